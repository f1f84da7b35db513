//! The input of an S = 0 configuration state function of n open shells over a closed core,
//! shared by the benchmarks that derive its energy.

/// n open shells o1..on over the space `core`, coupled to a singlet along the path that climbs
/// 1/2, 1, ..., n/4 and comes back down, so the function spans all C(n, n/2) determinants.
pub fn singlet_input(n: usize) -> String {
    let names: Vec<String> = (1..=n).map(|k| format!("o{k}")).collect();
    let half = |t: usize| if t.is_multiple_of(2) { (t / 2).to_string() } else { format!("{t}/2") };
    let path: Vec<String> = (1..=n / 2).chain((0..n / 2).rev()).map(half).collect();
    format!(
        "space core\norbitals {}\ncsf X = | core^2 {} | S=0 path={}\nenergy X\n",
        names.join(" "),
        names.join(" "),
        path.join(",")
    )
}

//! `density S` and `density S T`: the spin-summed one- and two-particle (transition) density
//! matrices γ_pq = Σ_σ <a+_pσ a_qσ> and Γ_pqrs = Σ_στ <a+_pσ a+_rτ a_sτ a_qσ>, derived
//! symbolically, listed one element per symmetry-related set, checked against the densities of
//! brute-force state vectors, and giving back the energy E = Σ γ h + ½ Σ Γ (pq|rs).

mod common;

use spinfold::{
    Binding, DEFAULT_SEED, DensityElements, ErrorKind, Format, Options, Request, RequestKind, Symmetry,
    complete, density_elements, density_energy, derive, derive_checked, parse, render, representatives,
    verify,
};
use std::process::Command;

use common::TWO_SHELL_STATES as STATES;

/// The densities of each request of `requests` over STATES, numbered under a = 0, b = 1 and
/// the core {2, 3}.
fn elements(requests: &str) -> Vec<DensityElements> {
    let program = parse("densities.spinfold", &format!("{STATES}{requests}")).unwrap();
    let binding = Binding { orbitals: vec![0, 1], spaces: vec![vec![2, 3]], indices: vec![] };
    derive_checked(&program, &Options::default(), Some(DEFAULT_SEED))
        .unwrap()
        .iter()
        .map(|(d, _)| density_elements(&d.value, &binding))
        .collect()
}

fn one(d: &DensityElements, p: usize, q: usize) -> f64 {
    d.one.get(&[p, q]).copied().unwrap_or(0.0)
}

fn two(d: &DensityElements, o: [usize; 4]) -> f64 {
    d.two.get(&o).copied().unwrap_or(0.0)
}

/// The derivation listed as ASCII text, one line per listed element.
fn listing(requests: &str) -> String {
    let program = parse("densities.spinfold", &format!("{STATES}{requests}")).unwrap();
    let derived = derive_checked(&program, &Options::default(), Some(DEFAULT_SEED)).unwrap();
    render(&program, &derived, Format::Text { ascii: true }).unwrap()
}

#[test]
fn a_closed_shell_has_two_on_each_occupied_orbital_and_pair_density_four_minus_two() {
    // common practice: for a closed shell γ_pq = 2 δ_pq over occupied orbitals and
    // Γ_pqrs = γ_pq γ_rs − ½ γ_ps γ_rq
    let d = &elements("density closed\n")[0];
    let occupied = [0, 2, 3];
    for &p in &occupied {
        assert_eq!(one(d, p, p), 2.0);
        for &r in &occupied {
            let (direct, exchange) = if p == r { (2.0, 2.0) } else { (4.0, -2.0) };
            assert_eq!(two(d, [p, p, r, r]), direct, "Γ_{p}{p}{r}{r}");
            assert_eq!(two(d, [p, r, r, p]), exchange, "Γ_{p}{r}{r}{p}");
        }
    }
    assert_eq!(one(d, 1, 1), 0.0, "b is empty");
    // traces (common practice): Σ γ_pp = N, Σ Γ_ppqq = N(N − 1), here N = 6
    assert_eq!(d.one.iter().filter(|(k, _)| k[0] == k[1]).map(|(_, v)| v).sum::<f64>(), 6.0);
    assert_eq!(d.two.iter().filter(|(k, _)| k[0] == k[1] && k[2] == k[3]).map(|(_, v)| v).sum::<f64>(), 30.0);
    let text = listing("density closed\n");
    for line in ["for k in core: g_kk += 2", "for k,l in core: G_kkll += 4", "for k,l in core: G_kllk += -2"]
    {
        assert!(text.contains(line), "{line} in\n{text}");
    }
}

#[test]
fn triplet_and_singlet_differ_in_the_sign_of_the_exchange_element_alone() {
    // common practice: two open shells a, b give Γ_aabb = 1 and Γ_abba = −1 when parallel
    // (triplet) and +1 in the open-shell singlet; the energies J − K and J + K follow
    let [triplet, singlet] =
        <[DensityElements; 2]>::try_from(elements("density triplet\ndensity singlet\n")).unwrap();
    for d in [&triplet, &singlet] {
        assert_eq!((one(d, 0, 0), one(d, 1, 1)), (1.0, 1.0));
        assert_eq!(two(d, [0, 0, 1, 1]), 1.0);
        // an open shell sees every core member as a closed shell sees another orbital, halved
        assert_eq!(two(d, [0, 0, 2, 2]), 2.0);
        assert_eq!(two(d, [0, 2, 2, 0]), -1.0);
    }
    assert_eq!(two(&triplet, [0, 1, 1, 0]), -1.0);
    assert_eq!(two(&singlet, [0, 1, 1, 0]), 1.0);
    assert!(listing("density singlet\n").contains("G_abba += 1"));
}

#[test]
fn the_transition_density_from_the_closed_shell_to_the_open_shell_singlet_is_root_two() {
    // common practice: <a²| E_ab |singlet(a→b)> = √2 for the spin-summed excitation operator
    let d = &elements("density closed singlet\n")[0];
    assert!((one(d, 0, 1) - 2f64.sqrt()).abs() < 1e-15);
    assert_eq!(one(d, 1, 0), 0.0, "a transition density is not symmetric");
    let text = listing("density closed singlet\n");
    assert!(text.contains("g_ab += sqrt(2)"), "{text}");
    assert!(text.contains("symmetry G_pqrs = G_rspq"), "{text}");
}

#[test]
fn the_energy_rebuilt_from_every_example_density_is_the_derived_energy() {
    // E = Σ γ_pq h_pq + ½ Σ Γ_pqrs (pq|rs), compared as exact expressions
    let mut compared = 0;
    for (stem, text) in common::examples() {
        let program = parse(&format!("{stem}.spinfold"), &text).unwrap();
        for r in program.requests.iter().filter(|r| r.kind == RequestKind::Energy && r.block.is_none()) {
            if r.bra.is_unexpanded() || r.bra.terms.len() > 40 {
                continue;
            }
            let energy = derive(&program, r, &Options::default()).unwrap();
            let density =
                derive(&program, &Request { kind: RequestKind::Density, ..r.clone() }, &Options::default())
                    .unwrap();
            assert_eq!(density_energy(&density.value), energy.value, "{stem}: {}", r.text);
            // listing one element per related set loses nothing
            let listed = representatives(&density.value, Symmetry::Expectation);
            assert_eq!(complete(&listed, Symmetry::Expectation), density.value, "{stem}: {}", r.text);
            compared += 1;
        }
    }
    assert!(compared >= 15, "only {compared} energies compared");
}

#[test]
fn verification_catches_a_wrong_density() {
    let program = parse("densities.spinfold", &format!("{STATES}density triplet\n")).unwrap();
    let request = &program.requests[0];
    let d = derive(&program, request, &Options::default()).unwrap();
    assert!(verify(&program, request, &d, DEFAULT_SEED).is_ok());
    // the singlet's exchange sign in the triplet's density: symmetric, so only brute force
    // and the rebuilt energy can tell
    let mut wrong = d.clone();
    for t in &mut wrong.value.terms {
        if matches!(t.factor, spinfold::Factor::Gamma2(p, q, r, s) if p == s && q == r && p != q
            && !matches!(p, spinfold::Orb::Summed(_)) && !matches!(q, spinfold::Orb::Summed(_)))
        {
            t.coeff = -t.coeff.clone();
        }
    }
    assert_ne!(wrong.value, d.value);
    let error = verify(&program, request, &wrong, DEFAULT_SEED).unwrap_err();
    assert!(matches!(error.kind, ErrorKind::VerificationFailed { .. }), "{error}");
    // one element of a symmetric pair changed breaks the symmetry the listing relies on
    let mut lopsided = d.clone();
    lopsided.value.terms[0].coeff = spinfold::Exact::integer(7);
    assert!(verify(&program, request, &lopsided, DEFAULT_SEED).is_err());
}

fn spinfold(args: &[&str]) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_spinfold"))
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .args(args)
        .output()
        .unwrap()
}

#[test]
fn eval_lists_each_non_zero_element_once_with_real_integrals() {
    let out = spinfold(&[
        "eval",
        "examples/densities.spinfold",
        "--integrals",
        "tests/fixtures/water_sto3g_rhf.fcidump",
        "--bind",
        "core=1-4",
        "--bind",
        "a=5",
        "--bind",
        "b=6",
        "--json",
    ]);
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let json: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let triplet = &json["results"][1];
    assert_eq!(triplet["request"], "density triplet");
    let value = |list: &str, orbitals: &[u64]| -> Option<f64> {
        triplet[list]
            .as_array()
            .unwrap()
            .iter()
            .find(|e| e["orbitals"] == serde_json::json!(orbitals))
            .map(|e| e["value"].as_f64().unwrap())
    };
    // core 1-4 doubly occupied, a = 5 and b = 6 singly (common practice)
    assert_eq!(value("gamma", &[1, 1]), Some(2.0));
    assert_eq!(value("gamma", &[5, 5]), Some(1.0));
    assert_eq!(value("Gamma", &[5, 6, 6, 5]), Some(-1.0));
    // the image of a listed element is not listed again
    assert_eq!(value("Gamma", &[6, 5, 5, 6]), None);
    assert_eq!(value("Gamma", &[6, 6, 5, 5]), None);
    let gammas = triplet["Gamma"].as_array().unwrap();
    assert!(gammas.iter().all(|e| e["value"].as_f64().unwrap() != 0.0));
}

#[test]
fn density_requests_take_one_or_two_fixed_states() {
    let free = format!("{STATES}coefficients c\nstate pair = c closed + | core^2 b^2 |\ndensity pair\n");
    let error = parse("x.spinfold", &free).unwrap_err();
    assert!(matches!(error.kind, ErrorKind::FreeNotAllowed { .. }), "{error}");
    let error = parse("x.spinfold", &format!("{STATES}density closed triplet singlet\n")).unwrap_err();
    assert!(error.to_string().contains("`density` takes 1 or 2 state(s), but 3 are given"), "{error}");
}

#[test]
fn eval_lists_one_density_per_assignment_of_unbound_indices() {
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("g.spinfold");
    std::fs::write(
        &input,
        "orbitals a\nspace core\nspace vir: i\ndet ref = | core^2 a^2 |\ndensity ref[a -> i]\n",
    )
    .unwrap();
    let out = spinfold(&[
        "eval",
        input.to_str().unwrap(),
        "--integrals",
        "tests/fixtures/water_sto3g_rhf.fcidump",
        "--bind",
        "core=1-4",
        "--bind",
        "a=5",
        "--bind",
        "vir=6-7",
        "--json",
    ]);
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let json: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let values = json["results"][0]["values"].as_array().unwrap();
    assert_eq!(values.len(), 2);
    for (row, i) in values.iter().zip([6u64, 7]) {
        assert_eq!(row["indices"]["i"], i);
        // a → i moves the alpha electron of a: γ_aa = γ_ii = 1 (common practice)
        let gamma = row["gamma"].as_array().unwrap();
        for p in [5, i] {
            assert!(
                gamma.iter().any(|e| e["orbitals"] == serde_json::json!([p, p]) && e["value"] == 1.0),
                "{row}"
            );
        }
    }
}

#[test]
fn a_state_of_no_electrons_has_zero_densities_and_is_still_checked() {
    // no orbital declared at all: the check compares the (zero) elements of one spare orbital
    for input in ["density | |\n", "space occ: i\ndensity | |\n"] {
        let program = parse("empty.spinfold", input).unwrap();
        let derived = derive_checked(&program, &Options::default(), Some(DEFAULT_SEED)).unwrap();
        let report = derived[0].1.as_ref().expect("checked");
        assert!(report.checks > 0, "{input}: {} checks", report.checks);
        let binding = Binding { orbitals: vec![], spaces: vec![vec![0]], indices: vec![None] };
        let d = density_elements(&derived[0].0.value, &binding);
        assert!(d.one.is_empty() && d.two.is_empty(), "{input}: no element is non-zero");
    }
}

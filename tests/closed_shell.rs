//! The closed-shell determinant: E = 2 Σ_k h_kk + Σ_kl (2 J_kl − K_kl), as a symbol-for-symbol
//! result and as a number on random integrals (common practice; CONVENTIONS.md check value).

use spinfold::{
    Binding, Format, IntegralTable, Integrals, Options, derive, derive_checked, evaluate, parse, render,
};

const INPUT: &str = "space occ\ndet ground = | occ^2 |\nenergy ground\n";

#[test]
fn the_formula_comes_out_exactly() {
    let program = parse("closed.spinfold", INPUT).unwrap();
    let derived = derive_checked(&program, &Options::default(), Some(1)).unwrap();
    let text = render(&program, &derived, Format::Text { ascii: true }).unwrap();
    let body: Vec<&str> = text.lines().skip(1).take(2).map(str::trim).collect();
    assert_eq!(body, ["= 2 sum_{k in occ} h_kk", "+ sum_{k,l in occ} (2 J_kl - K_kl)"]);
    assert_eq!(derived[0].0.value.terms.len(), 3);
}

#[test]
fn the_formula_holds_numerically_for_several_sizes() {
    let program = parse("closed.spinfold", INPUT).unwrap();
    let d = derive(&program, &program.requests[0], &Options::default()).unwrap();
    for n in 1..=6 {
        let ints = IntegralTable::random(n, 40 + n as u64);
        let mut expected = 0.0;
        for k in 0..n {
            expected += 2.0 * ints.h(k, k);
            for l in 0..n {
                expected += 2.0 * ints.eri(k, k, l, l) - ints.eri(k, l, l, k);
            }
        }
        let binding = Binding { orbitals: vec![], spaces: vec![(0..n).collect()], indices: vec![] };
        assert!((evaluate(&d.value, &binding, &ints) - expected).abs() < 1e-12, "n = {n}");
    }
}

#[test]
fn a_core_and_valence_split_gives_the_same_energy() {
    // Splitting the occupied space in two must not change the number, only the layout.
    let input = "space core\nspace val\ndet split = | core^2 val^2 |\nenergy split\n";
    let program = parse("split.spinfold", input).unwrap();
    let d = derive(&program, &program.requests[0], &Options::default()).unwrap();
    let whole = parse("closed.spinfold", INPUT).unwrap();
    let w = derive(&whole, &whole.requests[0], &Options::default()).unwrap();
    let ints = IntegralTable::random(5, 9);
    let split = Binding { orbitals: vec![], spaces: vec![vec![0, 1], vec![2, 3, 4]], indices: vec![] };
    let all = Binding { orbitals: vec![], spaces: vec![vec![0, 1, 2, 3, 4]], indices: vec![] };
    assert!((evaluate(&d.value, &split, &ints) - evaluate(&w.value, &all, &ints)).abs() < 1e-12);
}

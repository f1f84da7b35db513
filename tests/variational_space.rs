//! The roots of a space of functions with real integrals (`solve_space`).
//!
//! Specification:
//! - every operand expands to its members over its bound indices (indices fixed in the binding
//!   stay); members that vanish are left out and counted; functions reached more than once are
//!   removed by canonical orthogonalization and counted;
//! - the roots are total energies (the file's constant included), ascending, their vectors over
//!   the members normalized to C^T S C = 1 with the largest component positive;
//! - the roots of the determinant CISD space are those of the same Hamiltonian block built
//!   independently; a complete space gives the full-CI energies;
//! - spaces that cannot be solved are refused with a clear error.

mod common;

use common::space::{Space, space};
use spinfold::{Binding, ErrorKind, IntegralTable, SpaceRoots, read_dump, solve_space};

const ROOT: &str = env!("CARGO_MANIFEST_DIR");

fn dump(name: &str) -> IntegralTable {
    read_dump(&format!("{ROOT}/tests/fixtures/{name}")).expect("a committed integral file").integrals
}

/// The reference roots of tests/fixtures/space_reference.json (made by
/// tests/pyscf/make_space_fixtures.py: PySCF's full-CI Hamiltonian restricted to the determinant
/// CISD space, diagonalized by numpy).
fn space_reference(case: &str) -> (usize, Vec<f64>) {
    let text =
        std::fs::read_to_string(format!("{ROOT}/tests/fixtures/space_reference.json")).expect("committed");
    let json: serde_json::Value = serde_json::from_str(&text).expect("JSON");
    let c = &json["cases"][case];
    let roots = c["roots"].as_array().expect("roots").iter().map(|v| v.as_f64().expect("a number")).collect();
    (c["determinants"].as_u64().expect("a count") as usize, roots)
}

const CLOSED_SHELL: &str = "
space occ: i j k l
space vir: a b c d
det ref = | occ^2 |
";

/// Renames the column operand's letters apart from the row's.
const FRESH: &[(&str, &str)] = &[("i", "k"), ("j", "l"), ("a", "c"), ("b", "d")];

const CISD: [&str; 6] =
    ["ref", "ref[i -> a]", "ref[i' -> a']", "ref[i j' -> a b']", "ref[i j -> a b]", "ref[i' j' -> a' b']"];

fn solve(s: &Space, binding: &Binding, ints: &IntegralTable, count: usize) -> SpaceRoots {
    solve_space(&s.program, &s.operands, &s.elements(), binding, ints, count, &|_| {})
        .expect("the space is solved")
}

fn water() -> (IntegralTable, Binding, Space) {
    let s = space(CLOSED_SHELL, &CISD, FRESH);
    let binding = s.binding(&[("occ", &[0, 1, 2, 3, 4]), ("vir", &[5, 6])]);
    (dump("water_sto3g_rhf.fcidump"), binding, s)
}

fn assert_close(got: &[f64], want: &[f64], tolerance: f64) {
    assert_eq!(got.len(), want.len());
    for (g, w) in got.iter().zip(want) {
        assert!((g - w).abs() < tolerance, "{g} vs {w} (all: {got:?})");
    }
}

fn values(roots: &SpaceRoots) -> Vec<f64> {
    roots.roots.iter().map(|r| r.value).collect()
}

/// H2 in a minimal basis: the reference, both singles and the pair double span the full CI
/// space of two electrons in two orbitals.
#[test]
fn a_complete_space_gives_the_full_ci_energies() {
    let s = space(CLOSED_SHELL, &["ref", "ref[i -> a]", "ref[i' -> a']", "ref[i i' -> a a']"], FRESH);
    let ints = dump("h2_sto3g_rhf.fcidump");
    let roots = solve(&s, &s.binding(&[("occ", &[0]), ("vir", &[1])]), &ints, 10);
    assert_eq!((roots.dimension, roots.dropped, roots.vanishing), (4, 0, 0));
    // PySCF FCI, tests/fixtures/pyscf_reference.json (h2_sto3g_rhf fci)
    let fci = common::recorded(&common::pyscf_reference(), "/cases/h2_sto3g_rhf/energies/fci/value");
    assert!((roots.roots[0].value - fci).abs() < 1e-10, "{} vs {fci}", roots.roots[0].value);
    // all four: PySCF full-CI Hamiltonian diagonalized by numpy (space_reference.json)
    let (determinants, reference) = space_reference("h2_sto3g_rhf");
    assert_eq!(determinants, 4);
    assert_close(&values(&roots), &reference, 1e-10);
}

/// Water STO-3G, 5 occupied and 2 virtual orbitals: 141 determinants. Each same-spin double
/// is reached four times (i j -> a b, j i -> b a, and the two with a sign), and the members with
/// i = j or a = b vanish.
#[test]
fn the_determinant_cisd_space_of_water() {
    let (ints, binding, s) = water();
    let roots = solve(&s, &binding, &ints, 12);
    let (determinants, reference) = space_reference("water_sto3g_rhf");
    assert_eq!(roots.dimension, determinants);
    // 5·4·2·1 = 40 members of each same-spin double exist, for C(5,2)·C(2,2) = 10 determinants
    assert_eq!((roots.vanishing, roots.dropped), (2 * (100 - 40), 2 * (40 - 10)));
    // PySCF's Hamiltonian restricted to the same determinants, diagonalized by numpy
    assert_close(&values(&roots), &reference, 1e-9);
    // the same numbers bit for bit when solved again (rows are assembled in parallel)
    assert_eq!(solve(&s, &binding, &ints, 12).roots, roots.roots);
    let ground = &roots.roots[0].vector;
    assert_eq!((ground[0].operand, ground[0].coefficient > 0.9), (0, true));
    assert!(ground.windows(2).all(|w| w[0].coefficient.abs() >= w[1].coefficient.abs()));
}

/// The vectors are normalized over the members as given: for the ground state of water's
/// space, Σ c_p c_q <p|q> = 1 with each duplicated double counted in every spelling; checked
/// here through the exact overlaps of determinants, ±1 between spellings of one determinant.
#[test]
fn vectors_are_normalized_over_the_members() {
    let (ints, binding, s) = water();
    let roots = solve(&s, &binding, &ints, 3);
    for root in &roots.roots {
        // one determinant per sorted occupied and virtual pair; a spelling's sign is that of
        // the two permutations that sort it
        let mut by_determinant: std::collections::BTreeMap<(usize, Vec<usize>), f64> = Default::default();
        for c in &root.vector {
            let mut v: Vec<usize> = c.indices.iter().map(|(_, m)| *m).collect();
            let label = s.operands[c.operand].label.as_str();
            let mut sign = 1.0;
            if label == CISD[4] || label == CISD[5] {
                for (x, y) in [(0, 1), (2, 3)] {
                    if v[x] > v[y] {
                        v.swap(x, y);
                        sign = -sign;
                    }
                }
            }
            *by_determinant.entry((c.operand, v)).or_default() += sign * c.coefficient;
        }
        let norm: f64 = by_determinant.values().map(|c| c * c).sum();
        assert!((norm - 1.0).abs() < 1e-10, "norm {norm}");
    }
}

/// The same operand listed twice: one copy of every member is dropped.
#[test]
fn a_function_listed_twice_counts_once() {
    let (ints, binding, _) = water();
    let twice = space(CLOSED_SHELL, &["ref", "ref[i -> a]", "ref", "ref[i -> a]"], FRESH);
    let once = space(CLOSED_SHELL, &["ref", "ref[i -> a]"], FRESH);
    let (r2, r1) = (solve(&twice, &binding, &ints, 20), solve(&once, &binding, &ints, 20));
    assert_eq!((r2.dimension, r2.dropped, r2.vanishing), (11, 11, 0));
    assert_eq!((r1.dimension, r1.dropped), (11, 0));
    assert_close(&values(&r2), &values(&r1), 1e-10);
}

/// ref[i j -> a b] over all i, j, a, b: the members with i = j or a = b vanish, and each
/// remaining determinant is spelled four times.
#[test]
fn same_spin_doubles_over_all_indices() {
    let (ints, binding, _) = water();
    let s = space(CLOSED_SHELL, &["ref[i j -> a b]"], FRESH);
    let roots = solve(&s, &binding, &ints, 20);
    assert_eq!((roots.vanishing, roots.dropped, roots.dimension), (60, 30, 10));
}

/// The singlet combination S spans part of the determinant singles: with both spellings of
/// the singles beside it, S adds nothing (all its members dropped), and alone with the
/// reference its roots are among the determinant CIS roots.
#[test]
fn a_state_operand_overlapping_determinants() {
    let (ints, binding, _) = water();
    // written out, so that its letters can be renamed apart
    let singlet = "((ref[i -> a] + ref[i' -> a'])/sqrt(2))";
    let cis =
        solve(&space(CLOSED_SHELL, &["ref", "ref[i -> a]", "ref[i' -> a']"], FRESH), &binding, &ints, 30);
    let with_s = solve(
        &space(CLOSED_SHELL, &["ref", singlet, "ref[i -> a]", "ref[i' -> a']"], FRESH),
        &binding,
        &ints,
        30,
    );
    assert_eq!((with_s.dimension, with_s.dropped), (21, 10));
    assert_close(&values(&with_s), &values(&cis), 1e-10);
    let singlets = solve(&space(CLOSED_SHELL, &["ref", singlet], FRESH), &binding, &ints, 30);
    assert_eq!(singlets.dimension, 11);
    for e in values(&singlets) {
        assert!(values(&cis).iter().any(|c| (c - e).abs() < 1e-10), "singlet root {e} is a CIS root");
    }
}

/// An index fixed in the binding stays: ref[i -> a] with i on the highest occupied orbital is
/// the same space as the excitations from a named orbital bound there.
#[test]
fn indices_fixed_by_the_binding_stay() {
    let (ints, _, _) = water();
    let s = space(CLOSED_SHELL, &["ref", "ref[i -> a]", "ref[i' -> a']"], FRESH);
    let mut fixed = s.binding(&[("occ", &[0, 1, 2, 3, 4]), ("vir", &[5, 6])]);
    let i = s.program.indices.iter().position(|x| x.name == "i").expect("declared");
    fixed.indices[i] = Some(4);
    let operands: Vec<spinfold::Operand> = s
        .operands
        .iter()
        .map(|o| spinfold::Operand {
            indices: o.indices.iter().copied().filter(|&k| k as usize != i).collect(),
            ..o.clone()
        })
        .collect();
    let roots =
        solve_space(&s.program, &operands, &s.elements(), &fixed, &ints, 10, &|_| {}).expect("solved");
    assert_eq!((roots.dimension, roots.dropped, roots.vanishing), (5, 0, 0));
    let named = space(
        "orbitals h\nspace occ\nspace vir: a c\ndet ref = | occ^2 h^2 |\n",
        &["ref", "ref[h -> a]", "ref[h' -> a']"],
        &[("a", "c")],
    );
    let mut b = named.binding(&[("occ", &[0, 1, 2, 3]), ("vir", &[5, 6])]);
    b.orbitals[0] = 4;
    let expected = solve(&named, &b, &ints, 10);
    assert_close(&values(&roots), &values(&expected), 1e-10);
    let listed = roots
        .roots
        .iter()
        .flat_map(|r| &r.vector)
        .map(|c| c.indices.iter().map(|(n, _)| n.as_str()).collect::<Vec<_>>());
    assert!(listed.clone().all(|names| names.is_empty() || names == ["a"]), "only a is listed");
    assert!(listed.clone().any(|names| names == ["a"]));
}

#[test]
fn pair_elements_derived_with_distinct_are_refused() {
    let (ints, binding, mut s) = water();
    s.pairs[3].derivation.distinct = true;
    let e = solve_space(&s.program, &s.operands, &s.elements(), &binding, &ints, 1, &|_| {}).unwrap_err();
    assert!(matches!(e.kind, ErrorKind::DistinctSpace { .. }), "{e:?}");
    assert!(e.message().contains("--distinct"));
}

#[test]
fn a_space_past_the_member_limit_is_refused_before_any_work() {
    let s = space(CLOSED_SHELL, &["ref[i j' -> a b']"], FRESH);
    let occ: Vec<usize> = (0..20).collect();
    let vir: Vec<usize> = (20..40).collect();
    let binding = s.binding(&[("occ", &occ), ("vir", &vir)]);
    let ints = IntegralTable::zeros(40);
    let e = solve_space(&s.program, &s.operands, &s.elements(), &binding, &ints, 1, &|_| {}).unwrap_err();
    let message = e.message();
    assert!(message.contains("160000") && message.contains(&spinfold::MEMBER_LIMIT.to_string()), "{message}");
}

/// With one virtual orbital every member of ref[i j -> a b] has a = b and vanishes: the space
/// is empty, and so are its roots.
#[test]
fn a_space_whose_members_all_vanish_has_no_roots() {
    let s = space(CLOSED_SHELL, &["ref[i j -> a b]"], FRESH);
    let binding = s.binding(&[("occ", &[0, 1, 2]), ("vir", &[3])]);
    let roots = solve(&s, &binding, &IntegralTable::random(4, 1), 5);
    assert_eq!((roots.dimension, roots.dropped, roots.vanishing, roots.roots.len()), (0, 0, 9, 0));
}

/// An index that no operand runs over and no binding fixes has no value: refused, naming it.
#[test]
fn an_index_neither_run_over_nor_bound_is_refused() {
    let (ints, binding, s) = water();
    let mut operands = s.operands.clone();
    operands[1].indices.retain(|&k| s.program.indices[k as usize].name != "a");
    let e = solve_space(&s.program, &operands, &s.elements(), &binding, &ints, 1, &|_| {}).unwrap_err();
    assert!(e.message().contains("the index `a`") && e.message().contains("--bind a="), "{}", e.message());
}

/// Every pair of operands is derived and verified on its own, so a `roots` request may list at
/// most 100 operands; past that it is refused at the first operand beyond the limit.
#[test]
fn a_roots_request_of_too_many_operands_is_refused_where_it_passes_the_limit() {
    let head = "orbitals a b\nspace core\ndet ab = | core^2 a b' |\n";
    let at_limit = format!("{head}roots{}\n", " ab".repeat(100));
    spinfold::parse("space.spinfold", &at_limit).expect("100 operands are allowed");
    let past = format!("{head}roots{}\n", " ab".repeat(150));
    let error = spinfold::parse("space.spinfold", &past).unwrap_err();
    assert!(matches!(error.kind, ErrorKind::TooLarge { .. }), "{error:?}");
    let report = error.render();
    // `roots` and 100 operands of ` ab` put the 101st at column 6 + 3 * 100 + 1
    assert!(report.contains("space.spinfold:4:307: this `roots` request lists 150 operands"), "{report}");
    assert!(report.contains("exceeds the limit of 100 operands"), "{report}");
    assert!(report.contains("let generic indices stand for the members"), "{report}");
}

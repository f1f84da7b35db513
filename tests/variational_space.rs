//! The roots of a space of functions with real integrals (`solve_space`).
//!
//! Specification:
//! - every operand expands to its members over its bound indices; members that vanish are left
//!   out and counted; duplicated functions are removed by canonical orthogonalization and
//!   counted; the roots are total energies, ascending, their vectors normalized over the
//!   members (C^T S C = 1) with the largest component positive;
//! - the roots of a complete determinant space are the full-CI energies.

mod common;

use common::space::space;
use spinfold::{Integrals, read_dump, solve_space};

const ROOT: &str = env!("CARGO_MANIFEST_DIR");

fn dump(name: &str) -> spinfold::IntegralTable {
    read_dump(&format!("{ROOT}/tests/fixtures/{name}")).expect("a committed integral file").integrals
}

const CLOSED_SHELL: &str = "
space occ: i j k l
space vir: a b c d
det ref = | occ^2 |
";

/// Renames the column operand's letters apart from the row's.
const FRESH: &[(&str, &str)] = &[("i", "k"), ("j", "l"), ("a", "c"), ("b", "d")];

/// H2 in a minimal basis: the reference, both singles and the pair double span the full CI
/// space of two electrons in two orbitals, so the lowest root is the full-CI energy.
#[test]
fn the_lowest_root_of_a_complete_space_is_the_full_ci_energy() {
    let s = space(CLOSED_SHELL, &["ref", "ref[i -> a]", "ref[i' -> a']", "ref[i i' -> a a']"], FRESH);
    let ints = dump("h2_sto3g_rhf.fcidump");
    let binding = s.binding(&[("occ", &[0]), ("vir", &[1])]);
    let roots = solve_space(&s.program, &s.operands, &s.elements(), &binding, &ints, 10, &|_| {}).unwrap();
    assert_eq!((roots.dimension, roots.dropped, roots.vanishing), (4, 0, 0));
    assert_eq!(roots.roots.len(), 4);
    // PySCF FCI, tests/fixtures/pyscf_reference.json (h2_sto3g_rhf fci)
    let fci = common::recorded(&common::pyscf_reference(), "/cases/h2_sto3g_rhf/energies/fci/value");
    assert!((roots.roots[0].value - fci).abs() < 1e-10, "{} vs {fci}", roots.roots[0].value);
    assert!(ints.constant() != 0.0);
}

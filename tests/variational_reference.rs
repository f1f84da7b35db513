//! Configuration spaces, their roots and free coefficients, evaluated by `spinfold eval --json`
//! with real integrals, against PySCF references (`tests/fixtures/variational_reference.json`).
//!
//! The references come from `tests/pyscf/make_variational_fixtures.py` (H2O/6-31G,
//! NH3/STO-3G and LiH/6-31G in canonical RHF orbitals; every value cross-checked there from
//! the dump's own integrals); these tests need no PySCF. Specification:
//! - `roots` over g², u² and the open-shell singlet of two orbitals over a closed core gives
//!   the three singlet roots of CASCI(2,2) on the same orbitals;
//! - `roots ref S` over the reference and the singlet singles gives the reference at the RHF
//!   energy and, above it, the TDA singlet excitation energies; the triplet singles give the
//!   TDA triplet ones; singles coupled by `csf` give the same;
//! - `roots` over the reference, its singles and its doubles of both spins gives the
//!   closed-shell CISD energy, whatever the dependence among the members it removes;
//! - a pair function with free coefficients has, without `--set`, the lowest root of its 2×2
//!   problem as its energy and that root's vector as its coefficients, and with `--set` the
//!   energy, <P|H|P> and <P|P> of the quadratic forms at those coefficients.
//!
//! Every energy is a total energy, nuclear repulsion included (the dump's constant).

use serde_json::Value;
use std::process::Command;

/// Total energies against PySCF's CASCI, CISD and RHF, and the pair function, hartree.
const ENERGY_TOLERANCE: f64 = 1e-8;
/// Excitation energies against PySCF's TDA, hartree.
const EXCITATION_TOLERANCE: f64 = 1e-7;
/// Coefficients of a stationary pair function against numpy's eigenvector.
const COEFFICIENT_TOLERANCE: f64 = 1e-7;
/// Overlaps <P|P> against numpy's quadratic form (pure numbers, no integrals in them).
const OVERLAP_TOLERANCE: f64 = 1e-12;
/// How many excitation energies of each spin are checked.
const EXCITATIONS: usize = 5;

fn path(relative: &str) -> String {
    format!("{}/tests/{relative}", env!("CARGO_MANIFEST_DIR"))
}

/// The molecules of the reference file, by key, in the order recorded.
fn molecules() -> Vec<(String, Value)> {
    let text = std::fs::read_to_string(path("fixtures/variational_reference.json"))
        .expect("the reference file is committed");
    let reference: Value = serde_json::from_str(&text).expect("the reference file is JSON");
    reference["molecules"]
        .as_object()
        .expect("variational_reference.json has an object `molecules`")
        .iter()
        .map(|(key, molecule)| (key.clone(), molecule.clone()))
        .collect()
}

fn number(value: &Value, pointer: &str) -> f64 {
    value
        .pointer(pointer)
        .and_then(Value::as_f64)
        .unwrap_or_else(|| panic!("a number at {pointer} in {value}"))
}

fn list<'a>(value: &'a Value, pointer: &str) -> &'a Vec<Value> {
    value
        .pointer(pointer)
        .and_then(Value::as_array)
        .unwrap_or_else(|| panic!("a list at {pointer} in {value}"))
}

/// The `--bind` options recorded at `pointer` (a list such as ["core=1-4", "g=5", "u=6"]).
fn bindings(molecule: &Value, pointer: &str) -> Vec<String> {
    list(molecule, pointer)
        .iter()
        .flat_map(|b| ["--bind".to_string(), b.as_str().expect("a binding").to_string()])
        .collect()
}

/// `spinfold eval tests/inputs/INPUT --integrals tests/fixtures/DUMP ARGS... --json`: the
/// run succeeds and its `results`, in request order, are returned.
fn eval(input: &str, molecule: &Value, args: &[String]) -> Vec<Value> {
    let dump = path(&format!("fixtures/{}", molecule["dump_file"].as_str().expect("a dump name")));
    let output = Command::new(env!("CARGO_BIN_EXE_spinfold"))
        .args(["eval", &path(&format!("inputs/{input}")), "--integrals", &dump, "--json"])
        .args(args)
        .output()
        .expect("the binary runs");
    let stdout = String::from_utf8_lossy(&output.stdout);
    let stderr = String::from_utf8_lossy(&output.stderr);
    assert!(
        output.status.success(),
        "eval {input} {args:?} on {dump} exits with 0, not {:?}:\n{stderr}",
        output.status.code()
    );
    let json: Value = serde_json::from_str(&stdout)
        .unwrap_or_else(|e| panic!("eval {input} prints JSON ({e}):\n{stdout}\n{stderr}"));
    json["results"].as_array().unwrap_or_else(|| panic!("a list `results`:\n{stdout}")).clone()
}

/// The result of a request, checked to be the one written in the input.
fn result<'a>(results: &'a [Value], index: usize, request: &str) -> &'a Value {
    let result = results.get(index).unwrap_or_else(|| panic!("a result for `{request}`"));
    assert_eq!(result["request"], request, "results come in request order");
    result
}

/// One root of a `roots` result: its total energy and the operand of its largest component.
struct Root {
    value: f64,
    leading_operand: String,
}

/// A `roots` result: the functions that span the space, and its roots, checked to ascend.
struct Roots {
    dimension: u64,
    dropped: u64,
    roots: Vec<Root>,
}

fn roots(result: &Value) -> Roots {
    let count = |name: &str| result[name].as_u64().unwrap_or_else(|| panic!("a count `{name}` in {result}"));
    let roots: Vec<Root> = list(result, "/roots")
        .iter()
        .map(|root| {
            let leading = list(root, "/vector")
                .iter()
                .max_by(|x, y| {
                    let size = |c: &Value| number(c, "/coefficient").abs();
                    size(x).total_cmp(&size(y))
                })
                .unwrap_or_else(|| panic!("a root has components: {root}"));
            Root {
                value: number(root, "/value"),
                leading_operand: leading["operand"].as_str().expect("an operand").to_string(),
            }
        })
        .collect();
    assert!(roots.windows(2).all(|w| w[0].value <= w[1].value), "roots ascend: {result}");
    Roots { dimension: count("dimension"), dropped: count("dropped"), roots }
}

fn assert_close(what: &str, actual: f64, expected: f64, tolerance: f64) {
    assert!(
        (actual - expected).abs() <= tolerance,
        "{what}: got {actual:.12}, expected {expected:.12} (difference {:.1e}, allowed {tolerance:.0e})",
        actual - expected
    );
}

#[test]
fn two_electrons_in_two_orbitals_give_the_three_casci_singlets() {
    for (key, molecule) in molecules() {
        let results =
            eval("variational_two_orbitals.spinfold", &molecule, &bindings(&molecule, "/casci_2_2/bind"));
        let space = roots(result(&results, 0, "roots | core^2 g^2 | | core^2 u^2 | S"));
        assert_eq!((space.dimension, space.dropped), (3, 0), "{key}: three independent functions");
        // PySCF mcscf.CASCI(mf, 2, 2) on the RHF orbitals, the roots with <S^2> = 0
        let expected = list(&molecule, "/casci_2_2/singlet_roots");
        assert_eq!(space.roots.len(), 3, "{key}: every root is printed");
        for (k, (root, reference)) in space.roots.iter().zip(expected).enumerate() {
            let reference = reference.as_f64().expect("a root");
            assert_close(&format!("{key}: CASCI(2,2) root {k}"), root.value, reference, ENERGY_TOLERANCE);
        }
    }
}

/// The reference and the singles of one spin (`request`, the `index`th result): the
/// reference is the lowest root, at the RHF energy, and the roots above it, minus it, are the
/// lowest TDA excitation energies recorded under `tda/<spin>`.
fn assert_tda(key: &str, molecule: &Value, results: &[Value], index: usize, request: &str, spin: &str) {
    let space = roots(result(results, index, request));
    let singles = number(molecule, "/occupied") * number(molecule, "/virtual");
    assert_eq!(number(molecule, "/tda/dimension"), 1.0 + singles);
    assert_eq!(
        (space.dimension, space.dropped),
        (1 + singles as u64, 0),
        "{key}, {request}: the reference and one function per (i, a)"
    );
    assert!(space.roots.len() > EXCITATIONS, "{key}, {request}: at least {} roots", EXCITATIONS + 1);
    let reference = &space.roots[0];
    assert_eq!(reference.leading_operand, "ref", "{key}, {request}: the lowest root is the reference");
    // PySCF scf.RHF; the singles do not lower it (Brillouin: canonical RHF orbitals)
    assert_close(
        &format!("{key}, {request}: reference root"),
        reference.value,
        number(molecule, "/rhf/value"),
        ENERGY_TOLERANCE,
    );
    // PySCF tdscf.TDA(mf), singlet=True / False, lowest five
    let expected = list(molecule, &format!("/tda/{spin}/excitation_energies"));
    assert_eq!(expected.len(), EXCITATIONS);
    for (k, (root, tda)) in space.roots[1..].iter().zip(expected).enumerate() {
        let tda = tda.as_f64().expect("an excitation energy");
        assert_close(
            &format!("{key}, {request}: {spin} excitation {}", k + 1),
            root.value - reference.value,
            tda,
            EXCITATION_TOLERANCE,
        );
    }
}

#[test]
fn singles_give_the_tda_excitation_energies() {
    for (key, molecule) in molecules() {
        let bind = bindings(&molecule, "/tda/bind");
        let results = eval("variational_singles.spinfold", &molecule, &bind);
        assert_tda(&key, &molecule, &results, 0, "roots ref S", "singlet");
        assert_tda(&key, &molecule, &results, 1, "roots ref T", "triplet");
    }
}

#[test]
fn singles_coupled_by_csf_give_the_tda_excitation_energies() {
    for (key, molecule) in molecules() {
        let bind = bindings(&molecule, "/tda/bind");
        let results = eval("variational_coupled_singles.spinfold", &molecule, &bind);
        assert_tda(&key, &molecule, &results, 0, "roots ref S", "singlet");
        assert_tda(&key, &molecule, &results, 1, "roots ref T", "triplet");
    }
}

#[test]
fn singles_and_doubles_give_the_cisd_energy() {
    let request = "roots ref ref[i -> a] ref[i' -> a'] ref[i j' -> a b'] ref[i j -> a b] ref[i' j' -> a' b']";
    let mut checked = 0;
    for (key, molecule) in molecules() {
        if molecule.get("cisd").is_none() {
            continue;
        }
        let results = eval("variational_doubles.spinfold", &molecule, &bindings(&molecule, "/cisd/bind"));
        let space = roots(result(&results, 0, request));
        // The space is spanned by its distinct determinants, 1 + 2ov + (ov)^2 + 2 C(o,2) C(v,2)
        // (counted by enumeration in the fixture script); the members repeat some of them, and
        // the repeats are dropped. `dimension` counts the functions either before or after
        // the drop; in both readings the functions kept are the determinants.
        let determinants = number(&molecule, "/cisd/determinants") as u64;
        assert!(
            space.dimension == determinants || space.dimension == determinants + space.dropped,
            "{key}: {determinants} determinants span the space; got dimension {} with {} dropped",
            space.dimension,
            space.dropped
        );
        assert!(space.dropped > 0, "{key}: the repeated determinants are dropped");
        // PySCF ci.CISD(mf), closed shell, all electrons
        let lowest = space.roots.first().unwrap_or_else(|| panic!("{key}: a root"));
        assert_eq!(lowest.leading_operand, "ref", "{key}: the ground state is mostly the reference");
        assert_close(
            &format!("{key}: CISD"),
            lowest.value,
            number(&molecule, "/cisd/value"),
            ENERGY_TOLERANCE,
        );
        checked += 1;
    }
    assert!(checked >= 2, "CISD references for at least two molecules");
}

/// The molecules with a pair-function reference.
fn pair_molecules() -> Vec<(String, Value)> {
    let found: Vec<_> = molecules().into_iter().filter(|(_, m)| m.get("pair_function").is_some()).collect();
    assert!(!found.is_empty(), "a pair-function reference is recorded");
    found
}

#[test]
fn pair_function_without_set_is_the_lowest_root_of_its_two_configurations() {
    for (key, molecule) in pair_molecules() {
        let results =
            eval("variational_pair.spinfold", &molecule, &bindings(&molecule, "/pair_function/bind"));
        // numpy.linalg.eigh of the 2x2 H over |core^2 g^2|, |core^2 u^2| (S = 1), from the
        // dump's integrals; equal there to PySCF's CASCI(2,2) ground root
        let lowest = number(&molecule, "/pair_function/lowest_root");

        let p = result(&results, 0, "energy P");
        assert_close(&format!("{key}: energy P"), number(p, "/value"), lowest, ENERGY_TOLERANCE);
        let (cg, cu) = (number(p, "/coefficients/cg"), number(p, "/coefficients/cu"));
        // normalized, the largest-magnitude coefficient positive: the eigenvector as recorded
        assert_close(&format!("{key}: <P|P> at the stationary point"), cg * cg + cu * cu, 1.0, 1e-10);
        for (name, value) in [("cg", cg), ("cu", cu)] {
            let expected = number(&molecule, &format!("/pair_function/eigenvector/{name}"));
            assert_close(&format!("{key}: energy P, {name}"), value, expected, COEFFICIENT_TOLERANCE);
        }

        // the fixed part g^2 keeps its weight 1: cu = v_u / v_g of the same root
        let q = result(&results, 1, "energy Q");
        assert_close(&format!("{key}: energy Q"), number(q, "/value"), lowest, ENERGY_TOLERANCE);
        let expected = number(&molecule, "/pair_function/fixed_g_weight/cu");
        assert_close(
            &format!("{key}: energy Q, cu"),
            number(q, "/coefficients/cu"),
            expected,
            COEFFICIENT_TOLERANCE,
        );
    }
}

#[test]
fn pair_function_with_set_coefficients_is_the_quadratic_form_there() {
    for (key, molecule) in pair_molecules() {
        let points = list(&molecule, "/pair_function/rayleigh");
        assert!(points.len() >= 3, "{key}: several coefficient pairs");
        for point in points {
            let (cg, cu) = (number(point, "/cg"), number(point, "/cu"));
            let mut args = bindings(&molecule, "/pair_function/bind");
            args.extend(["--set".into(), format!("cg={cg}"), "--set".into(), format!("cu={cu}")]);
            let results = eval("variational_pair_forms.spinfold", &molecule, &args);
            let at = format!("{key} at cg={cg}, cu={cu}");
            // numpy: c^T H c / c^T S c, c^T H c and c^T S c with the recorded 2x2 H and S
            let energy = number(result(&results, 0, "energy P"), "/value");
            assert_close(&format!("{at}: energy P"), energy, number(point, "/quotient"), ENERGY_TOLERANCE);
            let element = number(result(&results, 1, "element P P"), "/value");
            assert_close(
                &format!("{at}: element P P"),
                element,
                number(point, "/numerator"),
                ENERGY_TOLERANCE,
            );
            let overlap = number(result(&results, 2, "overlap P P"), "/value");
            assert_close(
                &format!("{at}: overlap P P"),
                overlap,
                number(point, "/denominator"),
                OVERLAP_TOLERANCE,
            );
        }
    }
}

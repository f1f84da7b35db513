//! Orbital optimization (`spinfold optimize --json`) from orbitals that are not optimal for the
//! state, against PySCF's ROHF, RHF and CASSCF(2,2) energies (`tests/fixtures/optimize_reference.json`).
//!
//! The references come from `tests/pyscf/make_optimize_fixtures.py`, which writes each dump in
//! poor orbitals (an anion's or the closed-shell singlet's RHF orbitals, or converged orbitals
//! under a seeded random rotation, with and without ORBSYM) and makes every reference twice;
//! these tests need no PySCF. Specification:
//! - a high-spin doublet or triplet optimizes to the ROHF energy, 1e-8;
//! - a closed-shell determinant from rotated orbitals optimizes to the RHF energy, 1e-8;
//! - a pair function cg g² + cu u² over a core, g and u of different symmetry, optimizes to the
//!   CASSCF(2,2) energy of the symmetric state, 1e-7, with its coefficients in the output;
//! - the open-shell singlet of two orbitals of different symmetry optimizes to the
//!   state-specific CASSCF(2,2) energy of its symmetry, 1e-7;
//! - each run takes at least one iteration, ends with a gradient norm below 1e-6, and reports
//!   coefficients exactly for the state with free ones.
//!
//! Every energy is a total energy, nuclear repulsion included (the dump's constant).

use serde_json::Value;
use std::process::Command;

/// Optimized energies against PySCF's ROHF and RHF, hartree.
const SCF_TOLERANCE: f64 = 1e-8;
/// Optimized energies against PySCF's CASSCF(2,2), hartree.
const CASSCF_TOLERANCE: f64 = 1e-7;
/// Normalized pair coefficients against PySCF's CASSCF CI vector.
const COEFFICIENT_TOLERANCE: f64 = 1e-5;
/// The gradient norm a converged run reports at most (the default `--gradient-tol`).
const GRADIENT_TOLERANCE: f64 = 1e-6;
/// `eval` of the state in the dump's own orbitals against the recorded start energy.
const START_TOLERANCE: f64 = 1e-8;
/// The least distance, hartree, of every start above its optimum (so the optimizer must move).
const MIN_START_GAP: f64 = 1e-3;

fn path(relative: &str) -> String {
    format!("{}/tests/{relative}", env!("CARGO_MANIFEST_DIR"))
}

/// One case of the reference file.
struct Case {
    key: String,
    record: Value,
}

impl Case {
    fn text(&self, field: &str) -> &str {
        self.record[field].as_str().unwrap_or_else(|| panic!("{}: a string `{field}`", self.key))
    }

    fn number(&self, pointer: &str) -> f64 {
        self.record
            .pointer(pointer)
            .and_then(Value::as_f64)
            .unwrap_or_else(|| panic!("{}: a number at {pointer}", self.key))
    }

    /// `COMMAND tests/inputs/INPUT --integrals tests/fixtures/DUMP --bind ... --json`: the run
    /// succeeds and the result of the case's request, the only one of the input, is returned.
    fn run(&self, command: &str) -> Value {
        let bind: Vec<String> = self.record["bind"]
            .as_array()
            .unwrap_or_else(|| panic!("{}: a list `bind`", self.key))
            .iter()
            .flat_map(|b| ["--bind".to_string(), b.as_str().expect("a binding").to_string()])
            .collect();
        let input = path(&format!("inputs/{}", self.text("input")));
        let dump = path(&format!("fixtures/{}", self.text("dump_file")));
        let output = Command::new(env!("CARGO_BIN_EXE_spinfold"))
            .args([command, &input, "--integrals", &dump, "--json"])
            .args(&bind)
            .output()
            .expect("the binary runs");
        let stdout = String::from_utf8_lossy(&output.stdout);
        let stderr = String::from_utf8_lossy(&output.stderr);
        assert!(
            output.status.success(),
            "{}: {command} {input} {bind:?} exits with 0, not {:?}:\n{stderr}",
            self.key,
            output.status.code()
        );
        let json: Value = serde_json::from_str(&stdout)
            .unwrap_or_else(|e| panic!("{}: {command} prints JSON ({e}):\n{stdout}", self.key));
        let results = json["results"].as_array().unwrap_or_else(|| panic!("a list `results`:\n{stdout}"));
        assert_eq!(results.len(), 1, "{}: one result, for `{}`", self.key, self.text("request"));
        assert_eq!(results[0]["request"], self.text("request"), "{}: the request", self.key);
        results[0].clone()
    }
}

/// The cases whose spinfold input is `input`, in the order recorded; at least two, so that no
/// check below is vacuous.
fn cases(input: &str) -> Vec<Case> {
    let text = std::fs::read_to_string(path("fixtures/optimize_reference.json"))
        .expect("the reference file is committed");
    let reference: Value = serde_json::from_str(&text).expect("the reference file is JSON");
    let cases: Vec<Case> = reference["cases"]
        .as_object()
        .expect("optimize_reference.json has an object `cases`")
        .iter()
        .filter(|(_, record)| record["input"] == input)
        .map(|(key, record)| Case { key: key.clone(), record: record.clone() })
        .collect();
    assert!(cases.len() >= 2, "at least two cases use {input}");
    cases
}

fn number(result: &Value, field: &str, key: &str) -> f64 {
    result[field].as_f64().unwrap_or_else(|| panic!("{key}: a number `{field}` in {result}"))
}

/// Optimizes every case of `input` and checks energy, iterations, gradient norm and the absence
/// of coefficients; returns each case with its result, and panics listing every case that
/// misses (spinfold's value against the reference), not only the first.
fn optimize_all(input: &str, tolerance: f64) -> Vec<(Case, Value)> {
    let mut misses = Vec::new();
    let runs: Vec<(Case, Value)> = cases(input)
        .into_iter()
        .map(|case| {
            let result = case.run("optimize");
            let value = number(&result, "value", &case.key);
            // PySCF's energy of the optimized state (`reference.source` of the fixture names
            // the method: ROHF, RHF or CASSCF(2,2) with symmetry)
            let reference = case.number("/reference/value");
            if (value - reference).abs() >= tolerance {
                misses.push(format!(
                    "{}: spinfold {value:.12} vs PySCF {reference:.12} (difference {:.3e}, tolerance {tolerance:e})",
                    case.key,
                    value - reference
                ));
            }
            // the start lies well above the optimum (checked by `starts_are_not_optimal`), so
            // reaching it takes steps
            let iterations = result["iterations"].as_u64().unwrap_or_else(|| panic!("{}: `iterations`", case.key));
            assert!(iterations > 0, "{}: a start away from the optimum takes iterations", case.key);
            let gradient = number(&result, "gradient_norm", &case.key);
            assert!(
                (0.0..GRADIENT_TOLERANCE).contains(&gradient),
                "{}: converged with gradient norm {gradient:e} below {GRADIENT_TOLERANCE:e}",
                case.key
            );
            (case, result)
        })
        .collect();
    assert!(misses.is_empty(), "optimized energies off the PySCF references:\n{}", misses.join("\n"));
    runs
}

fn assert_no_coefficients(runs: &[(Case, Value)]) {
    for (case, result) in runs {
        assert!(
            result.get("coefficients").is_none(),
            "{}: a state without free coefficients reports none: {result}",
            case.key
        );
    }
}

#[test]
fn starts_are_not_optimal() {
    for input in [
        "optimize_doublet.spinfold",
        "optimize_triplet.spinfold",
        "optimize_closed_shell.spinfold",
        "optimize_pair.spinfold",
        "optimize_open_shell_singlet.spinfold",
    ] {
        for case in cases(input) {
            // the state's energy in the dump's orbitals (the fixture's closed form from the dump,
            // cross-checked there with PySCF's energy functional or CASCI on the same orbitals)
            let start = case.number("/start_energy/value");
            let value = number(&case.run("eval"), "value", &case.key);
            assert!(
                (value - start).abs() < START_TOLERANCE,
                "{}: eval in the start orbitals gives {value:.12}, the fixture {start:.12}",
                case.key
            );
            // PySCF's optimum (the reference) lies below the start by a clear margin
            let reference = case.number("/reference/value");
            assert!(start - reference > MIN_START_GAP, "{}: start {start} vs optimum {reference}", case.key);
        }
    }
}

#[test]
fn high_spin_doublets_reach_the_rohf_energy() {
    // PySCF ROHF of NH2 (2B1, from the anion's RHF orbitals, C2v) and OH (2Pi, from rotated
    // ROHF orbitals without symmetry)
    assert_no_coefficients(&optimize_all("optimize_doublet.spinfold", SCF_TOLERANCE));
}

#[test]
fn high_spin_triplets_reach_the_rohf_energy() {
    // PySCF ROHF of CH2 (3B1, from the closed-shell singlet's RHF orbitals, C2v) and NH (3Sigma-,
    // from rotated ROHF orbitals without symmetry)
    assert_no_coefficients(&optimize_all("optimize_triplet.spinfold", SCF_TOLERANCE));
}

#[test]
fn closed_shells_from_rotated_orbitals_reach_the_rhf_energy() {
    // PySCF RHF of H2O (rotated within C2v irreps) and HF (rotated without symmetry)
    assert_no_coefficients(&optimize_all("optimize_closed_shell.spinfold", SCF_TOLERANCE));
}

#[test]
fn pair_functions_reach_the_casscf_energy_and_its_coefficients() {
    // PySCF CASSCF(2,2), D2h, CI of Ag symmetry, of stretched H2 (no core) and Li2 (core 1-2),
    // from RHF orbitals
    for (case, result) in optimize_all("optimize_pair.spinfold", CASSCF_TOLERANCE) {
        let coefficients = result["coefficients"]
            .as_object()
            .unwrap_or_else(|| panic!("{}: a state with free coefficients reports them: {result}", case.key));
        let mut names: Vec<&str> = coefficients.keys().map(String::as_str).collect();
        names.sort_unstable();
        assert_eq!(names, ["cg", "cu"], "{}: the free coefficients of the input", case.key);
        let get = |name: &str| {
            coefficients[name].as_f64().unwrap_or_else(|| panic!("{}: a number {name}", case.key))
        };
        let (cg, cu) = (get("cg"), get("cu"));
        let norm = cg.hypot(cu);
        // the g² and u² coefficients of PySCF's CASSCF CI vector, normalized, cg > 0 (the sign
        // of cu/cg does not depend on the orbitals' phases)
        let (ref_cg, ref_cu) = (case.number("/coefficients/cg"), case.number("/coefficients/cu"));
        assert!(
            ((cg.abs() / norm) - ref_cg).abs() < COEFFICIENT_TOLERANCE
                && ((cu.abs() / norm) - ref_cu.abs()).abs() < COEFFICIENT_TOLERANCE,
            "{}: |cg|, |cu| normalized {:.8} {:.8} vs CASSCF {ref_cg:.8} {:.8}",
            case.key,
            cg.abs() / norm,
            cu.abs() / norm,
            ref_cu.abs()
        );
        assert_eq!(
            (cu / cg).signum(),
            (ref_cu / ref_cg).signum(),
            "{}: the relative sign of u² and g²",
            case.key
        );
    }
}

#[test]
fn open_shell_singlets_reach_the_state_specific_casscf_energy() {
    // PySCF state-specific CASSCF(2,2), C2v, CI of B1 symmetry with the spin fixed to singlet,
    // of H2O (1b1 -> 4a1) and CH2 (3a1 -> 1b1), from RHF orbitals
    assert_no_coefficients(&optimize_all("optimize_open_shell_singlet.spinfold", CASSCF_TOLERANCE));
}

//! Reading integral files for `spinfold eval`, on the water fixture (STO-3G, RHF orbitals,
//! PySCF) and small hand-made files:
//! - an integral given twice with different values, under any of its 8 orderings, is refused,
//!   naming both lines; given twice with the same value it is accepted;
//! - values that overflow double precision are refused; values so large that a result is not
//!   a finite number make eval fail instead of printing inf or NaN;
//! - a header key given twice is refused; a file without a constant line is read with the
//!   constant taken as 0, and says so;
//! - errors name the line and the column of the offending field;
//! - the tables hold what the file holds: a header of 2000 or 100000 orbitals with a few
//!   entries works, and the water integrals under such a header give the same numbers.

use serde_json::Value;
use std::process::{Command, Stdio};

const ROOT: &str = env!("CARGO_MANIFEST_DIR");

/// The closed-shell determinant and the open-shell singlet of water's HOMO (a) and LUMO (b).
const INPUT: &str = "\
orbitals a b
space core
det closed = | core^2 a^2 |
det ab = | core^2 a b' |
det ba = | core^2 a' b |
state singlet = (ab - ba)/sqrt(2)
energy closed
energy singlet
";

const BINDINGS: [&str; 6] = ["--bind", "core=1-4", "--bind", "a=5", "--bind", "b=6"];

fn water_text() -> String {
    std::fs::read_to_string(format!("{ROOT}/tests/fixtures/water_sto3g_rhf.fcidump"))
        .expect("the water fixture")
}

/// The water total energies of the closed-shell determinant and the open-shell singlet, and
/// the nuclear repulsion (pyscf_reference.json, PySCF).
fn reference() -> (f64, f64, f64) {
    let text = std::fs::read_to_string(format!("{ROOT}/tests/fixtures/pyscf_reference.json")).unwrap();
    let json: Value = serde_json::from_str(&text).unwrap();
    let case = &json["cases"]["water_sto3g_rhf"];
    let energy = |name: &str| case["energies"][name]["value"].as_f64().unwrap();
    (energy("closed_shell_determinant"), energy("open_shell_singlet"), case["e_nuc"].as_f64().unwrap())
}

struct Output {
    code: Option<i32>,
    stdout: String,
    stderr: String,
}

/// Writes `dump` as `water.fcidump` in a fresh directory and evaluates `input` with it.
fn eval_with(dump: &str, input: &str, args: &[&str]) -> (Output, String) {
    let dir = tempfile::tempdir().expect("a temporary directory");
    let path = dir.path().join("water.fcidump");
    std::fs::write(&path, dump).unwrap();
    std::fs::write(dir.path().join("input.spinfold"), input).unwrap();
    let output = Command::new(env!("CARGO_BIN_EXE_spinfold"))
        .args(["eval", "input.spinfold", "--integrals", path.to_str().unwrap()])
        .args(args)
        .current_dir(dir.path())
        .stdin(Stdio::null())
        .output()
        .expect("the binary runs");
    let out = Output {
        code: output.status.code(),
        stdout: String::from_utf8_lossy(&output.stdout).into_owned(),
        stderr: String::from_utf8_lossy(&output.stderr).into_owned(),
    };
    (out, path.display().to_string())
}

/// Exit code 2, nothing printed, and a first line saying `place` and every fragment.
fn assert_refused(out: &Output, place: &str, says: &[&str]) {
    assert_eq!(out.code, Some(2), "{}", out.stderr);
    assert!(out.stdout.is_empty(), "{}", out.stdout);
    assert!(!out.stderr.contains("panicked"), "{}", out.stderr);
    let first = out.stderr.lines().next().unwrap_or("");
    assert!(first.starts_with(&format!("error: {place}")), "{place} in\n{}", out.stderr);
    for fragment in says {
        assert!(first.contains(fragment), "{fragment:?} in\n{}", out.stderr);
    }
}

/// The two energies printed with --json.
fn energies(out: &Output) -> (f64, f64) {
    assert_eq!(out.code, Some(0), "{}", out.stderr);
    let json: Value = serde_json::from_str(&out.stdout).expect("JSON");
    let value = |k: usize| json["results"][k]["value"].as_f64().unwrap();
    (value(0), value(1))
}

fn assert_close(what: &str, got: f64, want: f64) {
    assert!((got - want).abs() < 1e-9, "{what}: got {got:.12}, want {want:.12}");
}

/// The 1-based number of the first line whose indices are `indices`, and its value.
fn line_of(text: &str, indices: &str) -> (usize, String) {
    let (k, line) = text
        .lines()
        .enumerate()
        .find(|(_, l)| l.split_whitespace().skip(1).collect::<Vec<_>>().join(" ") == indices)
        .unwrap_or_else(|| panic!("the water fixture has an entry {indices}"));
    (k + 1, line.split_whitespace().next().unwrap().to_string())
}

#[test]
fn an_integral_given_twice_with_different_values_is_refused_naming_both_lines() {
    let text = water_text();
    let (first, value) = line_of(&text, "4 1 2 1");
    let appended = text.lines().count() + 1;
    // (41|21) again as (12|14), one of its eight orderings, with another value
    for (line, what) in [(" 0.5 1 2 1 4", "one integral"), (" 9.5 0 0 0 0", "the constant")] {
        let (out, path) = eval_with(&format!("{text}{line}\n"), INPUT, &BINDINGS);
        let earlier = if what == "the constant" { line_of(&text, "0 0 0 0").0 } else { first };
        assert_refused(
            &out,
            &format!("{path}:{appended}:2: "),
            &[what, "given twice with different values", &format!("on line {earlier}")],
        );
        if what == "one integral" {
            assert!(
                out.stderr.contains(&format!("`{value}    4    1    2    1` on line {first}")),
                "{}",
                out.stderr
            );
        }
    }
}

#[test]
fn an_integral_given_twice_with_the_same_value_is_accepted() {
    let text = water_text();
    let (_, value) = line_of(&text, "4 1 2 1");
    let (out, _) = eval_with(
        &format!("{text} {value} 1 2 1 4\n {value} 2 1 4 1\n"),
        INPUT,
        &[&BINDINGS[..], &["--json"]].concat(),
    );
    let (closed, singlet) = energies(&out);
    let (want_closed, want_singlet, _) = reference();
    assert_close("closed", closed, want_closed);
    assert_close("singlet", singlet, want_singlet);
}

#[test]
fn values_that_overflow_double_precision_are_refused() {
    let text = water_text();
    let line = text.lines().count() + 1;
    for value in ["1e999", "1D400", "-2.5d+310"] {
        let (out, path) = eval_with(&format!("{text} {value} 7 7 7 7\n"), INPUT, &BINDINGS);
        assert_refused(
            &out,
            &format!("{path}:{line}:2: "),
            &[&format!("`{value}` overflows double precision")],
        );
    }
}

#[test]
fn results_that_are_not_finite_are_errors_not_numbers() {
    let text = water_text();
    let (h_aa, _) = line_of(&text, "5 5 0 0");
    let (k_a1, _) = line_of(&text, "5 1 5 1");
    let replaced = |lines: &[usize]| {
        text.lines()
            .enumerate()
            .map(|(k, l)| {
                let fields: Vec<&str> = l.split_whitespace().collect();
                if lines.contains(&(k + 1)) {
                    format!(" 1e308 {}", fields[1..].join(" "))
                } else {
                    l.to_string()
                }
            })
            .collect::<Vec<_>>()
            .join("\n")
            + "\n"
    };
    // 2 h_aa overflows to inf; with K_a1 = 1e308 as well, -2 Σ_k K_ak is -inf and the sum NaN
    for (lines, value) in [(vec![h_aa], "inf"), (vec![h_aa, k_a1], "NaN")] {
        let (out, _) = eval_with(&replaced(&lines), INPUT, &BINDINGS);
        assert_refused(&out, "`energy closed` evaluates to ", &[&format!("to {value}:"), "double precision"]);
    }
}

#[test]
fn a_header_key_given_twice_is_refused() {
    let text = water_text().replacen("NORB=   7,", "NORB=   7,NORB=8,", 1);
    let (out, path) = eval_with(&text, INPUT, &BINDINGS);
    assert_refused(&out, &format!("{path}:1:17: "), &["NORB is given twice", "first at line 1, column 7"]);
    let text = water_text().replacen("NELEC=10", "NELEC=ten", 1);
    let (out, path) = eval_with(&text, INPUT, &BINDINGS);
    assert_refused(&out, &format!("{path}:1:23: "), &["NELEC=ten is not a whole number"]);
}

#[test]
fn a_file_without_a_constant_line_takes_it_as_zero_and_says_so() {
    let text: String =
        water_text().lines().filter(|l| !l.ends_with(" 0  0  0  0")).map(|l| format!("{l}\n")).collect();
    assert!(text.lines().count() < water_text().lines().count());
    let (out, path) = eval_with(&text, INPUT, &[&BINDINGS[..], &["--json"]].concat());
    let (closed, singlet) = energies(&out);
    let (want_closed, want_singlet, e_nuc) = reference();
    assert_close("closed, electronic", closed, want_closed - e_nuc);
    assert_close("singlet, electronic", singlet, want_singlet - e_nuc);
    let warning = format!(
        "{path} has no constant line (`value 0 0 0 0`): the constant is taken as 0, so energies are electronic only"
    );
    assert_eq!(out.stderr, format!("warning: {warning}\n"));
    let json: Value = serde_json::from_str(&out.stdout).unwrap();
    assert_eq!(json["warnings"], serde_json::json!([warning]));
}

#[test]
fn a_header_of_many_orbitals_with_a_few_entries_is_read_as_it_is() {
    for norb in [2000, 100_000] {
        let dump = format!(
            " &FCI NORB={norb},NELEC=2,MS2=0,\n &END\n -1.5 {norb} {norb} 0 0\n 0.7 {norb} {norb} {norb} {norb}\n 0.25 0 0 0 0\n"
        );
        let bind = format!("a={norb}");
        let (out, _) =
            eval_with(&dump, "orbitals a\ndet d = | a^2 |\nenergy d\n", &["--bind", &bind, "--json"]);
        assert_eq!(out.code, Some(0), "NORB={norb}: {}", out.stderr);
        let json: Value = serde_json::from_str(&out.stdout).unwrap();
        // 2 h_aa + J_aa + constant (the closed-shell check value of CONVENTIONS.md)
        assert_close("energy d", json["results"][0]["value"].as_f64().unwrap(), 2.0 * -1.5 + 0.7 + 0.25);
    }
}

#[test]
fn water_under_a_header_of_2000_orbitals_gives_the_same_numbers() {
    let text = water_text().replacen("NORB=   7,", "NORB=2000,", 1);
    let (out, _) = eval_with(&text, INPUT, &[&BINDINGS[..], &["--json"]].concat());
    let (closed, singlet) = energies(&out);
    let (want_closed, want_singlet, _) = reference();
    assert_close("closed", closed, want_closed);
    assert_close("singlet", singlet, want_singlet);
}

#[test]
fn a_number_of_orbitals_past_64_bit_indices_is_refused() {
    let (out, path) = eval_with(" &FCI NORB=200000,NELEC=2 &END\n 0.5 1 1 0 0\n", INPUT, &BINDINGS);
    assert_refused(&out, &format!("{path}:1:12: "), &["NORB=200000 is too large", "64 bits"]);
}

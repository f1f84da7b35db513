//! `spinfold eval` with the integrals of water (STO-3G, canonical RHF orbitals, 7 orbitals):
//! bindings that are missing, overlapping, out of range, malformed or unknown, and integral
//! files with a bad line, all end with exit code 2 and a message naming the culprit; a good
//! run prints `{"results": [{"request": ..., "value": ...}]}` in request order.

use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};

const DUMP: &str = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/fixtures/water_sto3g_rhf.fcidump");
const REFERENCE: &str = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/fixtures/pyscf_reference.json");

/// Two open shells a, b over a closed core: the closed-shell determinant, the open-shell
/// singlet and the M_S = 0 triplet, and the element between the first two.
const INPUT: &str = "\
orbitals a b
space core
det closed = | core^2 a^2 |
det ab = | core^2 a b' |
det ba = | core^2 a' b |
state singlet = (ab - ba)/sqrt(2)
state triplet = (ab + ba)/sqrt(2)
energy closed
energy singlet
energy triplet
element closed singlet
";

/// The bindings of the reference: core = orbitals 1-4, a = 5 (HOMO), b = 6 (LUMO).
const BINDINGS: [&str; 6] = ["--bind", "core=1-4", "--bind", "a=5", "--bind", "b=6"];

struct Run {
    code: Option<i32>,
    stdout: String,
    stderr: String,
}

/// Writes INPUT to `water.spinfold` in `dir` and runs `spinfold eval water.spinfold ARGS...` there.
fn eval_in(dir: &Path, integrals: &str, args: &[&str]) -> Run {
    std::fs::write(dir.join("water.spinfold"), INPUT).expect("the input is written");
    let output = Command::new(env!("CARGO_BIN_EXE_spinfold"))
        .args(["eval", "water.spinfold", "--integrals", integrals])
        .args(args)
        .current_dir(dir)
        .stdin(Stdio::null())
        .output()
        .expect("the binary runs");
    Run {
        code: output.status.code(),
        stdout: String::from_utf8_lossy(&output.stdout).into_owned(),
        stderr: String::from_utf8_lossy(&output.stderr).into_owned(),
    }
}

fn eval(args: &[&str]) -> Run {
    let dir = tempfile::tempdir().expect("a temporary directory");
    eval_in(dir.path(), DUMP, args)
}

/// The bindings with `name=...` replaced by `spec` (or dropped when `spec` is None), and
/// any extra options appended.
fn bindings_with(name: &str, spec: Option<&str>, extra: &[&'static str]) -> Vec<String> {
    let mut out = vec![];
    for pair in BINDINGS.chunks(2) {
        let option = pair[1];
        if option.split('=').next() == Some(name) {
            if let Some(spec) = spec {
                out.extend(["--bind".to_string(), format!("{name}={spec}")]);
            }
        } else {
            out.extend(pair.iter().map(|s| s.to_string()));
        }
    }
    out.extend(extra.iter().map(|s| s.to_string()));
    out
}

/// All the bindings, and extra options.
fn with_extra(extra: &[&'static str]) -> Vec<String> {
    bindings_with("", None, extra)
}

fn strs(v: &[String]) -> Vec<&str> {
    v.iter().map(String::as_str).collect()
}

/// Exit code 2, no results, no panic, and a one-line message containing every fragment.
fn assert_fails(run: &Run, says: &[&str]) {
    let stderr = &run.stderr;
    assert_eq!(run.code, Some(2), "exit code 2; stderr:\n{stderr}");
    assert!(!stderr.contains("panicked"), "no panic:\n{stderr}");
    assert!(run.stdout.is_empty(), "no results are printed:\n{}", run.stdout);
    let first = stderr.lines().next().unwrap_or("");
    assert!(first.starts_with("error: "), "{stderr}");
    for fragment in says {
        assert!(first.contains(fragment), "the message says {fragment:?}:\n{stderr}");
    }
}

#[test]
fn missing_binding_names_the_symbol_and_suggests_bind() {
    for name in ["a", "b", "core"] {
        let run = eval(&strs(&bindings_with(name, None, &[])));
        assert_fails(&run, &[&format!("`{name}`"), &format!("--bind {name}=")]);
    }
    let run = eval(&[]);
    assert_fails(&run, &["needs", "--bind"]);
}

#[test]
fn overlapping_bindings() {
    let run = eval(&strs(&bindings_with("a", Some("4"), &[])));
    assert_fails(&run, &["orbital 4", "`a`", "`core`", "overlap"]);

    let run = eval(&strs(&bindings_with("b", Some("5"), &[])));
    assert_fails(&run, &["orbital 5", "`a`", "`b`"]);
}

#[test]
fn orbital_beyond_the_integral_file() {
    let run = eval(&strs(&bindings_with("core", Some("1-9"), &[])));
    assert_fails(&run, &["--bind core=1-9", "orbital 8", "7 orbitals"]);

    let run = eval(&strs(&bindings_with("b", Some("8"), &[])));
    assert_fails(&run, &["--bind b=8", "orbital 8", "7 orbitals"]);
}

#[test]
fn numbers_and_ranges_are_checked_against_the_file_before_they_are_expanded() {
    // each would otherwise allocate a list of up to 2^64 orbital numbers
    for spec in ["1-18446744073709551615", "1-100000000000", "3-99999999999999999999999"] {
        let run = eval(&strs(&bindings_with("core", Some(spec), &[])));
        assert_fails(&run, &[&format!("--bind core={spec}"), "orbital 8 is beyond", "7 orbitals"]);
    }
    let run = eval(&strs(&bindings_with("core", Some("99999999999999999999999"), &[])));
    assert_fails(&run, &["orbital 99999999999999999999999 is beyond", "7 orbitals"]);
    let run = eval(&strs(&bindings_with("core", Some("100000000000-200000000000"), &[])));
    assert_fails(&run, &["orbital 100000000000 is beyond"]);
}

#[test]
fn a_space_bound_to_no_orbitals_is_written_none() {
    let run = eval(&strs(&bindings_with("core", Some(""), &[])));
    assert_fails(&run, &["--bind core=", "no orbitals are given", "core=none"]);
    let run = eval(&strs(&bindings_with("a", Some("none"), &[])));
    assert_fails(&run, &["--bind a=none", "`a` is one orbital"]);
    // with core=none every state here is one of two electrons: each energy and element is
    // evaluated (and warned about, since the file was made for 10)
    let run = eval(&strs(&bindings_with("core", Some("none"), &[])));
    assert_eq!(run.code, Some(0), "{}", run.stderr);
    assert_eq!(run.stdout.lines().count(), 4, "{}", run.stdout);
    assert_eq!(run.stderr.matches("has 2 electrons under the bindings").count(), 4, "{}", run.stderr);
}

#[test]
fn an_orbital_listed_twice_in_one_binding_is_refused() {
    let run = eval(&strs(&bindings_with("core", Some("1-3,3"), &[])));
    assert_fails(&run, &["--bind core=1-3,3", "orbital 3 is listed twice"]);
}

#[test]
fn malformed_bind_specs() {
    let cases: [(&str, Option<&str>, &[&str]); 6] = [
        ("core", Some("5-1"), &["core=5-1", "5-1 runs backwards"]),
        ("a", Some("x"), &["a=x", "`x` is not an orbital number"]),
        ("a", Some("0"), &["a=0", "`0` is not an orbital number (1-based)"]),
        ("a", Some(""), &["a=", "missing"]),
        ("a", Some("5,6"), &["a=5,6", "one orbital", "one number"]),
        ("core", Some("1-"), &["core=1-", "missing"]),
    ];
    for (name, spec, says) in cases {
        let run = eval(&strs(&bindings_with(name, spec, &[])));
        assert_fails(&run, says);
    }
    let run = eval(&strs(&bindings_with("a", None, &["--bind", "a"])));
    assert_fails(&run, &["--bind a", "NAME=SPEC"]);
}

#[test]
fn binding_an_unknown_name() {
    let run = eval(&strs(&with_extra(&["--bind", "c=3"])));
    assert_fails(&run, &["--bind c=3", "`c`", "not an orbital, space or generic index"]);
}

#[test]
fn binding_a_name_twice() {
    let run = eval(&strs(&with_extra(&["--bind", "a=5"])));
    assert_fails(&run, &["`a` is bound twice"]);
}

#[test]
fn missing_integral_file() {
    let dir = tempfile::tempdir().unwrap();
    let run = eval_in(dir.path(), "nowhere.fcidump", &BINDINGS);
    assert_fails(&run, &["cannot use `nowhere.fcidump`"]);
}

const HEADER: &str = " &FCI NORB=2,NELEC=2,MS2=0,\n  ORBSYM=1,1\n  ISYM=1,\n &END\n";

/// Writes a small dump `bad.fcidump` whose line 7 is `bad_line` and evaluates the input with
/// it (the integral file is read, and rejected, before the bindings are checked).
fn eval_with_bad_line(bad_line: &str) -> (Run, PathBuf) {
    let dir = tempfile::tempdir().expect("a temporary directory");
    let path = dir.path().join("bad.fcidump");
    let text = format!("{HEADER} 0.6 1 1 1 1\n -1.2 1 1 0 0\n{bad_line}\n 0.5 2 2 0 0\n");
    std::fs::write(&path, text).unwrap();
    let run = eval_in(dir.path(), path.to_str().unwrap(), &BINDINGS);
    (run, path)
}

#[test]
fn malformed_integral_file_line_is_named() {
    // the column is that of the offending field (past the end for a missing one)
    let cases: [(&str, usize, &[&str]); 6] = [
        (" 0.25 1 x 0 0", 9, &["`x` is not an orbital number"]),
        (" 0.25 1 1", 10, &["5 fields", "found 3"]),
        (" abc 1 1 0 0", 2, &["`abc` is not a finite number"]),
        (" NaN 1 1 0 0", 2, &["`NaN` is not a finite number"]),
        (" 0.25 1 3 0 0", 9, &["orbital 3 is beyond NORB=2"]),
        (" 0.25 1 0 1 0", 7, &["index pattern 1 0 1 0"]),
    ];
    for (line, column, says) in cases {
        let (run, path) = eval_with_bad_line(line);
        let place = format!("{}:7:{column}: ", path.display());
        let mut all = vec![place.as_str()];
        all.extend_from_slice(says);
        assert_fails(&run, &all);
        assert!(run.stderr.contains("help: "), "{}", run.stderr);
    }
}

#[test]
fn integral_file_without_header_end() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("nohead.fcidump");
    std::fs::write(&path, " &FCI NORB=2,NELEC=2,MS2=0,\n 0.6 1 1 1 1\n").unwrap();
    let run = eval_in(dir.path(), path.to_str().unwrap(), &BINDINGS);
    assert_fails(&run, &[&format!("{}:1:1: ", path.display()), "`&END`"]);
}

/// The reference total energies (hartree) for the closed-shell determinant, the open-shell
/// singlet and the M_S = 0 triplet.
fn reference() -> (f64, f64, f64) {
    let text = std::fs::read_to_string(REFERENCE).expect("the reference file");
    let json: serde_json::Value = serde_json::from_str(&text).expect("the reference is JSON");
    let case = &json["cases"]["water_sto3g_rhf"];
    assert_eq!(case["NORB"], 7);
    assert_eq!(case["orbitals_1based"]["core"], serde_json::json!([1, 2, 3, 4]));
    assert_eq!(case["orbitals_1based"]["a"], 5);
    assert_eq!(case["orbitals_1based"]["b"], 6);
    let energy = |name: &str| case["energies"][name]["value"].as_f64().expect("a reference energy");
    (energy("closed_shell_determinant"), energy("open_shell_singlet"), energy("triplet_m0"))
}

#[test]
fn json_results_in_request_order() {
    let run = eval(&strs(&with_extra(&["--json"])));
    assert_eq!(run.code, Some(0), "{}", run.stderr);
    assert!(run.stderr.is_empty(), "{}", run.stderr);
    let json: serde_json::Value = serde_json::from_str(&run.stdout).expect("the output is JSON");
    let top = json.as_object().expect("an object");
    assert_eq!(top.keys().collect::<Vec<_>>(), vec!["results", "warnings"], "{}", run.stdout);
    assert_eq!(json["warnings"], serde_json::json!([]), "the water file has a constant and NELEC=10");
    let results = json["results"].as_array().expect("results is a list");
    let requests: Vec<&str> =
        results.iter().map(|r| r["request"].as_str().expect("a request text")).collect();
    assert_eq!(requests, ["energy closed", "energy singlet", "energy triplet", "element closed singlet"]);
    for r in results {
        let entry = r.as_object().unwrap();
        let mut keys: Vec<&String> = entry.keys().collect();
        keys.sort();
        assert_eq!(keys, ["request", "value"], "{r}");
        assert!(r["value"].is_f64(), "a number: {r}");
    }
    let values: Vec<f64> = results.iter().map(|r| r["value"].as_f64().unwrap()).collect();
    let (closed, singlet, triplet) = reference();
    for (got, want) in [(values[0], closed), (values[1], singlet), (values[2], triplet)] {
        assert!((got - want).abs() < 1e-8, "{got} against the reference {want}");
    }
    // the closed-shell determinant and the singly excited singlet do not couple: the
    // orbitals are canonical (Brillouin)
    assert!(values[3].abs() < 1e-8, "{}", values[3]);
}

#[test]
fn text_results_in_request_order() {
    let run = eval(&BINDINGS);
    assert_eq!(run.code, Some(0), "{}", run.stderr);
    let lines: Vec<&str> = run.stdout.lines().collect();
    assert_eq!(lines.len(), 4, "{}", run.stdout);
    let (closed, singlet, triplet) = reference();
    for (line, (request, want)) in lines.iter().zip([
        ("energy closed", closed),
        ("energy singlet", singlet),
        ("energy triplet", triplet),
        ("element closed singlet", 0.0),
    ]) {
        assert!(line.starts_with(request), "{line}");
        let value: f64 = line.split_whitespace().last().unwrap().parse().expect("a number");
        assert!((value - want).abs() < 1e-8, "{line} against {want}");
    }
}

//! Free coefficients: `coefficients cg cu` declares them, and a term's coefficient is an exact
//! number, a free coefficient, or their product (`sqrt(2) cg`, `-cu/2`).
//!
//! Specification:
//! - a state is linear in its free coefficients; a product of two of them, one in a
//!   denominator, under a square root, alone, in a `det` or a `csf`, an undeclared one, and a
//!   `spin` or `roots` request on such a state are errors at the offending text (exit 2);
//! - `derive`: an energy is <P|H|P> over <P|P>, each a quadratic form in the coefficients whose
//!   coefficients are expressions (`cg² (...) + 2 cg cu (...) + cu² (...)`); elements and
//!   overlaps are bilinear the same way; text and JSON show the monomials; every pair of parts
//!   is checked as an element, and the assembled forms at random coefficients, against brute force;
//! - `eval --set cg=.. --set cu=..`: the values at those coefficients; an energy with none set:
//!   where it is stationary, the lowest root over the span of its parts, with the coefficients
//!   there (normalized, the largest positive, or the fixed part at its written weight); an
//!   element or overlap with coefficients left unset is an error naming them.

mod common;

use common::blocks::{Run, fixture, number, numpy_reference, spinfold};
use spinfold::{ErrorKind, Exact, Options, derive, parse, verify};
use std::sync::Arc;

/// A pair function over a closed core: the bonding pair g² and the antibonding pair u².
const PAIR: &str = "\
orbitals g u
space core
coefficients cg cu
state P = cg | core^2 g^2 | + cu | core^2 u^2 |
energy P
";

/// The bindings of the water fixture: core = orbitals 1-4, g = 5 (HOMO), u = 6 (LUMO).
const WATER: [&str; 8] = ["--integrals", "", "--bind", "core=1-4", "--bind", "g=5", "--bind", "u=6"];

/// The bindings of H2 in a minimal basis: no core, g = 1, u = 2.
const H2: [&str; 8] = ["--integrals", "", "--bind", "core=none", "--bind", "g=1", "--bind", "u=2"];

fn eval(input: &str, bindings: [&str; 8], dump: &str, extra: &[&str]) -> Run {
    let dump = fixture(dump);
    let mut args: Vec<&str> = bindings.to_vec();
    args[1] = &dump;
    args.extend(extra);
    spinfold("eval", input, &args)
}

/// `result` (the first of a JSON eval output) has `value` and coefficients cg, cu.
fn value_and_coefficients(out: &serde_json::Value) -> (f64, f64, f64) {
    let r = &out["results"][0];
    (number(r, "/value"), number(r, "/coefficients/cg"), number(r, "/coefficients/cu"))
}

#[test]
fn the_energy_is_a_ratio_of_quadratic_forms_in_the_coefficients() {
    let text = spinfold("derive", PAIR, &["--ascii"]).text().to_string();
    // <g²|H|u²> = K_gu and the two determinants are orthonormal (textbook Slater-Condon rules,
    // from memory)
    assert!(text.contains("<P|H|P> = cg^2 (\n"), "{text}");
    assert!(text.contains(") + 2 cg cu (K_gu) + cu^2 (\n"), "{text}");
    assert!(text.contains("  <P|P> = cg^2 + cu^2\n"), "{text}");
    assert!(text.contains("3 pair elements, each checked as an element"), "{text}");
    assert!(text.contains("<P|H|P> and <P|P> assembled at 3 random sets of the free coefficients"), "{text}");

    let json = spinfold("derive", PAIR, &["--to", "json"]).json();
    let request = &json["requests"][0];
    assert_eq!(request["coefficients"], serde_json::json!(["cg", "cu"]));
    let monomials = request["monomials"].as_array().expect("monomials");
    let names: Vec<&str> = monomials.iter().map(|m| m["monomial"].as_str().unwrap()).collect();
    assert_eq!(names, ["cg^2", "cg cu", "cu^2"]);
    // the cross monomial carries both equal pairs: 2 K_gu, and no overlap
    let cross = &monomials[1];
    assert_eq!(cross["coefficients"], serde_json::json!(["cg", "cu"]));
    assert_eq!(cross["terms"].as_array().unwrap().len(), 1);
    assert_eq!(cross["terms"][0]["coefficient"]["exact"], "2");
    assert_eq!(cross["terms"][0]["integral"], serde_json::json!({"kind": "exchange", "indices": ["g", "u"]}));
    assert_eq!(cross["overlap"], serde_json::json!([]));
    assert_eq!(monomials[0]["overlap"][0]["coefficient"]["exact"], "1");
    assert!(request.get("terms").is_none(), "the monomials hold the expression");
    assert_eq!(request["elements"].as_array().unwrap().len(), 3, "one element per pair of parts");
}

#[test]
fn a_coefficient_is_a_number_a_free_coefficient_or_their_product() {
    let input = "\
orbitals g u
space core
coefficients cg cu
state R = sqrt(2) cg | core^2 g^2 | - cu/2 | core^2 u^2 |
overlap R R
";
    // orthonormal determinants: <R|R> = 2 cg² + cu²/4 (common practice)
    let text = spinfold("derive", input, &["--ascii"]).text().to_string();
    assert!(text.contains("  <R|R> = 2 cg^2 + 1/4 cu^2\n"), "{text}");
    let states = spinfold("states", input, &[]).text().to_string();
    assert!(states.contains("sqrt(2) cg  | core^2 g g' |"), "{states}");
    assert!(states.contains("-1/2 cu  | core^2 u u' |"), "{states}");
}

/// `derive` of `input` fails with exit 2 at `line:column` with `message` in the report.
fn refused(input: &str, line: usize, column: usize, message: &str) {
    let run = spinfold("derive", input, &[]);
    assert_eq!(run.code, Some(2), "{input}\n{}", run.stderr);
    assert!(run.stderr.contains(&format!("input.spinfold:{line}:{column}: ")), "{input}\n{}", run.stderr);
    assert!(run.stderr.contains(message), "{input}\n{}", run.stderr);
    assert!(!run.stderr.contains("panicked"), "{}", run.stderr);
}

#[test]
fn misused_free_coefficients_are_located_errors() {
    let head = "orbitals g u\nspace core\ncoefficients cg cu\n";
    refused(
        "orbitals g u\nspace core\nstate Q = | core^2 g^2 | + t | core^2 u^2 |\n",
        3,
        28,
        "`t` is not defined",
    );
    refused(&format!("{head}state X = cg cu | core^2 g^2 |\n"), 4, 14, "`cg` and `cu` multiply each other");
    refused(&format!("{head}state X = | core^2 g^2 | / cg\n"), 4, 28, "`cg` stands in a denominator");
    refused(&format!("{head}state X = sqrt(cg) | core^2 g^2 |\n"), 4, 16, "`cg` stands under a square root");
    refused(&format!("{head}state X = cg + | core^2 g^2 |\n"), 4, 11, "`cg` stands alone");
    refused(&format!("{head}det X = cg\n"), 4, 9, "`X` is a `det`");
    refused(
        &format!("{head}state P = cg | core^2 g^2 |\ndet X = P[g -> u]\n"),
        5,
        9,
        "free coefficients (cg) stand in it",
    );
    refused(&format!("{head}csf X = | core^2 cg | S=0\n"), 4, 18, "`cg` is a free coefficient");
    refused(
        &format!("{head}state P = cg | core^2 g^2 | + cu | core^2 u^2 |\nspin P\n"),
        5,
        6,
        "`spin` needs states with fixed coefficients, but `P` has the free coefficients cg, cu",
    );
    refused(
        &format!("{head}state P = cg | core^2 g^2 | + cu | core^2 u^2 |\nroots P\n"),
        5,
        7,
        "`roots` needs states with fixed coefficients",
    );
}

#[test]
fn the_stationary_energy_is_the_lowest_root_of_the_two_by_two_problem() {
    for (dump, bindings) in [("h2_sto3g_rhf.fcidump", H2), ("water_sto3g_rhf.fcidump", WATER)] {
        let (energy, cg, cu) = value_and_coefficients(&eval(PAIR, bindings, dump, &["--json"]).json());
        // the parts are orthonormal: normalized means cg² + cu² = 1; the larger is positive
        assert!((cg * cg + cu * cu - 1.0).abs() < 1e-12, "{dump}: {cg}, {cu}");
        assert!(cg > cu.abs(), "{dump}: the bonding pair dominates: {cg}, {cu}");
        // numpy: the lowest eigenpair of the 2x2 Hamiltonian from the textbook closed-shell
        // formulas on the same integrals (tests/numpy/reference.py)
        let ncore = if dump.starts_with("h2") { "0" } else { "4" };
        let (g, u) = if dump.starts_with("h2") { ("1", "2") } else { ("5", "6") };
        if let Some(reference) = numpy_reference(dump, &["pair", ncore, g, u, "1", "0"]) {
            assert!(
                (energy - number(&reference, "/lowest")).abs() < 1e-10,
                "{dump}: {energy} vs {reference}"
            );
            assert!((cg - number(&reference, "/vector/0")).abs() < 1e-8, "{dump}: {cg} vs {reference}");
            assert!((cu - number(&reference, "/vector/1")).abs() < 1e-8, "{dump}: {cu} vs {reference}");
        }
    }
    // PySCF FCI of H2 in a minimal basis, where the singles do not couple, so the pair function
    // spans the ground state (tests/fixtures/pyscf_reference.json)
    let fci = common::recorded(&common::pyscf_reference(), "/cases/h2_sto3g_rhf/energies/fci/value");
    let (energy, cg, cu) =
        value_and_coefficients(&eval(PAIR, H2, "h2_sto3g_rhf.fcidump", &["--json"]).json());
    assert!((energy - fci).abs() < 1e-10, "{energy} vs PySCF FCI {fci}");
    assert!((cg - 0.99).abs() < 0.01 && (cu + 0.11).abs() < 0.01, "{cg}, {cu}");
    let text = eval(PAIR, H2, "h2_sto3g_rhf.fcidump", &[]).text().to_string();
    assert!(text.starts_with("energy P "), "{text}");
    assert!(text.contains("stationary at cg = 0.99"), "{text}");
}

#[test]
fn set_values_equal_the_quadratic_form_evaluated_directly() {
    let set = ["--json", "--set", "cg=0.98", "--set", "cu=-0.2"];
    let out = eval(PAIR, WATER, "water_sto3g_rhf.fcidump", &set).json();
    let (energy, cg, cu) = value_and_coefficients(&out);
    assert_eq!((cg, cu), (0.98, -0.2), "the coefficients as set");
    assert_eq!(out["results"][0]["stationary"], false);
    // numpy: c·Hc / c·c with the 2x2 Hamiltonian of the textbook formulas
    if let Some(reference) =
        numpy_reference("water_sto3g_rhf.fcidump", &["pair", "4", "5", "6", "0.98", "-0.2"])
    {
        assert!((energy - number(&reference, "/at")).abs() < 1e-10, "{energy} vs {reference}");
    }
    // the same with the coefficients scaled: the energy is a ratio of quadratic forms
    let scaled = ["--json", "--set", "cg=1.96", "--set", "cu=-0.4"];
    let (twice, _, _) = value_and_coefficients(&eval(PAIR, WATER, "water_sto3g_rhf.fcidump", &scaled).json());
    assert!((twice - energy).abs() < 1e-12, "{twice} vs {energy}");
}

#[test]
fn a_fixed_part_keeps_its_written_weight() {
    let input = "\
orbitals g u
space core
coefficients cg cu
state P = cg | core^2 g^2 | + cu | core^2 u^2 |
state Q = | core^2 g^2 | - cu/2 | core^2 u^2 |
energy P
energy Q
";
    let out = eval(input, WATER, "water_sto3g_rhf.fcidump", &["--json"]).json();
    let (p, cg, cu) = value_and_coefficients(&out);
    let q = number(&out["results"][1], "/value");
    let cu_q = number(&out["results"][1], "/coefficients/cu");
    // Q spans the same two determinants as P: the same stationary energy, with the g² part at
    // weight 1, so -cu_Q/2 = cu/cg (common practice)
    assert!((p - q).abs() < 1e-10, "{p} vs {q}");
    assert!((-cu_q / 2.0 - cu / cg).abs() < 1e-9, "{cu_q} vs {cu}/{cg}");
    assert_eq!(out["results"][1]["coefficients"].as_object().unwrap().len(), 1, "only cu is free in Q");
}

#[test]
fn elements_and_overlaps_are_bilinear() {
    let input = "\
orbitals g u
space core
coefficients cg cu ch
state P = cg | core^2 g^2 | + cu | core^2 u^2 |
state Q = | core^2 g^2 | + ch | core^2 u^2 |
element P Q
overlap P Q
";
    let text = spinfold("derive", input, &["--ascii"]).text().to_string();
    assert!(text.contains("<P|Q> = cg + cu ch\n"), "{text}");
    assert!(text.contains("+ cg ch (K_gu) +"), "{text}");
    let unset = eval(input, WATER, "water_sto3g_rhf.fcidump", &[]);
    assert_eq!(unset.code, Some(2), "{}", unset.stderr);
    assert!(
        unset.stderr.contains("`element P Q` has free coefficients without a value: cg, cu, ch"),
        "{}",
        unset.stderr
    );
    assert!(unset.stderr.contains("--set"), "{}", unset.stderr);
    let set = ["--json", "--set", "cg=0.9", "--set", "cu=-0.3", "--set", "ch=0.25"];
    let out = eval(input, WATER, "water_sto3g_rhf.fcidump", &set).json();
    let element = number(&out["results"][0], "/value");
    let overlap = number(&out["results"][1], "/value");
    // orthonormal determinants: <P|Q> = cg + cu ch (common practice)
    assert!((overlap - (0.9 - 0.3 * 0.25)).abs() < 1e-14, "{overlap}");
    // numpy: c·H d with the 2x2 Hamiltonian (total energies on its diagonal)
    if let Some(r) = numpy_reference("water_sto3g_rhf.fcidump", &["pair", "4", "5", "6", "1", "0"]) {
        let h = |i: usize, j: usize| number(&r, &format!("/H/{i}/{j}"));
        let (c, d) = ([0.9, -0.3], [1.0, 0.25]);
        let expected: f64 =
            (0..2).flat_map(|i| (0..2).map(move |j| (i, j))).map(|(i, j)| c[i] * h(i, j) * d[j]).sum();
        assert!((element - expected).abs() < 1e-10, "{element} vs {expected}");
    }
}

#[test]
fn set_options_are_checked() {
    let wrong = |extra: &[&str], message: &str| {
        let run = eval(PAIR, WATER, "water_sto3g_rhf.fcidump", extra);
        assert_eq!(run.code, Some(2), "{extra:?}: {}", run.stderr);
        assert!(run.stderr.contains(message), "{extra:?}: {}", run.stderr);
    };
    wrong(
        &["--set", "cx=1"],
        "`cx` is not a free coefficient of the input; its free coefficients are cg, cu",
    );
    wrong(&["--set", "cg=1", "--set", "cg=2"], "`cg` is given twice");
    wrong(&["--set", "cg"], "write NAME=VALUE");
    wrong(&["--set", "cg=nan"], "`nan` is not a finite number");
    wrong(&["--set", "cg=1"], "`energy P` has free coefficients without a value: cu");
}

#[test]
fn verification_catches_a_wrong_pair_element() {
    let program = parse("pair.spinfold", PAIR).unwrap();
    let request = &program.requests[0];
    let mut d = derive(&program, request, &Options::default()).unwrap();
    assert!(verify(&program, request, &d, 7).is_ok());
    let mut block = (**d.block.as_ref().expect("a block")).clone();
    block.pairs[1].value = block.pairs[1].value.scaled(&Exact::integer(2));
    d.block = Some(Arc::new(block));
    let error = verify(&program, request, &d, 7).unwrap_err();
    assert!(matches!(error.kind, ErrorKind::VerificationFailed { .. }), "{error}");
}

#[test]
fn generated_python_assembles_the_forms_and_proves_itself() {
    let ready = std::process::Command::new("python3")
        .args(["-c", "import numpy, pytest"])
        .output()
        .is_ok_and(|o| o.status.success());
    if !ready {
        assert!(std::env::var_os("CI").is_none(), "python3 with numpy and pytest is required under CI");
        eprintln!("skipping: python3 with numpy and pytest not found");
        return;
    }
    let input = "\
orbitals g u
space core
coefficients cg cu ch
state P = cg | core^2 g^2 | + cu | core^2 u^2 |
state Q = | core^2 g^2 | + ch | core^2 u^2 |
energy Q
element P Q
overlap P Q
";
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("forms.spinfold"), input).unwrap();
    let run = |program: &str, args: &[&str]| {
        let out = std::process::Command::new(program).args(args).current_dir(dir.path()).output().unwrap();
        let text =
            format!("{}{}", String::from_utf8_lossy(&out.stdout), String::from_utf8_lossy(&out.stderr));
        assert!(out.status.success(), "{program} {args:?}:\n{text}");
        text
    };
    run(env!("CARGO_BIN_EXE_spinfold"), &["derive", "--to", "python", "-o", "forms.py", "forms.spinfold"]);
    let code = std::fs::read_to_string(dir.path().join("forms.py")).unwrap();
    assert!(code.contains("def element_p_q(h, eri, cg, cu, ch, g, u, core):"), "{code}");
    // one test per request and the check of the test integrals
    let report = run("python3", &["-m", "pytest", "-q", "-p", "no:cacheprovider", "forms.py"]);
    assert!(report.contains("4 passed"), "{report}");
}

/// Each pair of parts of a state with free coefficients is a derivation of its own: a state of
/// more than 100 parts is refused at the operand of the request that uses it.
#[test]
fn a_state_of_too_many_free_parts_is_refused_in_its_request() {
    let names: Vec<String> = (0..101).map(|k| format!("c{k}")).collect();
    let sum: Vec<String> = names.iter().map(|c| format!("{c} | core^2 g^2 |")).collect();
    let input = format!(
        "orbitals g u\nspace core\ncoefficients {}\nstate W = {}\nenergy W\n",
        names.join(" "),
        sum.join(" + ")
    );
    let run = spinfold("derive", &input, &[]);
    assert_eq!(run.code, Some(2), "{}", run.stderr);
    assert!(run.stderr.contains("input.spinfold:5:8: `W` is a sum of 101 parts"), "{}", run.stderr);
    assert!(run.stderr.contains("exceeds the limit of 100 parts"), "{}", run.stderr);
    assert!(!run.stderr.contains("panicked"), "{}", run.stderr);
}

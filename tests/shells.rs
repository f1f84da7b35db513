//! `shells S`: the energy of S in the open-shell form E = Σ_s f_s h_ss + Σ_{s,t} (a_st J_st +
//! b_st K_st) over ordered pairs of shells, a closed space counting as one shell; energies
//! outside the form are refused with the first term that does not fit.

mod common;

use spinfold::{DEFAULT_SEED, ErrorKind, Exact, Options, Shell, ShellForm, derive_checked, parse};
use std::process::Command;

use common::TWO_SHELL_STATES as STATES;

fn form(request: &str) -> ShellForm {
    let program = parse("shells.spinfold", &format!("{STATES}{request}\n")).unwrap();
    let derived = derive_checked(&program, &Options::default(), Some(DEFAULT_SEED)).unwrap();
    derived[0].0.shells.as_deref().expect("a shells request has a form").clone()
}

fn n(numerator: i64, denominator: i64) -> Exact {
    Exact::fraction(numerator, denominator)
}

#[test]
fn a_closed_shell_is_f_2_a_2_b_minus_1_within_and_between_its_shells() {
    // common practice: E = 2 Σ_i h_ii + Σ_ij (2 J_ij − K_ij) over the doubly occupied orbitals
    let f = form("shells closed");
    assert_eq!(f.shells, vec![Shell::Space(0), Shell::Orbital(spinfold::Orb::Named(0))]);
    assert_eq!(f.f, vec![n(2, 1), n(2, 1)]);
    for s in 0..2 {
        for t in 0..2 {
            let diagonal = s == t && s == 1;
            // J_aa = K_aa: the orbital's own pair enters as J_aa alone
            assert_eq!(f.a[s][t], if diagonal { n(1, 1) } else { n(2, 1) }, "a[{s}][{t}]");
            assert_eq!(f.b[s][t], if diagonal { n(0, 1) } else { n(-1, 1) }, "b[{s}][{t}]");
        }
    }
}

#[test]
fn the_triplet_and_the_open_shell_singlet_differ_in_the_sign_of_b_between_the_open_shells() {
    // common practice: triplet E = E_core + h_aa + h_bb + J_ab − K_ab (+ core terms), the
    // open-shell singlet has + K_ab; over ordered pairs, a_ab = a_ba = 1/2, b_ab = b_ba = ∓1/2
    let (t, s) = (form("shells triplet"), form("shells singlet"));
    for f in [&t, &s] {
        assert_eq!(f.shells.len(), 3);
        assert_eq!(f.f, vec![n(2, 1), n(1, 1), n(1, 1)]);
        assert_eq!((f.a[1][2].clone(), f.a[2][1].clone()), (n(1, 2), n(1, 2)));
        // each open shell sees the core with 2 J − K, halved over the two orders
        assert_eq!((f.a[0][1].clone(), f.b[0][1].clone()), (n(1, 1), n(-1, 2)));
        assert_eq!((f.a[0][0].clone(), f.b[0][0].clone()), (n(2, 1), n(-1, 1)));
        assert_eq!(f.a[1][1], n(0, 1), "one electron in a has no self-interaction");
    }
    assert_eq!((t.b[1][2].clone(), t.b[2][1].clone()), (n(-1, 2), n(-1, 2)));
    assert_eq!((s.b[1][2].clone(), s.b[2][1].clone()), (n(1, 2), n(1, 2)));
}

#[test]
fn an_energy_outside_the_form_is_refused_naming_its_first_such_term() {
    // two determinants one excitation apart couple through h_ab: no shell form holds that
    let program = parse("shells.spinfold", &format!("{STATES}shells (closed + | core^2 a b' |)\n")).unwrap();
    let error = derive_checked(&program, &Options::default(), None).unwrap_err();
    assert!(matches!(error.kind, ErrorKind::OutsideShellForm { .. }), "{error}");
    let text = error.to_string();
    assert!(text.contains(":6:1"), "located: {text}");
    assert!(text.contains("h_ab"), "names the term: {text}");
    assert!(text.contains("off-diagonal one-electron integral"), "says why: {text}");
}

#[test]
fn eval_of_the_form_gives_the_energy() {
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("s.spinfold");
    std::fs::write(
        &input,
        format!("{STATES}energy singlet\nshells singlet\nenergy triplet\nshells triplet\n"),
    )
    .unwrap();
    let out = Command::new(env!("CARGO_BIN_EXE_spinfold"))
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .args(["eval", input.to_str().unwrap(), "--integrals", "tests/fixtures/water_sto3g_rhf.fcidump"])
        .args(["--bind", "core=1-4", "--bind", "a=5", "--bind", "b=6", "--json"])
        .output()
        .unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let json: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let value = |k: usize| json["results"][k]["value"].as_f64().unwrap();
    // the README's water example: S −74.471401509193, T −74.548868456380 (PySCF integrals)
    assert!((value(0) - -74.471401509193).abs() < 1e-9);
    assert!((value(1) - value(0)).abs() < 1e-10);
    assert!((value(3) - value(2)).abs() < 1e-10);
    assert!((value(2) - -74.548868456380).abs() < 1e-9);
}

#[test]
fn a_state_of_no_electrons_has_no_shells_in_text_and_latex() {
    let program = parse("empty.spinfold", "shells | |\n").unwrap();
    let derived = derive_checked(&program, &Options::default(), Some(DEFAULT_SEED)).unwrap();
    let form = derived[0].0.shells.as_deref().expect("a shells request has a form");
    assert!(form.shells.is_empty() && form.f.is_empty());
    let text = spinfold::render(&program, &derived, spinfold::Format::Text { ascii: true }).unwrap();
    assert!(text.contains("in open shells: none; the state has no electrons"), "{text}");
    // an array of no columns would not compile: the LaTeX says so in words instead
    let latex = spinfold::render(&program, &derived, spinfold::Format::Latex { standalone: false }).unwrap();
    assert!(latex.contains("In open shells: none") && !latex.contains("\\begin{array}"), "{latex}");
}

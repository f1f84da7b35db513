//! `derive --ascii`: every character of the output is ASCII, for every bundled example and for
//! every kind of note (spin warnings, vanishing cases, the spin-algebra route), the Fock legend
//! and every form of the verification line.

mod common;

use std::io::Write;
use std::process::{Command, Stdio};

/// `spinfold derive - --ascii ARGS` on `input`; its standard output, after checking that it
/// succeeded.
fn derive_ascii(input: &str, args: &[&str]) -> String {
    let mut child = Command::new(env!("CARGO_BIN_EXE_spinfold"))
        .args(["derive", "-", "--ascii"])
        .args(args)
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("the binary runs");
    child.stdin.take().expect("a pipe").write_all(input.as_bytes()).expect("the input is written");
    let output = child.wait_with_output().expect("the binary finishes");
    let stderr = String::from_utf8_lossy(&output.stderr);
    assert_eq!(output.status.code(), Some(0), "{input}{stderr}");
    String::from_utf8(output.stdout).expect("the output is UTF-8")
}

/// Every character that is not ASCII, with its line.
fn not_ascii(text: &str) -> Vec<(char, &str)> {
    text.lines().flat_map(|line| line.chars().filter(|c| !c.is_ascii()).map(move |c| (c, line))).collect()
}

#[test]
fn every_example_in_every_option() {
    for (stem, text) in common::examples() {
        for args in [&[][..], &["--fock"], &["--distinct"], &["--fock", "--distinct"], &["--no-verify"]] {
            let out = derive_ascii(&text, args);
            assert_eq!(not_ascii(&out), [], "{stem} {args:?}:\n{out}");
        }
    }
}

#[test]
fn every_kind_of_note_and_verification_line() {
    let open_shells = "orbitals a b c d e f\nspace core\ncsf X = | core^2 a b c d e f | S=0 path=1/2,0,1/2,0,1/2,0\nenergy X\n";
    // (input, options, what the output must say: the path the input exercises)
    let cases: &[(&str, &[&str], &str)] = &[
        ("orbitals c z q\nspin | c' z |\n", &[], "is not an eigenfunction of S^2:"),
        ("orbitals a\nstate m = (| a | + | a' |)/sqrt(2)\nspin m\n", &[], "is not an eigenfunction of S_z:"),
        (
            "orbitals a b\nstate x = | a b | + | a b' |\nspin x\n",
            &[],
            "is not an eigenfunction of S^2 or S_z:",
        ),
        ("orbitals a b\nstate r = | a b' | + sqrt(2) | a' b |\nspin r\n", &[], "<S^2> = (1 + 2sqrt(2)/3)"),
        ("orbitals a\nspace act: t u\nstate w = | t a | + | u a' |\nspin w\n", &[], "S_z when t = u:"),
        ("space act: t u\nenergy | t u |\n", &[], "the state vanishes when t = u"),
        (
            "space act: t u\nspace core\nspace val\nenergy | core^2 val^2 t u' |\n",
            &["--fock"],
            "E_ref = 2 sum_",
        ),
        (open_shells, &["--route", "spin-algebra"], "derived by spin-coupling algebra"),
        (open_shells, &["--max-determinants", "10"], "not checked by brute force"),
        ("space act: t u v w x y\nelement | t u' v | | w x' y |\n", &[], "a seeded sample of"),
        (
            "orbitals a b c d e f g h i j\n\
             csf X = | a b c d e f g h i j | S=0 path=1/2,1,3/2,2,5/2,2,3/2,1,1/2,0\n\
             csf Y = | a b c d e f g h i j | S=0 path=1/2,1,3/2,2,3/2,2,3/2,1,1/2,0\n\
             element X Y\n",
            &[],
            "determinant pairs",
        ),
        ("orbitals a b\nenergy | a b' |\n", &["--no-verify"], "not verified (--no-verify)"),
    ];
    for &(input, args, says) in cases {
        let out = derive_ascii(input, args);
        assert!(out.contains(says), "{input}{args:?} should say {says:?}:\n{out}");
        assert_eq!(not_ascii(&out), [], "{input}{args:?}:\n{out}");
    }
}

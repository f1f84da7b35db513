//! The Python emitter's output for every bundled example, plain, in Fock form and with
//! distinct indices, must pass its own tests under pytest and when run directly; names from the
//! input that are Python keywords or builtins, and hostile file names, must not break it.

mod common;

use spinfold::{DEFAULT_SEED, Format, Options, derive_checked, parse, render};
use std::path::{Path, PathBuf};
use std::process::Command;

fn run(command: &mut Command) -> String {
    let out = command.output().unwrap_or_else(|e| panic!("{command:?} could not start: {e}"));
    let text = format!("{}{}", String::from_utf8_lossy(&out.stdout), String::from_utf8_lossy(&out.stderr));
    assert!(out.status.success(), "{command:?} failed:\n{text}");
    text
}

fn python() -> Command {
    let mut c = Command::new("python3");
    c.env("PYTHONDONTWRITEBYTECODE", "1");
    c
}

/// Whether python3 with NumPy and pytest is here. Outside CI a missing one skips the test with
/// a message; under CI it is a failure, since .ci/run installs them.
fn python_ready(test: &str) -> bool {
    let ok =
        python().args(["-c", "import numpy, pytest"]).output().map(|o| o.status.success()).unwrap_or(false);
    if !ok {
        assert!(
            std::env::var_os("CI").is_none(),
            "{test}: python3 with numpy and pytest is required under CI (python3 -m pip install numpy pytest)"
        );
        eprintln!(
            "skipping {test}: python3 with numpy and pytest not found (python3 -m pip install numpy pytest)"
        );
    }
    ok
}

/// Runs a generated module under pytest and directly; both must pass `tests` tests.
fn check_module(path: &Path, tests: usize) {
    let dir = path.parent().unwrap();
    let report =
        run(python().current_dir(dir).args(["-m", "pytest", "-q", "-p", "no:cacheprovider"]).arg(path));
    assert!(
        report.lines().any(|l| l.starts_with(&format!("{tests} passed in "))),
        "{}: pytest collected the wrong tests:\n{report}",
        path.display()
    );
    let direct = run(python().current_dir(dir).arg(path));
    assert!(
        direct.lines().any(|l| l == format!("{tests} passed, 0 failed")),
        "{}: running the module directly:\n{direct}",
        path.display()
    );
}

fn examples() -> Vec<PathBuf> {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let mut out: Vec<PathBuf> = std::fs::read_dir(root.join("examples"))
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|x| x == "spinfold"))
        .filter(|p| common::has_code(&std::fs::read_to_string(p).unwrap()))
        .collect();
    out.sort();
    out
}

fn request_count(path: &Path) -> usize {
    let text = std::fs::read_to_string(path).unwrap();
    parse(&path.display().to_string(), &text).unwrap().requests.len()
}

/// Derives `input` to Python through the command line and checks the module.
fn derive_and_check(input: &Path, extra: Option<&str>, out: &Path) {
    let mut command = Command::new(env!("CARGO_BIN_EXE_spinfold"));
    command.args(["derive", "--to", "python", "-o"]).arg(out).arg(input);
    command.args(extra);
    run(&mut command);
    // one test per request and the check of the test integrals themselves
    check_module(out, request_count(input) + 1);
}

#[test]
fn generated_modules_pass_their_own_tests() {
    if !python_ready("generated_modules_pass_their_own_tests") {
        return;
    }
    let scratch = tempfile::tempdir().unwrap();
    let all = examples();
    assert!(!all.is_empty());
    for example in &all {
        let stem = example.file_stem().unwrap().to_string_lossy().to_string();
        for (suffix, extra) in [("", None), ("_fock", Some("--fock")), ("_distinct", Some("--distinct"))] {
            derive_and_check(example, extra, &scratch.path().join(format!("{stem}{suffix}.py")));
        }
    }
}

#[test]
fn python_keywords_and_builtins_as_names_still_run() {
    if !python_ready("python_keywords_and_builtins_as_names_still_run") {
        return;
    }
    let scratch = tempfile::tempdir().unwrap();
    let input = scratch.path().join("names.spinfold");
    std::fs::write(
        &input,
        "# names that are Python keywords, builtins or the generated code's own names
orbitals lambda def h eri np sum k float
space class: int len
space _value: self value
det import = | class^2 lambda def' |
det return = | class^2 lambda' def |
state None = (import - return)/sqrt(2)
det pass = | class^2 _value^2 h np' sum k |
energy None
element import return
energy pass
element import import[int -> self]
element import import[int int' -> self value']
energy | class^2 float^2 eri |
spin None
",
    )
    .unwrap();
    for (name, extra) in [("names.py", None), ("names_fock.py", Some("--fock"))] {
        let out = scratch.path().join(name);
        derive_and_check(&input, extra, &out);
        let code = std::fs::read_to_string(&out).unwrap();
        assert!(code.contains("def energy_none(h, eri, lambda_, def_, class_):"), "{code}");
        assert!(code.contains("def energy_pass(h, eri, h_2, np_2, sum_, k, class_, value_2):"), "{code}");
    }
}

#[test]
fn hostile_file_names_stay_inside_the_docstring() {
    if !python_ready("hostile_file_names_stay_inside_the_docstring") {
        return;
    }
    let scratch = tempfile::tempdir().unwrap();
    for (k, (name, shown)) in [
        (
            "evil\"\"\"\nraise SystemExit(3)\n\"\"\"#.spinfold",
            "evil\"\"\" raise SystemExit(3) \"\"\"#.spinfold",
        ),
        ("ends in a quote and a backslash \"\\", "ends in a quote and a backslash \"\\"),
    ]
    .into_iter()
    .enumerate()
    {
        let program = parse(name, "orbitals a b\ndet ab = | a b' |\nenergy ab\n").unwrap();
        let derived = derive_checked(&program, &Options::default(), Some(DEFAULT_SEED)).unwrap();
        let code = render(&program, &derived, Format::Python).unwrap();
        assert!(!code.lines().any(|l| l.starts_with("raise SystemExit(3)")), "{code}");
        let out = scratch.path().join(format!("hostile_{k}.py"));
        std::fs::write(&out, &code).unwrap();
        check_module(&out, 2);
        let first_line = run(python().arg("-c").arg(format!(
            "import ast; print(ast.get_docstring(ast.parse(open({:?}).read())).splitlines()[0])",
            out.display().to_string()
        )));
        assert!(first_line.contains(&format!("from {shown}:")), "{first_line}");
    }
}

/// f_pq and E_ref over two closed spaces: the helpers take every closed space at once.
#[test]
fn fock_terms_over_two_closed_spaces() {
    if !python_ready("fock_terms_over_two_closed_spaces") {
        return;
    }
    let scratch = tempfile::tempdir().unwrap();
    let input = scratch.path().join("two_closed.spinfold");
    std::fs::write(
        &input,
        "orbitals a b\nspace core\nspace val: i j\nspace vir: x y\n\
         det ab = | core^2 val^2 a b' |\ndet ba = | core^2 val^2 a' b |\nstate S = (ab - ba)/sqrt(2)\n\
         energy S\nelement ab ba\nelement ab ab[i -> x]\nelement ab ab[i j' -> x y']\n",
    )
    .unwrap();
    let out = scratch.path().join("two_closed.py");
    derive_and_check(&input, Some("--fock"), &out);
    let code = std::fs::read_to_string(&out).unwrap();
    assert!(code.contains("_reference_energy(h, eri, (core, val))"), "{code}");
    assert!(code.contains("_fock(h, eri, a, a, (core, val))"), "{code}");
}

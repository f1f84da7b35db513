//! The Rust emitter's output for every bundled example and for an input of keyword names,
//! plain and in Fock form, is gathered into one scratch crate that must be rustfmt-clean,
//! compile and pass clippy with warnings denied, and pass the tests embedded in each module.

mod common;

use std::path::Path;
use std::process::Command;

/// Whether a toolchain component answers `--version`; rustfmt and clippy come with the
/// toolchain here, and a machine without them says so rather than failing for it.
fn available(program: &str, args: &[&str]) -> bool {
    let ok = Command::new(program).args(args).arg("--version").output().is_ok_and(|o| o.status.success());
    if !ok {
        eprintln!("{program} {} is not installed: that check is skipped", args.join(" "));
    }
    ok
}

fn rustfmt_check(path: &Path) {
    if available("rustfmt", &[]) {
        run(Command::new("rustfmt").args(["--edition", "2021", "--check"]).arg(path));
    }
}

fn run(command: &mut Command) -> String {
    let out = command.output().unwrap_or_else(|e| panic!("{command:?} could not start: {e}"));
    let text = format!("{}{}", String::from_utf8_lossy(&out.stdout), String::from_utf8_lossy(&out.stderr));
    assert!(out.status.success(), "{command:?} failed:\n{text}");
    text
}

#[test]
fn generated_modules_are_clean_and_prove_themselves() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let scratch = tempfile::tempdir().unwrap();
    let src = scratch.path().join("src");
    std::fs::create_dir_all(&src).unwrap();
    std::fs::write(
        scratch.path().join("Cargo.toml"),
        "[package]\nname = \"generated\"\nversion = \"0.0.0\"\nedition = \"2021\"\n\n[dependencies]\n",
    )
    .unwrap();
    let mut modules = vec![];
    let mut examples: Vec<_> = std::fs::read_dir(root.join("examples"))
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|x| x == "spinfold"))
        .filter(|p| common::has_code(&std::fs::read_to_string(p).unwrap()))
        .collect();
    examples.sort();
    // names that are Rust keywords, reserved words, or clash once made lower case
    examples.push(root.join("tests/inputs/keyword_names.spinfold"));
    for example in &examples {
        let stem = example.file_stem().unwrap().to_string_lossy().to_string();
        for (suffix, extra) in [("", None), ("_fock", Some("--fock"))] {
            let module = format!("{stem}{suffix}");
            let path = src.join(format!("{module}.rs"));
            let mut command = Command::new(env!("CARGO_BIN_EXE_spinfold"));
            command.args(["derive", "--to", "rust", "-o"]).arg(&path).arg(example);
            command.args(extra);
            run(&mut command);
            rustfmt_check(&path);
            modules.push(module);
        }
    }
    let lib: String = modules.iter().map(|m| format!("pub mod {m};\n")).collect();
    std::fs::write(src.join("lib.rs"), lib).unwrap();
    let target = scratch.path().join("target");
    let cargo = || {
        let mut c = Command::new(env!("CARGO"));
        c.current_dir(scratch.path()).env("CARGO_TARGET_DIR", &target).env("RUSTFLAGS", "-D warnings");
        c
    };
    if available(env!("CARGO"), &["clippy"]) {
        run(cargo().args(["clippy", "--offline", "--quiet", "--all-targets", "--", "-D", "warnings"]));
    }
    let report = run(cargo().args(["test", "--offline", "--quiet"]));
    let passed: usize = report
        .lines()
        .filter_map(|l| l.strip_prefix("test result: ok. "))
        .filter_map(|l| l.split_whitespace().next()?.parse::<usize>().ok())
        .sum();
    assert!(passed >= modules.len() * 2, "every module checks itself: {report}");
}

#[test]
fn the_benchmarked_module_is_the_emitters_current_output() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let out = run(Command::new(env!("CARGO_BIN_EXE_spinfold")).current_dir(root).args([
        "derive",
        "--to",
        "rust",
        "benches/generated/energies.spinfold",
    ]));
    let committed = std::fs::read_to_string(root.join("benches/generated/energies.rs")).unwrap();
    assert_eq!(
        out, committed,
        "regenerate with: spinfold derive --to rust benches/generated/energies.spinfold -o benches/generated/energies.rs"
    );
}

#[test]
fn one_module_per_request_when_asked() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("modules");
    run(Command::new(env!("CARGO_BIN_EXE_spinfold"))
        .args(["derive", "--to", "rust", "--per-request", "-o"])
        .arg(&out)
        .arg(root.join("examples/double_excitations.spinfold")));
    let mut files: Vec<_> = std::fs::read_dir(&out).unwrap().map(|e| e.unwrap().path()).collect();
    files.sort();
    let names: Vec<String> =
        files.iter().map(|p| p.file_name().unwrap().to_string_lossy().into_owned()).collect();
    assert_eq!(names[0], "request_01_element_ref_dd.rs");
    assert_eq!(names.len(), 4, "one file per request: {names:?}");
    for file in &files {
        let binary = dir.path().join("check");
        run(Command::new("rustc")
            .args(["--edition", "2021", "--test", "-D", "warnings", "-o"])
            .arg(&binary)
            .arg(file));
        let report = run(&mut Command::new(&binary));
        assert!(report.contains("test result: ok."), "{report}");
    }
}

#[test]
fn keywords_and_clashing_names_still_give_valid_code() {
    // orbital and space names that are Rust keywords or names the module itself uses
    let input = "orbitals fn type ints value\nspace self: k l\nspace Integrals\n\
                 det x = | self^2 Integrals^2 fn type' |\n\
                 state y = (x - | self^2 Integrals^2 fn' type |)/sqrt(2)\n\
                 energy y\nenergy x[k -> value]\nelement x y\n";
    let dir = tempfile::tempdir().unwrap();
    let (source, module, binary) =
        (dir.path().join("k.spinfold"), dir.path().join("k.rs"), dir.path().join("k"));
    std::fs::write(&source, input).unwrap();
    run(Command::new(env!("CARGO_BIN_EXE_spinfold"))
        .args(["derive", "--to", "rust", "-o"])
        .arg(&module)
        .arg(&source));
    rustfmt_check(&module);
    run(Command::new("rustc")
        .args(["--edition", "2021", "--test", "-D", "warnings", "-o"])
        .arg(&binary)
        .arg(&module));
    assert!(run(&mut Command::new(&binary)).contains("test result: ok. 6 passed"));
}

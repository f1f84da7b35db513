//! Results written with `-o`: a new file gets the mode the umask allows and a replaced file
//! keeps its own; errors name the destination, never a temporary; an interrupted run leaves no
//! temporary file behind; `--per-request` writes every file or says which were written.

#![cfg(unix)]

use std::os::unix::fs::PermissionsExt;
use std::os::unix::process::ExitStatusExt;
use std::path::Path;
use std::process::{Command, Output, Stdio};
use std::time::{Duration, Instant};

const INPUT: &str = "orbitals a b\nspace core\ndet ab = | core^2 a b' |\ndet ba = | core^2 a' b |\n\
                     state S = (ab - ba)/sqrt(2)\nenergy S\nelement ab ba\noverlap S ab\n";

/// A scratch directory holding `input.spinfold`.
fn scratch() -> tempfile::TempDir {
    let dir = tempfile::tempdir().expect("a temporary directory");
    std::fs::write(dir.path().join("input.spinfold"), INPUT).expect("the input is written");
    dir
}

/// Runs `spinfold ARGS` in `dir` through the shell, after the shell commands `setup` (a umask,
/// a limit).
fn spinfold_after(setup: &str, dir: &Path, args: &[&str]) -> Output {
    Command::new("sh")
        .arg("-c")
        .arg(format!("{setup}; exec \"$0\" \"$@\""))
        .arg(env!("CARGO_BIN_EXE_spinfold"))
        .args(args)
        .current_dir(dir)
        .stdin(Stdio::null())
        .output()
        .expect("the binary runs")
}

fn spinfold(dir: &Path, args: &[&str]) -> Output {
    spinfold_after("umask 022", dir, args)
}

fn stderr(out: &Output) -> String {
    String::from_utf8_lossy(&out.stderr).into_owned()
}

fn mode(path: &Path) -> u32 {
    std::fs::metadata(path).expect("the file exists").permissions().mode() & 0o7777
}

/// Every name in `dir`, sorted.
fn entries(dir: &Path) -> Vec<String> {
    let mut names: Vec<String> = std::fs::read_dir(dir)
        .expect("a readable directory")
        .map(|e| e.expect("an entry").file_name().to_string_lossy().into_owned())
        .collect();
    names.sort();
    names
}

#[test]
fn a_new_file_gets_the_mode_the_umask_allows() {
    for (umask, expected) in [("022", 0o644), ("027", 0o640), ("002", 0o664)] {
        let dir = scratch();
        let out = spinfold_after(
            &format!("umask {umask}"),
            dir.path(),
            &["derive", "input.spinfold", "-o", "out.txt"],
        );
        assert!(out.status.success(), "{}", stderr(&out));
        assert_eq!(mode(&dir.path().join("out.txt")), expected, "umask {umask}: 0666 less the umask");
    }
}

#[test]
fn a_replaced_file_keeps_its_mode() {
    let dir = scratch();
    let target = dir.path().join("out.txt");
    for kept in [0o604, 0o640, 0o755] {
        std::fs::write(&target, "earlier results\n").unwrap();
        std::fs::set_permissions(&target, std::fs::Permissions::from_mode(kept)).unwrap();
        // a umask that would take bits away from a new file takes none from a replaced one
        let out = spinfold_after("umask 077", dir.path(), &["derive", "input.spinfold", "-o", "out.txt"]);
        assert!(out.status.success(), "{}", stderr(&out));
        assert_eq!(mode(&target), kept, "the mode {kept:o} of the replaced file is kept");
        assert!(std::fs::read_to_string(&target).unwrap().contains("energy S"), "the file is replaced");
    }
}

#[test]
fn errors_name_the_destination_and_never_a_temporary() {
    let dir = scratch();
    std::fs::create_dir(dir.path().join("taken")).unwrap();
    for (target, why) in [
        // the directory of the destination does not exist
        ("missing/out.txt", "No such file or directory"),
        // the destination is a directory: the rename fails after the file was written
        ("taken", "Is a directory"),
    ] {
        let out = spinfold(dir.path(), &["derive", "input.spinfold", "-o", target]);
        assert_eq!(out.status.code(), Some(2));
        let message = stderr(&out);
        assert!(message.starts_with(&format!("error: cannot use `{target}`: {why}")), "{message}");
        assert!(
            !message.contains("spinfold-tmp") && !message.contains(".tmp"),
            "no temporary is named:\n{message}"
        );
    }
    assert_eq!(entries(dir.path()), ["input.spinfold", "taken"], "no temporary is left");
    assert!(entries(&dir.path().join("taken")).is_empty());
}

#[test]
fn per_request_output_cannot_go_to_standard_output() {
    let dir = scratch();
    let out = spinfold(dir.path(), &["derive", "input.spinfold", "--per-request", "-o", "-"]);
    assert_eq!(out.status.code(), Some(2), "{}", stderr(&out));
    let message = stderr(&out);
    assert!(
        message
            .starts_with("error: --per-request writes one file per request into the directory given by -o"),
        "{message}"
    );
    assert!(message.contains("give a directory"), "{message}");
    assert!(out.stdout.is_empty());
    assert_eq!(entries(dir.path()), ["input.spinfold"], "no directory named `-` is made");
}

#[test]
fn per_request_writes_every_file() {
    let dir = scratch();
    let out = spinfold(dir.path(), &["derive", "input.spinfold", "--per-request", "-o", "results"]);
    assert!(out.status.success(), "{}", stderr(&out));
    let written = entries(&dir.path().join("results"));
    assert_eq!(
        written,
        ["request_01_energy_s.txt", "request_02_element_ab_ba.txt", "request_03_overlap_s_ab.txt"]
    );
    for name in written {
        assert_eq!(mode(&dir.path().join("results").join(name)), 0o644);
    }
}

#[test]
fn per_request_says_which_files_were_written_when_a_rename_fails() {
    let dir = scratch();
    // a directory where the second file should go
    std::fs::create_dir_all(dir.path().join("results/request_02_element_ab_ba.txt")).unwrap();
    let out = spinfold(dir.path(), &["derive", "input.spinfold", "--per-request", "-o", "results"]);
    assert_eq!(out.status.code(), Some(2), "{}", stderr(&out));
    let message = stderr(&out);
    assert!(message.starts_with("error: cannot use `results/request_02_element_ab_ba.txt`: "), "{message}");
    assert!(message.contains("written before it: `results/request_01_energy_s.txt`;"), "{message}");
    assert!(
        message.contains(
            "not written: `results/request_02_element_ab_ba.txt`, `results/request_03_overlap_s_ab.txt`"
        ),
        "{message}"
    );
    let results = dir.path().join("results");
    assert_eq!(entries(&results), ["request_01_energy_s.txt", "request_02_element_ab_ba.txt"]);
    assert!(std::fs::read_to_string(results.join("request_01_energy_s.txt")).unwrap().contains("energy S"));
}

#[test]
fn per_request_writes_nothing_when_one_file_cannot_be_written() {
    // the second request's file is larger than the file-size limit lets a file grow (the limit's
    // signal ignored, so that the write fails instead)
    let long = "o".repeat(200);
    let input = format!("orbitals a b {long}\nenergy | a b' |\nenergy | a {long}' |\nenergy | b b' |\n");
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("input.spinfold"), input).unwrap();
    let args = ["derive", "input.spinfold", "--no-verify", "--per-request", "-o", "results"];
    let out = spinfold_after("umask 022; trap '' XFSZ; ulimit -f 1", dir.path(), &args);
    assert_eq!(out.status.code(), Some(2), "{}", stderr(&out));
    let message = stderr(&out);
    assert!(message.starts_with("error: cannot use `results/request_02_energy_a_o"), "{message}");
    assert!(message.contains("File too large"), "{message}");
    assert!(message.contains("none of the 3 files was written"), "{message}");
    assert!(!message.contains("spinfold-tmp"), "{message}");
    assert!(entries(&dir.path().join("results")).is_empty(), "{:?}", entries(&dir.path().join("results")));
    // without the limit all three are written, the second larger than the limit
    let out = spinfold(dir.path(), &args);
    assert!(out.status.success(), "{}", stderr(&out));
    let second = dir.path().join("results").join(format!("request_02_energy_a_{long}.txt"));
    assert!(std::fs::metadata(second).unwrap().len() > 1024);
}

#[test]
fn an_interrupted_run_leaves_no_temporary_file() {
    // enough requests that writing their files takes a while
    let mut input = String::from("orbitals a b\n");
    for _ in 0..3000 {
        input.push_str("energy | a b' |\n");
    }
    for signal in ["TERM", "INT"] {
        let dir = tempfile::tempdir().unwrap();
        std::fs::write(dir.path().join("many.spinfold"), &input).unwrap();
        let results = dir.path().join("results");
        let mut child = Command::new(env!("CARGO_BIN_EXE_spinfold"))
            .args(["derive", "many.spinfold", "--no-verify", "--per-request", "-o", "results"])
            .current_dir(dir.path())
            .stdin(Stdio::null())
            .stdout(Stdio::null())
            .stderr(Stdio::piped())
            .spawn()
            .expect("the binary runs");
        // wait until the first temporary file appears, then interrupt
        let start = Instant::now();
        let seen = loop {
            let names = if results.is_dir() { entries(&results) } else { vec![] };
            if let Some(name) = names.iter().find(|n| n.contains(".spinfold-tmp-")) {
                break name.clone();
            }
            assert!(
                child.try_wait().unwrap().is_none(),
                "the run ended before a temporary file was seen: {names:?}"
            );
            assert!(start.elapsed() < Duration::from_secs(120), "no temporary file within two minutes");
            std::thread::sleep(Duration::from_micros(200));
        };
        assert!(seen.starts_with(".request_"), "named after its destination: {seen}");
        let killed = Command::new("sh").arg("-c").arg(format!("kill -{signal} {}", child.id())).status();
        assert!(killed.unwrap().success());
        let status = child.wait().unwrap();
        let number = if signal == "TERM" { 15 } else { 2 };
        assert_eq!(status.signal(), Some(number), "ended by SIG{signal} as without a handler: {status:?}");
        let left = entries(&results);
        assert!(!left.iter().any(|n| n.contains("spinfold-tmp")), "SIG{signal}: temporaries left: {left:?}");
        // every file written before the interrupt is whole
        for name in left {
            let text = std::fs::read_to_string(results.join(&name)).unwrap();
            assert!(text.ends_with("not verified (--no-verify)\n"), "{name} is whole");
        }
    }
}

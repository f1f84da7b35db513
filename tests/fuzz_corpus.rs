//! Hostile and odd inputs never crash the binary: every input under tests/fuzz_corpus/ is run
//! with the command lines recorded beside it and must end with exit 0 or 2, by itself, without a
//! panic or a stack overflow. Also a short seeded run of the fuzz driver, so that it keeps working.
//!
//! Each corpus entry is `NAME.spinfold` (the input, any bytes) and `NAME.args`: `#` lines saying
//! what it probes, then one command per line, where `{input}` is the input file, `{stdin}` is `-`
//! with the input on standard input, `{integrals}` is `NAME.fcidump` where there is one (else the
//! water integral file of tests/fixtures) and `{out}` is a scratch directory. Where a command
//! succeeds, `--ascii` output must be ASCII and `eval` must print finite numbers.

use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

/// Long enough for any corpus input on a loaded machine; a runaway input stops here.
const TIMEOUT: Duration = Duration::from_secs(30);
/// Address space of one run (KiB, for `ulimit -v`): a runaway input fails instead of the machine.
const MEMORY_KIB: u64 = 4 * 1024 * 1024;

fn corpus_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fuzz_corpus")
}

/// How one command ended.
struct Ended {
    code: Option<i32>,
    timed_out: bool,
    stdout: String,
    stderr: String,
}

/// Runs a command under the memory limit, killing it past the timeout.
fn run_limited(program: &Path, args: &[String], stdin: Option<&[u8]>, dir: &Path) -> Ended {
    let mut child = Command::new("sh")
        .arg("-c")
        .arg(format!("ulimit -v {MEMORY_KIB}; exec \"$0\" \"$@\""))
        .arg(program)
        .args(args)
        .current_dir(dir)
        .stdin(if stdin.is_some() { Stdio::piped() } else { Stdio::null() })
        .stdout(std::fs::File::create(dir.join("stdout.txt")).expect("a scratch file"))
        .stderr(std::fs::File::create(dir.join("stderr.txt")).expect("a scratch file"))
        .spawn()
        .expect("sh starts");
    if let (Some(bytes), Some(mut pipe)) = (stdin, child.stdin.take()) {
        let bytes = bytes.to_vec();
        std::thread::spawn(move || {
            let _ = pipe.write_all(&bytes);
        });
    }
    let deadline = Instant::now() + TIMEOUT;
    let (status, timed_out) = loop {
        if let Some(status) = child.try_wait().expect("the child is ours") {
            break (status, false);
        }
        if Instant::now() > deadline {
            let _ = child.kill();
            break (child.wait().expect("the child is ours"), true);
        }
        std::thread::sleep(Duration::from_millis(5));
    };
    let read =
        |name: &str| String::from_utf8_lossy(&std::fs::read(dir.join(name)).unwrap_or_default()).into_owned();
    Ended { code: status.code(), timed_out, stdout: read("stdout.txt"), stderr: read("stderr.txt") }
}

/// One command of a corpus entry: its arguments, and whether the input goes to standard input.
type CorpusCommand = (Vec<String>, bool);

/// The corpus entries: (name, input bytes, commands).
fn corpus() -> Vec<(String, Vec<u8>, Vec<CorpusCommand>)> {
    let dir = corpus_dir();
    let mut names: Vec<String> = std::fs::read_dir(&dir)
        .expect("tests/fuzz_corpus exists")
        .filter_map(|e| e.ok())
        .filter_map(|e| e.file_name().to_str()?.strip_suffix(".args").map(str::to_string))
        .collect();
    names.sort();
    let water = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/water_sto3g_rhf.fcidump");
    names
        .into_iter()
        .map(|name| {
            let input_path = dir.join(format!("{name}.spinfold"));
            let own = dir.join(format!("{name}.fcidump"));
            let integrals = if own.exists() { own } else { water.clone() };
            let input =
                std::fs::read(&input_path).unwrap_or_else(|_| panic!("{name}.args has its {name}.spinfold"));
            let args =
                std::fs::read_to_string(dir.join(format!("{name}.args"))).expect("the args file reads");
            assert!(args.starts_with('#'), "{name}.args starts with a comment saying what it probes");
            let commands = args
                .lines()
                .filter(|l| !l.trim().is_empty() && !l.starts_with('#'))
                .map(|line| {
                    let stdin = line.split_whitespace().any(|w| w == "{stdin}");
                    let argv = line
                        .split_whitespace()
                        .map(|w| {
                            w.replace("{input}", &input_path.to_string_lossy())
                                .replace("{stdin}", "-")
                                .replace("{integrals}", &integrals.to_string_lossy())
                        })
                        .collect();
                    (argv, stdin)
                })
                .collect::<Vec<_>>();
            assert!(!commands.is_empty(), "{name}.args lists at least one command");
            (name, input, commands)
        })
        .collect()
}

#[test]
fn no_corpus_input_crashes_hangs_or_fails_verification() {
    let binary = Path::new(env!("CARGO_BIN_EXE_spinfold"));
    let mut failures = Vec::new();
    let mut runs = 0;
    for (name, input, commands) in corpus() {
        for (argv, stdin) in commands {
            let scratch = tempfile::tempdir().expect("a scratch directory");
            let argv: Vec<String> = argv
                .iter()
                .map(|a| a.replace("{out}", &scratch.path().join("out").to_string_lossy()))
                .collect();
            let ended = run_limited(binary, &argv, stdin.then_some(&input[..]), scratch.path());
            runs += 1;
            let what = if ended.timed_out {
                Some(format!("no answer within {} s", TIMEOUT.as_secs()))
            } else if ended.stderr.contains("panicked") {
                Some("a panic".into())
            } else if ended.stderr.contains("has overflowed its stack") {
                Some("a stack overflow".into())
            } else if ended.code == Some(1) {
                Some("a verification mismatch (exit 1)".into())
            } else if !matches!(ended.code, Some(0 | 2)) {
                Some(format!("exit status {:?} (killed by a signal or out of memory)", ended.code))
            } else if ended.code == Some(0) && argv.iter().any(|a| a == "--ascii") && !ended.stdout.is_ascii()
            {
                let line = ended.stdout.lines().find(|l| !l.is_ascii()).unwrap_or("");
                Some(format!("--ascii output that is not ASCII: {line}"))
            } else if ended.code == Some(0)
                && argv[0] == "eval"
                && ended
                    .stdout
                    .split(|c: char| c.is_whitespace() || c == ',')
                    .any(|w| ["inf", "-inf", "NaN", "null"].contains(&w))
            {
                Some(format!(
                    "an evaluation printed a value that is not a finite number:\n    {}",
                    ended.stdout.trim()
                ))
            } else {
                None
            };
            if let Some(what) = what {
                let tail: String = ended.stderr.lines().take(6).collect::<Vec<_>>().join("\n    ");
                failures.push(format!("{name}: spinfold {}: {what}\n    {tail}", argv.join(" ")));
            }
        }
    }
    assert!(runs >= 20, "the corpus has commands to run ({runs})");
    assert!(failures.is_empty(), "{} of {runs} corpus runs failed:\n{}", failures.len(), failures.join("\n"));
}

/// A few hundred inputs of a fixed seed through the fuzz driver (workspace member `fuzz`): it
/// builds, runs its workers on every input, and most generated programs are accepted by the tool
/// (a generator that only produced rejected input would test little). Bugs it finds are the
/// corpus's business, so findings (exit 1) do not fail this test; a broken driver does.
#[test]
fn the_fuzz_driver_runs_a_short_seeded_session() {
    let findings = tempfile::tempdir().expect("a scratch directory");
    let mut cargo = Command::new(env!("CARGO"));
    cargo.args(["run", "--quiet", "-p", "spinfold-fuzz"]);
    if !cfg!(debug_assertions) {
        cargo.arg("--release");
    }
    let output = cargo
        .args(["--", "--seed", "7", "--inputs", "300", "--seconds", "120", "--findings"])
        .arg(findings.path())
        .arg("--spinfold")
        .arg(env!("CARGO_BIN_EXE_spinfold"))
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .output()
        .expect("cargo runs the fuzz driver");
    let summary = String::from_utf8_lossy(&output.stdout);
    let stderr = String::from_utf8_lossy(&output.stderr);
    println!("{summary}");
    assert!(matches!(output.status.code(), Some(0 | 1)), "the driver ends normally:\n{summary}\n{stderr}");
    assert!(summary.contains("seed 7, 300 inputs"), "the driver ran every input:\n{summary}\n{stderr}");
    // the row `generated  inputs accepted rejected ...` of the summary
    let row: Vec<u64> = summary
        .lines()
        .find(|l| l.starts_with("generated "))
        .expect("the summary has a row for generated programs")
        .split_whitespace()
        .skip(1)
        .map(|n| n.parse().expect("the row holds counts"))
        .collect();
    let (inputs, accepted) = (row[0], row[1]);
    assert!(inputs > 50 && accepted * 2 > inputs, "most generated programs are accepted:\n{summary}");
}

//! Benchmark: how the derivation engine scales with generic indices (five and six per space,
//! eight in one space), with a 20-shell singlet and a doubles block, in wall time and peak memory.
//!
//! Run with `cargo bench --bench engine_scaling` (every row), or `-- NAME...` for chosen rows
//! (`-- --cap 300 --memory 4 NAME...` sets the time cap, s, and the memory cap, GiB). Each row
//! derives its request through the library as `spinfold derive` does (parse, derive, verify
//! against brute force with the default seed, unless the row says `--no-verify`), in a child
//! process of its own, so that its peak memory (VmHWM, the figure getrusage reports as ru_maxrss)
//! is its own. A child is limited to 8 GiB of address space by default (its row reads "out of
//! memory" past it) and killed at the time cap, 150 s by default (its row reads "> cap"). The
//! coincidence-case limit is lifted, as `--max-cases` would.
//!
//! "Eight generic indices in one space" is read as the energy of one determinant written with
//! eight indices of an open space, `| t u v w x y z q |`: every coincidence of two indices is a
//! case of its own, B(8) = 4140 cases. The row `eight-mixed` is the same with four alpha and four
//! beta electrons, where an alpha and a beta index may coincide without the state vanishing.

#[path = "shared/singlet.rs"]
mod singlet;

use singlet::singlet_input;
use spinfold::{DEFAULT_SEED, Limits, Options, Route, derive_checked, parse_with};
use std::io::Read;
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

/// The address space a child may take, GiB, unless `--memory G` says otherwise.
const DEFAULT_MEMORY_GIB: f64 = 8.0;
/// The wall time after which a child is killed, unless `--cap S` says otherwise.
const DEFAULT_CAP_SECONDS: f64 = 150.0;
/// Case counts of these rows (up to B(6)² = 41209) are far past the default limit.
const MAX_CASES: usize = 1_000_000;

/// One request to time and the target it is measured against.
struct Row {
    name: &'static str,
    /// The request as it is named in the table (Markdown).
    request: &'static str,
    input: fn() -> String,
    verify: bool,
    route: Route,
    target_seconds: f64,
    /// In MB (10⁶ bytes), where the row has a memory target.
    target_mb: Option<f64>,
}

const FIVE_PER_SPACE: &str = "space occ: i j k l m\nspace vir: a b c d e\ndet ref = | occ^2 |\n\
                              element ref[i j k' -> a b c'] ref[l m' -> d e']\n";
const EIGHT_IN_ONE_SPACE: &str = "space act: t u v w x y z q\nenergy | t u v w x y z q |\n";
const EIGHT_MIXED_SPINS: &str = "space act: t u v w x y z q\nenergy | t u v w x' y' z' q' |\n";
const SIX_PER_SPACE: &str = "space occ: i j k l m n\nspace vir: a b c d e f\ndet ref = | occ^2 |\n\
                             element ref[i j k' -> a b c'] ref[l m n' -> d e f']\n";
const FOUR_PER_SPACE: &str = "space occ: i j k l\nspace vir: a b c d\ndet ref = | occ^2 |\n\
                              element ref[i j' -> a b'] ref[k l' -> c d']\n";

const ROWS: &[Row] = &[
    Row {
        name: "five-per-space",
        request: "`element ref[i j k' -> a b c'] ref[l m' -> d e']`",
        input: || FIVE_PER_SPACE.to_string(),
        verify: true,
        route: Route::Auto,
        target_seconds: 3.0,
        target_mb: Some(300.0),
    },
    Row {
        name: "eight-one-space",
        request: "`energy \\| t u v w x y z q \\|` (8 indices of `act`)",
        input: || EIGHT_IN_ONE_SPACE.to_string(),
        verify: true,
        route: Route::Auto,
        target_seconds: 5.0,
        target_mb: Some(500.0),
    },
    Row {
        name: "eight-mixed",
        request: "`energy \\| t u v w x' y' z' q' \\|` (8 indices of `act`)",
        input: || EIGHT_MIXED_SPINS.to_string(),
        verify: true,
        route: Route::Auto,
        target_seconds: 5.0,
        target_mb: Some(500.0),
    },
    Row {
        name: "six-per-space",
        request: "`element ref[i j k' -> a b c'] ref[l m n' -> d e f']`",
        input: || SIX_PER_SPACE.to_string(),
        verify: false,
        route: Route::Auto,
        target_seconds: 60.0,
        target_mb: Some(2000.0),
    },
    Row {
        name: "csf-20",
        request: "energy of an S = 0 csf of 20 open shells, `--route determinants`",
        input: || singlet_input(20),
        verify: true,
        route: Route::Determinants,
        target_seconds: 2.0,
        target_mb: None,
    },
    Row {
        name: "doubles-doubles",
        request: "`element ref[i j' -> a b'] ref[k l' -> c d']`",
        input: || FOUR_PER_SPACE.to_string(),
        verify: true,
        route: Route::Auto,
        target_seconds: 0.5,
        target_mb: None,
    },
];

/// The peak resident memory of a process (VmHWM), KiB.
fn peak_memory_kib(pid: &str) -> Option<u64> {
    let status = std::fs::read_to_string(format!("/proc/{pid}/status")).ok()?;
    let line = status.lines().find(|l| l.starts_with("VmHWM:"))?;
    line.split_whitespace().nth(1)?.parse().ok()
}

/// In the child: cap the address space, derive (and verify) once, print "seconds peak_kib terms".
fn child(row: &Row, memory_gib: f64) {
    let bytes = (memory_gib * (1u64 << 30) as f64) as u64;
    let cap = libc::rlimit { rlim_cur: bytes, rlim_max: bytes };
    // SAFETY: setrlimit reads the struct it is given and changes only this process's limit.
    assert_eq!(unsafe { libc::setrlimit(libc::RLIMIT_AS, &cap) }, 0, "the memory cap is set");
    let start = Instant::now();
    let program = parse_with("bench.spinfold", &(row.input)(), Limits::default()).expect("the input parses");
    let options = Options { max_cases: MAX_CASES, route: row.route, ..Options::default() };
    let derived = derive_checked(&program, &options, row.verify.then_some(DEFAULT_SEED))
        .unwrap_or_else(|e| panic!("derivation and verification pass:\n{}", e.render()));
    let seconds = start.elapsed().as_secs_f64();
    let terms: usize = derived.iter().map(|(d, _)| d.value.terms.len()).sum();
    println!("{seconds} {} {terms}", peak_memory_kib("self").unwrap_or(0));
}

/// How a child ended.
enum Outcome {
    /// Wall seconds, peak KiB, terms of the result.
    Done(f64, u64, usize),
    /// Killed at the cap, with the peak memory it had reached.
    TimedOut(Option<u64>),
    OutOfMemory,
    Failed(String),
}

/// Collects a pipe of the child on a thread of its own, so that neither pipe fills and stalls it.
fn drain(pipe: Option<impl Read + Send + 'static>) -> std::thread::JoinHandle<String> {
    std::thread::spawn(move || {
        let mut text = String::new();
        if let Some(mut p) = pipe {
            p.read_to_string(&mut text).ok();
        }
        text
    })
}

fn run(row: &Row, cap: Duration, memory_gib: f64) -> Outcome {
    let mut child: Child = Command::new(std::env::current_exe().expect("the bench knows its path"))
        .env("SPINFOLD_BENCH_CHILD", row.name)
        .env("SPINFOLD_BENCH_MEMORY", memory_gib.to_string())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("the child starts");
    let (stdout, stderr) = (drain(child.stdout.take()), drain(child.stderr.take()));
    let start = Instant::now();
    let status = loop {
        if let Some(status) = child.try_wait().expect("the child can be waited for") {
            break status;
        }
        if start.elapsed() > cap {
            let peak = peak_memory_kib(&child.id().to_string());
            child.kill().expect("the child can be killed");
            child.wait().expect("the killed child is reaped");
            return Outcome::TimedOut(peak);
        }
        std::thread::sleep(Duration::from_millis(20));
    };
    let (out, err) = (stdout.join().unwrap_or_default(), stderr.join().unwrap_or_default());
    if err.contains("memory allocation of") || err.contains("Cannot allocate memory") {
        return Outcome::OutOfMemory;
    }
    let f: Vec<&str> = out.split_whitespace().collect();
    match (status.success(), f.as_slice()) {
        (true, [s, kib, terms]) => match (s.parse(), kib.parse(), terms.parse()) {
            (Ok(s), Ok(kib), Ok(terms)) => Outcome::Done(s, kib, terms),
            _ => Outcome::Failed(out),
        },
        _ => Outcome::Failed(format!("{status}: {}", err.trim())),
    }
}

fn target_text(row: &Row) -> String {
    match row.target_mb {
        Some(mb) if mb >= 1000.0 => format!("< {} s, < {} GB", row.target_seconds, mb / 1000.0),
        Some(mb) => format!("< {} s, < {mb} MB", row.target_seconds),
        None => format!("< {} s", row.target_seconds),
    }
}

fn main() {
    if let Ok(name) = std::env::var("SPINFOLD_BENCH_CHILD") {
        let memory = std::env::var("SPINFOLD_BENCH_MEMORY").ok().and_then(|g| g.parse().ok());
        child(
            ROWS.iter().find(|r| r.name == name).expect("a row of the table"),
            memory.expect("a memory cap"),
        );
        return;
    }
    // cargo passes `--bench`; `--cap S` and `--memory G` set the caps; other words name rows
    let args: Vec<String> = std::env::args().skip(1).filter(|a| a != "--bench").collect();
    let (mut cap, mut memory) = (DEFAULT_CAP_SECONDS, DEFAULT_MEMORY_GIB);
    let mut names = vec![];
    let mut words = args.iter();
    while let Some(word) = words.next() {
        if word == "--cap" {
            cap = words.next().and_then(|s| s.parse().ok()).expect("--cap takes a number of seconds");
        } else if word == "--memory" {
            memory = words.next().and_then(|g| g.parse().ok()).expect("--memory takes a number of GiB");
        } else if ROWS.iter().any(|r| r.name == word) {
            names.push(word.as_str());
        } else {
            let known: Vec<&str> = ROWS.iter().map(|r| r.name).collect();
            eprintln!("unknown row `{word}`; the rows are: {}", known.join(" "));
            std::process::exit(2);
        }
    }
    println!("| row | request | verification | wall s | peak MiB | terms | target | holds |");
    println!("|---|---|---|---:|---:|---:|---|---|");
    for row in ROWS.iter().filter(|r| names.is_empty() || names.contains(&r.name)) {
        let verification = if row.verify { "on" } else { "--no-verify" };
        let figures = match run(row, Duration::from_secs_f64(cap), memory) {
            Outcome::Done(seconds, kib, terms) => {
                let bytes = kib as f64 * 1024.0;
                let holds = seconds < row.target_seconds && row.target_mb.is_none_or(|mb| bytes < mb * 1e6);
                let holds = if holds { "yes" } else { "no" };
                format!(
                    "{seconds:.2} | {:.0} | {terms} | {} | {holds}",
                    bytes / (1 << 20) as f64,
                    target_text(row)
                )
            }
            Outcome::TimedOut(peak) => {
                let peak = peak.map_or("?".to_string(), |kib| format!("≥ {:.0}", kib as f64 / 1024.0));
                format!("> {cap} (killed) | {peak} | | {} | no", target_text(row))
            }
            Outcome::OutOfMemory => format!("out of memory ({memory} GiB) | | | {} | no", target_text(row)),
            Outcome::Failed(why) => {
                format!("failed: {} | | | {} | no", why.replace('\n', " "), target_text(row))
            }
        };
        println!("| {} | {} | {verification} | {figures} |", row.name, row.request);
    }
}

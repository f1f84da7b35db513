//! spinfold-fuzz: feeds mutated and generated inputs through every stage of spinfold in worker
//! subprocesses and saves a reproducer for every crash, hang, verification mismatch or bad exit.

mod binding;
mod findings;
mod generate;
mod input;
mod integrals;
mod minimize;
mod mutate;
mod plan;
mod pool;
mod worker;

use clap::Parser;
use findings::{Findings, classify};
use input::{Category, Input};
use pool::{BinaryResult, Limits, Worker, WorkerResult, run_binary};
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::sync::Arc;
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::mpsc::{Sender, channel};
use std::time::{Duration, Instant};

/// The workspace root, where the examples are.
const ROOT: &str = concat!(env!("CARGO_MANIFEST_DIR"), "/..");

#[derive(Parser)]
#[command(
    name = "spinfold-fuzz",
    about = "Runs random and mutated inputs through every stage of spinfold (parse, derive with verification, every emitter, states, eval) in worker subprocesses, and saves a reproducer for every panic, abort, stack overflow, timeout, out-of-memory, verification mismatch or exit status other than 0 and 2."
)]
struct Args {
    /// Stop after this many seconds.
    #[arg(long, default_value_t = 60)]
    seconds: u64,
    /// Stop after this many inputs (whichever comes first).
    #[arg(long)]
    inputs: Option<u64>,
    /// Seed of the run: input k of a seed is always the same.
    #[arg(long, default_value_t = 1)]
    seed: u64,
    /// Number of worker subprocesses.
    #[arg(long, default_value_t = 2)]
    workers: usize,
    /// Seconds an input may take before its worker is killed and the input reported.
    #[arg(long, default_value_t = 10)]
    timeout: u64,
    /// Address-space limit of each worker and binary run, in MiB.
    #[arg(long, default_value_t = 2048)]
    memory_mb: u64,
    /// Where reproducers are saved.
    #[arg(long, default_value = concat!(env!("CARGO_MANIFEST_DIR"), "/findings"))]
    findings: PathBuf,
    /// The spinfold binary that replays findings (default: the one beside this driver, built
    /// if missing).
    #[arg(long)]
    spinfold: Option<PathBuf>,
    /// Print input number K of the seed on stdout and its commands on stderr, and stop.
    #[arg(long, value_name = "K")]
    show: Option<u64>,
    /// Shrink the saved findings in these directories (each a `<kind>-<hash>` directory of
    /// the findings) to `minimal.spinfold` beside their input, and stop.
    #[arg(long, value_name = "DIR", num_args = 1..)]
    minimize: Vec<PathBuf>,
    /// Seconds the minimizer may spend on one finding.
    #[arg(long, default_value_t = 120)]
    budget: u64,
    /// Internal: serve as a worker with this integral file.
    #[arg(long, hide = true)]
    worker: Option<String>,
}

/// The examples and test inputs that mutations start from, in a fixed order.
fn examples() -> Vec<String> {
    let mut paths: Vec<PathBuf> = ["examples", "tests/inputs"]
        .iter()
        .filter_map(|d| std::fs::read_dir(Path::new(ROOT).join(d)).ok())
        .flatten()
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| p.extension().is_some_and(|x| x == "spinfold"))
        .collect();
    paths.sort();
    paths.iter().filter_map(|p| std::fs::read_to_string(p).ok()).collect()
}

/// The binary beside this driver (same profile), built with cargo when it is not there.
fn spinfold_binary() -> PathBuf {
    let exe = std::env::current_exe().expect("the driver knows where it is");
    let beside = exe.with_file_name("spinfold");
    if !beside.exists() {
        let release = exe.parent().is_some_and(|d| d.ends_with("release"));
        eprintln!("building the spinfold binary to replay findings ...");
        let cargo = std::env::var("CARGO").unwrap_or_else(|_| "cargo".into());
        let mut cmd = std::process::Command::new(cargo);
        cmd.args(["build", "-p", "spinfold", "--bin", "spinfold"]).current_dir(ROOT);
        if release {
            cmd.arg("--release");
        }
        let ok = cmd.status().is_ok_and(|s| s.success());
        if !ok || !beside.exists() {
            eprintln!("could not build {}; give --spinfold PATH", beside.display());
            std::process::exit(2);
        }
    }
    beside
}

/// What a slot reports for each input.
struct Event {
    input: Input,
    result: WorkerResult,
    binary: Vec<BinaryResult>,
    millis: u64,
}

struct Shared {
    seed: u64,
    examples: Vec<String>,
    next: AtomicU64,
    max_inputs: u64,
    deadline: Instant,
    limits: Limits,
    integrals: String,
    spinfold: PathBuf,
}

/// One worker slot: takes the next input number, runs it in its worker (replaced after a
/// death or a timeout) and through the binary where the input asks for it.
fn slot(shared: Arc<Shared>, events: Sender<Event>) {
    let scratch = tempfile::tempdir().expect("a scratch directory");
    // the workers' copy; binary runs write theirs into the scratch directory itself
    let integrals = scratch.path().join("worker.fcidump");
    std::fs::write(&integrals, &shared.integrals).expect("the scratch directory is writable");
    let mut worker = Worker::spawn(&integrals, &shared.limits);
    loop {
        let k = shared.next.fetch_add(1, Ordering::SeqCst);
        if k >= shared.max_inputs || Instant::now() >= shared.deadline {
            break;
        }
        let input = input::make(shared.seed, k, &shared.examples);
        let start = Instant::now();
        let result = if input.steps.is_empty() {
            WorkerResult::Skipped
        } else {
            let text = String::from_utf8(input.bytes.clone()).expect("inputs with steps are text");
            let claims = matches!(input.category, Category::Generated | Category::Large);
            let job = worker::Job { id: k, input: text, steps: input.steps.clone(), claims };
            worker.run(&job, shared.limits.timeout)
        };
        if matches!(result, WorkerResult::Died { .. } | WorkerResult::TimedOut { .. }) {
            worker = Worker::spawn(&integrals, &shared.limits);
        }
        let binary = input
            .binary
            .iter()
            .map(|run| {
                let ints = input.integrals.as_deref().unwrap_or(shared.integrals.as_bytes());
                run_binary(&shared.spinfold, scratch.path(), &input.bytes, ints, run, &shared.limits)
            })
            .collect();
        let millis = start.elapsed().as_millis() as u64;
        if events.send(Event { input, result, binary, millis }).is_err() {
            break;
        }
    }
}

/// How inputs of one category ended.
#[derive(Default)]
struct Tally {
    inputs: u64,
    /// every step exited 0
    accepted: u64,
    /// some step exited 2 (bad input, told clearly)
    rejected: u64,
    /// taking longer than a second
    slow: u64,
    slowest: u64,
    with_findings: u64,
}

fn main() {
    let args = Args::parse();
    if let Some(integrals) = &args.worker {
        worker::serve(integrals, args.memory_mb);
    }
    let examples = examples();
    if let Some(k) = args.show {
        let input = input::make(args.seed, k, &examples);
        use std::io::Write;
        std::io::stdout().write_all(&input.bytes).expect("stdout is open");
        eprintln!("input {k} of seed {} ({})", args.seed, input.category.name());
        for step in &input.steps {
            eprintln!("{}", plan::shell_line("spinfold", &step.argv()));
        }
        for run in &input.binary {
            eprintln!(
                "{}{}",
                plan::shell_line("spinfold", &run.argv),
                if run.stdin { " < input.spinfold" } else { "" }
            );
        }
        if let Some(dump) = &input.integrals {
            eprintln!("with its own integral file:\n{}", String::from_utf8_lossy(dump));
        }
        return;
    }
    let spinfold = args.spinfold.clone().unwrap_or_else(spinfold_binary);
    let limits = Limits { timeout: Duration::from_secs(args.timeout), memory_mb: args.memory_mb };
    if !args.minimize.is_empty() {
        for dir in &args.minimize {
            match minimize::minimize(dir, &spinfold, &limits, Duration::from_secs(args.budget)) {
                Ok(bytes) => println!("{}:\n{}", dir.display(), String::from_utf8_lossy(&bytes)),
                Err(e) => eprintln!("{}: {e}", dir.display()),
            }
        }
        return;
    }
    let start = Instant::now();
    let shared = Arc::new(Shared {
        seed: args.seed,
        examples,
        next: AtomicU64::new(0),
        max_inputs: args.inputs.unwrap_or(u64::MAX),
        deadline: start + Duration::from_secs(args.seconds),
        limits: limits.clone(),
        integrals: integrals::dump_text(args.seed, integrals::NORB),
        spinfold: spinfold.clone(),
    });
    let mut findings =
        Findings::new(args.findings.clone(), spinfold, limits, shared.integrals.clone(), args.seed);
    let (send, events) = channel();
    let slots: Vec<_> = (0..args.workers.max(1))
        .map(|_| {
            let (shared, send) = (shared.clone(), send.clone());
            std::thread::spawn(move || slot(shared, send))
        })
        .collect();
    drop(send);
    let mut tally: BTreeMap<Category, Tally> = Category::ALL.iter().map(|&c| (c, Tally::default())).collect();
    let mut last_progress = Instant::now();
    let mut total = 0u64;
    for event in events {
        total += 1;
        let t = tally.get_mut(&event.input.category).expect("every category is tallied");
        t.inputs += 1;
        // exit statuses of the worker's steps, or of the binary where no worker took the input
        let codes: Vec<Option<i32>> = match &event.result {
            WorkerResult::Done(outcomes) => outcomes.iter().map(|o| Some(o.code)).collect(),
            WorkerResult::Skipped => event.binary.iter().map(|b| b.code).collect(),
            _ => vec![None],
        };
        if codes.iter().all(|&c| c == Some(0)) {
            t.accepted += 1;
        } else if codes.contains(&Some(2)) {
            t.rejected += 1;
        }
        if event.millis > 1000 {
            t.slow += 1;
        }
        t.slowest = t.slowest.max(event.millis);
        let found = classify(&event.input, &event.result, &event.binary);
        if !found.is_empty() {
            t.with_findings += 1;
        }
        for f in &found {
            if findings.record(&event.input, f) {
                eprintln!("new finding: {} (input {})", f.signature, event.input.index);
            }
        }
        if last_progress.elapsed() > Duration::from_secs(10) {
            last_progress = Instant::now();
            let secs = start.elapsed().as_secs_f64();
            eprintln!(
                "[{:5.0} s] {total} inputs ({:.0}/s), {} finding classes",
                secs,
                total as f64 / secs,
                findings.classes().count()
            );
        }
    }
    for s in slots {
        let _ = s.join();
    }
    let secs = start.elapsed().as_secs_f64();
    println!(
        "spinfold-fuzz: seed {}, {total} inputs in {secs:.0} s ({:.0}/s)",
        args.seed,
        total as f64 / secs
    );
    println!(
        "{:<16} {:>8} {:>9} {:>9} {:>7} {:>12} {:>9}",
        "category", "inputs", "accepted", "rejected", "slow", "slowest ms", "findings"
    );
    for (c, t) in &tally {
        println!(
            "{:<16} {:>8} {:>9} {:>9} {:>7} {:>12} {:>9}",
            c.name(),
            t.inputs,
            t.accepted,
            t.rejected,
            t.slow,
            t.slowest,
            t.with_findings
        );
    }
    if findings.is_empty() {
        println!("no findings");
        return;
    }
    println!("findings by kind (classes, inputs):");
    for (category, (classes, count)) in findings.by_category() {
        println!("  {category:<28} {classes:>4} {count:>8}");
    }
    println!("finding classes, saved in {}:", args.findings.display());
    for (signature, dir, count) in findings.classes() {
        println!("  {dir:<34} {count:>6}  {signature}");
    }
    std::process::exit(1);
}

//! The parent's side: worker subprocesses with a memory limit, fed one input at a time and
//! killed past a timeout; a worker that dies is replaced, and the input it was on is reported.
//! Also runs the real binary on an input under the same limits.

use crate::input::{BinaryRun, OUTPUT};
use crate::plan::{INPUT_FILE, INTEGRALS_FILE};
use crate::worker::{Job, Outcome, Reply};
use std::io::{Read, Write};
use std::os::unix::process::ExitStatusExt;
use std::path::{Path, PathBuf};
use std::process::{Child, ChildStdin, Command, ExitStatus, Stdio};
use std::sync::mpsc::{Receiver, RecvTimeoutError, channel};
use std::sync::{Arc, Mutex};
use std::thread::JoinHandle;
use std::time::{Duration, Instant};

/// How long the tail of a dead process's standard error is kept.
const STDERR_TAIL: usize = 4096;

#[derive(Clone)]
pub struct Limits {
    pub timeout: Duration,
    pub memory_mb: u64,
}

/// How a process ended when it should not have.
#[derive(Clone, Debug)]
pub struct Death {
    pub code: Option<i32>,
    pub signal: Option<i32>,
    pub stderr: String,
}

impl Death {
    fn new(status: ExitStatus, stderr: String) -> Death {
        Death { code: status.code(), signal: status.signal(), stderr }
    }

    /// The kind of death: stack overflow and allocation failure say so on standard error.
    pub fn kind(&self) -> &'static str {
        if self.stderr.contains("has overflowed its stack") {
            "stack-overflow"
        } else if self.stderr.contains("memory allocation of") || self.stderr.contains("capacity overflow") {
            "out-of-memory"
        } else {
            match self.signal {
                Some(6) => "abort",
                Some(9) => "killed",
                Some(11) => "segfault",
                Some(_) => "signal",
                None => "exit",
            }
        }
    }
}

/// What became of an input in a worker.
#[derive(Clone, Debug)]
pub enum WorkerResult {
    /// the input is not UTF-8: only the binary can take it
    Skipped,
    Done(Vec<Outcome>),
    Died {
        step: Option<usize>,
        death: Death,
    },
    TimedOut {
        step: Option<usize>,
    },
}

/// One command of the real binary and how it ended.
#[derive(Clone, Debug)]
pub struct BinaryResult {
    pub run: BinaryRun,
    pub code: Option<i32>,
    pub signal: Option<i32>,
    pub timed_out: bool,
    pub stderr: String,
    /// an `-o` file left when the command failed, or missing when it succeeded
    pub output_problem: Option<String>,
    pub millis: u64,
}

impl BinaryResult {
    /// What is wrong with the run, if anything: the binary exits 0 or 2, by itself, quietly.
    pub fn problem(&self) -> Option<String> {
        if self.timed_out {
            Some("timeout".into())
        } else if self.stderr.contains("has overflowed its stack") {
            Some("stack-overflow".into())
        } else if self.stderr.contains("memory allocation of") {
            Some("out-of-memory".into())
        } else if self.stderr.contains("panicked") {
            Some("panic".into())
        } else if let Some(signal) = self.signal {
            Some(format!("signal-{signal}"))
        } else if self.code == Some(1) {
            Some("verification-mismatch".into())
        } else if !matches!(self.code, Some(0 | 2)) {
            Some(format!("exit-{}", self.code.unwrap_or(-1)))
        } else {
            self.output_problem.as_ref().map(|_| "output-file".into())
        }
    }
}

/// Keeps the tail of a child's standard error.
fn collect_tail(mut from: impl Read + Send + 'static) -> (Arc<Mutex<Vec<u8>>>, JoinHandle<()>) {
    let tail = Arc::new(Mutex::new(Vec::new()));
    let keep = tail.clone();
    let handle = std::thread::spawn(move || {
        let mut buf = [0u8; 4096];
        while let Ok(n) = from.read(&mut buf) {
            if n == 0 {
                break;
            }
            let mut t = keep.lock().unwrap_or_else(|e| e.into_inner());
            t.extend_from_slice(&buf[..n]);
            let excess = t.len().saturating_sub(STDERR_TAIL);
            t.drain(..excess);
        }
    });
    (tail, handle)
}

/// A worker subprocess: this same executable with `--worker`.
pub struct Worker {
    child: Child,
    stdin: ChildStdin,
    replies: Receiver<String>,
    stderr: Arc<Mutex<Vec<u8>>>,
    stderr_thread: Option<JoinHandle<()>>,
}

impl Worker {
    pub fn spawn(integrals: &Path, limits: &Limits) -> Worker {
        let exe = std::env::current_exe().expect("the driver knows where it is");
        let mut child = Command::new(exe)
            .arg("--worker")
            .arg(integrals)
            .arg("--memory-mb")
            .arg(limits.memory_mb.to_string())
            .stdin(Stdio::piped())
            .stdout(Stdio::piped())
            .stderr(Stdio::piped())
            .spawn()
            .expect("a worker starts");
        let stdin = child.stdin.take().expect("piped");
        let stdout = child.stdout.take().expect("piped");
        let (stderr, stderr_thread) = collect_tail(child.stderr.take().expect("piped"));
        let (send, replies) = channel();
        std::thread::spawn(move || {
            use std::io::BufRead;
            for line in std::io::BufReader::new(stdout).lines() {
                let Ok(line) = line else { break };
                if send.send(line).is_err() {
                    break;
                }
            }
        });
        Worker { child, stdin, replies, stderr, stderr_thread: Some(stderr_thread) }
    }

    /// Runs one job. After a death or a timeout the worker is gone and must be replaced.
    pub fn run(&mut self, job: &Job, timeout: Duration) -> WorkerResult {
        self.stderr.lock().unwrap_or_else(|e| e.into_inner()).clear();
        let mut deadline = Instant::now() + timeout;
        let mut step = None;
        let line = serde_json::to_string(job).expect("jobs serialize") + "\n";
        if self.stdin.write_all(line.as_bytes()).and_then(|_| self.stdin.flush()).is_err() {
            return self.died(step);
        }
        loop {
            match self.replies.recv_timeout(deadline.saturating_duration_since(Instant::now())) {
                Ok(line) => match serde_json::from_str::<Reply>(&line) {
                    Ok(Reply::Begin { step: k, .. }) => {
                        // the timeout is per step: one command of the binary that runs away
                        step = Some(k);
                        deadline = Instant::now() + timeout;
                    }
                    Ok(Reply::Done { outcomes, .. }) => return WorkerResult::Done(outcomes),
                    Err(_) => {} // a stray line on stdout; the outcome will tell
                },
                Err(RecvTimeoutError::Timeout) => {
                    // our own child, by its handle
                    let _ = self.child.kill();
                    let _ = self.child.wait();
                    return WorkerResult::TimedOut { step };
                }
                Err(RecvTimeoutError::Disconnected) => return self.died(step),
            }
        }
    }

    fn died(&mut self, step: Option<usize>) -> WorkerResult {
        let status = self.child.wait().expect("the worker is our child");
        if let Some(t) = self.stderr_thread.take() {
            let _ = t.join();
        }
        let stderr =
            String::from_utf8_lossy(&self.stderr.lock().unwrap_or_else(|e| e.into_inner())).into_owned();
        WorkerResult::Died { step, death: Death::new(status, stderr) }
    }
}

impl Drop for Worker {
    fn drop(&mut self) {
        let _ = self.child.kill();
        let _ = self.child.wait();
    }
}

/// Runs the real binary once in `dir` (where the input file is), with the same memory limit
/// and timeout as a worker, and checks what `-o` left behind.
pub fn run_binary(
    spinfold: &Path,
    dir: &Path,
    input: &[u8],
    integrals: &[u8],
    run: &BinaryRun,
    limits: &Limits,
) -> BinaryResult {
    let out_dir = dir.join("out");
    std::fs::write(dir.join(INTEGRALS_FILE), integrals).expect("the work directory is writable");
    let _ = std::fs::remove_dir_all(&out_dir);
    std::fs::create_dir_all(&out_dir).expect("the work directory is writable");
    std::fs::write(dir.join(INPUT_FILE), input).expect("the work directory is writable");
    let stderr_path = dir.join("stderr.txt");
    let stderr_file = std::fs::File::create(&stderr_path).expect("the work directory is writable");
    let start = Instant::now();
    let mut child = Command::new(spinfold)
        .args(&run.argv)
        .current_dir(dir)
        .stdin(if run.stdin { Stdio::piped() } else { Stdio::null() })
        .stdout(std::fs::File::create(dir.join("stdout.txt")).expect("the work directory is writable"))
        .stderr(stderr_file)
        .spawn()
        .expect("the spinfold binary starts");
    let bytes = limits.memory_mb * 1024 * 1024;
    let _ = rlimit::prlimit(child.id() as i32, rlimit::Resource::AS, Some((bytes, bytes)), None);
    if let Some(mut stdin) = child.stdin.take() {
        let input = input.to_vec();
        // a thread, so that a child that stops reading cannot block the driver
        std::thread::spawn(move || {
            let _ = stdin.write_all(&input);
        });
    }
    let deadline = start + limits.timeout;
    let mut timed_out = false;
    let status = loop {
        if let Some(status) = child.try_wait().expect("the binary is our child") {
            break status;
        }
        if Instant::now() > deadline {
            timed_out = true;
            let _ = child.kill();
            break child.wait().expect("the binary is our child");
        }
        std::thread::sleep(Duration::from_millis(2));
    };
    let millis = start.elapsed().as_millis() as u64;
    let stderr = std::fs::read(&stderr_path).unwrap_or_default();
    let stderr = String::from_utf8_lossy(&stderr[stderr.len().saturating_sub(STDERR_TAIL)..]).into_owned();
    let output_problem = if timed_out {
        None
    } else if run.writes {
        output_problem(dir, run, status.code())
    } else {
        non_finite(dir, run, status.code())
    };
    BinaryResult {
        run: run.clone(),
        code: status.code(),
        signal: status.signal(),
        timed_out,
        stderr,
        output_problem,
        millis,
    }
}

/// A successful evaluation prints finite numbers only (JSON has no non-finite numbers: they
/// would come out as `null`).
fn non_finite(dir: &Path, run: &BinaryRun, code: Option<i32>) -> Option<String> {
    if run.argv[0] != "eval" || code != Some(0) {
        return None;
    }
    let stdout = std::fs::read_to_string(dir.join("stdout.txt")).unwrap_or_default();
    stdout
        .split(|c: char| c.is_whitespace() || c == ',' || c == ':')
        .find(|w| ["inf", "-inf", "NaN", "null"].contains(w))
        .map(|w| format!("exit 0 but a value printed as {w}"))
}

/// A successful `-o` leaves its target; a failed one leaves nothing at all in `out`.
fn output_problem(dir: &Path, run: &BinaryRun, code: Option<i32>) -> Option<String> {
    let target = run.argv.iter().skip_while(|a| *a != "-o").nth(1).cloned().unwrap_or_else(|| OUTPUT.into());
    let per_request = run.argv.iter().any(|a| a == "--per-request");
    let path: PathBuf = dir.join(&target);
    let left: Vec<String> = std::fs::read_dir(dir.join("out"))
        .map(|d| d.filter_map(|e| e.ok()).map(|e| e.file_name().to_string_lossy().into_owned()).collect())
        .unwrap_or_default();
    match code {
        Some(0) if per_request && !path.is_dir() => Some(format!("exit 0 but no directory {target}")),
        Some(0) if !per_request && !path.is_file() => Some(format!("exit 0 but no file {target}")),
        Some(0) => None,
        _ if !left.is_empty() => Some(format!("exit {code:?} but out/ holds {left:?}")),
        _ => None,
    }
}

//! Findings: what counts as a bug in the outcome of an input, one class per signature, and the
//! reproducer saved for each (the smallest input seen, the exact command lines, and how the
//! real binary behaves on it).

use crate::input::{BinaryRun, Input};
use crate::plan::{INPUT_FILE, INTEGRALS_FILE, Step, shell_line};
use crate::pool::{BinaryResult, Limits, WorkerResult, run_binary};
use crate::worker::{PANIC, Problem};
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;
use std::fmt::Write;
use std::path::{Path, PathBuf};

/// One bug seen on one input.
#[derive(Clone, Debug)]
pub struct Finding {
    pub category: String,
    /// what makes two findings the same bug
    pub signature: String,
    /// the command that shows it
    pub run: BinaryRun,
    /// the worker steps that show it (the failing one last), or none when the binary did
    pub steps: Vec<Step>,
    pub detail: String,
}

/// What the minimizer needs to replay a saved finding, stored beside it as `finding.json`.
#[derive(Serialize, Deserialize)]
pub struct Replay {
    pub signature: String,
    pub steps: Vec<Step>,
    pub run: BinaryRun,
}

/// Digits replaced, so that messages differing only in numbers share a signature.
fn normalized(text: &str) -> String {
    let mut out = String::new();
    for c in text.chars().take(160) {
        if c.is_ascii_digit() {
            if !out.ends_with('N') {
                out.push('N');
            }
        } else {
            out.push(c);
        }
    }
    out
}

fn step_kind(step: &Step) -> String {
    match step {
        Step::Derive { variant, .. } | Step::Eval { variant, .. } => format!(
            "{}{}{}",
            if matches!(step, Step::Derive { .. }) { "derive" } else { "eval" },
            if variant.fock { " --fock" } else { "" },
            if variant.distinct { " --distinct" } else { "" }
        ),
        Step::States { .. } => "states".into(),
    }
}

fn of_step(input: &Input, k: Option<usize>) -> BinaryRun {
    let argv = k
        .and_then(|k| input.steps.get(k))
        .map(Step::argv)
        .unwrap_or_else(|| vec!["derive".into(), INPUT_FILE.into()]);
    BinaryRun { argv, stdin: false, writes: false }
}

/// The steps of the input up to the failing one.
fn steps_to(input: &Input, k: Option<usize>) -> Vec<Step> {
    k.map(|k| input.steps[..=k.min(input.steps.len().saturating_sub(1))].to_vec())
        .unwrap_or_else(|| input.steps.clone())
}

/// Every bug shown by one input.
pub fn classify(input: &Input, result: &WorkerResult, binary: &[BinaryResult]) -> Vec<Finding> {
    let mut out = Vec::new();
    match result {
        WorkerResult::Skipped => {}
        WorkerResult::Done(outcomes) => {
            for (k, o) in outcomes.iter().enumerate() {
                let step = &input.steps[k];
                let (category, signature, detail) = if o.code == PANIC {
                    let at = o.message.split(": ").next().unwrap_or("").to_string();
                    ("panic", at, o.message.clone())
                } else if o.code == 1 {
                    (
                        "verification-mismatch",
                        format!("{} {}", step_kind(step), normalized(o.message.lines().next().unwrap_or(""))),
                        o.message.clone(),
                    )
                } else if o.code != 0 && o.code != 2 {
                    ("bad-exit", format!("exit {}", o.code), o.message.clone())
                } else if let Some(problem) = &o.problem {
                    let (category, detail) = match problem {
                        Problem::InvalidJson(d) => ("invalid-json", d),
                        Problem::NotAscii(d) => ("not-ascii", d),
                        Problem::NotFinite(d) => ("not-finite", d),
                        Problem::EvalMismatch(d) => ("eval-mismatch", d),
                        Problem::ClaimBroken(d) => ("claim-broken", d),
                    };
                    (category, step_kind(step), detail.clone())
                } else {
                    continue;
                };
                out.push(Finding {
                    category: category.into(),
                    signature: format!("{category}: {signature}"),
                    run: of_step(input, Some(k)),
                    steps: steps_to(input, Some(k)),
                    detail,
                });
            }
        }
        WorkerResult::Died { step, death } => {
            let kind = step.and_then(|k| input.steps.get(k)).map(step_kind).unwrap_or_default();
            out.push(Finding {
                category: death.kind().into(),
                signature: format!("{}: {kind}", death.kind()),
                run: of_step(input, *step),
                steps: steps_to(input, *step),
                detail: format!("exit {:?}, signal {:?}\n{}", death.code, death.signal, death.stderr),
            });
        }
        WorkerResult::TimedOut { step } => {
            let kind = step.and_then(|k| input.steps.get(k)).map(step_kind).unwrap_or_default();
            out.push(Finding {
                category: "timeout".into(),
                signature: format!("timeout: {kind}"),
                run: of_step(input, *step),
                steps: steps_to(input, *step),
                detail: format!("no answer within the timeout, in step {step:?}"),
            });
        }
    }
    for b in binary {
        if let Some(problem) = b.problem() {
            // a panic is told apart by where it happened
            let first = b.stderr.lines().find(|l| l.contains("panicked at")).unwrap_or("");
            out.push(Finding {
                category: format!("binary-{problem}"),
                signature: format!("binary-{problem}: {} {}", b.run.argv[0], normalized(first)),
                run: b.run.clone(),
                steps: Vec::new(),
                detail: format!(
                    "exit {:?}, signal {:?}, {} ms{}\n{}",
                    b.code,
                    b.signal,
                    b.millis,
                    b.output_problem.as_ref().map(|p| format!(", {p}")).unwrap_or_default(),
                    b.stderr
                ),
            });
        }
    }
    out
}

struct Saved {
    category: String,
    dir: String,
    count: u64,
    size: usize,
}

/// The findings of a run, saved under `dir/<category>-<hash>/`.
pub struct Findings {
    dir: PathBuf,
    spinfold: PathBuf,
    limits: Limits,
    integrals: String,
    seed: u64,
    saved: BTreeMap<String, Saved>,
}

/// A stable short hash (FNV-1a), so that a signature keeps its directory from run to run.
fn hash(text: &str) -> String {
    let mut h: u64 = 0xcbf29ce484222325;
    for b in text.bytes() {
        h = (h ^ b as u64).wrapping_mul(0x100000001b3);
    }
    format!("{:08x}", h >> 32)
}

impl Findings {
    pub fn new(dir: PathBuf, spinfold: PathBuf, limits: Limits, integrals: String, seed: u64) -> Findings {
        Findings { dir, spinfold, limits, integrals, seed, saved: BTreeMap::new() }
    }

    /// Counts a finding; saves it when its class is new or this input is smaller. Returns
    /// whether the class is new.
    pub fn record(&mut self, input: &Input, f: &Finding) -> bool {
        let new = !self.saved.contains_key(&f.signature);
        let entry = self.saved.entry(f.signature.clone()).or_insert_with(|| Saved {
            category: f.category.clone(),
            dir: format!("{}-{}", f.category, hash(&f.signature)),
            count: 0,
            size: usize::MAX,
        });
        entry.count += 1;
        if input.bytes.len() < entry.size {
            entry.size = input.bytes.len();
            let dir = self.dir.join(&entry.dir);
            if let Err(e) = save(&dir, input, f, self) {
                eprintln!("could not save a finding in {}: {e}", dir.display());
            }
        }
        new
    }

    /// (category, number of classes, number of inputs) for the summary.
    pub fn by_category(&self) -> BTreeMap<String, (usize, u64)> {
        let mut out: BTreeMap<String, (usize, u64)> = BTreeMap::new();
        for s in self.saved.values() {
            let e = out.entry(s.category.clone()).or_default();
            e.0 += 1;
            e.1 += s.count;
        }
        out
    }

    pub fn classes(&self) -> impl Iterator<Item = (&String, &str, u64)> {
        self.saved.iter().map(|(sig, s)| (sig, s.dir.as_str(), s.count))
    }

    pub fn is_empty(&self) -> bool {
        self.saved.is_empty()
    }
}

fn save(dir: &Path, input: &Input, f: &Finding, findings: &Findings) -> std::io::Result<()> {
    std::fs::create_dir_all(dir)?;
    std::fs::write(dir.join(INPUT_FILE), &input.bytes)?;
    let integrals = input.integrals.as_deref().unwrap_or(findings.integrals.as_bytes());
    std::fs::write(dir.join(INTEGRALS_FILE), integrals)?;
    let line = |run: &BinaryRun| {
        let cmd = shell_line("spinfold", &run.argv);
        if run.stdin { format!("{cmd} < {INPUT_FILE}") } else { cmd }
    };
    let mut commands = String::from(
        "#!/bin/sh\n# Run from this directory, with spinfold on PATH.\n# The command that shows the finding:\n",
    );
    writeln!(commands, "{}", line(&f.run)).expect("writing to a string");
    commands.push_str("# Every command run on this input:\n");
    for step in &input.steps {
        writeln!(commands, "# {}", shell_line("spinfold", &step.argv())).expect("writing to a string");
    }
    for run in &input.binary {
        writeln!(commands, "# {}", line(run)).expect("writing to a string");
    }
    std::fs::write(dir.join("commands.sh"), commands)?;
    let replay = Replay { signature: f.signature.clone(), steps: f.steps.clone(), run: f.run.clone() };
    std::fs::write(
        dir.join("finding.json"),
        serde_json::to_string_pretty(&replay).expect("plain data serializes"),
    )?;
    // the real binary on the same input and command, in a scratch copy of this directory
    let scratch = tempfile::tempdir()?;
    let replay =
        run_binary(&findings.spinfold, scratch.path(), &input.bytes, integrals, &f.run, &findings.limits);
    let report = format!(
        "category: {}\nsignature: {}\ninput: number {} of seed {} ({}), {} bytes\ncommand: {}\n\n{}\n\n\
         the real binary on this command: exit {:?}, signal {:?}, timed out {}, {} ms{}\nits standard error (tail):\n{}\n",
        f.category,
        f.signature,
        input.index,
        findings.seed,
        input.category.name(),
        input.bytes.len(),
        line(&f.run),
        f.detail,
        replay.code,
        replay.signal,
        replay.timed_out,
        replay.millis,
        replay.problem().map(|p| format!(" ({p})")).unwrap_or_default(),
        replay.stderr
    );
    std::fs::write(dir.join("report.txt"), report)
}

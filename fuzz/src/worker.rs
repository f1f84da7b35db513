//! A worker subprocess: takes inputs from the parent one at a time, runs each step through the
//! library as the binary would, catches panics, checks the outputs, and reports every outcome.

use crate::generate::CLAIM;
use crate::plan::{Emit, INPUT_FILE, Step, Variant};
use serde::{Deserialize, Serialize};
use spinfold::{
    Bindings, Checked, DEFAULT_SEED, Error, Evaluated, Format, FreeValue, IntegralDump, Limits, Options,
    Program, RequestKind, Settings, derive_checked, eval_warnings, evaluate_with, parse_with, read_dump,
    render, render_states, results_json, results_text,
};
use std::collections::HashMap;
use std::io::{BufRead, Write};
use std::panic::{AssertUnwindSafe, catch_unwind};
use std::sync::Mutex;
use std::time::Instant;

/// The exit status a panic gets from the binary.
pub const PANIC: i32 = 101;

/// One input and the steps to run on it.
#[derive(Serialize, Deserialize)]
pub struct Job {
    pub id: u64,
    pub input: String,
    pub steps: Vec<Step>,
    /// Check the claims the generator wrote into the input (only an unmutated generated
    /// program's claims hold).
    pub claims: bool,
}

/// What a worker says: the step it is about to start, then the outcomes of the whole job.
#[derive(Serialize, Deserialize)]
pub enum Reply {
    Begin { id: u64, step: usize },
    Done { id: u64, outcomes: Vec<Outcome> },
}

/// The outcome of one step: the exit status the binary would have, what it said, and any
/// output that breaks a promise of the tool even though the status is fine.
#[derive(Clone, Debug, Serialize, Deserialize)]
pub struct Outcome {
    pub code: i32,
    /// The rendered error, or the panic message with its location.
    pub message: String,
    pub problem: Option<Problem>,
    pub millis: u64,
}

/// Output that breaks a promise of the tool.
#[derive(Clone, Debug, Serialize, Deserialize)]
pub enum Problem {
    InvalidJson(String),
    NotAscii(String),
    NotFinite(String),
    /// Two forms of one evaluation (plain and Fock, plain and distinct) disagree.
    EvalMismatch(String),
    /// A claim of the generator does not hold: the lowest root of a `roots` request is not the
    /// energy of the one function it spans, or lies above an energy of a function in its span.
    ClaimBroken(String),
}

type Failure = (i32, String);

fn failure(e: Error) -> Failure {
    (e.exit_code(), e.render())
}

/// What one job has computed so far, so that every emitter of a variant shares its derivation.
struct Session<'a> {
    text: &'a str,
    dump: &'a IntegralDump,
    program: Option<Result<Program, Failure>>,
    derived: HashMap<Variant, Result<Vec<Checked>, Failure>>,
    evaluated: Vec<(Variant, Vec<Evaluated>)>,
    /// (energy request, roots request) as written
    claims: Vec<(String, String)>,
}

impl Session<'_> {
    fn program(&mut self) -> Result<Program, Failure> {
        let text = self.text;
        self.program
            .get_or_insert_with(|| parse_with(INPUT_FILE, text, Limits::default()).map_err(failure))
            .clone()
    }

    fn derived(&mut self, variant: Variant) -> Result<(Program, Vec<Checked>), Failure> {
        let program = self.program()?;
        if let Some(done) = self.derived.get(&variant) {
            return done.clone().map(|d| (program, d));
        }
        let options = Options { fock: variant.fock, distinct: variant.distinct, ..Options::default() };
        let result =
            derive_checked(&program, &options, Some(variant.seed.unwrap_or(DEFAULT_SEED))).map_err(failure);
        self.derived.insert(variant, result.clone());
        result.map(|d| (program, d))
    }

    fn run(&mut self, step: &Step) -> Result<Option<Problem>, Failure> {
        match step {
            Step::Derive { variant, emit } => {
                let (program, derived) = self.derived(*variant)?;
                let format = match emit {
                    Emit::Text => Format::Text { ascii: false },
                    Emit::Ascii => Format::Text { ascii: true },
                    Emit::Latex => Format::Latex { standalone: false },
                    Emit::LatexStandalone => Format::Latex { standalone: true },
                    Emit::Json => Format::Json,
                    Emit::Rust => Format::Rust,
                    Emit::Python => Format::Python,
                };
                let out = render(&program, &derived, format).map_err(failure)?;
                Ok(match emit {
                    Emit::Json => json_problem(&out),
                    Emit::Ascii => out.lines().find(|l| !l.is_ascii()).map(|l| Problem::NotAscii(l.into())),
                    _ => None,
                })
            }
            Step::States { json } => {
                let program = self.program()?;
                let out = render_states(&program, *json);
                Ok(if *json { json_problem(&out) } else { None })
            }
            Step::Eval { variant, binds, evaluation, json } => {
                let (program, derived) = self.derived(*variant)?;
                let bindings = Bindings::parse(&program, binds, self.dump.header.norb).map_err(failure)?;
                // as the binary takes --roots N
                let roots = evaluation.roots.map(|n| usize::try_from(n).unwrap_or(usize::MAX));
                let settings = Settings::parse(&program, &evaluation.sets, roots).map_err(failure)?;
                let results =
                    evaluate_with(&program, &derived, &bindings, &self.dump.integrals, &settings, &|_| {})
                        .map_err(failure)?;
                let warnings = eval_warnings(self.dump, &results);
                let out = if *json { results_json(&results, &warnings) } else { results_text(&results) };
                let problem = if *json { json_problem(&out) } else { None }
                    .or_else(|| not_finite(&results))
                    .or_else(|| self.disagreement(&program, binds, *variant, &results))
                    .or_else(|| self.broken_claim(&results));
                self.evaluated.push((*variant, results));
                Ok(problem)
            }
        }
    }

    /// Plain and Fock forms must give the same numbers; the distinct form must agree with the
    /// plain one wherever the generic indices stand for different orbitals.
    fn disagreement(
        &self,
        program: &Program,
        binds: &[String],
        variant: Variant,
        results: &[Evaluated],
    ) -> Option<Problem> {
        let bound_indices: Vec<&str> = binds
            .iter()
            .filter_map(|b| b.split_once('='))
            .filter(|(name, _)| program.indices.iter().any(|i| i.name == *name))
            .map(|(_, value)| value)
            .collect();
        for (other, theirs) in &self.evaluated {
            if other.distinct && variant.distinct {
                continue;
            }
            for (mine, their) in results.iter().zip(theirs) {
                // --distinct leaves members with coinciding indices out of a roots space
                if mine.kind == RequestKind::Roots && (other.distinct || variant.distinct) {
                    continue;
                }
                // rows left out differ between forms, so rows are matched by their indices
                let pairs = mine
                    .entries
                    .iter()
                    .filter_map(|a| their.entries.iter().find(|b| b.indices == a.indices).map(|b| (a, b)));
                for (a, b) in pairs {
                    let mut orbitals: Vec<String> = a.indices.iter().map(|(_, m)| m.to_string()).collect();
                    orbitals.extend(bound_indices.iter().map(|s| s.to_string()));
                    let all_different = orbitals.iter().enumerate().all(|(k, x)| !orbitals[..k].contains(x));
                    if (other.distinct || variant.distinct) && !all_different {
                        continue;
                    }
                    let scale = 1f64.max(a.value.abs()).max(b.value.abs());
                    if (a.value - b.value).abs() > 1e-9 * scale {
                        return Some(Problem::EvalMismatch(format!(
                            "{} at {:?}: {} with {:?}, {} with {:?}",
                            mine.request, a.indices, a.value, variant, b.value, other
                        )));
                    }
                }
            }
        }
        None
    }
}

impl Session<'_> {
    /// The generator's claims on these results: where the energy request has one value (at
    /// the stationary point or of a fixed state), the lowest root of the roots request over the
    /// same functions equals it; where it has a table, the lowest root lies at or below every
    /// value of the table (each is the energy of a function in the roots space).
    fn broken_claim(&self, results: &[Evaluated]) -> Option<Problem> {
        let find = |text: &str| results.iter().find(|r| r.request.trim() == text);
        for (energy, roots) in &self.claims {
            let (Some(e), Some(r)) = (find(energy), find(roots)) else { continue };
            let Some(lowest) = r.roots.as_ref().and_then(|o| o.roots.first()).map(|v| v.value) else {
                continue;
            };
            if e.kind != RequestKind::Energy || e.free == Some(FreeValue::Set) || e.entries.is_empty() {
                continue;
            }
            let values: Vec<f64> = e.entries.iter().map(|x| x.value).collect();
            let least = values.iter().copied().fold(f64::INFINITY, f64::min);
            let tolerance = 1e-8 * 1f64.max(least.abs());
            let one = values.len() == 1 && e.omitted.is_empty();
            let broken = if one { (lowest - least).abs() > tolerance } else { lowest > least + tolerance };
            if broken {
                return Some(Problem::ClaimBroken(format!(
                    "`{roots}` has the lowest root {lowest}, `{energy}` {} {least}",
                    if one { "is" } else { "has the least value" }
                )));
            }
        }
        None
    }
}

/// The claims written into an input by the generator.
fn claims(text: &str) -> Vec<(String, String)> {
    text.lines()
        .filter_map(|l| l.strip_prefix(CLAIM)?.split_once(" == "))
        .map(|(e, r)| (e.trim().to_string(), r.trim().to_string()))
        .collect()
}

fn json_problem(out: &str) -> Option<Problem> {
    serde_json::from_str::<serde_json::Value>(out).err().map(|e| Problem::InvalidJson(e.to_string()))
}

/// The first number of the results that is not finite: a value, a coefficient where an energy
/// is stationary or set, or a component of a root.
fn not_finite(results: &[Evaluated]) -> Option<Problem> {
    results.iter().find_map(|r| {
        let entry = r.entries.iter().find_map(|e| {
            let bad = !e.value.is_finite() || e.coefficients.iter().any(|(_, c)| !c.is_finite());
            bad.then(|| format!("{} at {:?}: {} {:?}", r.request, e.indices, e.value, e.coefficients))
        });
        let root = r.roots.iter().flat_map(|o| &o.roots).find_map(|root| {
            let bad = !root.value.is_finite() || root.vector.iter().any(|c| !c.coefficient.is_finite());
            bad.then(|| format!("{}: a root {} or its vector is not finite", r.request, root.value))
        });
        entry.or(root).map(Problem::NotFinite)
    })
}

static LAST_PANIC: Mutex<Option<String>> = Mutex::new(None);

/// The worker's main loop: one job per line on standard input, replies on standard output.
pub fn serve(integrals: &str, memory_mb: u64) -> ! {
    let bytes = memory_mb * 1024 * 1024;
    rlimit::setrlimit(rlimit::Resource::AS, bytes, bytes).expect("the worker limits its own memory");
    std::panic::set_hook(Box::new(|info| {
        let payload = info
            .payload()
            .downcast_ref::<&str>()
            .map(|s| s.to_string())
            .or_else(|| info.payload().downcast_ref::<String>().cloned())
            .unwrap_or_default();
        let at = info.location().map(|l| format!("{}:{}", l.file(), l.line())).unwrap_or_default();
        *LAST_PANIC.lock().unwrap_or_else(|e| e.into_inner()) = Some(format!("panicked at {at}: {payload}"));
    }));
    let dump =
        read_dump(integrals).unwrap_or_else(|e| panic!("the fuzz integral file reads: {}", e.render()));
    let stdout = std::io::stdout();
    let send = |reply: &Reply| {
        let mut out = stdout.lock();
        serde_json::to_writer(&mut out, reply).expect("replies serialize");
        out.write_all(b"\n").and_then(|_| out.flush()).expect("the parent listens");
    };
    for line in std::io::stdin().lock().lines() {
        let job: Job = serde_json::from_str(&line.expect("the parent writes lines")).expect("jobs parse");
        let mut session = Session {
            text: &job.input,
            dump: &dump,
            program: None,
            derived: HashMap::new(),
            evaluated: Vec::new(),
            claims: if job.claims { claims(&job.input) } else { Vec::new() },
        };
        let mut outcomes = Vec::new();
        for (k, step) in job.steps.iter().enumerate() {
            send(&Reply::Begin { id: job.id, step: k });
            let start = Instant::now();
            let result = catch_unwind(AssertUnwindSafe(|| {
                session.run(step).map_err(|(code, message)| {
                    // rendering must not panic either; keep the first lines for the report
                    (code, message.lines().take(12).collect::<Vec<_>>().join("\n"))
                })
            }));
            let millis = start.elapsed().as_millis() as u64;
            outcomes.push(match result {
                Ok(Ok(problem)) => Outcome { code: 0, message: String::new(), problem, millis },
                Ok(Err((code, message))) => Outcome { code, message, problem: None, millis },
                Err(_) => {
                    let message =
                        LAST_PANIC.lock().unwrap_or_else(|e| e.into_inner()).take().unwrap_or_default();
                    Outcome { code: PANIC, message, problem: None, millis }
                }
            });
        }
        send(&Reply::Done { id: job.id, outcomes });
    }
    std::process::exit(0)
}

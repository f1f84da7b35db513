//! What is run on one input: each step is one command of the `spinfold` binary, executed
//! in-process by a worker through the library, and written out as that command for reproducers.

use serde::{Deserialize, Serialize};

/// The name the input file has in every recorded command line.
pub const INPUT_FILE: &str = "input.spinfold";
/// The name the integral file has in every recorded command line.
pub const INTEGRALS_FILE: &str = "integrals.fcidump";

/// The options that change a derivation: one derivation per variant serves all its emitters.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize, Deserialize)]
pub struct Variant {
    pub fock: bool,
    pub distinct: bool,
    /// `--seed` of the verification; `None` is the binary's default.
    pub seed: Option<u64>,
}

impl Variant {
    fn args(&self) -> Vec<String> {
        let mut out = Vec::new();
        if self.fock {
            out.push("--fock".into());
        }
        if self.distinct {
            out.push("--distinct".into());
        }
        if let Some(seed) = self.seed {
            out.extend(["--seed".into(), seed.to_string()]);
        }
        out
    }
}

/// The output formats of `derive`.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum Emit {
    Text,
    Ascii,
    Latex,
    LatexStandalone,
    Json,
    Rust,
    Python,
}

impl Emit {
    pub const ALL: [Emit; 7] =
        [Emit::Text, Emit::Ascii, Emit::Latex, Emit::LatexStandalone, Emit::Json, Emit::Rust, Emit::Python];

    fn args(self) -> &'static [&'static str] {
        match self {
            Emit::Text => &[],
            Emit::Ascii => &["--ascii"],
            Emit::Latex => &["--to", "latex"],
            Emit::LatexStandalone => &["--to", "latex", "--standalone"],
            Emit::Json => &["--to", "json"],
            Emit::Rust => &["--to", "rust"],
            Emit::Python => &["--to", "python"],
        }
    }
}

/// One command of the binary.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub enum Step {
    Derive {
        variant: Variant,
        emit: Emit,
    },
    States {
        json: bool,
    },
    /// `eval` with bindings, free-coefficient values (`--set`) and `--roots N`.
    Eval {
        variant: Variant,
        binds: Vec<String>,
        evaluation: Evaluation,
        json: bool,
    },
}

/// What `eval` is told besides the bindings: values of free coefficients and how many roots.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct Evaluation {
    pub sets: Vec<String>,
    pub roots: Option<u64>,
}

impl Step {
    /// The arguments of the equivalent `spinfold` command (without the program name).
    pub fn argv(&self) -> Vec<String> {
        let mut out: Vec<String> = Vec::new();
        match self {
            Step::Derive { variant, emit } => {
                out.extend(["derive".into(), INPUT_FILE.into()]);
                out.extend(variant.args());
                out.extend(emit.args().iter().map(|s| s.to_string()));
            }
            Step::States { json } => {
                out.extend(["states".into(), INPUT_FILE.into()]);
                if *json {
                    out.push("--json".into());
                }
            }
            Step::Eval { variant, binds, evaluation, json } => {
                out.extend(["eval".into(), INPUT_FILE.into(), "--integrals".into(), INTEGRALS_FILE.into()]);
                out.extend(variant.args());
                for b in binds {
                    out.extend(["--bind".into(), b.clone()]);
                }
                for s in &evaluation.sets {
                    out.extend(["--set".into(), s.clone()]);
                }
                if let Some(n) = evaluation.roots {
                    out.extend(["--roots".into(), n.to_string()]);
                }
                if *json {
                    out.push("--json".into());
                }
            }
        }
        out
    }
}

/// Every step for one input: every emitter with and without `--fock` and `--distinct`, both
/// state listings, and evaluation in the plain, Fock and distinct forms with one set of bindings
/// and settings (so that their numbers can be compared).
pub fn full(seed: Option<u64>, binds: Vec<String>, evaluation: Evaluation, json: bool) -> Vec<Step> {
    let variants: Vec<Variant> = [(false, false), (true, false), (false, true), (true, true)]
        .into_iter()
        .map(|(fock, distinct)| Variant { fock, distinct, seed })
        .collect();
    let mut steps: Vec<Step> = variants
        .iter()
        .flat_map(|&variant| Emit::ALL.into_iter().map(move |emit| Step::Derive { variant, emit }))
        .collect();
    steps.extend([Step::States { json: false }, Step::States { json: true }]);
    steps.extend(variants[..3].iter().map(|&variant| Step::Eval {
        variant,
        binds: binds.clone(),
        evaluation: evaluation.clone(),
        json,
    }));
    steps
}

/// A command line as a shell would take it, every argument quoted where needed.
pub fn shell_line(program: &str, argv: &[String]) -> String {
    std::iter::once(program.to_string())
        .chain(argv.iter().map(|a| {
            if !a.is_empty() && a.chars().all(|c| c.is_ascii_alphanumeric() || "-_=.,/:".contains(c)) {
                a.clone()
            } else {
                format!("'{}'", a.replace('\'', r"'\''"))
            }
        }))
        .collect::<Vec<_>>()
        .join(" ")
}

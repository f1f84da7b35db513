//! Every way an input can be wrong, as one enum of precise kinds, and their rendering as a
//! sentence with the file, line, column and a caret under the offending text.

use codespan_reporting::diagnostic::{Diagnostic, Label};
use codespan_reporting::files::{self, Files};
use codespan_reporting::term::{self, Config};
use std::fmt;
use std::fmt::Write as _;
use std::ops::Range;
use std::sync::Arc;
use unicode_width::UnicodeWidthChar;

/// An input text with the name it is reported under.
#[derive(Debug)]
pub struct Source {
    pub name: String,
    pub text: String,
}

impl Source {
    pub fn new(name: impl Into<String>, text: impl Into<String>) -> Arc<Source> {
        Arc::new(Source { name: name.into(), text: text.into() })
    }

    /// 1-based line and column of a byte offset. Lines end as the grammar's NEWLINE reads
    /// them (see `ends_line`). Columns count characters: a tab, a wide character and a
    /// character shown as an escape (see `render`) are one column each, and the caret of a
    /// report stands under the character at that column.
    pub fn line_column(&self, offset: usize) -> (usize, usize) {
        let (line, start) = self.line_start(offset);
        (line, self.text[start..offset.min(self.text.len())].chars().count() + 1)
    }

    /// 1-based line number of a byte offset and the byte offset where that line starts.
    pub fn line_start(&self, offset: usize) -> (usize, usize) {
        (0..offset.min(self.text.len()))
            .filter(|&k| ends_line(&self.text, k))
            .fold((1, 0), |(line, _), k| (line + 1, k + 1))
    }
}

/// Whether the byte at `at` of `text` ends a line: `\n`, the `\n` of `\r\n`, and a `\r` alone
/// each make one line break, as in the grammar (pest's NEWLINE), so that an old Mac-style file
/// is reported at the lines its reader sees.
fn ends_line(text: &str, at: usize) -> bool {
    match text.as_bytes()[at] {
        b'\n' => true,
        b'\r' => text.as_bytes().get(at + 1) != Some(&b'\n'),
        _ => false,
    }
}

/// A stretch of an input text.
#[derive(Clone, Debug)]
pub struct Span {
    pub source: Arc<Source>,
    pub range: Range<usize>,
}

impl Span {
    pub fn text(&self) -> &str {
        &self.source.text[self.range.clone()]
    }
}

impl PartialEq for Span {
    fn eq(&self, other: &Span) -> bool {
        Arc::ptr_eq(&self.source, &other.source) && self.range == other.range
    }
}

/// The statements of the input language, as the help after a syntax error lists them.
pub const STATEMENTS: &str = "`orbitals`, `space`, `coefficients`, `det`, `state`, `csf`, `csfs`, `energy`, `element`, `overlap`, `spin`, `roots`, `density`, `shells`";

/// What went wrong. Each kind carries the names it is about; `Error` adds the place.
#[derive(Clone, Debug, PartialEq)]
pub enum ErrorKind {
    Syntax {
        expected: String,
    },
    Undefined {
        name: String,
    },
    WrongKind {
        name: String,
        is: String,
        wanted: String,
    },
    Redefined {
        name: String,
        first: Option<Span>,
    },
    /// An option of a `csf` line given a second time.
    RepeatedOption {
        option: String,
        first: Span,
    },
    Pauli {
        spin_orbital: String,
    },
    SpaceNotDoubled {
        space: String,
    },
    SpaceInExcitation {
        space: String,
    },
    ExcitationLengths {
        from: usize,
        to: usize,
    },
    NotExciting {
        spin_orbital: String,
        det: String,
    },
    NotADeterminant {
        name: String,
    },
    BadCoefficient {
        why: String,
    },
    NumberAlone,
    /// A free coefficient that multiplies no state (alone in a sum, or excited).
    FreeAlone {
        name: String,
    },
    /// Two free coefficients multiplied: a state must be linear in them.
    FreeProduct {
        first: String,
        second: String,
    },
    FreeDivisor {
        name: String,
    },
    FreeUnderRoot {
        name: String,
    },
    /// A `det` whose value holds free coefficients.
    FreeInDeterminant {
        det: String,
        coefficients: String,
    },
    /// A request that needs fixed states (`spin`, `roots`) given one with free coefficients.
    FreeNotAllowed {
        request: String,
        state: String,
        coefficients: String,
    },
    /// `eval` of a request whose free coefficients are not all given with --set.
    Unset {
        request: String,
        unset: String,
        why: String,
    },
    /// A wrong `--set NAME=VALUE`.
    Setting {
        why: String,
    },
    StateTimesState,
    DivisionByState,
    DivisionByZero,
    EmptyState {
        name: String,
    },
    ZeroNorm {
        state: String,
    },
    ElectronCount {
        bra: usize,
        ket: usize,
    },
    ClosedSpaces {
        bra: String,
        ket: String,
    },
    /// `shells X` where X's energy has a term the open-shell form cannot hold.
    OutsideShellForm {
        request: String,
        term: String,
        why: String,
    },
    RequestArity {
        kind: String,
        /// How many operands it takes, in words ("1", "1 or 2").
        wanted: String,
        got: usize,
    },
    /// `what` (a phrase ending in a verb, e.g. "`X` spans") has `count` of the limit's unit.
    TooLarge {
        what: String,
        count: String,
        limit: Box<Limit>,
    },
    /// A square root sqrt(p/q) whose p·q is `product`, past what exact coefficients hold.
    RootTooLarge {
        product: String,
    },
    Coupling {
        why: String,
    },
    /// A spin-adapted excitation of a determinant that is not closed-shell.
    ClosedShellNeeded {
        det: String,
        orbital: String,
    },
    /// A hole of a spin-adapted excitation that is not doubly occupied, or a particle that is
    /// not empty.
    ExcitedShell {
        orbital: String,
        det: String,
        hole: bool,
    },
    /// A spin-adapted excitation whose open shells change when its generic indices coincide;
    /// `cases` says how, case by case.
    OpenShellsDepend {
        operand: String,
        cases: String,
    },
    /// A csf whose determinant is excited more than once.
    ExcitationCount {
        operand: String,
        count: usize,
    },
    Io {
        path: String,
        why: String,
    },
    NotUtf8 {
        byte: u8,
        line: usize,
        position: usize,
    },
    IntegralFile {
        path: String,
        line: usize,
        column: usize,
        why: String,
    },
    Binding {
        why: String,
    },
    /// A request's bindings fix an assignment in which one of its states does not exist.
    StateVanishes {
        request: String,
        bindings: String,
        state: String,
        equal: String,
    },
    /// Bindings that put two generic indices on one orbital, for a request derived with
    /// --distinct.
    DistinctCoincide {
        request: String,
        bindings: String,
        equal: String,
    },
    /// A value that is not a finite number in double precision.
    NonFinite {
        request: String,
        value: String,
        row: String,
    },
    /// An eigensolver that did not converge.
    EigenNotConverged {
        dimension: usize,
        why: String,
    },
    /// A space whose pair elements were derived with --distinct: its members take every
    /// assignment, equal indices included.
    DistinctSpace {
        request: String,
    },
    Usage {
        why: String,
    },
    VerificationFailed {
        request: String,
        report: String,
    },
    /// Generic indices `optimize` needs bound: it optimizes one state, not a table of them.
    UnboundIndices {
        request: String,
        names: String,
    },
    /// The energy of a state's densities differs from its derived energy expression, with the
    /// same integrals: an internal error.
    DensityMismatch {
        request: String,
        density: f64,
        expression: f64,
    },
    /// An orbital optimization that stopped before its gradient fell below the tolerance:
    /// at the iteration limit, or (`stalled`) where no lower energy was found along the step.
    NotConverged {
        request: String,
        iterations: usize,
        energy: f64,
        gradient_norm: f64,
        tolerance: f64,
        stalled: bool,
    },
}

/// A bound that keeps a run within time and memory: its value, what it counts, and either the
/// option that changes it or, for a fixed bound, why it is there.
#[derive(Clone, Debug, PartialEq)]
pub struct Limit {
    pub value: u128,
    /// What the limit counts, in the plural ("determinants", "coincidence cases").
    pub unit: &'static str,
    pub change: Change,
}

/// How a limit can be changed.
#[derive(Clone, Debug, PartialEq)]
pub enum Change {
    /// The command-line option that sets it, and another way around it if there is one.
    Option { option: &'static str, or: Option<&'static str> },
    /// No option changes it; the reason it is fixed.
    Fixed(String),
}

/// An error with its place in the input, when it has one.
#[derive(Clone, Debug, PartialEq)]
pub struct Error {
    pub kind: ErrorKind,
    pub span: Option<Span>,
}

pub type Result<T> = std::result::Result<T, Error>;

impl Error {
    pub fn at(kind: ErrorKind, span: &Span) -> Error {
        Error { kind, span: Some(span.clone()) }
    }

    pub fn new(kind: ErrorKind) -> Error {
        Error { kind, span: None }
    }

    /// The process exit code: 1 for a failed verification, 2 for bad input or usage.
    pub fn exit_code(&self) -> i32 {
        match self.kind {
            ErrorKind::VerificationFailed { .. }
            | ErrorKind::DensityMismatch { .. }
            | ErrorKind::NotConverged { .. } => 1,
            _ => 2,
        }
    }

    /// One sentence saying what is wrong.
    pub fn message(&self) -> String {
        use ErrorKind::*;
        match &self.kind {
            Syntax { expected } => format!("this line cannot be read: expected {expected}"),
            Undefined { name } => format!("`{name}` is not defined"),
            WrongKind { name, is, wanted } => {
                format!("`{name}` is {is}, but {wanted} is needed here")
            }
            Redefined { name, .. } => format!("`{name}` is defined twice"),
            RepeatedOption { option, .. } => format!("`{option}=` is given twice in this csf"),
            Pauli { spin_orbital } => match spin_orbital.strip_suffix("^2") {
                Some(space) => format!(
                    "the space `{space}` is closed twice in this determinant: each of its orbitals would hold four electrons (Pauli principle)"
                ),
                None => format!(
                    "the spin orbital {spin_orbital} is occupied twice in this determinant (Pauli principle)"
                ),
            },
            SpaceNotDoubled { space } => {
                format!("the space `{space}` stands in a determinant without `^2`")
            }
            SpaceInExcitation { space } => {
                format!("the space `{space}` cannot be excited as a whole")
            }
            ExcitationLengths { from, to } => {
                format!("this excitation removes {from} electron(s) but adds {to}")
            }
            NotExciting { spin_orbital, det } => {
                format!("the excitation leaves no determinant: {spin_orbital} in {det}")
            }
            NotADeterminant { name } => format!("`{name}` is not a single determinant"),
            BadCoefficient { why } => format!("this coefficient is not exact: {why}"),
            NumberAlone => "a number stands alone in a state; it must multiply a determinant or state".into(),
            FreeAlone { name } => {
                format!(
                    "the free coefficient `{name}` stands alone here; it must multiply a determinant or state"
                )
            }
            FreeProduct { first, second } => format!(
                "the free coefficients `{first}` and `{second}` multiply each other here, but a state must be linear in its free coefficients"
            ),
            FreeDivisor { name } => format!("the free coefficient `{name}` stands in a denominator"),
            FreeUnderRoot { name } => format!("the free coefficient `{name}` stands under a square root"),
            FreeInDeterminant { det, coefficients } => format!(
                "`{det}` is a `det`, one determinant as written, but free coefficients ({coefficients}) stand in it"
            ),
            FreeNotAllowed { request, state, coefficients } => format!(
                "`{request}` needs states with fixed coefficients, but `{state}` has the free coefficients {coefficients}"
            ),
            Unset { request, unset, why } => {
                format!("`{request}` has free coefficients without a value: {unset}; {why}")
            }
            Setting { why } => why.clone(),
            StateTimesState => "two states are multiplied together".into(),
            DivisionByState => "a state stands in a denominator".into(),
            DivisionByZero => "a coefficient divides by zero".into(),
            EmptyState { name } => {
                format!("the state `{name}` has no determinant left: every coefficient cancels")
            }
            ZeroNorm { state } => format!("the state `{state}` has zero norm"),
            ElectronCount { bra, ket } => format!(
                "the determinants compared here have different numbers of explicit electrons: one has {bra}, another {ket}"
            ),
            ClosedSpaces { bra, ket } => {
                let spaces = |names: &str| {
                    if names.is_empty() { "none".to_string() } else { format!("{{{names}}}") }
                };
                format!(
                    "the determinants compared here have different closed spaces: one has {}, another {}",
                    spaces(bra),
                    spaces(ket)
                )
            }
            OutsideShellForm { request, term, why } => format!(
                "`{request}`: the energy has the term {term}, which has no place in the open-shell form Σ f h + Σ (a J + b K): {why}"
            ),
            RequestArity { kind, wanted, got } => {
                format!(
                    "`{kind}` takes {wanted} state(s), but {got} {} given",
                    if *got == 1 { "is" } else { "are" }
                )
            }
            TooLarge { what, count, limit } => {
                format!(
                    "{what} {count} {}, which exceeds the limit of {} {}",
                    limit.unit, limit.value, limit.unit
                )
            }
            RootTooLarge { product } => format!(
                "this coefficient is not exact: the square root sqrt(p/q) has p·q = {product}, which exceeds the limit of 2^32 - 1 = 4294967295 for p·q"
            ),
            Coupling { why } => format!("this spin coupling cannot be built: {why}"),
            ClosedShellNeeded { det, orbital } => format!(
                "a csf of an excitation starts from a closed-shell determinant, but `{orbital}` is singly occupied in `{det}`"
            ),
            ExcitedShell { orbital, det, hole: true } => format!(
                "`{orbital}` cannot be a hole of this excitation: it is not doubly occupied in `{det}`"
            ),
            ExcitedShell { orbital, det, hole: false } => {
                format!("`{orbital}` cannot be a particle of this excitation: it is occupied in `{det}`")
            }
            OpenShellsDepend { operand, cases } => format!(
                "the open shells of `{operand}` depend on which of its generic indices are equal: {cases}"
            ),
            ExcitationCount { operand, count } => format!(
                "a csf couples the open shells of one excitation of a determinant, but `{operand}` applies {count} excitations"
            ),
            Io { path, why } => format!("cannot use `{path}`: {why}"),
            NotUtf8 { byte, line, position } => format!(
                "the input is not UTF-8 text: byte {position} of line {line} (0x{byte:02x}) is not part of a character"
            ),
            IntegralFile { path, line, column, why } => format!("{path}:{line}:{column}: {why}"),
            Binding { why } => why.clone(),
            StateVanishes { request, bindings, state, equal } => {
                format!("`{request}` has no value for {bindings}: the state `{state}` vanishes when {equal}")
            }
            DistinctCoincide { request, bindings, equal } => format!(
                "`{request}` was derived with --distinct, which takes different letters to be different orbitals, but {bindings} give {equal}"
            ),
            NonFinite { request, value, row } => format!(
                "`{request}` evaluates to {value}{row}: the integrals are too large for double precision"
            ),
            EigenNotConverged { dimension, why } => {
                format!("the roots of a space of dimension {dimension} were not found: {why}")
            }
            DistinctSpace { request } => format!(
                "`{request}` was derived with --distinct, but the members of a space take every assignment of their indices, equal ones included"
            ),
            Usage { why } => why.clone(),
            VerificationFailed { request, report } => {
                format!("verification failed for `{request}`: {report}")
            }
            UnboundIndices { request, names } => format!(
                "`{request}` has generic indices that are not bound ({names}): optimize needs one state, with every index on an orbital"
            ),
            DensityMismatch { request, density, expression } => format!(
                "internal error: the densities of `{request}` give the energy {density:.12}, but its derived expression gives {expression:.12} with the same integrals"
            ),
            NotConverged { request, iterations, energy, gradient_norm, tolerance, stalled } => {
                let why = if *stalled {
                    format!("after {iterations} iterations the line search found no lower energy")
                } else {
                    format!("it reached the limit of {iterations} iterations")
                };
                format!(
                    "the orbitals of `{request}` did not converge: {why}, at energy {energy:.12} with gradient norm {gradient_norm:.3e} (tolerance {tolerance:.1e})"
                )
            }
        }
    }

    /// How to fix it.
    pub fn help(&self) -> Option<String> {
        use ErrorKind::*;
        Some(match &self.kind {
            Syntax { .. } => format!("see the input language in README.md; statements are {STATEMENTS}"),
            Undefined { .. } => {
                "declare it first with `orbitals`, `space`, `coefficients` (a free coefficient), `det`, `state`, `csf` or `csfs`".into()
            }
            WrongKind { .. } => "check which name was meant".into(),
            Redefined { .. } => "give each orbital, space, index, determinant and state its own name".into(),
            RepeatedOption { option, .. } => format!("keep one `{option}=`: each of `S=`, `M=` and `path=` is given at most once"),
            Pauli { spin_orbital } => match spin_orbital.strip_suffix("^2") {
                Some(space) => format!("write `{space}^2` once"),
                None => "remove one of the two, or put the electron in another orbital or spin".into(),
            },
            SpaceNotDoubled { space } => format!("write `{space}^2`: a space is always doubly occupied"),
            SpaceInExcitation { .. } => "excite one of its generic indices instead, e.g. `ref[i -> a]` with `space occ: i`".into(),
            ExcitationLengths { .. } => "list as many spin orbitals after `->` as before it".into(),
            NotExciting { .. } => "an excitation must remove occupied spin orbitals and add empty ones".into(),
            NotADeterminant { .. } => "use `state` for a combination of determinants".into(),
            BadCoefficient { .. } => "write integers, fractions and sqrt(n) or sqrt(p/q), multiplied or divided".into(),
            NumberAlone | StateTimesState | DivisionByState => "write a combination as c1 D1 + c2 D2, with each coefficient multiplying one determinant or state".into(),
            FreeAlone { name } => format!("write `{name}` before the determinant or state it multiplies, e.g. `{name} | a b |`"),
            FreeProduct { .. } | FreeDivisor { .. } | FreeUnderRoot { .. } => "a term's coefficient is an exact number, a free coefficient, or their product (`sqrt(2) cg`, `-cu/2`)".into(),
            FreeInDeterminant { det, .. } => format!("define it as a `state`: `state {det} = ...`"),
            FreeNotAllowed { request, .. } if request == "roots" => "the operands of `roots` span the space themselves: list the parts the free coefficients multiply as operands of their own".into(),
            FreeNotAllowed { .. } => "write the state with numbers for its coefficients".into(),
            Unset { .. } => "give each a value, e.g. `--set cg=0.98`".into(),
            Setting { .. } => "write --set NAME=VALUE once for each free coefficient of the input, e.g. --set cg=0.98".into(),
            DivisionByZero => "use a non-zero divisor".into(),
            EmptyState { .. } | ZeroNorm { .. } => "check the signs and coefficients of the combination".into(),
            ElectronCount { .. } => "the Hamiltonian conserves the number of electrons: every determinant of the bra and the ket must have the same count".into(),
            ClosedSpaces { .. } => "write the same closed spaces in every determinant of the bra and the ket; their sizes are unknown".into(),
            OutsideShellForm { .. } => "ask for `energy X` (any energy) or `density X` (its densities) instead".into(),
            RequestArity { .. } => "write `energy X`, `spin X`, `element X Y`, `overlap X Y`, `roots X Y ...`, `density X`, `density X Y` or `shells X`".into(),
            Coupling { .. } => "write `csf X = | core^2 p q r | S=1/2 path=1/2,0,1/2`: the intermediate spin after each open shell, ending at S".into(),
            ClosedShellNeeded { .. } => "write every orbital of the determinant doubly occupied (`p^2`): the excitation makes the open shells".into(),
            ExcitedShell { .. } => "a spin-adapted excitation moves electrons out of doubly occupied orbitals into empty ones".into(),
            OpenShellsDepend { .. } => "derive with --distinct, which takes different letters to be different orbitals, or take the indices from different spaces (`space occ1: i` and `space occ2: j`)".into(),
            ExcitationCount { .. } => "write the excitation in one bracket, `csf X = ref[i j -> a b] S=0`, with `ref` a closed-shell `det`".into(),
            TooLarge { limit, .. } => match &limit.change {
                Change::Option { option, or } => {
                    let raise = format!("raise the limit with `{option} N` if the machine has the memory and time for it");
                    match or {
                        Some(other) => format!("{raise}, or use {other}"),
                        None => raise,
                    }
                }
                Change::Fixed(why) => format!("no option changes this limit: {why}"),
            },
            RootTooLarge { .. } => "no option changes this limit: the radicand of an exact coefficient is a 64-bit integer, and the product of two such roots must still fit; take square factors out of the root (sqrt(40000000000) is 200000)".into(),
            NotUtf8 { .. } => "save the input as UTF-8 (names are ASCII; comments may hold any UTF-8 text)".into(),
            StateVanishes { .. } => "bind the indices to different orbitals, or leave one unbound: a table leaves out the rows where the state does not exist".into(),
            DistinctSpace { .. } => "drop --distinct to evaluate the roots of a space".into(),
            DistinctCoincide { .. } => "drop --distinct: without it the expression holds for every assignment, equal indices included".into(),
            NonFinite { .. } => "check the values of the integral file".into(),
            IntegralFile { .. } => "the integral file must be in the integral-dump text format described in README.md".into(),
            UnboundIndices { names, .. } => format!("bind each with --bind, e.g. --bind {}=N", names.split(", ").next().unwrap_or("i")),
            DensityMismatch { .. } => "please report this input and integral file; run eval for the energy meanwhile".into(),
            NotConverged { stalled: false, .. } => "raise --max-iter, or start from orbitals closer to the state's (e.g. converged for a similar state); a looser --gradient-tol stops earlier".into(),
            NotConverged { stalled: true, .. } => "the energy no longer changes visibly: loosen --gradient-tol, or start from other orbitals".into(),
            _ => return None,
        })
    }

    /// The full report: the sentence, and where an input place is known, the file, line,
    /// column and a caret under the offending text. Nothing from the input reaches the terminal
    /// unescaped: see `Shown`.
    pub fn render(&self) -> String {
        let help = self.help().map(|h| format!("help: {}", visible(&h)));
        let Some(span) = &self.span else {
            let mut out = format!("error: {}", visible(&self.message()));
            if let Some(help) = help {
                out.push_str(&format!("\n  = {help}"));
            }
            return out + "\n";
        };
        let shown = Shown::new(&span.source);
        let (line, column) = span.source.line_column(span.range.start);
        let header = visible(&format!("{}:{line}:{column}: {}", span.source.name, self.message()));
        let mut labels = vec![Label::primary((), shown.range(&span.range)).with_message(self.label())];
        let secondary = match &self.kind {
            ErrorKind::Redefined { first: Some(first), .. } => Some((first, "first defined here")),
            ErrorKind::RepeatedOption { first, .. } => Some((first, "first given here")),
            _ => None,
        };
        if let Some((first, message)) = secondary
            && Arc::ptr_eq(&first.source, &span.source)
        {
            labels.push(Label::secondary((), shown.range(&first.range)).with_message(message));
        }
        let diagnostic = Diagnostic::error()
            .with_message(&header)
            .with_labels(labels)
            .with_notes(help.into_iter().collect());
        match term::emit_into_string(&Config::default(), &shown, &diagnostic) {
            Ok(text) => text,
            Err(_) => format!("error: {header}\n"),
        }
    }

    fn label(&self) -> String {
        match &self.kind {
            ErrorKind::Syntax { .. } => "here".into(),
            ErrorKind::Redefined { .. } => "defined again here".into(),
            ErrorKind::RepeatedOption { .. } => "given again here".into(),
            _ => "here".into(),
        }
    }
}

impl fmt::Display for Error {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.render())
    }
}

impl std::error::Error for Error {}

/// Whether a terminal shows `c` as itself, taking room: not a control character (a tab aside,
/// which the report expands to spaces) and not a character of no width (combining marks,
/// zero-width spaces and joiners, the byte-order mark, direction overrides), nor a soft hyphen
/// or a line or paragraph separator, which terminals hide or break on.
fn shows_itself(c: char) -> bool {
    c == '\t'
        || (!c.is_control()
            && c.width().is_some_and(|w| w > 0)
            && !matches!(c, '\u{ad}' | '\u{2028}' | '\u{2029}'))
}

/// Text from the input as a report prints it: every character that does not show as itself
/// written as its escape (`\u{1b}` for the escape character), line breaks kept.
fn visible(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        if c == '\n' || shows_itself(c) {
            out.push(c);
        } else {
            let _ = write!(out, "{}", c.escape_unicode());
        }
    }
    out
}

/// An input as a report shows it. The caret under a character is as wide as the character is
/// on the terminal; a control character, an escape sequence or a character of no width would
/// be printed raw with no caret under it at all. So such characters are shown by their escape
/// (`visible`), and spans are carried over to the shown text: the caret stands under the escape,
/// and the column still counts characters of the input (`Source::line_column`).
struct Shown<'s> {
    source: &'s Source,
    name: String,
    text: String,
    /// Where each line of `text` starts.
    starts: Vec<usize>,
    /// (offset in the input, offset in `text`) of every character of the input.
    offsets: Vec<(usize, usize)>,
}

impl<'s> Shown<'s> {
    fn new(source: &'s Source) -> Shown<'s> {
        let mut text = String::with_capacity(source.text.len());
        let mut offsets = Vec::with_capacity(source.text.len());
        for (at, c) in source.text.char_indices() {
            offsets.push((at, text.len()));
            // every `\r` belongs to a line break (`\r\n` or `\r` alone); the report drops the
            // `\r` of `\r\n` itself, and a `\r` alone becomes `\n`, one byte for one, where the
            // shown lines are found
            if c == '\r' && ends_line(&source.text, at) {
                text.push('\n');
            } else if c == '\n' || c == '\r' || shows_itself(c) {
                text.push(c);
            } else {
                let _ = write!(text, "{}", c.escape_unicode());
            }
        }
        let starts = files::line_starts(&text).collect();
        Shown { source, name: visible(&source.name), text, starts, offsets }
    }

    /// The offset in the shown text of an input offset (a character boundary).
    fn shown(&self, offset: usize) -> usize {
        match self.offsets.binary_search_by_key(&offset, |&(at, _)| at) {
            Ok(k) => self.offsets[k].1,
            Err(k) => self.offsets.get(k).map_or(self.text.len(), |&(_, to)| to),
        }
    }

    /// A span of the input in the shown text. An empty span marks the character at its place,
    /// so that the caret covers the whole of an escape there.
    fn range(&self, range: &Range<usize>) -> Range<usize> {
        let (start, end) = (self.shown(range.start), self.shown(range.end));
        let at = self.source.text[range.start.min(self.source.text.len())..].chars().next();
        match at {
            Some(c) if start == end && c != '\n' && c != '\r' => {
                start..self.shown(range.start + c.len_utf8())
            }
            _ => start..end,
        }
    }

    /// The input offset of the character shown at `offset` of the shown text.
    fn input_offset(&self, offset: usize) -> usize {
        if offset >= self.text.len() {
            return self.source.text.len();
        }
        let k = self.offsets.partition_point(|&(_, to)| to <= offset);
        self.offsets[k.saturating_sub(1)].0
    }

    fn line_start(&self, line: usize) -> std::result::Result<usize, files::Error> {
        match line.cmp(&self.starts.len()) {
            std::cmp::Ordering::Less => Ok(self.starts[line]),
            std::cmp::Ordering::Equal => Ok(self.text.len()),
            std::cmp::Ordering::Greater => {
                Err(files::Error::LineTooLarge { given: line, max: self.starts.len() - 1 })
            }
        }
    }
}

impl<'a> Files<'a> for Shown<'_> {
    type FileId = ();
    type Name = &'a str;
    type Source = &'a str;

    fn name(&'a self, (): ()) -> std::result::Result<&'a str, files::Error> {
        Ok(&self.name)
    }

    fn source(&'a self, (): ()) -> std::result::Result<&'a str, files::Error> {
        Ok(&self.text)
    }

    fn line_index(&'a self, (): (), offset: usize) -> std::result::Result<usize, files::Error> {
        Ok(self.starts.binary_search(&offset).unwrap_or_else(|next| next - 1))
    }

    fn line_range(&'a self, (): (), line: usize) -> std::result::Result<Range<usize>, files::Error> {
        Ok(self.line_start(line)?..self.line_start(line + 1)?)
    }

    /// Columns count characters of the input, as in the first line of the report.
    fn column_number(
        &'a self,
        (): (),
        _line: usize,
        offset: usize,
    ) -> std::result::Result<usize, files::Error> {
        Ok(self.source.line_column(self.input_offset(offset)).1)
    }
}

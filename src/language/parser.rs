//! Reads the input language (grammar/spinfold.pest) and resolves names into a `Program`,
//! checking every definition as it goes so that errors point at the text that caused them.

use crate::engine::coupling::{Twice, determinant_count, expanded, half, path_count, path_problem, paths};
use crate::engine::derive::check_definition;
use crate::engine::derive::{Options, derive};
use crate::engine::exact::Exact;
use crate::engine::spin_adapted_excitation::excited_shells;
use crate::error::{Change, Error, ErrorKind, Limit, Result, STATEMENTS, Source, Span};
use crate::language::block::{Block, MAX_FUNCTIONS, too_many_functions};
use crate::language::orbital::{Orb, Spin, SpinOrbital};
use crate::language::program::{
    Coefficient, Coupling, DetSpec, Excitation, Index, Linear, NamedState, Occupant, Orbital, Program,
    Request, RequestKind, Shells, Space, State,
};
use num_bigint::{BigInt, BigUint};
use num_rational::BigRational;
use num_traits::One;
use pest::Parser;
use pest::iterators::{Pair, Pairs};
use std::collections::{BTreeSet, HashMap};
use std::sync::Arc;

#[derive(pest_derive::Parser)]
#[grammar = "../grammar/spinfold.pest"]
struct Grammar;

/// What a name stands for.
#[derive(Clone, Copy, Debug)]
enum Symbol {
    Orbital(u32),
    Space(u32),
    Index(u32),
    State(u32),
    /// `csfs X`: the coupled states X.1 .. X.count
    Family(u32),
    /// A free coefficient.
    Coefficient(u32),
}

/// A piece of a state expression: a number, a number times a free coefficient, or a state
/// (linear in its free coefficients).
enum Value {
    Number(Exact),
    Free(Exact, u32),
    State(Linear),
}

/// Parses an input text, reported under `name` in errors.
pub fn parse(name: &str, text: &str) -> Result<Program> {
    parse_with(name, text, Limits::default())
}

/// Parses with explicit limits.
pub fn parse_with(name: &str, text: &str, limits: Limits) -> Result<Program> {
    let source = Source::new(name, text);
    check_nesting(&source)?;
    let mut pairs = Grammar::parse(Rule::file, text).map_err(|e| syntax_error(&source, e))?;
    let file = pairs.next().expect("the file rule always matches once");
    let mut resolver = Resolver {
        program: Program {
            source: source.clone(),
            orbitals: vec![],
            spaces: vec![],
            indices: vec![],
            coefficients: vec![],
            states: vec![],
            requests: vec![],
        },
        symbols: HashMap::new(),
        limits,
        deferred: BTreeSet::new(),
        roots: vec![],
    };
    for statement in file.into_inner() {
        resolver.statement(statement)?;
    }
    // the pairs of a `roots` space are made once every name is declared, so that the indices
    // generated to rename them apart clash with none
    for (k, operands) in std::mem::take(&mut resolver.roots) {
        let request = &resolver.program.requests[k];
        let (text, span) = (request.text.clone(), request.span.clone());
        let block = Block::roots(&mut resolver.program, &text, &span, operands);
        resolver.program.requests[k].block = Some(Arc::new(block));
    }
    if limits.expand_unused {
        let deferred: Vec<u32> = resolver.deferred.iter().copied().collect();
        for k in deferred {
            resolver.expand(k);
        }
    }
    Ok(resolver.program)
}

fn describe(rule: &Rule) -> String {
    let words = match rule {
        Rule::name => "a name",
        Rule::number => "a number",
        Rule::sum | Rule::product | Rule::unit => "a state or coefficient",
        Rule::operand | Rule::state_atom => "a state, a determinant `| ... |` or `(...)`",
        Rule::inline_det => "a determinant `| ... |`",
        Rule::csf_operand => {
            "a determinant `| ... |` or the name of a `det`, with an excitation `[i -> a]` if any"
        }
        Rule::occupant => "an orbital, `name'` or `name^2`",
        Rule::excitation => "an excitation `[x -> y]`",
        Rule::spin_orbital => "a spin orbital (`a` or `a'`)",
        Rule::EOI => "the end of the input",
        Rule::add_op | Rule::sign => "`+` or `-`",
        Rule::mul_op => "`*` or `/`",
        Rule::reference => "a state name",
        Rule::csf_option | Rule::option_name => "`S=`, `M=` or `path=`",
        Rule::spin_value => "a spin such as 1/2",
        // `file` is what pest names when the first line does not start a statement
        Rule::file
        | Rule::kw_orbitals
        | Rule::kw_space
        | Rule::kw_coefficients
        | Rule::kw_det
        | Rule::kw_state
        | Rule::kw_csf
        | Rule::request_kind => return format!("a statement ({STATEMENTS})"),
        _ => "something else",
    };
    words.to_string()
}

fn syntax_error(source: &Arc<Source>, error: pest::error::Error<Rule>) -> Error {
    let start = match error.location {
        pest::error::InputLocation::Pos(p) => p,
        pest::error::InputLocation::Span((s, _)) => s,
    };
    // a line ends at `\n`, `\r\n` or a `\r` alone, as the grammar's NEWLINE reads it
    let line_start = source.text[..start].rfind(['\n', '\r']).map_or(0, |k| k + 1);
    let line_end = source.text[start..].find(['\n', '\r']).map_or(source.text.len(), |k| start + k);
    let unclosed =
        source.text[line_start..line_end].split('#').next().unwrap_or("").matches('|').count() % 2 == 1;
    let expected = match &error.variant {
        _ if unclosed => "the closing `|` of the determinant".to_string(),
        pest::error::ErrorVariant::ParsingError { positives, .. } => {
            let mut words: Vec<String> = positives.iter().map(describe).collect();
            words.sort();
            words.dedup();
            if words.is_empty() { "a statement".to_string() } else { words.join(" or ") }
        }
        pest::error::ErrorVariant::CustomError { message } => message.clone(),
    };
    let text = &source.text;
    let end = text[start..].char_indices().nth(1).map_or(text.len(), |(k, _)| start + k);
    let end = if text[start..end].contains(['\n', '\r']) || start >= text.len() { start } else { end };
    Error::at(ErrorKind::Syntax { expected }, &Span { source: source.clone(), range: start..end.max(start) })
}

struct Resolver {
    program: Program,
    symbols: HashMap<String, (Symbol, Span)>,
    limits: Limits,
    /// Members of `csfs` families that nothing has used yet: only their couplings are kept,
    /// and each is expanded into determinants when a request or definition first names it.
    deferred: BTreeSet<u32>,
    /// `roots` requests (their position) with their operands, made into blocks at the end.
    roots: Vec<(usize, Vec<(State, String)>)>,
}

/// The most open shells a coupled state is expanded into determinants for: past it the
/// coefficients' square roots outgrow 64-bit radicands.
pub const MAX_EXPANDED_SHELLS: usize = 24;

/// The deepest nesting of parentheses (and `sqrt(`) in one line. The parser and the resolver
/// descend once per level; this keeps both far inside the stack of any thread, debug build or not.
pub const MAX_NESTING: usize = 32;

/// Limits that keep a run within memory.
#[derive(Clone, Copy, Debug)]
pub struct Limits {
    /// The largest number of determinants a coupled state may expand to.
    pub max_determinants: usize,
    /// The most coupling paths, so coupled states, that one `csfs` line may define.
    pub max_paths: usize,
    /// Expand every member of a `csfs` family, not only those a request or definition uses
    /// (to list them all).
    pub expand_unused: bool,
    /// Different generic indices are different orbitals (`--distinct`): a spin-adapted
    /// excitation may then open two shells on indices of one space.
    pub distinct: bool,
}

impl Default for Limits {
    fn default() -> Limits {
        Limits { max_determinants: 200_000, max_paths: 1000, expand_unused: false, distinct: false }
    }
}

/// The options of a `csf` line, each given at most once.
#[derive(Default)]
struct CsfOptions {
    s: Option<Twice>,
    m: Option<Twice>,
    path: Option<(Vec<Twice>, Span)>,
}

/// Stops a line whose parentheses nest deeper than `MAX_NESTING`, before the parser descends
/// into it: one pass over the text, comments skipped, the depth starting afresh on each line
/// (no group spans a line).
fn check_nesting(source: &Arc<Source>) -> Result<()> {
    let (mut depth, mut comment) = (0usize, false);
    for (k, byte) in source.text.bytes().enumerate() {
        match byte {
            b'\n' | b'\r' => (depth, comment) = (0, false),
            _ if comment => {}
            b'#' => comment = true,
            b'(' => {
                depth += 1;
                if depth > MAX_NESTING {
                    let span = Span { source: source.clone(), range: k..k + 1 };
                    return Err(Error::at(
                        ErrorKind::TooLarge {
                            what: "this parenthesis opens".into(),
                            count: depth.to_string(),
                            limit: Box::new(Limit {
                                value: MAX_NESTING as u128,
                                unit: "nested levels",
                                change: Change::Fixed(
                                    "the parser descends once per level and must stay within its stack; define the inner part as a `state` of its own, or multiply out the numbers".into(),
                                ),
                            }),
                        },
                        &span,
                    ));
                }
            }
            b')' => depth = depth.saturating_sub(1),
            _ => {}
        }
    }
    Ok(())
}

impl Resolver {
    /// The text of a pair, without the blanks and comment that may trail it.
    fn span(&self, pair: &Pair<Rule>) -> Span {
        let s = pair.as_span();
        let text = s.as_str();
        let kept = text.split('#').next().unwrap_or("").trim_end().len();
        Span {
            source: self.program.source.clone(),
            range: s.start()..s.start() + kept.max(1).min(text.len()),
        }
    }

    fn declare(&mut self, pair: &Pair<Rule>, symbol: Symbol) -> Result<()> {
        let name = pair.as_str().to_string();
        let span = self.span(pair);
        if let Some((_, first)) = self.symbols.get(&name) {
            return Err(Error::at(ErrorKind::Redefined { name, first: Some(first.clone()) }, &span));
        }
        self.symbols.insert(name, (symbol, span));
        Ok(())
    }

    fn lookup(&self, pair: &Pair<Rule>) -> Result<Symbol> {
        self.symbols
            .get(pair.as_str())
            .map(|(s, _)| *s)
            .ok_or_else(|| Error::at(ErrorKind::Undefined { name: pair.as_str().into() }, &self.span(pair)))
    }

    fn wrong_kind(&self, pair: &Pair<Rule>, symbol: Symbol, wanted: &str) -> Error {
        let is = match symbol {
            Symbol::Orbital(_) => "an orbital",
            Symbol::Space(_) => "a space",
            Symbol::Index(_) => "a generic index",
            Symbol::State(k) if self.program.states[k as usize].is_determinant => "a determinant",
            Symbol::State(_) => "a state",
            Symbol::Family(_) => "a family of coupled states",
            Symbol::Coefficient(_) => "a free coefficient",
        };
        Error::at(
            ErrorKind::WrongKind { name: pair.as_str().into(), is: is.into(), wanted: wanted.into() },
            &self.span(pair),
        )
    }

    fn statement(&mut self, pair: Pair<Rule>) -> Result<()> {
        let rule = pair.as_rule();
        let span = self.span(&pair);
        let inner = pair.into_inner();
        match rule {
            Rule::orbitals_stmt => self.orbitals(inner),
            Rule::space_stmt => self.space(inner),
            Rule::coefficients_stmt => self.coefficients(inner),
            Rule::det_stmt | Rule::state_stmt => self.definition(rule == Rule::det_stmt, inner),
            Rule::csf_stmt => self.csf(span, inner),
            Rule::request_stmt => self.request(span, inner),
            Rule::EOI => Ok(()),
            other => unreachable!("grammar: unexpected statement {other:?}"),
        }
    }

    /// `orbitals a b c`
    fn orbitals(&mut self, inner: Pairs<Rule>) -> Result<()> {
        for name in inner.skip(1) {
            let id = self.program.orbitals.len() as u32;
            self.declare(&name, Symbol::Orbital(id))?;
            self.program.orbitals.push(Orbital { name: name.as_str().into(), span: self.span(&name) });
        }
        Ok(())
    }

    /// `space act: t u`
    fn space(&mut self, mut inner: Pairs<Rule>) -> Result<()> {
        inner.next();
        let name = inner.next().expect("grammar: space name");
        let space = self.program.spaces.len() as u32;
        self.declare(&name, Symbol::Space(space))?;
        let mut indices = vec![];
        for index in inner {
            let id = self.program.indices.len() as u32;
            self.declare(&index, Symbol::Index(id))?;
            self.program.indices.push(Index { name: index.as_str().into(), space, span: self.span(&index) });
            indices.push(id);
        }
        self.program.spaces.push(Space { name: name.as_str().into(), indices, span: self.span(&name) });
        Ok(())
    }

    /// `coefficients cg cu`
    fn coefficients(&mut self, inner: Pairs<Rule>) -> Result<()> {
        for name in inner.skip(1) {
            let id = self.program.coefficients.len() as u32;
            self.declare(&name, Symbol::Coefficient(id))?;
            self.program
                .coefficients
                .push(Coefficient { name: name.as_str().into(), span: self.span(&name) });
        }
        Ok(())
    }

    fn coefficient_name(&self, c: u32) -> String {
        self.program.coefficients[c as usize].name.clone()
    }

    /// The free coefficients of a state, as `cg, cu`.
    fn coefficient_names(&self, state: &Linear) -> String {
        state.parts.iter().map(|&(c, _)| self.coefficient_name(c)).collect::<Vec<_>>().join(", ")
    }

    /// `det X = ...` (one determinant) and `state X = ...` (a combination, possibly with free
    /// coefficients).
    fn definition(&mut self, is_determinant: bool, mut inner: Pairs<Rule>) -> Result<()> {
        inner.next();
        let name = inner.next().expect("grammar: state name");
        let value = inner.next().expect("grammar: state value");
        self.expand_used(&value);
        let value_span = self.span(&value);
        let free_in_det = |coefficients: String| {
            Error::at(ErrorKind::FreeInDeterminant { det: name.as_str().into(), coefficients }, &value_span)
        };
        let linear = match self.value(value)? {
            Value::State(s) => s,
            Value::Number(_) => return Err(Error::at(ErrorKind::NumberAlone, &value_span)),
            Value::Free(_, c) if is_determinant => return Err(free_in_det(self.coefficient_name(c))),
            Value::Free(_, c) => {
                return Err(Error::at(ErrorKind::FreeAlone { name: self.coefficient_name(c) }, &value_span));
            }
        };
        if is_determinant && !linear.parts.is_empty() {
            return Err(free_in_det(self.coefficient_names(&linear)));
        }
        for (coefficient, state) in linear.functions() {
            let label = match coefficient {
                None if linear.parts.is_empty() => name.as_str().to_string(),
                None => format!("{}(1)", name.as_str()),
                Some(c) => format!("{}({})", name.as_str(), self.coefficient_name(c)),
            };
            if is_determinant && state.terms.len() != 1 {
                return Err(Error::at(
                    ErrorKind::NotADeterminant { name: value_span.text().into() },
                    &value_span,
                ));
            }
            if state.terms.iter().all(|(c, _)| c.is_zero()) || state.terms.is_empty() {
                return Err(Error::at(ErrorKind::EmptyState { name: label }, &value_span));
            }
            check_definition(&self.program, state, &label, &value_span)?;
        }
        self.check_parts_comparable(&linear, &value_span)?;
        let id = self.program.states.len() as u32;
        self.declare(&name, Symbol::State(id))?;
        let (state, free) = match linear.as_fixed() {
            Some(fixed) => (fixed.clone(), None),
            None => (linear.at_unit(), Some(linear)),
        };
        self.program.states.push(NamedState {
            name: name.as_str().into(),
            state,
            free,
            is_determinant,
            span: self.span(&name),
        });
        Ok(())
    }

    /// The parts of a state with free coefficients must hold the same closed spaces and number
    /// of electrons, as the determinants of one state must: checked by deriving the overlap of
    /// the first part with each other.
    fn check_parts_comparable(&self, linear: &Linear, span: &Span) -> Result<()> {
        let mut functions = linear.functions().map(|(_, s)| s);
        let Some(first) = functions.next() else { return Ok(()) };
        for other in functions {
            let request = Request {
                kind: RequestKind::Overlap,
                text: span.text().to_string(),
                bra: first.clone(),
                ket: other.clone(),
                bra_text: span.text().to_string(),
                ket_text: span.text().to_string(),
                span: span.clone(),
                block: None,
            };
            derive(&self.program, &request, &Options { distinct: true, ..Options::default() })?;
        }
        Ok(())
    }

    /// `energy X`, `spin X`, `element X Y`, `overlap X Y`, `roots X Y ...`, `density X`,
    /// `density X Y`, `shells X`
    fn request(&mut self, span: Span, mut inner: Pairs<Rule>) -> Result<()> {
        let keyword = inner.next().expect("grammar: request keyword");
        let operands: Vec<Pair<Rule>> = inner.collect();
        let kind = match keyword.as_str() {
            "energy" => RequestKind::Energy,
            "element" => RequestKind::Element,
            "spin" => RequestKind::Spin,
            "roots" => RequestKind::Roots,
            "shells" => RequestKind::Shells,
            "density" if operands.len() == 2 => RequestKind::TransitionDensity,
            "density" => RequestKind::Density,
            _ => RequestKind::Overlap,
        };
        let wanted: Option<&[usize]> = match kind {
            RequestKind::Energy | RequestKind::Spin | RequestKind::Shells => Some(&[1]),
            RequestKind::Element | RequestKind::Overlap => Some(&[2]),
            RequestKind::Density | RequestKind::TransitionDensity => Some(&[1, 2]),
            RequestKind::Roots => None,
        };
        if let Some(wanted) = wanted.filter(|w| !w.contains(&operands.len())) {
            return Err(Error::at(
                ErrorKind::RequestArity {
                    kind: kind.keyword().into(),
                    wanted: wanted.iter().map(|n| n.to_string()).collect::<Vec<_>>().join(" or "),
                    got: operands.len(),
                },
                &span,
            ));
        }
        if operands.len() > MAX_FUNCTIONS {
            // at the first operand past the limit
            let past = self.span(&operands[MAX_FUNCTIONS]);
            let what = "this `roots` request lists".to_string();
            return Err(too_many_functions(what, operands.len(), "operands", &past));
        }
        let mut states: Vec<(Linear, String)> = vec![];
        for operand in operands {
            self.expand_used(&operand);
            let operand_span = self.span(&operand);
            let text = without_comment(operand.as_str());
            let state = match self.value(operand)? {
                Value::State(s) => s,
                Value::Number(_) => return Err(Error::at(ErrorKind::NumberAlone, &operand_span)),
                Value::Free(_, c) => {
                    return Err(Error::at(
                        ErrorKind::FreeAlone { name: self.coefficient_name(c) },
                        &operand_span,
                    ));
                }
            };
            let fixed_only =
                !matches!(kind, RequestKind::Energy | RequestKind::Element | RequestKind::Overlap);
            if fixed_only && !state.parts.is_empty() {
                return Err(Error::at(
                    ErrorKind::FreeNotAllowed {
                        request: kind.keyword().into(),
                        state: text,
                        coefficients: self.coefficient_names(&state),
                    },
                    &operand_span,
                ));
            }
            let parts = state.functions().count();
            if !state.parts.is_empty() && parts > MAX_FUNCTIONS {
                let what = format!("`{text}` is a sum of");
                return Err(too_many_functions(what, parts, "parts", &operand_span));
            }
            states.push((state, text));
        }
        let text = without_comment(span.text());
        let (bra, bra_text) = states[0].clone();
        let (ket, ket_text) = states.last().cloned().expect("one or two operands");
        let block = match kind {
            _ if bra.parts.is_empty() && ket.parts.is_empty() => None,
            RequestKind::Roots => None,
            _ => Some(Arc::new(Block::free(
                &self.program,
                kind,
                &text,
                &span,
                (&bra, &bra_text),
                (&ket, &ket_text),
            ))),
        };
        let (bra, ket, bra_text, ket_text) = if kind == RequestKind::Roots {
            // the whole space: every operand's symbols and electrons
            let all = states.iter().skip(1).fold(bra.at_unit(), |acc, (s, _)| acc.joined(&s.at_unit()));
            let labels = states.iter().map(|(_, t)| t.as_str()).collect::<Vec<_>>().join(", ");
            self.roots.push((
                self.program.requests.len(),
                states.iter().map(|(s, t)| (s.at_unit(), t.clone())).collect(),
            ));
            (all.clone(), all, labels.clone(), labels)
        } else {
            (bra.at_unit(), ket.at_unit(), bra_text, ket_text)
        };
        self.program.requests.push(Request { kind, text, bra, ket, bra_text, ket_text, span, block });
        Ok(())
    }

    /// Expands the members of `csfs` families that `pair` names and nothing named before.
    fn expand_used(&mut self, pair: &Pair<Rule>) {
        let named: Vec<u32> = pair
            .clone()
            .into_inner()
            .flatten()
            .filter(|p| p.as_rule() == Rule::reference)
            .filter_map(|p| match self.symbols.get(p.as_str()) {
                Some(&(Symbol::State(k), _)) => Some(k),
                _ => None,
            })
            .collect();
        for k in named {
            self.expand(k);
        }
    }

    fn expand(&mut self, k: u32) {
        if self.deferred.remove(&k) {
            let state = &self.program.states[k as usize].state;
            let coupling = state.coupling.clone().expect("a deferred state keeps its coupling");
            let terms = expanded(&self.program, &coupling);
            self.program.states[k as usize].state.terms = Arc::new(terms);
        }
    }

    /// `csf X = | ... | S=.. M=.. path=..` and `csfs X = | ... | S=.. M=..`: the written
    /// determinant checked like a `det`, its open shells coupled along one path or every path;
    /// `csf X = ref[i j -> a b] ...`: the open shells of the excitation coupled the same way.
    fn csf(&mut self, span: Span, mut inner: Pairs<Rule>) -> Result<()> {
        let family = inner.next().expect("grammar: csf keyword").as_str() == "csfs";
        let name = inner.next().expect("grammar: csf name");
        let operand = inner.next().expect("grammar: csf determinant");
        let operand_span = self.span(&operand);
        let options = self.csf_options(inner, family)?;
        let (written, excitation, det_label) = self.csf_operand(operand)?;
        let (reference, orbs, shells) = match excitation {
            None => {
                // open shells carry no spin mark, so the determinant as written has them all
                // alpha; doubly occupied orbitals keep their two spins
                let open = self.open_shells(&written, &operand_span)?;
                let orbs: Vec<Orb> = open
                    .iter()
                    .map(|&k| match written.occupants[k] {
                        Occupant::Electron(so) => so.orb,
                        Occupant::Closed(_) => unreachable!("open shells are electrons"),
                    })
                    .collect();
                (written, orbs, Shells::Written)
            }
            Some(excitation) => {
                let operand_text = without_comment(operand_span.text());
                let labels = (det_label.as_str(), operand_text.as_str());
                let shells =
                    excited_shells(&self.program, &written, &excitation, labels, self.limits.distinct)
                        .map_err(|kind| Error::at(kind, &operand_span))?;
                (shells.reference, shells.open, Shells::Excited)
            }
        };
        let n = orbs.len();
        let (s, m) = total_spin(&options, n, &span)?;
        let determinants = determinant_count(n, m);
        let expandable =
            determinants <= BigUint::from(self.limits.max_determinants) && n <= MAX_EXPANDED_SHELLS;
        if family && !expandable {
            return Err(self.family_too_large(n, &determinants, &span));
        }
        let chosen = self.coupling_paths(options.path, family, n, s, &span)?;
        // the determinant must exist, as a `det` must: Pauli, closed spaces, size
        let single = State::new(vec![(Exact::one(), reference.clone())]);
        check_definition(&self.program, &single, name.as_str(), &operand_span)?;
        let name_span = self.span(&name);
        if family {
            self.declare(&name, Symbol::Family(chosen.len() as u32))?;
        }
        for (k, path) in chosen.into_iter().enumerate() {
            let coupling = Arc::new(Coupling {
                path,
                m,
                open: orbs.clone(),
                reference: reference.clone(),
                shells,
                determinants: determinants.clone(),
            });
            // one function too large to expand keeps only its coupling: its energy and spin
            // come from spin algebra; a family's members wait until something uses them
            let terms = if expandable && !family { expanded(&self.program, &coupling) } else { vec![] };
            let state = State { terms: Arc::new(terms), coupling: Some(coupling) };
            let id = self.program.states.len() as u32;
            let label =
                if family { format!("{}.{}", name.as_str(), k + 1) } else { name.as_str().to_string() };
            if family {
                self.symbols.insert(label.clone(), (Symbol::State(id), name_span.clone()));
                self.deferred.insert(id);
            } else {
                self.declare(&name, Symbol::State(id))?;
            }
            self.program.states.push(NamedState {
                name: label,
                state,
                free: None,
                is_determinant: false,
                span: name_span.clone(),
            });
        }
        Ok(())
    }

    /// The operand of a csf: an inline determinant or a `det` written without a coefficient,
    /// and the one excitation that follows it (its own, or written after it), if any; with the
    /// determinant's label for messages.
    fn csf_operand(&self, pair: Pair<Rule>) -> Result<(DetSpec, Option<Excitation>, String)> {
        let operand = without_comment(pair.as_str());
        let span = self.span(&pair);
        let mut inner = pair.into_inner();
        let head = inner.next().expect("grammar: csf determinant");
        let label = without_comment(head.as_str());
        let mut det = match head.as_rule() {
            Rule::inline_det => self.inline_det(head)?.at_unit().terms[0].1.clone(),
            _ => match self.lookup(&head)? {
                Symbol::State(k) if self.program.states[k as usize].is_determinant => {
                    let (coefficient, det) = &self.program.states[k as usize].state.terms[0];
                    if *coefficient != Exact::one() {
                        return Err(Error::at(
                            ErrorKind::WrongKind {
                                name: label,
                                is: format!("a determinant with the coefficient {coefficient}"),
                                wanted: "a determinant written without a coefficient".into(),
                            },
                            &self.span(&head),
                        ));
                    }
                    det.clone()
                }
                other => return Err(self.wrong_kind(&head, other, "a determinant")),
            },
        };
        for excitation in inner {
            det.excitations.push(self.excitation(excitation)?);
        }
        let excitation = det.excitations.pop();
        if !det.excitations.is_empty() {
            return Err(Error::at(
                ErrorKind::ExcitationCount { operand, count: det.excitations.len() + 1 },
                &span,
            ));
        }
        Ok((det, excitation, label))
    }

    /// `S=`, `M=` and `path=` as written, each at most once; `csfs` takes no `path=`.
    fn csf_options(&self, options: Pairs<Rule>, family: bool) -> Result<CsfOptions> {
        let mut out = CsfOptions::default();
        let mut seen: Vec<(String, Span)> = vec![];
        for option in options {
            let option_span = self.span(&option);
            let mut parts = option.into_inner();
            let key = parts.next().expect("grammar: option name").as_str().to_string();
            if let Some((_, first)) = seen.iter().find(|(k, _)| *k == key) {
                return Err(Error::at(
                    ErrorKind::RepeatedOption { option: key, first: first.clone() },
                    &option_span,
                ));
            }
            seen.push((key.clone(), option_span.clone()));
            let values = parts
                .map(|v| {
                    twice(v.as_str()).ok_or_else(|| {
                        coupling_error(
                            &self.span(&v),
                            format!("`{}` is not a whole or half-integer spin", v.as_str()),
                        )
                    })
                })
                .collect::<Result<Vec<Twice>>>()?;
            let single = || {
                if values.len() == 1 {
                    Ok(values[0])
                } else {
                    Err(coupling_error(&option_span, format!("`{key}` takes one value")))
                }
            };
            match key.as_str() {
                "S" => out.s = Some(single()?),
                "M" => out.m = Some(single()?),
                _ if family => {
                    return Err(coupling_error(
                        &option_span,
                        "`csfs` makes every path itself: leave out `path=`".into(),
                    ));
                }
                _ => out.path = Some((values, option_span)),
            }
        }
        Ok(out)
    }

    /// The positions of the open shells of a csf's determinant, which must carry no spin mark.
    fn open_shells(&self, written: &DetSpec, det_span: &Span) -> Result<Vec<usize>> {
        let open = written.open_shells();
        for &k in &open {
            if let Occupant::Electron(so) = &written.occupants[k]
                && so.spin == Spin::Beta
            {
                return Err(coupling_error(
                    det_span,
                    format!(
                        "`{}` carries a spin mark; in a csf the coupling sets the spins: write `{}`",
                        self.program.spin_orbital_name(*so),
                        self.program.orb_name(so.orb)
                    ),
                ));
            }
        }
        Ok(open)
    }

    /// The path given, the only path, or for `csfs` every path, counted before any is listed.
    fn coupling_paths(
        &self,
        path: Option<(Vec<Twice>, Span)>,
        family: bool,
        n: usize,
        s: Twice,
        span: &Span,
    ) -> Result<Vec<Vec<Twice>>> {
        if let Some((p, at)) = path {
            return match path_problem(&p, n, s) {
                Some(why) => Err(coupling_error(&at, why)),
                None => Ok(vec![p]),
            };
        }
        let count = path_count(n, s);
        if !family && count != BigUint::one() {
            return Err(coupling_error(
                span,
                format!(
                    "{n} open shells couple to S = {} in {count} ways: give `path=` or use `csfs`",
                    half(s)
                ),
            ));
        }
        if count > BigUint::from(self.limits.max_paths) {
            return Err(Error::at(
                ErrorKind::TooLarge {
                    what: format!("{n} open shells coupled to S = {} make", half(s)),
                    count: count.to_string(),
                    limit: Box::new(Limit {
                        value: self.limits.max_paths as u128,
                        unit: "coupled states",
                        change: Change::Option { option: "--max-paths", or: None },
                    }),
                },
                span,
            ));
        }
        Ok(paths(n, s))
    }

    /// Why the members of a family cannot be expanded: too many determinants each, or too many
    /// open shells for exact coefficients.
    fn family_too_large(&self, n: usize, determinants: &BigUint, span: &Span) -> Error {
        let kind = if n > MAX_EXPANDED_SHELLS {
            ErrorKind::TooLarge {
                what: "each coupled state of this family has".into(),
                count: n.to_string(),
                limit: Box::new(Limit {
                    value: MAX_EXPANDED_SHELLS as u128,
                    unit: "open shells",
                    change: Change::Fixed(
                        "past it the exact coefficients' square roots outgrow 64-bit integers; a single `csf` with `path=` is kept unexpanded, and its energy and spin come from spin algebra".into(),
                    ),
                }),
            }
        } else {
            ErrorKind::TooLarge {
                what: "each coupled state of this family spans".into(),
                count: determinants.to_string(),
                limit: Box::new(Limit {
                    value: self.limits.max_determinants as u128,
                    unit: "determinants",
                    change: Change::Option { option: "--max-determinants", or: None },
                }),
            }
        };
        Error::at(kind, span)
    }

    fn value(&self, pair: Pair<Rule>) -> Result<Value> {
        match pair.as_rule() {
            Rule::sum => self.sum(pair),
            Rule::product => self.product(pair),
            Rule::unit | Rule::operand => self.value(pair.into_inner().next().expect("grammar: unit")),
            Rule::number => bounded(Value::Number(decimal(pair.as_str())), &self.span(&pair)),
            Rule::sqrt_call => self.square_root(pair),
            Rule::group => {
                let span = self.span(&pair);
                let mut inner = pair.into_inner();
                let value = self.value(inner.next().expect("grammar: group body"))?;
                self.excite(value, inner, &span)
            }
            Rule::state_atom => self.atom(pair),
            other => unreachable!("grammar: unexpected expression {other:?}"),
        }
    }

    /// `a ± b ± ...`, with an optional leading sign.
    fn sum(&self, pair: Pair<Rule>) -> Result<Value> {
        let span = self.span(&pair);
        let mut inner = pair.into_inner().peekable();
        let negate = inner.peek().is_some_and(|p| p.as_rule() == Rule::sign && p.as_str() == "-");
        if inner.peek().is_some_and(|p| p.as_rule() == Rule::sign) {
            inner.next();
        }
        let first = inner.next().expect("grammar: sum has a product");
        let mut total = self.value(first)?;
        if negate {
            total = negated(total);
        }
        while let Some(op) = inner.next() {
            let term = inner.next().expect("grammar: operator has a right side");
            let term_span = self.span(&term);
            let mut right = self.value(term)?;
            if op.as_str() == "-" {
                right = negated(right);
            }
            total = bounded(self.added(total, right, &span, &term_span)?, &term_span)?;
        }
        Ok(total)
    }

    /// `a b`, `a * b`, `a / b`, ...
    fn product(&self, pair: Pair<Rule>) -> Result<Value> {
        let mut inner = pair.into_inner();
        let mut total = self.value(inner.next().expect("grammar: product has a unit"))?;
        let mut divide = false;
        for piece in inner {
            if piece.as_rule() == Rule::mul_op {
                divide = piece.as_str() == "/";
                continue;
            }
            let piece_span = self.span(&piece);
            let right = self.value(piece)?;
            total = bounded(self.multiplied(total, right, divide, &piece_span)?, &piece_span)?;
            divide = false;
        }
        Ok(total)
    }

    /// `sqrt(x)` of a non-negative rational x.
    fn square_root(&self, pair: Pair<Rule>) -> Result<Value> {
        let argument = pair.into_inner().nth(1).expect("grammar: sqrt argument");
        let argument_span = self.span(&argument);
        let bad = |kind: ErrorKind| Error::at(kind, &argument_span);
        let why = |why: &str| bad(ErrorKind::BadCoefficient { why: why.into() });
        match self.value(argument)? {
            Value::Number(x) => {
                let q = x.as_rational().ok_or_else(|| why("the square root of an irrational number"))?;
                if q < BigRational::from_integer(0.into()) {
                    return Err(why("the square root of a negative number"));
                }
                Exact::sqrt_of_rational(&q).map(Value::Number).ok_or_else(|| {
                    bad(ErrorKind::RootTooLarge { product: (q.numer() * q.denom()).to_string() })
                })
            }
            Value::State(_) => Err(why("the square root of a state")),
            Value::Free(_, c) => Err(bad(ErrorKind::FreeUnderRoot { name: self.coefficient_name(c) })),
        }
    }

    /// `left + right` (right already negated for `-`): states add, numbers add when the sum
    /// stays one exact coefficient; a free coefficient must multiply a state.
    fn added(&self, left: Value, right: Value, span: &Span, right_span: &Span) -> Result<Value> {
        match (left, right) {
            (Value::State(a), Value::State(b)) => Ok(Value::State(a.joined(&b))),
            (Value::Number(a), Value::Number(b)) => {
                let total = &a + &b;
                if total.as_monomial().is_none() {
                    return Err(Error::at(
                        ErrorKind::BadCoefficient {
                            why: format!("{total} is a sum of different square roots"),
                        },
                        span,
                    ));
                }
                Ok(Value::Number(total))
            }
            (Value::Free(_, c), _) => {
                Err(Error::at(ErrorKind::FreeAlone { name: self.coefficient_name(c) }, span))
            }
            (_, Value::Free(_, c)) => {
                Err(Error::at(ErrorKind::FreeAlone { name: self.coefficient_name(c) }, right_span))
            }
            _ => Err(Error::at(ErrorKind::NumberAlone, right_span)),
        }
    }

    /// `left * right` or `left / right`. A state stays linear in its free coefficients: a free
    /// coefficient multiplies a fixed state, never another free coefficient, and never divides.
    fn multiplied(&self, left: Value, right: Value, divide: bool, right_span: &Span) -> Result<Value> {
        let divisor = |x: &Exact| -> Result<Exact> {
            if x.is_zero() {
                return Err(Error::at(ErrorKind::DivisionByZero, right_span));
            }
            Ok(x.inverse().expect("non-zero numbers have inverses"))
        };
        let at = |kind: ErrorKind| Err(Error::at(kind, right_span));
        let name = |c: u32| self.coefficient_name(c);
        // the first free coefficient of a state, if it has one
        let free_of = |s: &Linear| s.parts.first().map(|&(c, _)| c);
        match (left, right) {
            (Value::Number(a), Value::Number(b)) => {
                Ok(Value::Number(if divide { &a * &divisor(&b)? } else { &a * &b }))
            }
            (Value::Free(a, c), Value::Number(b)) => {
                Ok(Value::Free(if divide { &a * &divisor(&b)? } else { &a * &b }, c))
            }
            (_, Value::Free(_, c)) if divide => at(ErrorKind::FreeDivisor { name: name(c) }),
            (Value::Number(a), Value::Free(b, c)) => Ok(Value::Free(&a * &b, c)),
            (Value::Free(_, a), Value::Free(_, b)) => {
                at(ErrorKind::FreeProduct { first: name(a), second: name(b) })
            }
            (Value::State(s), Value::Number(b)) => {
                Ok(Value::State(s.scaled(&if divide { divisor(&b)? } else { b })))
            }
            (Value::Number(_) | Value::Free(..), Value::State(_)) if divide => at(ErrorKind::DivisionByState),
            (Value::Number(a), Value::State(s)) => Ok(Value::State(s.scaled(&a))),
            (Value::Free(a, c), Value::State(s)) | (Value::State(s), Value::Free(a, c)) => match s.as_fixed()
            {
                Some(fixed) => Ok(Value::State(Linear::part(c, fixed.clone().scaled(&a)))),
                None => at(ErrorKind::FreeProduct {
                    first: name(c),
                    second: name(free_of(&s).expect("a state that is not fixed has a free part")),
                }),
            },
            (Value::State(_), Value::State(_)) => at(ErrorKind::StateTimesState),
        }
    }

    /// A determinant `| ... |` or a named state, with its excitations.
    fn atom(&self, pair: Pair<Rule>) -> Result<Value> {
        let span = self.span(&pair);
        let mut inner = pair.into_inner();
        let head = inner.next().expect("grammar: atom head");
        let state = match head.as_rule() {
            Rule::inline_det => self.inline_det(head)?,
            _ => match self.lookup(&head)? {
                Symbol::State(k) => {
                    let named = &self.program.states[k as usize];
                    named.free.clone().unwrap_or_else(|| Linear::fixed(named.state.clone()))
                }
                Symbol::Coefficient(c) => {
                    if let Some(excitation) = inner.next() {
                        return Err(Error::at(
                            ErrorKind::FreeAlone { name: self.coefficient_name(c) },
                            &self.span(&excitation),
                        ));
                    }
                    return Ok(Value::Free(Exact::one(), c));
                }
                Symbol::Family(count) => {
                    return Err(Error::at(
                        ErrorKind::WrongKind {
                            name: head.as_str().into(),
                            is: format!("a family of {count} coupled states"),
                            wanted: format!("one of them, `{0}.1` to `{0}.{count}`,", head.as_str()),
                        },
                        &self.span(&head),
                    ));
                }
                other => return Err(self.wrong_kind(&head, other, "a determinant or state")),
            },
        };
        self.excite(Value::State(state), inner, &span)
    }

    fn excite<'a>(
        &self,
        value: Value,
        excitations: impl Iterator<Item = Pair<'a, Rule>>,
        span: &Span,
    ) -> Result<Value> {
        let mut value = value;
        for excitation in excitations {
            let excitation = self.excitation(excitation)?;
            value = match value {
                Value::State(s) => Value::State(s.excited(&excitation)),
                Value::Number(_) => return Err(Error::at(ErrorKind::NumberAlone, span)),
                Value::Free(_, c) => {
                    return Err(Error::at(ErrorKind::FreeAlone { name: self.coefficient_name(c) }, span));
                }
            };
        }
        Ok(value)
    }

    fn excitation(&self, pair: Pair<Rule>) -> Result<Excitation> {
        let span = self.span(&pair);
        let text = pair.as_str();
        let arrow = text.find("->").expect("grammar: excitation arrow") + pair.as_span().start();
        let (mut from, mut to) = (vec![], vec![]);
        for so in pair.into_inner() {
            let target = if so.as_span().start() < arrow { &mut from } else { &mut to };
            target.push(self.spin_orbital(so)?);
        }
        if from.len() != to.len() {
            return Err(Error::at(ErrorKind::ExcitationLengths { from: from.len(), to: to.len() }, &span));
        }
        for list in [&from, &to] {
            for (k, a) in list.iter().enumerate() {
                if list[..k].contains(a) {
                    return Err(Error::at(
                        ErrorKind::Pauli { spin_orbital: self.program.spin_orbital_name(*a) },
                        &span,
                    ));
                }
            }
        }
        Ok(Excitation { from, to })
    }

    fn orbital(&self, name: &Pair<Rule>) -> Result<std::result::Result<Orb, u32>> {
        match self.lookup(name)? {
            Symbol::Orbital(k) => Ok(Ok(Orb::Named(k))),
            Symbol::Index(k) => Ok(Ok(Orb::Index(k))),
            Symbol::Space(k) => Ok(Err(k)),
            other => Err(self.wrong_kind(name, other, "an orbital or generic index")),
        }
    }

    fn spin_orbital(&self, pair: Pair<Rule>) -> Result<SpinOrbital> {
        let span = self.span(&pair);
        let mut inner = pair.into_inner();
        let name = inner.next().expect("grammar: spin orbital name");
        let spin = if inner.next().is_some() { Spin::Beta } else { Spin::Alpha };
        match self.orbital(&name)? {
            Ok(orb) => Ok(SpinOrbital::new(orb, spin)),
            Err(space) => Err(Error::at(
                ErrorKind::SpaceInExcitation { space: self.program.spaces[space as usize].name.clone() },
                &span,
            )),
        }
    }

    fn inline_det(&self, pair: Pair<Rule>) -> Result<Linear> {
        let mut occupants = vec![];
        for occupant in pair.into_inner() {
            let span = self.span(&occupant);
            let mut inner = occupant.into_inner();
            let name = inner.next().expect("grammar: occupant name");
            let suffix = inner.next().map(|p| p.as_rule());
            let added: Vec<Occupant> = match (self.orbital(&name)?, suffix) {
                (Err(space), Some(Rule::doubly)) => vec![Occupant::Closed(space)],
                (Err(space), _) => {
                    return Err(Error::at(
                        ErrorKind::SpaceNotDoubled {
                            space: self.program.spaces[space as usize].name.clone(),
                        },
                        &span,
                    ));
                }
                (Ok(orb), Some(Rule::doubly)) => vec![
                    Occupant::Electron(SpinOrbital::new(orb, Spin::Alpha)),
                    Occupant::Electron(SpinOrbital::new(orb, Spin::Beta)),
                ],
                (Ok(orb), Some(_)) => vec![Occupant::Electron(SpinOrbital::new(orb, Spin::Beta))],
                (Ok(orb), None) => vec![Occupant::Electron(SpinOrbital::new(orb, Spin::Alpha))],
            };
            for occupant in added {
                if occupants.contains(&occupant) {
                    let what = match occupant {
                        Occupant::Closed(s) => {
                            format!("{}^2", self.program.spaces[s as usize].name)
                        }
                        Occupant::Electron(so) => self.program.spin_orbital_name(so),
                    };
                    return Err(Error::at(ErrorKind::Pauli { spin_orbital: what }, &span));
                }
                occupants.push(occupant);
            }
        }
        Ok(Linear::fixed(State::new(vec![(Exact::one(), DetSpec { occupants, excitations: vec![] })])))
    }
}

/// Source text as a label: a trailing comment cut off, blanks trimmed.
fn without_comment(text: &str) -> String {
    text.split('#').next().unwrap_or("").trim().to_string()
}

fn coupling_error(span: &Span, why: String) -> Error {
    Error::at(ErrorKind::Coupling { why }, span)
}

/// S and M of a csf with n open shells, checked; M is S unless given.
fn total_spin(options: &CsfOptions, n: usize, span: &Span) -> Result<(Twice, Twice)> {
    let s =
        options.s.ok_or_else(|| coupling_error(span, "a csf needs its total spin: add `S=...`".into()))?;
    let m = options.m.unwrap_or(s);
    if s < 0 || s > n as i64 || (s - n as i64) % 2 != 0 {
        return Err(coupling_error(span, format!("{n} open shell(s) cannot couple to S = {}", half(s))));
    }
    if m.abs() > s || (m - s) % 2 != 0 {
        return Err(coupling_error(
            span,
            format!("M = {} is not one of -S, -S+1, ..., S for S = {}", half(m), half(s)),
        ));
    }
    Ok((s, m))
}

/// "1/2" → 1, "3" → 6: a spin value as twice itself, if it is a whole or half integer.
fn twice(text: &str) -> Option<Twice> {
    match text.split_once('/') {
        Some((num, "2")) => num.parse().ok(),
        Some(_) => None,
        None => text.parse::<i64>().ok().map(|v| 2 * v),
    }
}

fn decimal(text: &str) -> Exact {
    let (whole, fraction) = text.split_once('.').unwrap_or((text, ""));
    let digits: BigInt = format!("{whole}{fraction}").parse().expect("grammar: digits");
    let scale = BigInt::from(10).pow(fraction.len() as u32);
    Exact::rational(BigRational::new(digits, scale))
}

/// The most bits a numerator or denominator of a coefficient may have.
pub const MAX_COEFFICIENT_BITS: u64 = 2048;

/// The value, if its coefficients stay within `MAX_COEFFICIENT_BITS`: exact arithmetic on
/// numbers past it grows without bound (a product of many numbers, a sum of many fractions).
fn bounded(value: Value, span: &Span) -> Result<Value> {
    let bits = match &value {
        Value::Number(x) | Value::Free(x, _) => x.bits(),
        Value::State(s) => {
            s.functions().flat_map(|(_, f)| f.terms.iter()).map(|(c, _)| c.bits()).max().unwrap_or(0)
        }
    };
    if bits <= MAX_COEFFICIENT_BITS {
        return Ok(value);
    }
    Err(Error::at(
        ErrorKind::TooLarge {
            what: "a numerator or denominator of the coefficient here has".into(),
            count: bits.to_string(),
            limit: Box::new(Limit {
                value: MAX_COEFFICIENT_BITS as u128,
                unit: "bits",
                change: Change::Fixed(format!(
                    "exact coefficients are kept to about {} decimal digits so that derivations stay fast; write the coefficient in lowest terms, or scale the state (its energy does not change)",
                    MAX_COEFFICIENT_BITS * 3 / 10
                )),
            }),
        },
        span,
    ))
}

fn negated(value: Value) -> Value {
    match value {
        Value::Number(x) => Value::Number(-x),
        Value::Free(x, c) => Value::Free(-x, c),
        Value::State(s) => Value::State(s.scaled(&Exact::integer(-1))),
    }
}

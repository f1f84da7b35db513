//! Python source for derived expressions: a NumPy module with one vectorized function per
//! request and a `test_` function that checks it against brute-force values.
//!
//! Sums over spaces never become Python loops. A space arrives as a slice where its members
//! increase in even steps and as an index array otherwise (`_members`); a double sum takes
//! every combination of its indices' members (`_outer`: the slices themselves, or arrays from
//! `np.ix_`). An integral whose summation index repeats is read through an einsum view that
//! takes the diagonal without copying (`_J = np.einsum("iijj->ij", eri)`), so Σ_kl J_kl is
//! `_J[k, l].sum()`: with slices a strided view of |core|² elements, with arrays a gather of
//! exactly those elements, never a sub-block of eri. Deltas become `if` statements.

use super::text::request_meaning;
use super::{
    DensityTestVector, Group, Identifiers, Namer, TEST_SEED, TestVector, density_test_vectors, groups,
    test_vectors,
};
use crate::check::verify::Checked;
use crate::engine::derive::Derivation;
use crate::engine::exact::ExactDisplay;
use crate::engine::expression::{Expr, Factor, Term};
use crate::error::{Error, ErrorKind, Result};
use crate::language::orbital::{Orb, SpaceId, SpaceSet};
use crate::language::program::{Program, Request, RequestKind};
use crate::numbers::density::Densities;
use crate::numbers::evaluate::evaluate;
use crate::numbers::integrals::{HashedIntegrals, Integrals};
use std::collections::{BTreeMap, BTreeSet};
use std::fmt::Write;

/// Python's keywords, soft keywords and the lower-case builtins: no identifier made from the
/// input may shadow one of them, so generated bodies can use any builtin freely.
#[rustfmt::skip]
const KEYWORDS: &[&str] = &[
    "and", "as", "assert", "async", "await", "break", "class", "continue", "def", "del", "elif", "else",
    "except", "finally", "for", "from", "global", "if", "import", "in", "is", "lambda", "nonlocal",
    "not", "or", "pass", "raise", "return", "try", "while", "with", "yield", "false", "none", "true",
    "match", "case", "type", "abs", "aiter", "all", "anext", "any", "ascii", "bin", "bool",
    "breakpoint", "bytearray", "bytes", "callable", "chr", "classmethod", "compile", "complex",
    "copyright", "credits", "delattr", "dict", "dir", "divmod", "enumerate", "eval", "exec", "exit",
    "filter", "float", "format", "frozenset", "getattr", "globals", "hasattr", "hash", "help", "hex",
    "id", "input", "int", "isinstance", "issubclass", "iter", "len", "license", "list", "locals", "map",
    "max", "memoryview", "min", "next", "object", "oct", "open", "ord", "pow", "print", "property",
    "quit", "range", "repr", "reversed", "round", "set", "setattr", "slice", "sorted", "staticmethod",
    "str", "sum", "super", "tuple", "vars", "zip",
];

/// Names every generated function body uses besides its own parameters. Helpers and locals of
/// the module all start with `_`, which `Identifiers` never produces.
const RESERVED: &[&str] =
    &["np", "h", "eri", "n_orbitals", "density_energy", "generalized_fock_and_gradient"];

/// Lines longer than this are broken, one term per line.
const LINE_LIMIT: usize = 96;

/// Text from the input made safe inside a docstring: backslashes and quotes escaped, control
/// characters (line breaks included) replaced by spaces.
fn docstring_safe(text: &str) -> String {
    let mut out = String::new();
    for c in text.chars() {
        match c {
            '\\' => out.push_str("\\\\"),
            '"' => out.push_str("\\\""),
            c if c.is_control() || matches!(c, '\u{2028}' | '\u{2029}') => out.push(' '),
            c => out.push(c),
        }
    }
    out
}

/// Text from the input made safe inside a `#` comment: no line breaks of any kind.
fn comment_safe(text: &str) -> String {
    text.chars()
        .map(|c| if c.is_control() || matches!(c, '\u{2028}' | '\u{2029}') { ' ' } else { c })
        .collect()
}

/// A float literal Python reads back to the same f64 (Rust's shortest round-trip form).
fn float_literal(x: f64) -> String {
    let text = format!("{x:?}");
    match text.as_str() {
        "NaN" => "float(\"nan\")".into(),
        "inf" => "float(\"inf\")".into(),
        "-inf" => "-float(\"inf\")".into(),
        _ => text,
    }
}

/// Python identifiers for every orbital, generic index and space of the input, shared by all
/// functions of the module so that a name means the same parameter everywhere.
struct Symbols {
    orbitals: Vec<String>,
    indices: Vec<String>,
    spaces: Vec<String>,
    coefficients: Vec<String>,
}

impl Symbols {
    fn new(program: &Program) -> Symbols {
        let mut ids = Identifiers::new(KEYWORDS, RESERVED);
        Symbols {
            orbitals: program.orbitals.iter().map(|o| ids.fresh(&o.name)).collect(),
            indices: program.indices.iter().map(|i| ids.fresh(&i.name)).collect(),
            spaces: program.spaces.iter().map(|s| ids.fresh(&s.name)).collect(),
            coefficients: program.coefficients.iter().map(|c| ids.fresh(&c.name)).collect(),
        }
    }
}

/// What a function takes besides h and eri, in order: named orbitals, generic indices, spaces.
#[derive(Default)]
struct Parameters {
    orbs: BTreeSet<Orb>,
    spaces: BTreeSet<SpaceId>,
}

impl Parameters {
    fn of(expressions: &[&Expr]) -> Parameters {
        let mut out = Parameters::default();
        for expr in expressions {
            out.orbs.extend(expr.free_orbs());
            for t in &expr.terms {
                out.spaces.extend(t.sums.iter().copied());
                if let Factor::Fock(_, _, c) | Factor::RefEnergy(c) = t.factor {
                    out.spaces.extend(c.members());
                }
            }
        }
        out
    }

    fn uses_integrals(expressions: &[&Expr]) -> bool {
        expressions.iter().flat_map(|e| &e.terms).any(|t| t.factor != Factor::One)
    }
}

/// Which helpers the module needs.
#[derive(Default)]
struct Needs {
    members: bool,
    outer: bool,
    count: bool,
    fock: bool,
    reference: bool,
    /// The densities' energy, generalized Fock matrix and gradient, and their test helpers.
    densities: bool,
}

/// Writes one function body: the names of its symbols and summation indices, and its lines.
struct BodyWriter<'a> {
    symbols: &'a Symbols,
    namer: Namer<'a>,
    /// Local names of summation indices, by the name the formula gives them.
    locals: BTreeMap<String, String>,
    ids: Identifiers,
    /// The last assignment of summation-index locals still in force, to skip repeating it.
    bound: Option<String>,
    /// The named views the body reads.
    views: BTreeSet<View>,
    needs: &'a mut Needs,
    lines: Vec<String>,
}

/// One term as Python: its sign, and its magnitude times its summed integral, without sign.
struct TermCode {
    negative: bool,
    text: String,
    irrational: Option<String>,
}

/// `a + b - c` from signed items; a leading minus is written as a unary minus.
fn signed_sum(items: &[(bool, String)]) -> String {
    let mut out = String::new();
    for (k, (negative, text)) in items.iter().enumerate() {
        match (k, negative) {
            (0, true) => out.push('-'),
            (0, false) => {}
            (_, true) => out.push_str(" - "),
            (_, false) => out.push_str(" + "),
        }
        out.push_str(text);
    }
    out
}

/// Views of the integrals that a function names once: the diagonal of h, J_pq = (pp|qq) and
/// K_pq = (pq|pq) = (pq|qp), all without copying.
#[derive(Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
enum View {
    HDiagonal,
    Coulomb,
    Exchange,
}

impl View {
    fn name(self) -> &'static str {
        match self {
            View::HDiagonal => "_h_diagonal",
            View::Coulomb => "_J",
            View::Exchange => "_K",
        }
    }

    fn definition(self) -> &'static str {
        match self {
            View::HDiagonal => "_h_diagonal = np.einsum(\"ii->i\", h)  # h_pp",
            View::Coulomb => "_J = np.einsum(\"iijj->ij\", eri)  # J_pq = (pp|qq)",
            View::Exchange => "_K = np.einsum(\"ijij->ij\", eri)  # K_pq = (pq|pq) = (pq|qp)",
        }
    }
}

/// Subscript letters for einsum.
const LETTERS: &[u8] = b"ijklmnopqrstuvwxyzabcdefgh";

fn unsupported(why: &str) -> Error {
    Error::new(ErrorKind::Usage { why: format!("the Python emitter cannot write {why}") })
}

impl<'a> BodyWriter<'a> {
    fn orb(&self, orb: Orb, summed: &[String]) -> String {
        match orb {
            Orb::Named(k) => self.symbols.orbitals[k as usize].clone(),
            Orb::Index(k) => self.symbols.indices[k as usize].clone(),
            Orb::Summed(d) => self.locals[&summed[d as usize]].clone(),
        }
    }

    fn closed(&self, c: SpaceSet) -> String {
        let names: Vec<&str> =
            c.members().iter().map(|&s| self.symbols.spaces[s as usize].as_str()).collect();
        match names.len() {
            1 => format!("({},)", names[0]),
            _ => format!("({})", names.join(", ")),
        }
    }

    /// The integral `array` at `slots`, one element per combination of the summation indices.
    /// Plain indexing where it picks the right elements (`eri[a, k, b, l]`); where a summation
    /// index repeats, or summation indices must be put in order so that every term of a sum has
    /// the same shape, first an einsum view that takes the diagonal or reorders the axes without
    /// copying: Σ_k (ak|kb) reads `np.einsum("ijjk->ijk", eri)[a, k, b]`.
    fn gather(&mut self, array: &str, slots: &[Orb], summed: &[String], rank: usize) -> String {
        let mut distinct: Vec<Orb> = vec![];
        for &o in slots {
            if !distinct.contains(&o) {
                distinct.push(o);
            }
        }
        let is_summed = |o: &Orb| matches!(o, Orb::Summed(_));
        let repeats =
            distinct.iter().filter(|o| is_summed(o)).any(|o| slots.iter().filter(|s| *s == o).count() > 1);
        // the summation indices in their own order, in the places they first appear
        let mut order = distinct.clone();
        let mut sorted: Vec<Orb> = distinct.iter().copied().filter(is_summed).collect();
        sorted.sort();
        let places: Vec<usize> = (0..order.len()).filter(|&p| is_summed(&order[p])).collect();
        for (p, o) in places.into_iter().zip(sorted) {
            order[p] = o;
        }
        let names = |orbs: &[Orb]| orbs.iter().map(|&o| self.orb(o, summed)).collect::<Vec<_>>().join(", ");
        if !repeats && (rank < 2 || order == distinct) {
            return format!("{array}[{}]", names(slots));
        }
        let letter = |o: &Orb| LETTERS[distinct.iter().position(|d| d == o).expect("a slot")] as char;
        let input: String = slots.iter().map(letter).collect();
        let output: String = order.iter().map(letter).collect();
        // the most common views get names, defined once at the top of the function
        let view = match (array, input.as_str(), output.as_str()) {
            ("h", "ii", "i") => Some(View::HDiagonal),
            ("eri", "iijj", "ij") => Some(View::Coulomb),
            ("eri", "ijij" | "ijji", "ij") => Some(View::Exchange),
            _ => None,
        };
        match view {
            Some(v) => {
                let text = format!("{}[{}]", v.name(), names(&order));
                self.views.insert(v);
                text
            }
            None => format!("np.einsum(\"{input}->{output}\", {array})[{}]", names(&order)),
        }
    }

    fn term(&mut self, term: &Term, sums: &[SpaceId], summed: &[String]) -> Result<TermCode> {
        if term.deltas.iter().any(|&(a, b)| matches!(a, Orb::Summed(_)) || matches!(b, Orb::Summed(_))) {
            return Err(unsupported("a delta on a summation index"));
        }
        let rank = sums.len();
        let gather = match term.factor {
            Factor::One => None,
            Factor::H(p, q) => Some(self.gather("h", &[p, q], summed, rank)),
            Factor::Eri(p, q, r, s) => Some(self.gather("eri", &[p, q, r, s], summed, rank)),
            Factor::Gamma1(..) | Factor::Gamma2(..) => {
                unreachable!("density functions are written by `density_body`, not read as numbers")
            }
            Factor::Fock(p, q, c) => {
                if matches!(p, Orb::Summed(_)) || matches!(q, Orb::Summed(_)) {
                    return Err(unsupported("f_pq with a summation index"));
                }
                self.needs.fock = true;
                Some(format!(
                    "_fock(h, eri, {}, {}, {})",
                    self.orb(p, summed),
                    self.orb(q, summed),
                    self.closed(c)
                ))
            }
            Factor::RefEnergy(c) => {
                self.needs.reference = true;
                self.needs.outer = true;
                Some(format!("_reference_energy(h, eri, {})", self.closed(c)))
            }
        };
        let uses: BTreeSet<u8> = term
            .factor
            .orbs()
            .into_iter()
            .filter_map(|x| if let Orb::Summed(d) = x { Some(d) } else { None })
            .collect();
        let value = term.coeff.to_f64_rounded();
        let magnitude = value.abs();
        let mut factors = vec![];
        if magnitude != 1.0 || (gather.is_none() && uses.len() == rank) {
            factors.push(float_literal(magnitude));
        }
        if let Some(g) = gather {
            factors.push(if uses.is_empty() { g } else { format!("{g}.sum()") });
        }
        // a sum over a space the integral does not depend on multiplies by the space's size
        for (d, &space) in sums.iter().enumerate() {
            if !uses.contains(&(d as u8)) {
                self.needs.count = true;
                factors.push(format!("_count({})", self.symbols.spaces[space as usize]));
            }
        }
        let irrational = term.coeff.as_rational().is_none().then(|| {
            format!(
                "{} = {}",
                float_literal(magnitude),
                ExactDisplay { value: &term.coeff.abs(), ascii: true }
            )
        });
        Ok(TermCode { negative: value < 0.0, text: factors.join(" * "), irrational })
    }

    /// `target += expression`, broken over lines when long.
    fn accumulate(&mut self, indent: &str, target: &str, items: &[(bool, String)]) {
        let (op, items): (&str, Vec<(bool, String)>) = if items.len() == 1 && items[0].0 {
            ("-=", vec![(false, items[0].1.clone())])
        } else {
            ("+=", items.to_vec())
        };
        let one_line = format!("{indent}{target} {op} {}", signed_sum(&items));
        if one_line.len() <= LINE_LIMIT || items.len() == 1 {
            self.lines.push(one_line);
            return;
        }
        self.lines.push(format!("{indent}{target} {op} ("));
        for (k, (negative, text)) in items.iter().enumerate() {
            let sign = match (k, negative) {
                (0, true) => "-",
                (0, false) => "",
                (_, true) => "- ",
                (_, false) => "+ ",
            };
            self.lines.push(format!("{indent}    {sign}{text}"));
        }
        self.lines.push(format!("{indent})"));
    }

    fn group(&mut self, group: &Group, indent: &str, target: &str) -> Result<()> {
        let summed = self.namer.summed_names(group.sums);
        for name in &summed {
            if !self.locals.contains_key(name) {
                let local = self.ids.fresh(name);
                self.locals.insert(name.clone(), local);
            }
        }
        // the summation indices: a space's members for one, every combination for several
        if !group.sums.is_empty() {
            let locals: Vec<&str> = summed.iter().map(|n| self.locals[n].as_str()).collect();
            let spaces: Vec<&str> =
                group.sums.iter().map(|&s| self.symbols.spaces[s as usize].as_str()).collect();
            let assignment = if spaces.len() == 1 {
                format!("{} = {}", locals[0], spaces[0])
            } else {
                self.needs.outer = true;
                format!("{} = _outer({})", locals.join(", "), spaces.join(", "))
            };
            if self.bound.as_ref() != Some(&assignment) {
                self.lines.push(format!("{indent}{assignment}"));
                self.bound = Some(assignment);
            }
        }
        let codes =
            group.terms.iter().map(|t| self.term(t, group.sums, &summed)).collect::<Result<Vec<_>>>()?;
        let irrational: BTreeSet<&String> = codes.iter().filter_map(|c| c.irrational.as_ref()).collect();
        if !irrational.is_empty() {
            let list: Vec<&str> = irrational.into_iter().map(String::as_str).collect();
            self.lines.push(format!("{indent}# {}", list.join(", ")));
        }
        let items: Vec<(bool, String)> = codes.into_iter().map(|c| (c.negative, c.text)).collect();
        self.accumulate(indent, target, &items);
        Ok(())
    }

    /// Statements adding the expression to `target`; groups with the same deltas share one `if`.
    fn expression(&mut self, expr: &Expr, target: &str) -> Result<()> {
        self.lines.push(format!("    {target} = 0.0"));
        let all = groups(expr);
        let mut k = 0;
        while k < all.len() {
            if all[k].deltas.iter().any(|&(a, b)| matches!(a, Orb::Summed(_)) || matches!(b, Orb::Summed(_)))
            {
                return Err(unsupported("a delta on a summation index"));
            }
            let mut end = k + 1;
            while end < all.len() && all[end].deltas == all[k].deltas {
                end += 1;
            }
            let conditional = !all[k].deltas.is_empty();
            let indent = if conditional {
                let condition: Vec<String> = all[k]
                    .deltas
                    .iter()
                    .map(|&(a, b)| format!("{} == {}", self.orb(a, &[]), self.orb(b, &[])))
                    .collect();
                self.lines.push(format!("    if {}:", condition.join(" and ")));
                // what an `if` block assigns is not known to hold after it
                self.bound = None;
                "        "
            } else {
                "    "
            };
            for group in &all[k..end] {
                self.group(group, indent, target)?;
            }
            if conditional {
                self.bound = None;
            }
            k = end;
        }
        Ok(())
    }
}

/// The function's name from its request: `energy_s`, `element_ab_ba`; requests whose operands
/// are written inline (determinants, excitations, combinations) are named by their number.
fn function_name(d: &Derivation, number: usize) -> String {
    let simple = |label: &str| label.chars().all(|c| c.is_ascii_alphanumeric() || c == '_' || c == '.');
    let operands = match d.kind {
        RequestKind::Energy
        | RequestKind::Spin
        | RequestKind::Roots
        | RequestKind::Density
        | RequestKind::Shells => vec![d.bra.as_str()],
        RequestKind::Element | RequestKind::Overlap | RequestKind::TransitionDensity => {
            vec![d.bra.as_str(), d.ket.as_str()]
        }
    };
    if operands.iter().all(|o| simple(o)) {
        format!("{} {}", d.kind.keyword(), operands.join(" "))
    } else {
        format!("{}_{number}", d.kind.keyword())
    }
}

/// What one request becomes: its functions (one; for a request on pairs of functions one per
/// pair's <f|H|g> and <f|g>, and for free coefficients the function of the coefficients that
/// assembles them), checked by one test function named after `name`.
struct Emitted {
    name: String,
    text: String,
    units: Vec<(Request, Checked, Function)>,
    assembled: Option<Assembled>,
}

/// The function of the free coefficients, with what its test needs.
struct Assembled {
    function: Function,
    coefficients: Vec<u32>,
    values: BTreeMap<u32, crate::engine::exact::Exact>,
    vectors: Vec<TestVector>,
}

/// The functions of one request (see `Emitted`).
fn emitted(
    program: &Program,
    symbols: &Symbols,
    (request, checked): (&Request, &Checked),
    names: &mut Identifiers,
    number: usize,
    needs: &mut Needs,
) -> Result<Emitted> {
    let d = &checked.0;
    let base = function_name(d, number);
    let Some(block) = &d.block else {
        let name = names.fresh(&base);
        let f = function(program, symbols, checked, name.clone(), needs)?;
        return Ok(Emitted {
            name,
            text: d.text.clone(),
            units: vec![(request.clone(), checked.clone(), f)],
            assembled: None,
        });
    };
    let mut units = vec![];
    for (pair, pd) in block.block.pairs.iter().zip(&block.pairs) {
        let which = super::pair_label(program, d.kind, &block.block, pair, " ");
        if pd.kind == RequestKind::Element {
            let name = names.fresh(&format!("{base} h {which}"));
            let h = (pd.clone(), None);
            units.push((pair.request.clone(), h.clone(), function(program, symbols, &h, name, needs)?));
        }
        let (overlap_request, overlap) = super::overlap_of(&pair.request, pd);
        let name = names.fresh(&format!("{base} s {which}"));
        let s = (overlap, None);
        units.push((overlap_request, s.clone(), function(program, symbols, &s, name, needs)?));
    }
    let name = names.fresh(&base);
    let assembled = (d.kind != RequestKind::Roots)
        .then(|| assembled(program, symbols, request, d, block, &units, name.clone()))
        .transpose()?;
    Ok(Emitted { name, text: d.text.clone(), units, assembled })
}

/// For free coefficients: the function of the coefficients that assembles the request from
/// the pair functions in `units` (each pair's <f|H|g>, if it has one, then its <f|g>).
fn assembled(
    program: &Program,
    symbols: &Symbols,
    request: &Request,
    d: &Derivation,
    block: &crate::engine::block_derivation::BlockDerivation,
    units: &[(Request, Checked, Function)],
    name: String,
) -> Result<Assembled> {
    let coefficients = block.block.coefficients();
    let expressions: Vec<&Expr> = block.pairs.iter().flat_map(|p| [&p.value, &p.overlap]).collect();
    let parameters = Parameters::of(&expressions);
    let names = parameter_names(symbols, &parameters);
    let coefficient_names: Vec<&str> =
        coefficients.iter().map(|&c| symbols.coefficients[c as usize].as_str()).collect();
    let signature: Vec<&str> = ["h", "eri"]
        .into_iter()
        .chain(coefficient_names.iter().copied())
        .chain(names.iter().map(String::as_str))
        .collect();
    let mut code = String::new();
    let _ = writeln!(code, "def {name}({}):", signature.join(", "));
    let (what, constant) = match d.kind {
        RequestKind::Energy => (
            format!("The energy <{0}|H|{0}> / <{0}|{0}>", d.bra),
            "Electronic part: add the constant energy for the total.",
        ),
        RequestKind::Overlap => (format!("The overlap <{}|{}>", d.bra, d.ket), ""),
        _ => (
            format!("The Hamiltonian matrix element <{}|H|{}>", d.bra, d.ket),
            "Electronic part: add the constant energy times the overlap for the total.",
        ),
    };
    let _ = writeln!(
        code,
        "    \"\"\"{} at values of its free coefficients, for `{}`.\n",
        docstring_safe(&what),
        docstring_safe(&d.text)
    );
    let _ = writeln!(code, "    Assembled from the functions of its pairs above. {constant}");
    let _ = writeln!(code, "    {}: the free coefficients (floats).", coefficient_names.join(", "));
    let _ = writeln!(code, "    \"\"\"");
    let mut sums = [vec![], vec![]];
    let mut functions = units.iter().map(|(_, _, f)| f);
    for pair in &block.block.pairs {
        let product: Vec<&str> =
            [block.block.rows[pair.row].coefficient, block.block.columns[pair.column].coefficient]
                .into_iter()
                .flatten()
                .map(|c| symbols.coefficients[c as usize].as_str())
                .collect();
        let weight = if block.block.symmetric && pair.row != pair.column { "2.0 * " } else { "" };
        let factor = format!("{weight}{}", product.iter().map(|c| format!("{c} * ")).collect::<String>());
        let mut calls = vec![];
        if d.kind != RequestKind::Overlap {
            calls.push((0, functions.next().expect("a function per pair value")));
        }
        calls.push((1, functions.next().expect("a function per pair overlap")));
        for (sum, f) in calls {
            // an element needs no overlap: the constant times <X|Y> is the caller's
            if sum == 1 && d.kind == RequestKind::Element {
                continue;
            }
            let arguments: String =
                parameter_names(symbols, &f.parameters).iter().map(|n| format!(", {n}={n}")).collect();
            sums[sum].push(format!("{factor}{}(h, eri{arguments})", f.name));
        }
    }
    for (k, target) in ["_value", "_overlap"].into_iter().enumerate() {
        if sums[k].is_empty() {
            continue;
        }
        let _ = writeln!(code, "    {target} = 0.0");
        for term in &sums[k] {
            let _ = writeln!(code, "    {target} += {term}");
        }
    }
    let _ = writeln!(
        code,
        "    return {}",
        match d.kind {
            RequestKind::Energy => "_value / _overlap",
            RequestKind::Overlap => "_overlap",
            _ => "_value",
        }
    );
    let (values, vectors) = match super::assembled_test(request, d, block) {
        Some((values, at_request, at)) => {
            let vectors = test_vectors(program, &at_request, &at)?;
            (values, vectors.into_iter().filter(|v| v.source == "brute force").collect())
        }
        None => (BTreeMap::new(), vec![]),
    };
    Ok(Assembled { function: Function { name, parameters, code }, coefficients, values, vectors })
}

/// One generated function with what its test needs to call it.
struct Function {
    name: String,
    parameters: Parameters,
    code: String,
}

fn parameter_names(symbols: &Symbols, p: &Parameters) -> Vec<String> {
    let orbs = p.orbs.iter().map(|&o| match o {
        Orb::Named(k) => symbols.orbitals[k as usize].clone(),
        Orb::Index(k) => symbols.indices[k as usize].clone(),
        Orb::Summed(_) => unreachable!("free orbitals are never summation indices"),
    });
    orbs.chain(p.spaces.iter().map(|&s| symbols.spaces[s as usize].clone())).collect()
}

fn function(
    program: &Program,
    symbols: &Symbols,
    checked: &Checked,
    name: String,
    needs: &mut Needs,
) -> Result<Function> {
    let d = &checked.0;
    let spin = d.kind == RequestKind::Spin;
    let density = d.density_symmetry().is_some();
    let expressions: Vec<&Expr> = if spin { vec![&d.value, &d.s_z] } else { vec![&d.value] };
    let parameters = Parameters::of(&expressions);
    let names = parameter_names(symbols, &parameters);
    let mut code = String::new();
    let first: &[&str] = if density { &["n_orbitals"] } else { &["h", "eri"] };
    let signature: Vec<&str> = first.iter().copied().chain(names.iter().map(String::as_str)).collect();
    let _ = writeln!(code, "def {name}({}):", signature.join(", "));

    // the docstring: what is computed, the parameters, the derivation as text
    let meaning = docstring_safe(&request_meaning(d));
    let request = docstring_safe(&d.text);
    let summary = match d.kind {
        RequestKind::Energy | RequestKind::Shells => {
            format!("The energy {meaning}, electronic part, for `{request}`.")
        }
        RequestKind::Element | RequestKind::Roots => {
            format!("The Hamiltonian matrix element {meaning}, electronic part, for `{request}`.")
        }
        RequestKind::Overlap => format!("The overlap {meaning}, for `{request}`."),
        RequestKind::Spin => format!("{meaning} as the pair (<S^2>, <S_z>), for `{request}`."),
        RequestKind::Density | RequestKind::TransitionDensity => {
            format!("The {meaning}, for `{request}`.").replacen("The the ", "The ", 1)
        }
    };
    let _ = writeln!(code, "    \"\"\"{summary}\n");
    match d.kind {
        RequestKind::Energy | RequestKind::Shells => {
            let _ = writeln!(
                code,
                "    Add the constant energy (nuclear repulsion, frozen core) for the total.\n"
            );
        }
        RequestKind::Density | RequestKind::TransitionDensity => {
            let _ = writeln!(
                code,
                "    Returns (dm1, dm2) over n_orbitals orbitals, dm1[p, q] = g_pq = sum_s <a+_ps a_qs> and\n    \
                 dm2[p, q, r, s] = G_pqrs = sum_st <a+_ps a+_rt a_st a_qs>, so that the energy is\n    \
                 sum g_pq h_pq + 1/2 sum G_pqrs (pq|rs) (density_energy). Every element is filled; the\n    \
                 listing below shows one of each set of elements related by symmetry.\n"
            );
        }
        RequestKind::Element if d.overlap.is_zero() => {
            let _ = writeln!(code, "    The states are orthogonal: the constant energy adds nothing.\n");
        }
        RequestKind::Element => {
            let _ = writeln!(
                code,
                "    Add the constant energy times the overlap of the states for the total.\n"
            );
        }
        _ => {}
    }
    if density {
        let _ = writeln!(code, "    n_orbitals: the number of orbitals of the densities (int).");
    } else {
        let _ = writeln!(code, "    h, eri: one- and two-electron integrals, eri[p, q, r, s] = (pq|rs).");
    }
    for &o in &parameters.orbs {
        let line = match o {
            Orb::Named(k) => {
                format!(
                    "{}: the orbital {} (int)",
                    symbols.orbitals[k as usize], program.orbitals[k as usize].name
                )
            }
            Orb::Index(k) => {
                let index = &program.indices[k as usize];
                format!(
                    "{}: the generic index {} of the space {} (int)",
                    symbols.indices[k as usize], index.name, program.spaces[index.space as usize].name
                )
            }
            Orb::Summed(_) => continue,
        };
        let _ = writeln!(code, "    {}.", docstring_safe(&line));
    }
    for &s in &parameters.spaces {
        let line = format!(
            "{}: the orbitals of the space {} (sequence of ints)",
            symbols.spaces[s as usize], program.spaces[s as usize].name
        );
        let _ = writeln!(code, "    {}.", docstring_safe(&line));
    }
    let _ = writeln!(code, "\n    Derived by spinfold:\n");
    let text = super::text::render(program, std::slice::from_ref(checked), true);
    for line in text.lines() {
        let line = docstring_safe(line);
        if line.trim().is_empty() {
            code.push('\n');
        } else {
            let _ = writeln!(code, "        {}", line.trim_end());
        }
    }
    let _ = writeln!(code, "    \"\"\"");

    // the body
    if density {
        needs.densities = true;
        code.push_str(&density_body(program, symbols, &d.value, &names)?);
        return Ok(Function { name, parameters, code });
    }
    if Parameters::uses_integrals(&expressions) {
        let _ = writeln!(code, "    h = np.asarray(h)\n    eri = np.asarray(eri)");
    }
    for &s in &parameters.spaces {
        let n = &symbols.spaces[s as usize];
        let _ = writeln!(code, "    {n} = _members({n})");
        needs.members = true;
    }
    let reserved: Vec<&str> = RESERVED.iter().copied().chain(names.iter().map(String::as_str)).collect();
    let mut writer = BodyWriter {
        symbols,
        namer: Namer::new(program, &expressions),
        locals: BTreeMap::new(),
        ids: Identifiers::new(KEYWORDS, &reserved),
        bound: None,
        views: BTreeSet::new(),
        needs,
        lines: vec![],
    };
    if spin {
        writer.expression(&d.value, "_s_squared")?;
        writer.expression(&d.s_z, "_s_z")?;
        writer.lines.push("    return float(_s_squared), float(_s_z)".into());
    } else {
        writer.expression(&d.value, "_value")?;
        writer.lines.push("    return float(_value)".into());
    }
    for view in &writer.views {
        let _ = writeln!(code, "    {}", view.definition());
    }
    for line in &writer.lines {
        let _ = writeln!(code, "{line}");
    }
    Ok(Function { name, parameters, code })
}

/// The body of a density function: zero arrays, then each term's coefficient added to its
/// element, for every combination of its summation indices (index arrays, `np.ix_` for several;
/// `np.add.at` adds once per combination), under `if` for its deltas.
fn density_body(program: &Program, symbols: &Symbols, density: &Expr, names: &[String]) -> Result<String> {
    let mut lines = vec!["    _dm1 = np.zeros((n_orbitals, n_orbitals))".to_string()];
    lines.push("    _dm2 = np.zeros((n_orbitals, n_orbitals, n_orbitals, n_orbitals))".into());
    let parameters = Parameters::of(&[density]);
    for &s in &parameters.spaces {
        let n = &symbols.spaces[s as usize];
        lines.push(format!("    {n} = np.asarray({n}, dtype=np.intp).reshape(-1)"));
    }
    let namer = Namer::new(program, &[density]);
    let reserved: Vec<&str> = RESERVED.iter().copied().chain(names.iter().map(String::as_str)).collect();
    let mut ids = Identifiers::new(KEYWORDS, &reserved);
    let mut locals: BTreeMap<String, String> = BTreeMap::new();
    let orb = |o: Orb, summed: &[String], locals: &BTreeMap<String, String>| match o {
        Orb::Named(k) => symbols.orbitals[k as usize].clone(),
        Orb::Index(k) => symbols.indices[k as usize].clone(),
        Orb::Summed(d) => locals[&summed[d as usize]].clone(),
    };
    let mut condition: Option<&[(Orb, Orb)]> = None;
    // the last assignment of summation indices still in force
    let mut bound_by: Option<String> = None;
    for group in groups(density) {
        if group.deltas.iter().any(|&(a, b)| matches!(a, Orb::Summed(_)) || matches!(b, Orb::Summed(_))) {
            return Err(unsupported("a delta on a summation index"));
        }
        if condition != Some(group.deltas) {
            // what an `if` block assigns is not known to hold after it
            bound_by = None;
        }
        if condition != Some(group.deltas) && !group.deltas.is_empty() {
            let tests: Vec<String> = group
                .deltas
                .iter()
                .map(|&(a, b)| format!("{} == {}", orb(a, &[], &locals), orb(b, &[], &locals)))
                .collect();
            lines.push(format!("    if {}:", tests.join(" and ")));
        }
        condition = Some(group.deltas);
        let indent = if group.deltas.is_empty() { "    " } else { "        " };
        let summed = namer.summed_names(group.sums);
        for n in &summed {
            if !locals.contains_key(n) {
                let local = ids.fresh(n);
                locals.insert(n.clone(), local);
            }
        }
        let spaces: Vec<&str> = group.sums.iter().map(|&s| symbols.spaces[s as usize].as_str()).collect();
        let bound: Vec<&str> = summed.iter().map(|n| locals[n].as_str()).collect();
        let assignment = match spaces.len() {
            0 => None,
            1 => Some(format!("{} = {}", bound[0], spaces[0])),
            _ => Some(format!("{} = np.ix_({})", bound.join(", "), spaces.join(", "))),
        };
        if let Some(assignment) = assignment.filter(|a| bound_by.as_ref() != Some(a)) {
            lines.push(format!("{indent}{assignment}"));
            bound_by = Some(assignment);
        }
        let irrational: BTreeSet<String> = group
            .terms
            .iter()
            .filter(|t| t.coeff.as_rational().is_none())
            .map(|t| {
                let magnitude = t.coeff.abs();
                format!(
                    "{} = {}",
                    float_literal(magnitude.to_f64_rounded()),
                    ExactDisplay { value: &magnitude, ascii: true }
                )
            })
            .collect();
        if !irrational.is_empty() {
            lines.push(format!("{indent}# {}", irrational.into_iter().collect::<Vec<_>>().join(", ")));
        }
        for term in &group.terms {
            let (array, slots) = match term.factor {
                Factor::Gamma1(p, q) => ("_dm1", vec![p, q]),
                Factor::Gamma2(p, q, r, s) => ("_dm2", vec![p, q, r, s]),
                other => unreachable!("a density holds only density elements, not {other:?}"),
            };
            let index: Vec<String> = slots.iter().map(|&o| orb(o, &summed, &locals)).collect();
            let value = term.coeff.to_f64_rounded();
            if group.sums.is_empty() {
                let op = if value < 0.0 { "-=" } else { "+=" };
                lines.push(format!(
                    "{indent}{array}[{}] {op} {}",
                    index.join(", "),
                    float_literal(value.abs())
                ));
                continue;
            }
            // a summation index the element does not use multiplies by its space's size
            let mut factors = vec![float_literal(value)];
            for (d, space) in spaces.iter().enumerate() {
                if !slots.contains(&Orb::Summed(d as u8)) {
                    factors.push(format!("{space}.size"));
                }
            }
            lines.push(format!(
                "{indent}np.add.at({array}, ({}), {})",
                index.join(", "),
                factors.join(" * ")
            ));
        }
    }
    lines.push("    return _dm1, _dm2".into());
    Ok(lines.iter().map(|l| format!("{l}\n")).collect())
}

const MEMBERS_HELPER: &str = r#"def _members(space):
    """A space's orbital numbers as an index: a slice when they increase in even steps, so that
    sums over the space read views of h and eri, and an index array otherwise."""
    if isinstance(space, range) and space.step > 0 and space.start >= 0:
        return slice(space.start, space.stop, space.step)
    m = np.asarray(space, dtype=np.intp).reshape(-1)
    if m.size == 0:
        return slice(0, 0)
    step = int(m[1] - m[0]) if m.size > 1 else 1
    if m[0] >= 0 and step > 0 and (m == m[0] + step * np.arange(m.size)).all():
        return slice(int(m[0]), int(m[-1]) + 1, step)
    return m
"#;

const OUTER_HELPER: &str = r#"def _outer(*members):
    """Indices that pick every combination of members of several spaces: the slices themselves
    when all are slices, otherwise index arrays shaped to broadcast against each other."""
    if all(isinstance(m, slice) for m in members):
        return members
    return np.ix_(*(np.arange(m.start, m.stop, m.step) if isinstance(m, slice) else m for m in members))
"#;

const COUNT_HELPER: &str = r#"def _count(members):
    """The number of members of a space."""
    if isinstance(members, slice):
        return len(range(members.start, members.stop, members.step))
    return members.size
"#;

const FOCK_HELPER: &str = r#"def _fock(h, eri, p, q, closed):
    """f_pq = h_pq + sum_{k in closed} (2 (pq|kk) - (pk|kq)), closed a sequence of spaces."""
    total = h[p, q]
    for k in closed:
        total += 2.0 * np.einsum("ii->i", eri[p, q])[k].sum() - np.einsum("ii->i", eri[p, :, :, q])[k].sum()
    return total
"#;

const REFERENCE_HELPER: &str = r#"def _reference_energy(h, eri, closed):
    """E_ref = 2 sum_{k in closed} h_kk + sum_{k,l in closed} (2 J_kl - K_kl)."""
    total = 0.0
    for space in closed:
        total += 2.0 * np.einsum("ii->i", h)[space].sum()
        for other in closed:
            k, l = _outer(space, other)
            total += 2.0 * np.einsum("iijj->ij", eri)[k, l].sum() - np.einsum("ijij->ij", eri)[k, l].sum()
    return total
"#;

const DENSITY_HELPER: &str = r#"def density_energy(h, eri, dm1, dm2):
    """sum_pq g_pq h_pq + 1/2 sum_pqrs G_pqrs (pq|rs): the energy of densities from the density
    functions (for transition densities <S|H|T>), electronic part, integrals over their orbitals."""
    return float(np.einsum("pq,pq->", dm1, h) + 0.5 * np.einsum("pqrs,pqrs->", dm2, eri))


def generalized_fock_and_gradient(h, eri, dm1, dm2):
    """The generalized Fock matrix F and the orbital gradient of density_energy, both (n, n).

    F_pq = sum_r g_pr h_qr + sum_rst G_prst (qr|st). The gradient is dE/dkappa_pq for the
    rotation phi'_p = sum_q phi_q U_qp with U = exp(kappa), kappa antisymmetric: for the densities
    of one state (symmetric) 2 (F_qp - F_pq); for transition densities F_qp + F'_qp - F_pq - F'_pq,
    F' from g_qp and G_qpsr (the derivative of <S|H|T> with both states' orbitals rotated).
    """
    fock = dm1 @ h.T + np.einsum("prst,qrst->pq", dm2, eri, optimize=True)
    swapped = dm1.T @ h.T + np.einsum("rpts,qrst->pq", dm2, eri, optimize=True)
    total = fock + swapped
    return fock, total.T - total
"#;

const DENSITY_TEST_HELPER: &str = r#"

def _check_densities(dm1, dm2, one, two):
    """The densities against the listed non-zero elements ({orbitals: value}), the rest zero."""
    for dm, listed in ((dm1, one), (dm2, two)):
        expected = np.zeros_like(dm)
        for orbitals, value in listed.items():
            expected[orbitals] = value
        worst = np.unravel_index(np.argmax(np.abs(dm - expected)), dm.shape)
        assert abs(dm[worst] - expected[worst]) <= 1e-10 * max(1.0, abs(expected[worst])), (
            worst,
            dm[worst],
            expected[worst],
        )


def _rotated(h, eri, p, q, t):
    """The integrals of the orbitals phi'_p = sum_q phi_q U_qp with U = exp(kappa), kappa_pq = t
    and kappa_qp = -t: a rotation by t in the (p, q) plane."""
    u = np.eye(h.shape[0])
    u[p, p] = u[q, q] = np.cos(t)
    u[p, q], u[q, p] = np.sin(t), -np.sin(t)
    return u.T @ h @ u, np.einsum("abcd,ap,bq,cr,ds->pqrs", eri, u, u, u, u, optimize=True)


def _check_gradient(h, eri, dm1, dm2):
    """The gradient of generalized_fock_and_gradient against central differences of
    density_energy under rotations by +-1e-4 in every plane (p, q), within 1e-6 relative."""
    _, gradient = generalized_fock_and_gradient(h, eri, dm1, dm2)
    step = 1e-4
    for p in range(h.shape[0]):
        for q in range(p):
            plus = density_energy(*_rotated(h, eri, p, q, step), dm1, dm2)
            minus = density_energy(*_rotated(h, eri, p, q, -step), dm1, dm2)
            difference = (plus - minus) / (2 * step)
            assert abs(gradient[p, q] - difference) <= 1e-6 * max(1.0, abs(difference)), (
                p,
                q,
                gradient[p, q],
                difference,
            )
"#;

fn hashed_integrals_code() -> String {
    format!(
        r#"_TEST_SEED = 0x{TEST_SEED:x}
_INTEGRALS = {{}}


def _splitmix_value(key):
    """splitmix64 of key ^ seed (uint64 arrays, wrapping), mapped to [-0.5, 0.5)."""
    with np.errstate(over="ignore"):
        z = (key ^ np.uint64(_TEST_SEED)) + np.uint64(0x9E3779B97F4A7C15)
        z = (z ^ (z >> np.uint64(30))) * np.uint64(0xBF58476D1CE4E5B9)
        z = (z ^ (z >> np.uint64(27))) * np.uint64(0x94D049BB133111EB)
        z = z ^ (z >> np.uint64(31))
    return (z >> np.uint64(11)).astype(np.float64) / 2.0**53 - 0.5


def _pair(x, y):
    """The pair index of the 8-fold symmetry: max (max + 1) / 2 + min."""
    hi, lo = np.maximum(x, y), np.minimum(x, y)
    return hi * (hi + np.uint64(1)) // np.uint64(2) + lo


def _hashed_integrals(n):
    """The test integrals for n orbitals: h with key 2 pair(p, q), eri with key
    2 pair(pair(p, q), pair(r, s)) + 1, both hashed as spinfold's test integrals are."""
    if n not in _INTEGRALS:
        p = np.arange(n, dtype=np.uint64)
        pq = _pair(p[:, None], p[None, :])
        h = _splitmix_value(np.uint64(2) * pq)
        eri = _splitmix_value(np.uint64(2) * _pair(pq[:, :, None, None], pq[None, None, :, :]) + np.uint64(1))
        h.flags.writeable = False
        eri.flags.writeable = False
        _INTEGRALS[n] = (h, eri)
    return _INTEGRALS[n]


def _arranged(members, arrangement, position):
    """A space's members for a test call: in increasing order (arrangement 0, read as slices),
    reversed (1, index arrays), or reversed for every other space (2, both kinds in one call)."""
    reverse = arrangement == 1 or (arrangement == 2 and position % 2 == 0)
    return members[::-1] if reverse else members


def _check(derived, expected):
    assert abs(derived - expected) <= 1e-10 * max(1.0, abs(expected)), (derived, expected)


def test_hashed_integrals():
    """The test integrals are the ones spinfold computed the expected values with."""
    h, eri = _hashed_integrals(4)
"#
    )
}

/// Sample values of spinfold's own test integrals, for `test_hashed_integrals`.
fn hashed_samples() -> String {
    let ints = HashedIntegrals { seed: TEST_SEED, orbitals: 4 };
    let mut out = String::new();
    for (p, q) in [(0, 0), (1, 3), (3, 1), (2, 2)] {
        let _ = writeln!(out, "    assert h[{p}, {q}] == {}", float_literal(ints.h(p, q)));
    }
    for (p, q, r, s) in [(0, 0, 0, 0), (0, 1, 2, 3), (3, 2, 1, 0), (2, 3, 0, 1), (1, 1, 2, 2), (1, 2, 1, 2)] {
        let _ =
            writeln!(out, "    assert eri[{p}, {q}, {r}, {s}] == {}", float_literal(ints.eri(p, q, r, s)));
    }
    out
}

/// The keyword arguments of one call: every parameter bound to the vector's orbitals.
fn call_arguments(symbols: &Symbols, parameters: &Parameters, v: &TestVector) -> Result<String> {
    let mut args = vec![];
    for &o in &parameters.orbs {
        let (name, value) = match o {
            Orb::Named(k) => (&symbols.orbitals[k as usize], v.binding.orbitals.get(k as usize).copied()),
            Orb::Index(k) => {
                (&symbols.indices[k as usize], v.binding.indices.get(k as usize).copied().flatten())
            }
            Orb::Summed(_) => continue,
        };
        let value = value.ok_or_else(|| {
            Error::new(ErrorKind::Binding { why: format!("a test vector leaves `{name}` unbound") })
        })?;
        args.push(format!("{name}={value}"));
    }
    for (position, &s) in parameters.spaces.iter().enumerate() {
        let members: Vec<String> = v.binding.spaces[s as usize].iter().map(|m| m.to_string()).collect();
        args.push(format!(
            "{}=_arranged([{}], _arrangement, {position})",
            symbols.spaces[s as usize],
            members.join(", ")
        ));
    }
    Ok(args.iter().map(|a| format!(", {a}")).collect())
}

/// <S_z> at a test vector, from brute force where the vector's value is.
fn s_z_expected(program: &Program, request: &Request, d: &Derivation, v: &TestVector) -> Result<f64> {
    let ints = HashedIntegrals { seed: TEST_SEED, orbitals: v.orbitals };
    if v.source == "brute force"
        && let Some(c) = crate::check::verify::compare(program, request, d, &v.binding, &ints)?
        && let Some(s_z) = c.get(1)
    {
        return Ok(s_z.brute_force);
    }
    Ok(evaluate(&d.s_z, &v.binding, &ints))
}

/// The one test function of a request: every function it became, at every test vector.
fn test_function(program: &Program, symbols: &Symbols, e: &Emitted) -> Result<String> {
    let mut out = String::new();
    let _ = writeln!(out, "def test_{}():", e.name);
    let _ = writeln!(
        out,
        "    \"\"\"`{}` at every test vector, against values spinfold computed on the test integrals.\"\"\"",
        docstring_safe(&e.text)
    );
    for (request, (d, _), f) in &e.units {
        if d.density_symmetry().is_some() {
            let (vectors, densities): (Vec<TestVector>, Vec<Densities>) =
                density_test_vectors(program, request, d)
                    .into_iter()
                    .map(|v| (v.vector, v.densities))
                    .unzip();
            out.push_str(&test_calls(program, symbols, f, &vectors, "", Checks::Densities(&densities))?);
            continue;
        }
        let checks = if d.kind == RequestKind::Spin { Checks::Spin(request, d) } else { Checks::Value };
        out.push_str(&test_calls(program, symbols, f, &test_vectors(program, request, d)?, "", checks)?);
    }
    if let Some(a) = &e.assembled {
        let values: String = a
            .coefficients
            .iter()
            .map(|c| {
                format!(
                    ", {}={}",
                    symbols.coefficients[*c as usize],
                    float_literal(a.values[c].to_f64_rounded())
                )
            })
            .collect();
        out.push_str(&test_calls(program, symbols, &a.function, &a.vectors, &values, Checks::Value)?);
    }
    Ok(out)
}

/// What the test calls of a function check.
enum Checks<'a> {
    /// The value.
    Value,
    /// Both <S²> and <S_z> of a `spin` request (it and its derivation).
    Spin(&'a Request, &'a Derivation),
    /// The densities, one for each vector in order; then the energy they give (the vector's
    /// value) and the orbital gradient against finite differences.
    Densities(&'a [Densities]),
}

/// Calls of `f` at every vector (`extra`: arguments given before the vector's), checked.
fn test_calls(
    program: &Program,
    symbols: &Symbols,
    f: &Function,
    vectors: &[TestVector],
    extra: &str,
    checks: Checks,
) -> Result<String> {
    let mut out = String::new();
    if vectors.is_empty() {
        let _ = writeln!(out, "    # {}: no test vector, the state vanishes at every one tried", f.name);
        return Ok(out);
    }
    // with spaces, every vector in each arrangement of their members (see _arranged)
    let arrangements = match f.parameters.spaces.len() {
        0 => None,
        1 => Some(2),
        _ => Some(3),
    };
    let indent = match arrangements {
        Some(n) => {
            let _ = writeln!(out, "    for _arrangement in range({n}):");
            "        "
        }
        None => "    ",
    };
    for (k, v) in vectors.iter().enumerate() {
        let args = call_arguments(symbols, &f.parameters, v)?;
        let _ = writeln!(out, "{indent}# {}, {} orbitals", comment_safe(v.source), v.orbitals);
        let ints = format!("*_hashed_integrals({})", v.orbitals);
        let call = format!("{}({ints}{extra}{args})", f.name);
        match checks {
            Checks::Value => {
                let _ = writeln!(out, "{indent}_check({call}, {})", float_literal(v.expected));
            }
            Checks::Spin(request, d) => {
                let s_z = s_z_expected(program, request, d, v)?;
                let _ = writeln!(out, "{indent}_s_squared, _s_z = {call}");
                let _ = writeln!(out, "{indent}_check(_s_squared, {})", float_literal(v.expected));
                let _ = writeln!(out, "{indent}_check(_s_z, {})", float_literal(s_z));
            }
            Checks::Densities(densities) => {
                let _ = writeln!(out, "{indent}_dm1, _dm2 = {}(n_orbitals={}{args})", f.name, v.orbitals);
                out.push_str(&densities_check(indent, &densities[k]));
                let energy = float_literal(v.expected);
                let _ = writeln!(out, "{indent}_check(density_energy({ints}, _dm1, _dm2), {energy})");
                let _ = writeln!(out, "{indent}_check_gradient({ints}, _dm1, _dm2)");
            }
        }
    }
    Ok(out)
}

/// `_check_densities(_dm1, _dm2, {...}, {...})` with the non-zero elements of `expected`,
/// several to a line.
fn densities_check(indent: &str, expected: &Densities) -> String {
    let mut out = format!("{indent}_check_densities(\n{indent}    _dm1,\n{indent}    _dm2,\n");
    for values in [&expected.one, &expected.two] {
        let items: Vec<String> = DensityTestVector::nonzero(values, expected.n)
            .into_iter()
            .map(|(orbitals, x)| {
                let orbitals: Vec<String> = orbitals.iter().map(|o| o.to_string()).collect();
                format!("({}): {}", orbitals.join(", "), float_literal(x))
            })
            .collect();
        let inline = format!("{indent}    {{{}}},", items.join(", "));
        if inline.len() <= LINE_LIMIT {
            let _ = writeln!(out, "{inline}");
            continue;
        }
        let _ = writeln!(out, "{indent}    {{");
        let mut line = String::new();
        for item in items {
            if !line.is_empty() && indent.len() + 8 + line.len() + item.len() + 2 > LINE_LIMIT {
                let _ = writeln!(out, "{indent}        {}", line.trim_end());
                line.clear();
            }
            line.push_str(&item);
            line.push_str(", ");
        }
        let _ = writeln!(out, "{indent}        {}", line.trim_end());
        let _ = writeln!(out, "{indent}    }},");
    }
    let _ = writeln!(out, "{indent})");
    out
}

fn module_docstring(program: &Program, densities: bool) -> String {
    // the file name alone, so that the module does not depend on where it was generated
    let name = &program.source.name;
    let base = name.rsplit(['/', '\\']).next().filter(|b| !b.is_empty()).unwrap_or(name);
    let input = docstring_safe(base);
    let densities = if densities {
        "\n- A density function takes the number of orbitals n_orbitals and returns the densities\n  \
         (dm1, dm2), both NumPy arrays over all n_orbitals orbitals. density_energy gives their energy\n  \
         with h and eri, generalized_fock_and_gradient the generalized Fock matrix and the orbital\n  \
         gradient, checked here against finite differences of the energy under rotations."
    } else {
        ""
    };
    format!(
        r#""""Closed formulas derived by spinfold from {input}: one function per request, in input order.

Generated code; regenerate it rather than editing it.

Conventions:
- h is an (n, n) NumPy array of the one-electron integrals h_pq; eri is an (n, n, n, n)
  array of the two-electron integrals in chemists' notation, eri[p, q, r, s] = (pq|rs).
  The orbitals are real: h is symmetric and eri has the 8-fold symmetry.
- Orbitals are 0-based numbers into those arrays (ints); a space is a sequence of orbital
  numbers (a list, a range or a NumPy array).
- J_pq = (pp|qq) and K_pq = (pq|qp).
- Energies and matrix elements are electronic: add the constant energy (nuclear repulsion,
  frozen core) yourself, times the overlap for matrix elements.
- No function loops over orbitals: a sum over a space indexes views of h and eri (diagonals
  taken by np.einsum without copying), by slices where the members increase in even steps
  and by index arrays otherwise.{densities}

The test_ functions check every function against values computed by spinfold (brute-force
determinant algebra) on integrals defined by a hash, _hashed_integrals; run them with
`python3 -m pytest THIS_FILE` or `python3 THIS_FILE`.
"""

import numpy as np
"#
    )
}

/// The Python module for every derivation of the program, in request order.
pub fn render(program: &Program, derivations: &[Checked]) -> Result<String> {
    let symbols = Symbols::new(program);
    let mut names = Identifiers::new(KEYWORDS, RESERVED);
    let mut needs = Needs::default();
    let emitted = program
        .requests
        .iter()
        .zip(derivations)
        .enumerate()
        .map(|(k, unit)| emitted(program, &symbols, unit, &mut names, k + 1, &mut needs))
        .collect::<Result<Vec<Emitted>>>()?;

    let mut out = module_docstring(program, needs.densities);
    for (needed, helper) in [
        (needs.members, MEMBERS_HELPER),
        (needs.outer, OUTER_HELPER),
        (needs.count, COUNT_HELPER),
        (needs.fock, FOCK_HELPER),
        (needs.reference, REFERENCE_HELPER),
        (needs.densities, DENSITY_HELPER),
    ] {
        if needed {
            out.push_str("\n\n");
            out.push_str(helper);
        }
    }
    let functions = emitted
        .iter()
        .flat_map(|e| e.units.iter().map(|(_, _, f)| f).chain(e.assembled.iter().map(|a| &a.function)));
    for f in functions {
        out.push_str("\n\n");
        out.push_str(&f.code);
    }

    out.push_str("\n\n# Self-test\n\n");
    out.push_str(&hashed_integrals_code());
    out.push_str(&hashed_samples());
    if needs.densities {
        out.push_str(DENSITY_TEST_HELPER);
    }
    let mut tests = vec!["test_hashed_integrals".to_string()];
    for e in &emitted {
        out.push_str("\n\n");
        out.push_str(&test_function(program, &symbols, e)?);
        tests.push(format!("test_{}", e.name));
    }
    out.push_str("\n\nif __name__ == \"__main__\":\n    _tests = [\n");
    for t in &tests {
        let _ = writeln!(out, "        {t},");
    }
    out.push_str(
        r#"    ]
    _failed = 0
    for _test in _tests:
        try:
            _test()
        except Exception as _error:
            _failed += 1
            print(f"FAILED {_test.__name__}: {_error!r}")
        else:
            print(f"ok {_test.__name__}")
    print(f"{len(_tests) - _failed} passed, {_failed} failed")
    raise SystemExit(1 if _failed else 0)
"#,
    );
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::engine::exact::Exact;

    fn body(program: &Program, expr: &Expr) -> Result<Vec<String>> {
        let symbols = Symbols::new(program);
        let mut needs = Needs::default();
        let names = parameter_names(&symbols, &Parameters::of(&[expr]));
        let reserved: Vec<&str> = RESERVED.iter().copied().chain(names.iter().map(String::as_str)).collect();
        let mut writer = BodyWriter {
            symbols: &symbols,
            namer: Namer::new(program, &[expr]),
            locals: BTreeMap::new(),
            ids: Identifiers::new(KEYWORDS, &reserved),
            bound: None,
            views: BTreeSet::new(),
            needs: &mut needs,
            lines: vec![],
        };
        writer.expression(expr, "_value")?;
        Ok(writer.lines)
    }

    fn has(lines: &[String], line: &str) -> bool {
        lines.iter().any(|l| l.trim() == line)
    }

    #[test]
    fn repeated_summation_indices_read_diagonal_views() {
        let program =
            crate::language::parser::parse("t.spinfold", "orbitals a b\nspace core\nspace val\n").unwrap();
        let (a, b, k, l) = (Orb::Named(0), Orb::Named(1), Orb::Summed(0), Orb::Summed(1));
        let term =
            |c: i64, sums: Vec<u32>, factor| Term { coeff: Exact::integer(c), deltas: vec![], sums, factor };
        let expr = Expr::from_terms([
            term(2, vec![0], Factor::H(k, k)),
            term(1, vec![0], Factor::Eri(a, k, k, b)),
            term(1, vec![0], Factor::Eri(a, b, k, k)),
            term(2, vec![0, 1], Factor::Eri(k, k, l, l)),
            term(-1, vec![0, 1], Factor::Eri(k, l, l, k)),
            term(1, vec![0, 1], Factor::Eri(a, k, b, l)),
        ]);
        let lines = body(&program, &expr).unwrap();
        assert!(has(&lines, "k = core"), "{lines:#?}");
        assert!(has(&lines, "_value += 2.0 * _h_diagonal[k].sum()"), "{lines:#?}");
        assert!(
            lines.iter().any(|l| l.contains("np.einsum(\"ijkj->ijk\", eri)[a, k, b].sum()")),
            "{lines:#?}"
        );
        assert!(
            lines.iter().any(|l| l.contains("np.einsum(\"ijkk->ijk\", eri)[a, b, k].sum()")),
            "{lines:#?}"
        );
        assert!(has(&lines, "k, l = _outer(core, val)"), "{lines:#?}");
        let double = "_value += 2.0 * _J[k, l].sum() - _K[k, l].sum() + eri[a, k, b, l].sum()";
        assert!(has(&lines, double), "{lines:#?}");
    }

    #[test]
    fn summation_indices_out_of_order_are_reordered_by_a_view() {
        let program =
            crate::language::parser::parse("t.spinfold", "orbitals a b\nspace core\nspace val\n").unwrap();
        let (a, b, k, l) = (Orb::Named(0), Orb::Named(1), Orb::Summed(0), Orb::Summed(1));
        // written directly, so that from_terms cannot rename the indices
        let writer_term =
            Term { coeff: Exact::one(), deltas: vec![], sums: vec![0, 1], factor: Factor::Eri(a, l, b, k) };
        let lines = body(&program, &Expr { terms: vec![writer_term] }).unwrap();
        assert!(has(&lines, "_value += np.einsum(\"ijkl->ilkj\", eri)[a, k, b, l].sum()"), "{lines:#?}");
    }

    #[test]
    fn sums_over_spaces_a_term_does_not_use_multiply_by_their_size() {
        let program = crate::language::parser::parse("t.spinfold", "space core\nspace val\n").unwrap();
        let k = Orb::Summed(0);
        let expr = Expr::from_terms([
            Term { coeff: Exact::integer(3), deltas: vec![], sums: vec![0, 1], factor: Factor::H(k, k) },
            Term { coeff: Exact::integer(-1), deltas: vec![], sums: vec![0, 1], factor: Factor::One },
        ]);
        let lines = body(&program, &expr).unwrap();
        let sum = "_value += -_count(core) * _count(val) + 3.0 * _h_diagonal[k].sum() * _count(val)";
        assert!(has(&lines, sum), "{lines:#?}");
    }

    #[test]
    fn deltas_become_conditions_and_consecutive_groups_share_one() {
        let program =
            crate::language::parser::parse("t.spinfold", "space occ: i j\nspace vir: a b\n").unwrap();
        let (i, j, a, b, k) = (Orb::Index(0), Orb::Index(1), Orb::Index(2), Orb::Index(3), Orb::Summed(0));
        let delta = |deltas: Vec<(Orb, Orb)>, sums: Vec<u32>, factor| Term {
            coeff: Exact::one(),
            deltas,
            sums,
            factor,
        };
        let expr = Expr::from_terms([
            delta(vec![(i, j), (a, b)], vec![0], Factor::H(k, k)),
            delta(vec![(i, j)], vec![], Factor::H(a, b)),
            delta(vec![(i, j)], vec![0], Factor::Eri(a, b, k, k)),
            delta(vec![], vec![], Factor::Eri(i, a, j, b)),
        ]);
        let lines = body(&program, &expr).unwrap();
        let ifs: Vec<&String> = lines.iter().filter(|l| l.trim_start().starts_with("if ")).collect();
        assert_eq!(ifs, ["    if i == j and a == b:", "    if i == j:"], "{lines:#?}");
        // the assignment inside the first block is repeated inside the second
        assert_eq!(lines.iter().filter(|l| l.trim() == "k = occ").count(), 2, "{lines:#?}");
        assert_eq!(lines.last().map(String::as_str), Some("    _value += eri[i, a, j, b]"), "{lines:#?}");
    }

    #[test]
    fn deltas_on_summation_indices_are_refused() {
        let program = crate::language::parser::parse("t.spinfold", "space occ: i\n").unwrap();
        let (i, k) = (Orb::Index(0), Orb::Summed(0));
        let expr = Expr::from_terms([Term {
            coeff: Exact::one(),
            deltas: vec![(k, i)],
            sums: vec![0],
            factor: Factor::H(k, k),
        }]);
        assert!(body(&program, &expr).is_err());
    }

    #[test]
    fn irrational_coefficients_are_correctly_rounded_with_their_exact_value_beside() {
        let program = crate::language::parser::parse("t.spinfold", "orbitals a b\n").unwrap();
        let (a, b) = (Orb::Named(0), Orb::Named(1));
        let three_quarters = num_rational::BigRational::new(3.into(), 4.into());
        let half_root_three = Exact::sqrt_of_rational(&three_quarters).unwrap();
        let expr = Expr::from_terms([Term::new(-half_root_three, Factor::Eri(a, b, a, b))]);
        let lines = body(&program, &expr).unwrap();
        assert!(has(&lines, "# 0.8660254037844386 = sqrt(3)/2"), "{lines:#?}");
        assert!(has(&lines, "_value -= 0.8660254037844386 * eri[a, b, a, b]"), "{lines:#?}");
    }

    #[test]
    fn text_from_the_input_cannot_leave_a_docstring_or_comment() {
        assert_eq!(docstring_safe("a\"\"\"b\\\nc"), "a\\\"\\\"\\\"b\\\\ c");
        assert_eq!(comment_safe("x\ny\r\u{2028}z"), "x y  z");
        assert_eq!(float_literal(0.1), "0.1");
        assert_eq!(float_literal(-2.0), "-2.0");
        assert_eq!(float_literal(1e-20), "1e-20");
    }
}

//! The LaTeX form of derivations (amsmath): one `align*` per request, broken into lines by the
//! printed width of what they hold, sums labelled with their spaces, exact fractions and
//! radicals, and every piece of the input rendered so that it cannot inject TeX.

use super::{
    Definitions, Group, Namer, Summand, groups, integral_parts, monomial_text, sum_runs, summands,
    verification_line,
};
use crate::check::verify::Report;
use crate::engine::block_derivation::BlockDerivation;
use crate::engine::density::{Symmetry, representatives};
use crate::engine::derive::Derivation;
use crate::engine::exact::Exact;
use crate::engine::expression::{Expr, Factor, IntegralKind, Term};
use crate::engine::shells::{Shell, ShellForm};
use crate::language::orbital::SpaceId;
use crate::language::program::{Program, RequestKind};
use num_traits::{One, Signed};

/// The printed width, in em of the 10 pt text font, that one display line may take. The text
/// block of a 10 pt article is 34.5 em wide; the estimate of `width` is within a few per cent,
/// and the rest is margin.
const MEASURE: f32 = 32.0;

/// A left-hand side wider than this stands on a line of its own with the right-hand side
/// below it where that takes fewer lines in all, so that long labels do not squeeze an
/// expression into a narrow column.
const WIDE_LEFT: f32 = 11.0;

/// The width of a binary `+` or `−` with its spacing.
const SIGN: f32 = 1.22;

// ---------------------------------------------------------------------------------------------
// Names

/// One letter, optionally followed by digits: `p`, `o12`.
fn is_simple(n: &str) -> bool {
    let mut chars = n.chars();
    chars.next().is_some_and(|c| c.is_ascii_alphabetic()) && chars.all(|c| c.is_ascii_digit())
}

/// A name from the input in math mode: one letter stays italic (`p`), one letter followed by
/// digits takes them as a subscript (`o12` → o₁₂), anything else is upright with `_` escaped
/// (`core`, `pair_singlet`). Names are `[A-Za-z_][A-Za-z0-9_]*` by the grammar; any other
/// character would be dropped rather than passed to TeX.
fn name(n: &str) -> String {
    if is_simple(n) {
        let (letter, digits) = n.split_at(1);
        if digits.is_empty() { letter.to_string() } else { format!("{letter}_{{{digits}}}") }
    } else {
        upright(n)
    }
}

/// `\mathrm{…}` of a name, `_` escaped, nothing outside `[A-Za-z0-9_]` kept.
fn upright(n: &str) -> String {
    let mut body = String::new();
    for c in n.chars() {
        match c {
            '_' => body.push_str(r"\_"),
            c if c.is_ascii_alphanumeric() => body.push(c),
            _ => {}
        }
    }
    format!(r"\mathrm{{{body}}}")
}

/// Index names side by side when each is one letter (with digits), else separated by `sep`.
fn indices(names: &[String], sep: &str) -> String {
    let joint = if names.iter().all(|n| is_simple(n)) { "" } else { sep };
    names.iter().map(|n| name(n)).collect::<Vec<_>>().join(joint)
}

fn subscript(names: &[String]) -> String {
    format!("_{{{}}}", indices(names, ","))
}

// ---------------------------------------------------------------------------------------------
// Numbers and terms

/// |c| as TeX: `2`, `\frac{1}{2}`, `\frac{\sqrt{3}}{2}`, `\left(1 + \sqrt{2}\right)`.
fn magnitude(c: &Exact) -> String {
    let parts: Vec<String> = c
        .abs()
        .parts()
        .map(|(q, n)| {
            let root = if n == 1 { String::new() } else { format!(r"\sqrt{{{n}}}") };
            let num = q.numer().abs();
            let top = match (num.is_one(), root.is_empty()) {
                (true, false) => root.clone(),
                (_, true) => num.to_string(),
                (false, false) => format!("{num}{root}"),
            };
            let top = if q.is_negative() { format!("-{top}") } else { top };
            if q.denom().is_one() { top } else { format!(r"\frac{{{top}}}{{{}}}", q.denom()) }
        })
        .collect();
    if parts.len() == 1 {
        parts[0].clone()
    } else {
        format!(r"\left({}\right)", parts.join(" + ").replace("+ -", "- "))
    }
}

fn factor(f: &Factor, namer: &Namer, summed: &[String]) -> String {
    let (kind, n) = integral_parts(f, namer, summed);
    match kind {
        IntegralKind::Number => "1".into(),
        IntegralKind::RefEnergy => r"E_{\mathrm{ref}}".into(),
        IntegralKind::Fock => format!("f{}", subscript(&n)),
        IntegralKind::OneElectron => format!("h{}", subscript(&n)),
        IntegralKind::Coulomb => format!("J{}", subscript(&n)),
        IntegralKind::Exchange => format!("K{}", subscript(&n)),
        IntegralKind::General => {
            format!(r"({}\vert {})", indices(&n[..2], r"\,"), indices(&n[2..], r"\,"))
        }
        IntegralKind::OneDensity => format!(r"\gamma{}", subscript(&n)),
        IntegralKind::TwoDensity => format!(r"\Gamma{}", subscript(&n)),
    }
}

/// |c| times `body`: `J_{ab}`, `2 J_{ab}`, `\frac{1}{2} K_{pr}`, `\sqrt{2}\, f_{ia}` (a thin
/// space after a radical, as usual); the sign is the caller's.
fn times(c: &Exact, body: &str) -> String {
    if c.abs() == Exact::one() {
        body.to_string()
    } else if body == "1" {
        magnitude(c)
    } else {
        let m = magnitude(c);
        let gap = if m.ends_with('}') && !m.starts_with(r"\frac") { r"\, " } else { " " };
        format!("{m}{gap}{body}")
    }
}

/// One piece of an expression line: a term, with the sign before it.
/// A line may break before any piece; `inside` marks a piece within a parenthesised group, so
/// that a break there is indented further.
struct Piece {
    negative: bool,
    text: String,
    inside: bool,
}

/// `k,l \in \mathrm{occ}` for each run of summation indices over one space.
fn bounds(sums: &[SpaceId], summed: &[String], namer: &Namer) -> Vec<String> {
    sum_runs(sums, summed)
        .into_iter()
        .map(|(names, space)| {
            let names: Vec<String> = names.into_iter().map(name).collect();
            format!(r"{} \in {}", names.join(","), upright(namer.space(space)))
        })
        .collect()
}

/// The deltas and sums in front of a group: `\delta_{ij}\sum_{k,l \in \mathrm{occ}}`.
fn prefix(g: &Group, namer: &Namer, summed: &[String]) -> String {
    let o = |x| namer.orb(x, summed);
    let mut prefix = String::new();
    for &(a, b) in g.deltas {
        prefix.push_str(&format!(r"\delta{}", subscript(&[o(a), o(b)])));
    }
    for bound in bounds(g.sums, summed, namer) {
        if !prefix.is_empty() {
            prefix.push(' ');
        }
        prefix.push_str(&format!(r"\sum_{{{bound}}}"));
    }
    prefix
}

/// The pieces of one group. A group of several terms behind deltas or sums is
/// `prefix \bigl( t1 ± t2 … \bigr)`, one piece per term (the first carries the prefix and the
/// opening parenthesis, the last the closing one); `\bigl`/`\bigr` rather than `\left`/`\right`
/// so that the parenthesis may span lines.
fn group_pieces(g: &Group, namer: &Namer) -> Vec<Piece> {
    let summed = namer.summed_names(g.sums);
    let prefix = prefix(g, namer, &summed);
    let body = |t: &Term| factor(&t.factor, namer, &summed);
    let term = |t: &Term| (t.coeff.is_negative(), times(&t.coeff, &body(t)));
    if g.terms.len() == 1 {
        let t = g.terms[0];
        let inner = body(t);
        let text = if prefix.is_empty() {
            times(&t.coeff, &inner)
        } else if inner == "1" {
            times(&t.coeff, &prefix)
        } else {
            times(&t.coeff, &format!("{prefix} {inner}"))
        };
        return vec![Piece { negative: t.coeff.is_negative(), text, inside: false }];
    }
    let terms: Vec<(bool, String)> = g.terms.iter().map(|t| term(t)).collect();
    if prefix.is_empty() {
        return terms.into_iter().map(|(negative, text)| Piece { negative, text, inside: false }).collect();
    }
    let tall = terms.iter().any(|(_, t)| t.contains(r"\frac"));
    let (open, close) = if tall { (r"\Bigl(", r"\Bigr)") } else { (r"\bigl(", r"\bigr)") };
    let last = terms.len() - 1;
    terms
        .into_iter()
        .enumerate()
        .map(|(k, (negative, text))| {
            let text = if k == last { format!(r"{text} {close}") } else { text };
            if k == 0 {
                let sign = if negative { "-" } else { "" };
                Piece { negative: false, text: format!("{prefix} {open} {sign}{text}"), inside: false }
            } else {
                Piece { negative, text, inside: true }
            }
        })
        .collect()
}

// ---------------------------------------------------------------------------------------------
// Line breaking

/// One line of an expression: its TeX (a continuation starts with `{} + ` so the sign stays
/// binary) and whether it continues inside a parenthesis.
struct Line {
    text: String,
    inside: bool,
}

/// The room of the lines of one expression: the first line, a continuation, and a
/// continuation inside a parenthesis.
#[derive(Clone, Copy)]
struct Room {
    first: f32,
    rest: f32,
    inside: f32,
}

impl Room {
    fn scaled(self, f: f32) -> Room {
        Room { first: self.first * f, rest: self.rest * f, inside: self.inside * f }
    }
}

/// Breaks an expression into lines by printed width, as evenly as its number of lines allows:
/// the room is narrowed for as long as that adds no line and breaks no more parenthesised
/// groups, so that a last line does not hold a single stray term.
fn layout(expr: &Expr, namer: &Namer, room: Room) -> Vec<Line> {
    if expr.is_zero() {
        return vec![Line { text: "0".into(), inside: false }];
    }
    let measured: Vec<Vec<(Piece, f32)>> = groups(expr)
        .iter()
        .map(|g| {
            group_pieces(g, namer)
                .into_iter()
                .map(|p| {
                    let w = width(&p.text) + SIGN;
                    (p, w)
                })
                .collect()
        })
        .collect();
    let mut lines = fill(&measured, room);
    let mut f = 0.95;
    while lines.len() > 1 && f > 0.5 {
        let narrower = fill(&measured, room.scaled(f));
        let split = |lines: &[Line]| lines.iter().filter(|l| l.inside).count();
        if narrower.len() > lines.len() || split(&narrower) > split(&lines) {
            break;
        }
        lines = narrower;
        f -= 0.05;
    }
    lines
}

/// Fills lines greedily: terms fill a line while they fit; a parenthesised group goes whole
/// onto the current line if it fits, else whole onto a new line if it fits there, and only a
/// group longer than a line is broken between its terms. A line holds at least one piece,
/// however wide.
fn fill(groups: &[Vec<(Piece, f32)>], room: Room) -> Vec<Line> {
    let mut lines = vec![];
    let mut line = Line { text: String::new(), inside: false };
    let (mut used, mut capacity, mut first) = (0.0f32, room.first, true);
    let fresh = |lines: &mut Vec<Line>, line: &mut Line, used: &mut f32, capacity: &mut f32, inside| {
        lines.push(std::mem::replace(line, Line { text: String::new(), inside }));
        *used = 0.0;
        *capacity = if inside { room.inside } else { room.rest };
    };
    for pieces in groups {
        let total: f32 = pieces.iter().map(|(_, w)| w).sum();
        let bracketed = pieces.iter().any(|(p, _)| p.inside);
        if bracketed && !line.text.is_empty() && used + total > capacity && total <= room.rest {
            fresh(&mut lines, &mut line, &mut used, &mut capacity, false);
        }
        for (piece, w) in pieces {
            if !line.text.is_empty() && used + w > capacity {
                fresh(&mut lines, &mut line, &mut used, &mut capacity, piece.inside);
            }
            let sign = joining_sign(first, line.text.is_empty(), piece.negative);
            line.text.push_str(sign);
            line.text.push_str(&piece.text);
            used += w;
            first = false;
        }
    }
    lines.push(line);
    lines
}

// ---------------------------------------------------------------------------------------------
// Printed width

/// Whether characters are set as math, as roman text or in typewriter type.
#[derive(Clone, Copy, PartialEq)]
enum Mode {
    Math,
    Text,
    Typewriter,
}

/// The printed width of TeX that this emitter writes, in em, in display style: enough of the
/// Computer Modern metrics and of TeX's math spacing for the constructions used here.
fn width(tex: &str) -> f32 {
    let chars: Vec<char> = tex.chars().collect();
    let mut pos = 0;
    let mut total = 0.0;
    while pos < chars.len() {
        total += atom(&chars, &mut pos, 1.0, Mode::Math);
    }
    total
}

/// The space TeX puts after a sub- or superscript.
const SCRIPT_SPACE: f32 = 0.05;

/// The size of a script relative to the text font: Computer Modern's 7 pt and 5 pt designs
/// are wider for their size than the 10 pt one.
fn smaller(scale: f32) -> f32 {
    if scale >= 1.0 { 0.8 } else { 0.65 }
}

/// The width of everything up to the `}` that closes the group opened just before `pos`.
fn group_width(s: &[char], pos: &mut usize, scale: f32, mode: Mode) -> f32 {
    let mut total = 0.0;
    while *pos < s.len() {
        if s[*pos] == '}' {
            *pos += 1;
            return total;
        }
        total += atom(s, pos, scale, mode);
    }
    total
}

/// The width of one argument: a braced group or a single atom.
fn argument(s: &[char], pos: &mut usize, scale: f32, mode: Mode) -> f32 {
    while s.get(*pos) == Some(&' ') {
        *pos += 1;
    }
    if *pos >= s.len() { 0.0 } else { atom(s, pos, scale, mode) }
}

fn atom(s: &[char], pos: &mut usize, scale: f32, mode: Mode) -> f32 {
    let c = s[*pos];
    *pos += 1;
    let script = scale < 1.0;
    match (c, mode) {
        ('{', _) => group_width(s, pos, scale, mode),
        ('}', _) => 0.0,
        ('\\', _) => command(s, pos, scale, mode),
        ('_' | '^', Mode::Math) => {
            let mut w = argument(s, pos, smaller(scale), mode);
            let other = if c == '_' { '^' } else { '_' };
            if s.get(*pos) == Some(&other) {
                *pos += 1;
                w = w.max(argument(s, pos, smaller(scale), mode));
            }
            w + SCRIPT_SPACE
        }
        (_, Mode::Typewriter) => 0.525 * scale,
        (' ' | '\n', Mode::Text) => 0.33 * scale,
        (' ' | '\n' | '&' | '~', Mode::Math) => 0.0,
        ('+' | '-', Mode::Math) => scale * if script { 0.78 } else { SIGN },
        ('=', Mode::Math) => scale * if script { 0.78 } else { 1.34 },
        ('(' | ')' | '[' | ']', _) => 0.39 * scale,
        ('|' | '.' | '\'' | ';' | ':', _) => 0.28 * scale,
        (',', _) => scale * if script { 0.28 } else { 0.45 },
        ('m' | 'w' | 'H' | 'K' | 'M' | 'N' | 'W' | 'X', _) => 0.9 * scale,
        ('i' | 'j' | 'l' | 't', _) => 0.36 * scale,
        ('A'..='Z', _) => 0.78 * scale,
        ('0'..='9', _) => 0.5 * scale,
        _ => 0.52 * scale,
    }
}

/// The width of the command whose backslash was just read, with its arguments.
fn command(s: &[char], pos: &mut usize, scale: f32, mode: Mode) -> f32 {
    let start = *pos;
    while *pos < s.len() && s[*pos].is_ascii_alphabetic() {
        *pos += 1;
    }
    if *pos == start && *pos < s.len() {
        *pos += 1;
    }
    let cmd: String = s[start..*pos].iter().collect();
    let script = scale < 1.0;
    match cmd.as_str() {
        "frac" => {
            let top = argument(s, pos, scale, mode);
            let bottom = argument(s, pos, scale, mode);
            top.max(bottom) + 0.24 * scale
        }
        "sqrt" => argument(s, pos, scale, mode) + 0.83 * scale,
        "mathrm" | "mathit" => argument(s, pos, scale, Mode::Math),
        "text" => argument(s, pos, scale, Mode::Text),
        "texttt" => argument(s, pos, scale, Mode::Typewriter),
        "hat" | "bar" => argument(s, pos, scale, mode),
        "sum" => {
            let mut w = 1.44 * scale;
            while s.get(*pos) == Some(&' ') {
                *pos += 1;
            }
            while matches!(s.get(*pos), Some('_' | '^')) {
                *pos += 1;
                w = w.max(argument(s, pos, smaller(scale), mode) + SCRIPT_SPACE);
            }
            w + 0.34 * scale
        }
        "left" | "right" | "bigl" | "bigr" | "Bigl" | "Bigr" => {
            argument(s, pos, scale, mode);
            0.47 * scale
        }
        "langle" | "rangle" => 0.39 * scale,
        "vert" | "lvert" | "rvert" => 0.28 * scale,
        "delta" => 0.45 * scale,
        "in" => scale * if script { 0.67 } else { 1.23 },
        "cup" => scale * if script { 0.67 } else { 1.11 },
        "to" => scale * if script { 1.0 } else { 1.56 },
        "cdot" => scale * if script { 0.28 } else { 0.72 },
        "," => 0.17 * scale,
        ";" => 0.28 * scale,
        " " => 0.33 * scale,
        "quad" => scale,
        "qquad" => 2.0 * scale,
        "_" => 0.36 * scale,
        "{" | "}" | "$" | "&" | "#" | "%" | "^" | "~" => 0.5 * scale,
        "textbackslash" | "textbar" | "textless" | "textgreater" => 0.5 * scale,
        _ => scale,
    }
}

// ---------------------------------------------------------------------------------------------
// State labels

/// The tokens of a request operand as the input wrote it.
#[derive(Clone, Debug, PartialEq)]
enum Tok {
    /// A name, with the `N` of `X.N` for a member of a coupled-state family.
    Name(String, Option<String>),
    Prime,
    Square,
    Number(String),
    Arrow,
    Symbol(char),
}

/// The tokens of an operand, or None if it holds anything the grammar does not produce there.
fn tokens(text: &str) -> Option<Vec<Tok>> {
    let s: Vec<char> = text.chars().collect();
    let mut out = vec![];
    let mut i = 0;
    let run = |i: &mut usize, ok: &dyn Fn(char) -> bool| {
        let start = *i;
        while *i < s.len() && ok(s[*i]) {
            *i += 1;
        }
        s[start..*i].iter().collect::<String>()
    };
    while i < s.len() {
        let c = s[i];
        match c {
            ' ' | '\t' => i += 1,
            c if c.is_ascii_alphabetic() || c == '_' => {
                let n = run(&mut i, &|c| c.is_ascii_alphanumeric() || c == '_');
                let family = if s.get(i) == Some(&'.') && s.get(i + 1).is_some_and(|c| c.is_ascii_digit()) {
                    i += 1;
                    Some(run(&mut i, &|c| c.is_ascii_digit()))
                } else {
                    None
                };
                out.push(Tok::Name(n, family));
            }
            c if c.is_ascii_digit() => {
                let mut n = run(&mut i, &|c| c.is_ascii_digit());
                if s.get(i) == Some(&'.') && s.get(i + 1).is_some_and(|c| c.is_ascii_digit()) {
                    i += 1;
                    n.push('.');
                    n.push_str(&run(&mut i, &|c| c.is_ascii_digit()));
                }
                out.push(Tok::Number(n));
            }
            '\'' => {
                out.push(Tok::Prime);
                i += 1;
            }
            '^' if s.get(i + 1) == Some(&'2') => {
                out.push(Tok::Square);
                i += 2;
            }
            '-' if s.get(i + 1) == Some(&'>') => {
                out.push(Tok::Arrow);
                i += 2;
            }
            '|' | '[' | ']' | '(' | ')' | '+' | '-' | '*' | '/' => {
                out.push(Tok::Symbol(c));
                i += 1;
            }
            _ => return None,
        }
    }
    Some(out)
}

/// A state or determinant name: `S_{1}`, `\mathrm{singlet}.1`.
fn reference(n: &str, family: &Option<String>) -> String {
    match family {
        Some(k) => format!("{}.{k}", name(n)),
        None => name(n),
    }
}

/// Spin orbitals (`a`, `b'`, `core^2`) in math: `a`, `\bar{b}`, `\mathrm{core}^{2}`; None if
/// the tokens are anything else.
fn spin_orbitals(toks: &[Tok]) -> Option<(Vec<String>, bool)> {
    let mut out = vec![];
    let mut simple = true;
    let mut i = 0;
    while i < toks.len() {
        let Tok::Name(n, None) = &toks[i] else { return None };
        simple &= is_simple(n);
        let text = match toks.get(i + 1) {
            Some(Tok::Prime) => {
                i += 1;
                format!(r"\bar{{{}}}", name(n))
            }
            Some(Tok::Square) => {
                i += 1;
                format!("{}^{{2}}", name(n))
            }
            _ => name(n),
        };
        out.push(text);
        i += 1;
    }
    Some((out, simple))
}

/// A request operand in math. A determinant written inline is its occupants (the bra or ket
/// supplies the bars): `\mathrm{core}^{2}\, a\, \bar{b}`. One excitation of a named state is
/// written with the orbitals left below and the ones entered above: `\mathrm{ref}_{i\bar{j}}^{a\bar{b}}`.
/// Anything else goes token by token: names, a beta spin orbital barred, an inline determinant
/// between bars, an excitation in brackets with an arrow, `sqrt(…)` as a radical.
fn math_label(toks: &[Tok]) -> Option<String> {
    if let [Tok::Symbol('|'), inner @ .., Tok::Symbol('|')] = toks
        && let Some((occupants, _)) = spin_orbitals(inner)
    {
        return Some(if occupants.is_empty() { r"\mathrm{vac}".into() } else { occupants.join(r"\, ") });
    }
    if let [Tok::Name(n, family), Tok::Symbol('['), inner @ .., Tok::Symbol(']')] = toks
        && n != "sqrt"
        && let Some(arrow) = inner.iter().position(|t| *t == Tok::Arrow)
        && let (Some((from, a)), Some((to, b))) =
            (spin_orbitals(&inner[..arrow]), spin_orbitals(&inner[arrow + 1..]))
        && !from.is_empty()
        && !to.is_empty()
    {
        let joint = if a && b { "" } else { r"\," };
        return Some(format!("{{{}}}_{{{}}}^{{{}}}", reference(n, family), from.join(joint), to.join(joint)));
    }
    let mut out = String::new();
    let mut parens: Vec<bool> = vec![];
    let mut in_det = false;
    let mut after_operand = false;
    let mut i = 0;
    while i < toks.len() {
        let gap = |out: &mut String, after: bool| {
            if after {
                out.push_str(r"\, ");
            }
        };
        match &toks[i] {
            Tok::Name(n, None) if n == "sqrt" && toks.get(i + 1) == Some(&Tok::Symbol('(')) => {
                gap(&mut out, after_operand);
                out.push_str(r"\sqrt{");
                parens.push(true);
                after_operand = false;
                i += 1;
            }
            Tok::Name(n, family) => {
                gap(&mut out, after_operand);
                let base = reference(n, family);
                match toks.get(i + 1) {
                    Some(Tok::Prime) if family.is_none() => {
                        out.push_str(&format!(r"\bar{{{base}}}"));
                        i += 1;
                    }
                    Some(Tok::Square) if family.is_none() => {
                        out.push_str(&format!("{base}^{{2}}"));
                        i += 1;
                    }
                    _ => out.push_str(&base),
                }
                after_operand = true;
            }
            Tok::Number(x) => {
                gap(&mut out, after_operand);
                out.push_str(x);
                after_operand = true;
            }
            Tok::Symbol('(') => {
                gap(&mut out, after_operand);
                out.push('(');
                parens.push(false);
                after_operand = false;
            }
            Tok::Symbol(')') => {
                out.push(if parens.pop()? { '}' } else { ')' });
                after_operand = true;
            }
            Tok::Symbol('|') if in_det => {
                out.push_str(r"\rvert ");
                in_det = false;
                after_operand = true;
            }
            Tok::Symbol('|') => {
                gap(&mut out, after_operand);
                out.push_str(r"\lvert ");
                in_det = true;
                after_operand = false;
            }
            Tok::Symbol('[') => {
                out.push('[');
                after_operand = false;
            }
            Tok::Symbol(']') => {
                out.push(']');
                after_operand = true;
            }
            Tok::Arrow => {
                out.push_str(r" \to ");
                after_operand = false;
            }
            Tok::Symbol(c @ ('+' | '-')) => {
                out.push_str(&format!(" {c} "));
                after_operand = false;
            }
            Tok::Symbol('*') => {
                out.push_str(r" \cdot ");
                after_operand = false;
            }
            Tok::Symbol('/') => {
                out.push('/');
                after_operand = false;
            }
            _ => return None,
        }
        i += 1;
    }
    (parens.is_empty() && !in_det && !out.is_empty()).then_some(out)
}

/// Text from the input for typewriter type (`\texttt`), shown verbatim and safely: a
/// character special to TeX is written by its code (`{\char92}` for a backslash), which the
/// typewriter fonts hold at its ASCII position, and anything outside printable ASCII is `?`.
fn typewriter(text: &str) -> String {
    let mut out = String::new();
    for c in text.chars() {
        match c {
            '\\' | '{' | '}' | '$' | '&' | '#' | '_' | '%' | '^' | '~' | '|' | '<' | '>' | '"' | '-'
            | '`' => out.push_str(&format!("{{\\char{}}}", c as u32)),
            ' '..='~' => out.push(c),
            _ => out.push('?'),
        }
    }
    out
}

/// Text from the input in a TeX comment: on one line, printable ASCII only, and no `^^`
/// (which TeX would read as a character code before it sees the comment).
fn comment(text: &str) -> String {
    let line: String = text.chars().map(|c| if (' '..='~').contains(&c) { c } else { ' ' }).collect();
    line.replace("^^", "^ ^")
}

/// A request operand as a label in math mode: see `math_label`; what it cannot read is set
/// in typewriter type as it was written.
fn label(operand: &str) -> String {
    tokens(operand)
        .and_then(|t| math_label(&t))
        .unwrap_or_else(|| format!(r"\text{{\texttt{{{}}}}}", typewriter(operand)))
}

// ---------------------------------------------------------------------------------------------
// Requests

/// The left-hand sides of a request, one per expression (two for `spin`: ⟨S²⟩ and ⟨S_z⟩).
fn left_sides(d: &Derivation) -> Vec<String> {
    let (b, k) = (label(&d.bra), label(&d.ket));
    match d.kind {
        RequestKind::Energy | RequestKind::Shells | RequestKind::Density => vec![format!(
            r"\frac{{\langle {b} \vert \hat{{H}} \vert {b} \rangle}}{{\langle {b} \vert {b} \rangle}}"
        )],
        RequestKind::TransitionDensity => vec![format!(r"\langle {b} \vert \hat{{H}} \vert {k} \rangle")],
        RequestKind::Element | RequestKind::Roots => {
            vec![format!(r"\langle {b} \vert \hat{{H}} \vert {k} \rangle")]
        }
        RequestKind::Overlap => vec![format!(r"\langle {b} \vert {k} \rangle")],
        RequestKind::Spin => vec![
            format!(r"\langle \hat{{S}}^2 \rangle_{{{b}}}"),
            format!(r"\langle \hat{{S}}_z \rangle_{{{b}}}"),
        ],
    }
}

/// The definitions of f_pq and E_ref over the closed spaces that `used` asks for, as (left side,
/// right side), summed over letters the expression does not use.
fn fock_legend(d: &Derivation, namer: &Namer, used: Definitions) -> Vec<(String, String)> {
    let closed = d.closed.members();
    let over = closed.iter().map(|&s| upright(namer.space(s))).collect::<Vec<_>>().join(r" \cup ");
    let [k, l] = namer.definition_names(&closed);
    let eri = |n: [&String; 4]| {
        let n = n.map(String::clone);
        format!(r"({}\vert {})", indices(&n[..2], r"\,"), indices(&n[2..], r"\,"))
    };
    let [p, q] = ["p", "q"].map(String::from);
    let (sk, sl) = (name(&k), name(&l));
    let mut out = vec![];
    if used.fock {
        out.push((
            "f_{pq}".into(),
            format!(
                r"h_{{pq}} + \sum_{{{sk} \in {over}}} \bigl( 2 {} - {} \bigr)",
                eri([&p, &q, &k, &k]),
                eri([&p, &k, &k, &q])
            ),
        ));
    }
    if used.reference {
        out.push((
            r"E_{\mathrm{ref}}".into(),
            format!(
                r"2 \sum_{{{sk} \in {over}}} h{} + \sum_{{{sk},{sl} \in {over}}} \bigl( 2 J{kl} - K{kl} \bigr)",
                subscript(&[k.clone(), k.clone()]),
                kl = subscript(&[k.clone(), l.clone()])
            ),
        ));
    }
    out
}

/// The `align*` of one request. A left side that fits beside its expression stands in the
/// first column (`lhs &= …`, continuations `&\quad {} + …`); a wider one (see `WIDE_LEFT`)
/// takes a line of its own (`&lhs \\ &\quad = …`, continuations `&\qquad {} + …`). The
/// definitions in `legend` follow under the expression.
fn environment(d: &Derivation, namer: &Namer, legend: Definitions) -> String {
    let expressions = if d.kind == RequestKind::Spin { vec![&d.value, &d.s_z] } else { vec![&d.value] };
    rows_environment(d, left_sides(d), &expressions, namer, legend)
}

/// The `align*` of expressions with their left sides (see `environment`); `d` gives the closed
/// spaces of the legend.
fn rows_environment(
    d: &Derivation,
    left: Vec<String>,
    expressions: &[&Expr],
    namer: &Namer,
    legend: Definitions,
) -> String {
    let left_width = left.iter().map(|l| width(l)).fold(0.0, f32::max);
    let arrange = |wide: bool| -> Vec<Vec<Line>> {
        let (column, indent) = if wide { (0.0, 1.0) } else { (left_width, 0.0) };
        let room = Room {
            first: MEASURE - column - indent - 1.34,
            rest: MEASURE - column - indent - 1.0,
            inside: MEASURE - column - indent - 2.0,
        };
        expressions.iter().map(|e| layout(e, namer, room)).collect()
    };
    // a wide left side keeps its column unless a line of its own saves lines
    let beside = arrange(false);
    let rows = |a: &Vec<Vec<Line>>| a.iter().map(|lines| lines.len()).sum::<usize>();
    let below =
        (left_width > WIDE_LEFT).then(|| arrange(true)).filter(|b| rows(b) + left.len() < rows(&beside));
    let wide = below.is_some();
    let arranged = below.unwrap_or(beside);
    let quads = |depth: u32| match depth {
        1 => r"\quad",
        2 => r"\qquad",
        _ => r"\qquad\quad",
    };
    let mut rows: Vec<String> = vec![];
    for (lhs, lines) in left.iter().zip(arranged) {
        for (k, line) in lines.iter().enumerate() {
            let depth = u32::from(wide) + 1 + u32::from(line.inside);
            rows.push(match (k, wide) {
                (0, false) => format!("{lhs}\n  &= {}", line.text),
                (0, true) => format!("&{lhs} \\\\\n  &\\quad = {}", line.text),
                (_, _) => format!("&{} {}", quads(depth), line.text),
            });
        }
    }
    with_legend(d, namer, legend, &rows, wide)
}

/// `align*` around rows, the definitions in `legend` under them.
fn with_legend(d: &Derivation, namer: &Namer, legend: Definitions, rows: &[String], wide: bool) -> String {
    let mut out = String::from("\\begin{align*}\n  ");
    out.push_str(&rows.join(" \\\\\n  "));
    if legend.any() {
        out.push_str(" \\\\\n\\intertext{with}\n  ");
        let legend: Vec<String> = fock_legend(d, namer, legend)
            .iter()
            .map(|(l, r)| if wide { format!("&{l} = {r}") } else { format!("{l} &= {r}") })
            .collect();
        out.push_str(&legend.join(" \\\\\n  "));
    }
    out.push_str("\n\\end{align*}\n");
    out
}

/// The rows of a form in the free coefficients: `lhs &= n m \bigl( … \bigr) + …`. A summand
/// whose expression takes one line stays on the row; a longer one starts a row of its own,
/// its expression in brackets that open on its first line and close on its last.
fn form_rows(lhs: &str, summands: &[Summand], namer: &Namer) -> Vec<String> {
    let room = MEASURE - width(lhs) - 1.34;
    let mut rows = vec![];
    let mut current = format!("{lhs}\n  &= ");
    let (mut used, mut first, mut fresh) = (0.0f32, true, true);
    if summands.is_empty() {
        current.push('0');
    }
    for s in summands {
        let names: Vec<String> = s.coefficients.iter().map(|n| name(n)).collect();
        let monomial = monomial_text(&names, &|n| format!("{n}^{{2}}"), r"\,");
        let negative = s.expr.is_none() && s.number.is_negative();
        // the summand without its sign: inline text, or the lines of a long expression
        let (text, lines) = match s.expr {
            None => (times(&s.number, if monomial.is_empty() { "1" } else { &monomial }), vec![]),
            Some(expr) => {
                let prefix =
                    if monomial.is_empty() { String::new() } else { times(&s.number, &monomial) + " " };
                let lines =
                    layout(expr, namer, Room { first: room - 2.0, rest: room - 2.0, inside: room - 3.0 });
                match lines.as_slice() {
                    [line] => {
                        let tall = line.text.contains(r"\frac");
                        let (open, close) =
                            if tall { (r"\Bigl(", r"\Bigr)") } else { (r"\bigl(", r"\bigr)") };
                        (format!("{prefix}{open} {} {close}", line.text), vec![])
                    }
                    _ => (format!(r"{prefix}\Bigl[ "), lines),
                }
            }
        };
        if !fresh && (!lines.is_empty() || used + width(&text) + SIGN > room) {
            rows.push(std::mem::replace(&mut current, r"&\quad ".to_string()));
            (used, fresh) = (0.0, true);
        }
        let sign = joining_sign(first, fresh, negative);
        first = false;
        current.push_str(sign);
        current.push_str(&text);
        let Some((last, middle)) = lines.split_last() else {
            used += width(&text) + SIGN;
            fresh = false;
            continue;
        };
        for line in middle {
            current.push_str(&line.text);
            rows.push(std::mem::replace(&mut current, r"&\qquad ".to_string()));
        }
        current.push_str(&format!(r"{} \Bigr]", last.text));
        rows.push(std::mem::replace(&mut current, r"&\quad ".to_string()));
        (used, fresh) = (0.0, true);
    }
    if !fresh || rows.is_empty() {
        rows.push(current);
    }
    rows
}

/// The `align*` of a request on pairs of functions. Free coefficients: the value and the
/// overlap as forms in the coefficients. `roots`: one per pair, <f|H|g> and <f|g>, a ket whose
/// indices are renamed apart from the bra's carrying the renaming below its bracket.
fn block_environments(
    program: &Program,
    d: &Derivation,
    block: &BlockDerivation,
    legend: Definitions,
) -> String {
    let (b, k) = (label(&d.bra), label(&d.ket));
    if d.kind != RequestKind::Roots {
        let monomials = block.monomials();
        let expressions: Vec<&Expr> = monomials.iter().flat_map(|m| [&m.value, &m.overlap]).collect();
        let namer = Namer::new(program, &expressions);
        let h = format!(r"\langle {b} \vert \hat{{H}} \vert {k} \rangle");
        let s = format!(r"\langle {b} \vert {k} \rangle");
        let forms = match d.kind {
            RequestKind::Overlap => vec![(s, false)],
            _ => vec![(h, false), (s, true)],
        };
        let rows: Vec<String> = forms
            .into_iter()
            .flat_map(|(lhs, overlap)| form_rows(&lhs, &summands(program, &monomials, overlap), &namer))
            .collect();
        return with_legend(d, &namer, legend, &rows, false);
    }
    let mut out = String::new();
    for (pair, pd) in block.block.pairs.iter().zip(&block.pairs) {
        let namer = Namer::new(program, &[&pd.value, &pd.overlap]);
        let renamed = if pair.renamed.is_empty() {
            String::new()
        } else {
            let to = |(a, b): &(u32, u32)| {
                format!(
                    r"{} \to {}",
                    name(&program.indices[*a as usize].name),
                    name(&program.indices[*b as usize].name)
                )
            };
            format!("_{{{}}}", pair.renamed.iter().map(to).collect::<Vec<_>>().join(r",\, "))
        };
        let (b, k) = (label(&pd.bra), label(&pd.ket));
        let left = vec![
            format!(r"\langle {b} \vert \hat{{H}} \vert {k} \rangle{renamed}"),
            format!(r"\langle {b} \vert {k} \rangle{renamed}"),
        ];
        out.push_str(&rows_environment(pd, left, &[&pd.value, &pd.overlap], &namer, Definitions::default()));
    }
    if legend.any() {
        out.push_str(&with_legend(d, &Namer::new(program, &super::expressions(d)), legend, &[], false));
    }
    out
}

/// A signed exact number: `-\frac{1}{2}`.
fn signed(c: &Exact) -> String {
    if c.is_zero() {
        "0".into()
    } else if c.is_negative() {
        format!("-{}", magnitude(c))
    } else {
        magnitude(c)
    }
}

/// The symmetry of a density in TeX.
fn symmetry_tex(symmetry: Symmetry) -> &'static str {
    match symmetry {
        Symmetry::Transition => r"\Gamma_{pqrs} = \Gamma_{rspq}",
        Symmetry::Expectation => {
            r"\gamma_{pq} = \gamma_{qp},\ \Gamma_{pqrs} = \Gamma_{rspq} = \Gamma_{qpsr} = \Gamma_{srqp}"
        }
    }
}

/// A density as an `align*` of `element += value` rows, each with the summation ranges and
/// equalities under which it applies.
fn density_environment(d: &Derivation, symmetry: Symmetry, namer: &Namer) -> String {
    let (b, k) = (label(&d.bra), label(&d.ket));
    let of = match symmetry {
        Symmetry::Expectation => {
            format!(r"$\langle {b} \vert \cdots \vert {b} \rangle / \langle {b} \vert {b} \rangle$")
        }
        Symmetry::Transition => format!(r"$\langle {b} \vert \cdots \vert {k} \rangle$"),
    };
    let mut out = format!(
        "\\begin{{align*}}\n\\intertext{{The densities {of}, one element of each set related by the symmetry}}\n  &{} \\\\\n\\intertext{{is listed; each row adds its value to the element for every value of its summation indices:}}\n",
        symmetry_tex(symmetry)
    );
    let listed = representatives(&d.value, symmetry);
    let rows: Vec<String> = listed
        .terms
        .iter()
        .map(|t| {
            let summed = namer.summed_names(&t.sums);
            let o = |x| name(&namer.orb(x, &summed));
            let mut conditions: Vec<String> =
                t.deltas.iter().map(|&(a, b)| format!("{} = {}", o(a), o(b))).collect();
            conditions.extend(bounds(&t.sums, &summed, namer));
            let condition = if conditions.is_empty() {
                String::new()
            } else {
                format!(" && {}", conditions.join(r",\ "))
            };
            format!(
                r"  {} &\mathrel{{+}}= {}{condition}",
                factor(&t.factor, namer, &summed),
                signed(&t.coeff)
            )
        })
        .collect();
    if rows.is_empty() {
        out.push_str(r"  &\text{every element is zero}");
    }
    out.push_str(&rows.join(" \\\\\n"));
    out.push_str("\n\\end{align*}\n");
    out
}

/// The tables of an open-shell form: f_s, a_st and b_st over the shells, under the energy.
fn shell_tables(form: &ShellForm, namer: &Namer) -> String {
    if form.shells.is_empty() {
        return "\\noindent In open shells: none; the state has no electrons.\n".into();
    }
    let names: Vec<String> = form
        .shells
        .iter()
        .map(|&s| match s {
            Shell::Orbital(o) => name(&namer.orb(o, &[])),
            Shell::Space(space) => upright(namer.space(space)),
        })
        .collect();
    let columns = "c".repeat(names.len());
    let head = format!(" & {}", names.join(" & "));
    let table = |corner: &str, rows: Vec<(String, &Vec<Exact>)>| {
        let body: Vec<String> = rows
            .iter()
            .map(|(label, row)| {
                format!("{label} & {}", row.iter().map(signed).collect::<Vec<_>>().join(" & "))
            })
            .collect();
        format!(
            "\\begin{{array}}{{c|{columns}}}\n{corner}{head} \\\\ \\hline\n{}\n\\end{{array}}",
            body.join(" \\\\\n")
        )
    };
    let f = table("", vec![("f_s".into(), &form.f)]);
    let a = table("a_{st}", names.iter().cloned().zip(form.a.iter()).collect());
    let b = table("b_{st}", names.iter().cloned().zip(form.b.iter()).collect());
    format!(
        "\\begin{{gather*}}\n\\intertext{{In open shells, $E = \\sum_s f_s h_{{ss}} + \\sum_{{s,t}} (a_{{st}} J_{{st}} + b_{{st}} K_{{st}})$ over ordered pairs of shells (a closed space is one shell, its members summed):}}\n{f}\n\\\\\n{a} \\qquad {b}\n\\end{{gather*}}\n"
    )
}

/// The LaTeX of every derivation; with `standalone`, a complete document that needs nothing
/// beyond amsmath.
pub fn render(program: &Program, derivations: &[(Derivation, Option<Report>)], standalone: bool) -> String {
    let mut out = String::new();
    if standalone {
        out.push_str(
            "\\documentclass{article}\n\\usepackage{amsmath}\n\\allowdisplaybreaks\n\\begin{document}\n",
        );
        out.push_str(&format!("\\section*{{\\texttt{{{}}}}}\n", typewriter(&program.source.name)));
    }
    // f_pq and E_ref are each defined where they first appear over a set of closed spaces
    let (mut fock_defined, mut reference_defined) = (vec![], vec![]);
    for (d, report) in derivations {
        let expressions = super::expressions(d);
        let namer = Namer::new(program, &expressions);
        let used = Definitions::used_in(&expressions);
        let legend = Definitions {
            fock: used.fock && !fock_defined.contains(&d.closed),
            reference: used.reference && !reference_defined.contains(&d.closed),
        };
        if legend.fock {
            fock_defined.push(d.closed);
        }
        if legend.reference {
            reference_defined.push(d.closed);
        }
        out.push_str(&format!("% {}\n", comment(&d.text)));
        out.push_str(&format!("% {}\n", comment(&verification_line(report.as_ref()))));
        match (&d.block, d.density_symmetry(), &d.shells) {
            (Some(block), _, _) => out.push_str(&block_environments(program, d, block, legend)),
            (None, Some(symmetry), _) => out.push_str(&density_environment(d, symmetry, &namer)),
            (None, None, Some(form)) => {
                out.push_str(&environment(d, &namer, legend));
                out.push_str(&shell_tables(form, &namer));
            }
            (None, None, None) => out.push_str(&environment(d, &namer, legend)),
        }
        for note in &super::notes(d) {
            out.push_str(&format!("% note: {}\n", comment(note)));
        }
    }
    if standalone {
        out.push_str("\\end{document}\n");
    }
    out
}

/// The sign that joins a piece to what precedes it: none or a bare minus for the first piece of
/// an expression, `{} +` at the start of a continuation line (amsmath spacing for a binary
/// operator), and ` + ` or ` - ` within a line.
fn joining_sign(first: bool, line_start: bool, negative: bool) -> &'static str {
    match (first, line_start, negative) {
        (true, _, false) => "",
        (true, _, true) => "-",
        (false, true, false) => "{} + ",
        (false, true, true) => "{} - ",
        (false, false, false) => " + ",
        (false, false, true) => " - ",
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_are_typeset_and_escaped() {
        assert_eq!(name("p"), "p");
        assert_eq!(name("o12"), "o_{12}");
        assert_eq!(name("core"), r"\mathrm{core}");
        assert_eq!(name("pair_singlet"), r"\mathrm{pair\_singlet}");
        assert_eq!(name("_x1"), r"\mathrm{\_x1}");
        assert_eq!(upright(r"a}\x{"), r"\mathrm{ax}");
    }

    #[test]
    fn labels_are_math_or_escaped_text() {
        assert_eq!(label("S1"), "S_{1}");
        assert_eq!(label("singlet.2"), r"\mathrm{singlet}.2");
        assert_eq!(label("| core^2 a b' |"), r"\mathrm{core}^{2}\, a\, \bar{b}");
        assert_eq!(label("ref[i j' -> a b']"), r"{\mathrm{ref}}_{i\bar{j}}^{a\bar{b}}");
        assert_eq!(label("(ab - ba)/sqrt(2)"), r"(\mathrm{ab} - \mathrm{ba})/\sqrt{2}");
        assert_eq!(label("ref[i -> a][j' -> b']"), r"\mathrm{ref}[i \to a][\bar{j} \to \bar{b}]");
        assert_eq!(
            label(r"x}\end{document}"),
            r"\text{\texttt{x{\char125}{\char92}end{\char123}document{\char125}}}"
        );
        assert_eq!(label("a^3"), r"\text{\texttt{a{\char94}3}}");
        assert_eq!(label("é%"), r"\text{\texttt{?{\char37}}}");
    }

    #[test]
    fn comments_stay_comments() {
        assert_eq!(comment("a\nb^^Jc"), "a b^ ^Jc");
    }

    #[test]
    fn widths_follow_the_printed_form() {
        assert!((width("J_{ab}") - (0.78 + 0.8 * 1.04 + SCRIPT_SPACE)).abs() < 1e-4);
        assert!(width(r"\frac{1}{2}") < width("12"));
        assert!(width(r"\sum_{k,l \in \mathrm{core}}") > 1.44);
        assert!(width(r"\text{\texttt{abcd}}") > 2.0);
    }
}

//! The readable text form of derivations: Σ, δ, h_pq, J_pq, K_pq and (pq|rs), one group of
//! terms per line, in Unicode or plain ASCII.

use super::{
    Definitions, Group, Namer, Summand, groups, integral_parts, join_signed, monomial_text, sum_runs,
    summands, verification_line,
};
use crate::check::verify::Report;
use crate::engine::block_derivation::BlockDerivation;
use crate::engine::density::{Symmetry, representatives};
use crate::engine::derive::Derivation;
use crate::engine::exact::{Exact, ExactDisplay};
use crate::engine::expression::{Expr, Factor, IntegralKind, Term};
use crate::engine::shells::{Shell, ShellForm};
use crate::language::block::renaming_text;
use crate::language::orbital::SpaceId;
use crate::language::program::{Program, RequestKind};

struct Style {
    ascii: bool,
}

impl Style {
    fn sigma(&self) -> &'static str {
        if self.ascii { "sum" } else { "Σ" }
    }
    fn member(&self) -> &'static str {
        if self.ascii { " in " } else { "∈" }
    }
    fn delta(&self) -> &'static str {
        if self.ascii { "delta" } else { "δ" }
    }
    fn minus(&self) -> &'static str {
        if self.ascii { "-" } else { "−" }
    }
}

/// `ab` when every name is one letter, `{pi,s}` otherwise.
fn subscript(names: &[String]) -> String {
    if names.iter().all(|n| n.chars().count() == 1) {
        names.concat()
    } else {
        format!("{{{}}}", names.join(","))
    }
}

fn factor_text(factor: &Factor, namer: &Namer, summed: &[String], style: &Style) -> String {
    let (kind, n) = integral_parts(factor, namer, summed);
    match kind {
        IntegralKind::OneDensity => format!("{}_{}", if style.ascii { "g" } else { "γ" }, subscript(&n)),
        IntegralKind::TwoDensity => format!("{}_{}", if style.ascii { "G" } else { "Γ" }, subscript(&n)),
        IntegralKind::Number => "1".into(),
        IntegralKind::RefEnergy => "E_ref".into(),
        IntegralKind::Fock => format!("f_{}", subscript(&n)),
        IntegralKind::OneElectron => format!("h_{}", subscript(&n)),
        IntegralKind::Coulomb => format!("J_{}", subscript(&n)),
        IntegralKind::Exchange => format!("K_{}", subscript(&n)),
        IntegralKind::General => general(&n),
    }
}

/// `(pq|rs)` when every name is one letter, `(p q|r s)` otherwise.
fn general(n: &[String]) -> String {
    if n.iter().all(|x| x.chars().count() == 1) {
        format!("({}{}|{}{})", n[0], n[1], n[2], n[3])
    } else {
        format!("({} {}|{} {})", n[0], n[1], n[2], n[3])
    }
}

/// The definitions of f_pq and E_ref over the closed spaces of `d` that `used` asks for, as
/// `f_pq = …` and `E_ref = …` with the kind each defines, summed over letters the expression
/// does not use.
pub fn definitions(
    d: &Derivation,
    namer: &Namer,
    used: Definitions,
    ascii: bool,
) -> Vec<(IntegralKind, String)> {
    let style = Style { ascii };
    let closed = d.closed.members();
    let over =
        closed.iter().map(|&s| namer.space(s)).collect::<Vec<_>>().join(if ascii { " + " } else { " ∪ " });
    let [k, l] = namer.definition_names(&closed);
    let (sum, member, minus) = (style.sigma(), style.member(), style.minus());
    let [p, q] = ["p", "q"].map(String::from);
    let mut out = vec![];
    if used.fock {
        out.push((
            IntegralKind::Fock,
            format!(
                "f_pq = h_pq + {sum}_{{{k}{member}{over}}} (2 {} {minus} {})",
                general(&[p.clone(), q.clone(), k.clone(), k.clone()]),
                general(&[p, k.clone(), k.clone(), q])
            ),
        ));
    }
    if used.reference {
        let kl = subscript(&[k.clone(), l.clone()]);
        out.push((IntegralKind::RefEnergy, format!(
            "E_ref = 2 {sum}_{{{k}{member}{over}}} h_{} + {sum}_{{{k},{l}{member}{over}}} (2 J_{kl} {minus} K_{kl})",
            subscript(&[k.clone(), k.clone()])
        )));
    }
    out
}

/// `2 J_ab`, `K_ab`, `1/2 K_pr`; the sign is written by the caller.
fn magnitude_times(coeff: &Exact, body: &str, style: &Style) -> String {
    let magnitude = coeff.abs();
    if magnitude == Exact::one() {
        body.to_string()
    } else if body == "1" {
        ExactDisplay { value: &magnitude, ascii: style.ascii }.to_string()
    } else {
        format!("{} {body}", ExactDisplay { value: &magnitude, ascii: style.ascii })
    }
}

fn group_text(group: &Group, namer: &Namer, style: &Style) -> (bool, String) {
    let summed = namer.summed_names(group.sums);
    let o = |x| namer.orb(x, &summed);
    let mut prefix = String::new();
    for &(a, b) in group.deltas {
        prefix.push_str(&format!("{}_{} ", style.delta(), subscript(&[o(a), o(b)])));
    }
    if !group.sums.is_empty() {
        prefix.push_str(&format!(
            "{}_{{{}}} ",
            style.sigma(),
            bounds(group.sums, &summed, namer, style).join(",")
        ));
    }
    let body = |t: &Term| factor_text(&t.factor, namer, &summed, style);
    if group.terms.len() == 1 {
        let t = group.terms[0];
        let inner = body(t);
        let text = if prefix.is_empty() {
            magnitude_times(&t.coeff, &inner, style)
        } else {
            let magnitude = t.coeff.abs();
            let lead = if magnitude == Exact::one() {
                String::new()
            } else {
                format!("{} ", ExactDisplay { value: &magnitude, ascii: style.ascii })
            };
            if inner == "1" {
                format!("{lead}{}", prefix.trim_end())
            } else {
                format!("{lead}{prefix}{inner}")
            }
        };
        return (t.coeff.is_negative(), text);
    }
    let items =
        group.terms.iter().map(|t| (t.coeff.is_negative(), magnitude_times(&t.coeff, &body(t), style)));
    let (negative, inner) = join_signed(items, style.minus());
    if prefix.is_empty() {
        (negative, inner)
    } else {
        let inner = if negative { format!("{}{inner}", style.minus()) } else { inner };
        (false, format!("{prefix}({inner})"))
    }
}

/// The expression as lines: the first starts with `= `, each further group starts with its sign.
fn expression_lines(expr: &Expr, namer: &Namer, style: &Style) -> Vec<String> {
    if expr.is_zero() {
        return vec!["= 0".into()];
    }
    let mut lines: Vec<String> = vec![];
    let mut current = String::new();
    for (k, group) in groups(expr).iter().enumerate() {
        let (negative, text) = group_text(group, namer, style);
        let plain = group.deltas.is_empty() && group.sums.is_empty();
        let sign = if negative { style.minus() } else { "+" };
        if k == 0 {
            current = if negative { format!("= {}{text}", style.minus()) } else { format!("= {text}") };
        } else if plain && lines.is_empty() && !current.contains(style.sigma()) {
            current.push_str(&format!(" {sign} {text}"));
        } else {
            lines.push(std::mem::take(&mut current));
            current = format!("{sign} {text}");
        }
    }
    lines.push(current);
    lines
}

/// What a request computes, in brackets; a determinant written inline is named D (bra) and
/// D' (ket) so the brackets stay readable.
pub fn request_meaning(d: &Derivation) -> String {
    let inline = |label: &str| label.contains('|');
    let bra = if inline(&d.bra) { "D" } else { d.bra.as_str() };
    let ket = if inline(&d.ket) { if d.ket == d.bra { "D" } else { "D'" } } else { d.ket.as_str() };
    let mut out = match d.kind {
        RequestKind::Energy => format!("<{bra}|H|{bra}> / <{bra}|{bra}>"),
        RequestKind::Element => format!("<{bra}|H|{ket}>"),
        RequestKind::Overlap => format!("<{bra}|{ket}>"),
        RequestKind::Spin => format!("<S^2> and <S_z> of {bra}"),
        RequestKind::Density => format!("the densities <{bra}| ... |{bra}> / <{bra}|{bra}>"),
        RequestKind::TransitionDensity => format!("the transition densities <{bra}| ... |{ket}>"),
        RequestKind::Shells => format!("<{bra}|H|{bra}> / <{bra}|{bra}> in open shells"),
        RequestKind::Roots => {
            return format!("the elements of H and the overlaps among the members of {}", d.bra);
        }
    };
    if inline(&d.bra) {
        out.push_str(&format!(", {bra} = {}", d.bra));
    }
    if inline(&d.ket) && d.ket != d.bra {
        out.push_str(&format!(", {ket} = {}", d.ket));
    }
    out
}

/// One term of an expression as text, e.g. `2 Σ_{k∈core} h_kk` (for messages).
pub fn term_text(program: &Program, term: &Term) -> String {
    let expr = Expr { terms: vec![term.clone()] };
    let namer = Namer::new(program, &[&expr]);
    expression_lines(&expr, &namer, &Style { ascii: false }).join(" ").trim_start_matches("= ").to_string()
}

/// `k,l∈occ` for each run of summation indices over one space.
fn bounds(sums: &[SpaceId], summed: &[String], namer: &Namer, style: &Style) -> Vec<String> {
    sum_runs(sums, summed)
        .into_iter()
        .map(|(names, space)| format!("{}{}{}", names.join(","), style.member(), namer.space(space)))
        .collect()
}

/// `for k,l ∈ core: ` and `if i = j: ` in front of a density element.
fn condition(term: &Term, namer: &Namer, summed: &[String], style: &Style) -> String {
    let o = |x| namer.orb(x, summed);
    let mut out = String::new();
    if !term.deltas.is_empty() {
        let equal: Vec<String> = term.deltas.iter().map(|&(a, b)| format!("{} = {}", o(a), o(b))).collect();
        out.push_str(&format!("if {}: ", equal.join(", ")));
    }
    if !term.sums.is_empty() {
        out.push_str(&format!("for {}: ", bounds(&term.sums, summed, namer, style).join(", ")));
    }
    out
}

/// A density as a listing: its symmetry, then one line per listed term, `element += value`.
fn density_lines(d: &Derivation, symmetry: Symmetry, namer: &Namer, style: &Style) -> String {
    let listed = representatives(&d.value, symmetry);
    let stated = if style.ascii { symmetry.ascii() } else { symmetry.text() };
    let mut out = format!("  symmetry {stated}: one element of each related set is listed\n");
    if listed.is_zero() {
        out.push_str("  every element is zero\n");
    }
    for t in &listed.terms {
        let summed = namer.summed_names(&t.sums);
        let value = ExactDisplay { value: &t.coeff, ascii: style.ascii }.to_string();
        let value = if style.ascii { value } else { value.replacen('-', style.minus(), 1) };
        out.push_str(&format!(
            "  {}{} += {value}\n",
            condition(t, namer, &summed, style),
            factor_text(&t.factor, namer, &summed, style)
        ));
    }
    out.push_str("  each line adds its value to the element for every value of its summation indices; elements no line reaches are zero\n");
    out
}

/// The tables of an open-shell form: the shells, f per shell, a and b per ordered pair.
fn shell_lines(form: &ShellForm, namer: &Namer, style: &Style) -> String {
    let names: Vec<String> = form.shells.iter().map(|&s| shell_name(s, namer)).collect();
    let number = |c: &Exact| {
        let v = ExactDisplay { value: c, ascii: style.ascii }.to_string();
        if style.ascii { v } else { v.replacen('-', style.minus(), 1) }
    };
    if form.shells.is_empty() {
        return "  in open shells: none; the state has no electrons\n".into();
    }
    let (sum, member) = (style.sigma(), style.member());
    let mut out = format!(
        "  in open shells: E = {sum}_s f_s h_ss + {sum}_{{s,t}} (a_st J_st + b_st K_st), over ordered pairs of shells\n"
    );
    if form.shells.iter().any(|s| matches!(s, Shell::Space(_))) {
        out.push_str(&format!(
            "  a closed space S is one shell: h_SS = {sum}_{{k{member}S}} h_kk, J_St = {sum}_{{k{member}S}} J_kt, J_SS = {sum}_{{k,l{member}S}} J_kl (K alike)\n"
        ));
    }
    let cells: Vec<String> =
        form.f.iter().chain(form.a.iter().chain(&form.b).flatten()).map(number).collect();
    let width = names.iter().chain(&cells).map(|n| n.chars().count()).max().unwrap_or(1) + 2;
    let label = names.iter().map(|n| n.chars().count()).max().unwrap_or(1).max(5);
    let row = |head: &str, name: &str, values: &mut dyn Iterator<Item = String>| {
        format!("  {head:<5} {name:<label$}{}\n", values.map(|v| format!("{v:>width$}")).collect::<String>())
    };
    out.push_str(&row("", "", &mut names.iter().cloned()));
    out.push_str(&row("f_s", "", &mut form.f.iter().map(number)));
    for (head, table) in [("a_st", &form.a), ("b_st", &form.b)] {
        for (k, (values, name)) in table.iter().zip(&names).enumerate() {
            out.push_str(&row(if k == 0 { head } else { "" }, name, &mut values.iter().map(number)));
        }
    }
    out
}

/// A shell as written: an orbital's name, or a closed space's.
pub fn shell_name(shell: Shell, namer: &Namer) -> String {
    match shell {
        Shell::Orbital(o) => namer.orb(o, &[]),
        Shell::Space(s) => namer.space(s).to_string(),
    }
}

/// The text report of every derivation, in request order.
pub fn render(program: &Program, derivations: &[(Derivation, Option<Report>)], ascii: bool) -> String {
    let style = Style { ascii };
    let mut out = String::new();
    for (k, (d, report)) in derivations.iter().enumerate() {
        if k > 0 {
            out.push('\n');
        }
        let expressions = super::expressions(d);
        let namer = Namer::new(program, &expressions);
        out.push_str(&format!("{}    {}\n", d.text, request_meaning(d)));
        if let Some(block) = &d.block {
            out.push_str(&block_lines(program, d, block, &style));
        } else if let Some(symmetry) = d.density_symmetry() {
            out.push_str(&density_lines(d, symmetry, &namer, &style));
        } else if let Some(form) = &d.shells {
            for line in expression_lines(&d.value, &namer, &style) {
                out.push_str(&format!("  {line}\n"));
            }
            out.push_str(&shell_lines(form, &namer, &style));
        } else if d.kind == RequestKind::Spin {
            for (label, expr) in [("<S^2>", &d.value), ("<S_z>", &d.s_z)] {
                for (k, line) in expression_lines(expr, &namer, &style).iter().enumerate() {
                    let lead = if k == 0 { label } else { "     " };
                    out.push_str(&format!("  {lead} {line}\n"));
                }
            }
        } else {
            for line in expression_lines(&d.value, &namer, &style) {
                out.push_str(&format!("  {line}\n"));
            }
        }
        let legend = definitions(d, &namer, Definitions::used_in(&expressions), ascii);
        if !legend.is_empty() {
            let legend: Vec<String> = legend.into_iter().map(|(_, text)| text).collect();
            out.push_str(&format!("  with {}\n", legend.join(" and ")));
        }
        // notes are plain ASCII as the engine writes them, fit for either style
        for note in super::notes(d) {
            let note = if note.starts_with("warning:") { note.clone() } else { format!("note: {note}") };
            out.push_str(&format!("  {note}\n"));
        }
        out.push_str(&format!("  {}\n", verification_line(report.as_ref())));
    }
    out
}

/// `lhs = n1 m1 (e1) + n2 m2 (e2) …`: a form in the free coefficients. A summand whose
/// expression fits one short line stands inline in parentheses; a longer one opens a
/// parenthesis on its line, its expression follows indented, and the parenthesis closes at the
/// start of the next line.
fn form_lines(lhs: &str, summands: &[Summand], namer: &Namer, style: &Style) -> Vec<String> {
    let square = |name: &str| if style.ascii { format!("{name}^2") } else { format!("{name}²") };
    let mut lines = vec![];
    let mut current = format!("{lhs} =");
    if summands.is_empty() {
        current.push_str(" 0");
    }
    for (k, s) in summands.iter().enumerate() {
        let monomial = monomial_text(&s.coefficients, &square, " ");
        let negative = s.expr.is_none() && s.number.is_negative();
        let connector = match (k, negative) {
            (0, false) => " ".to_string(),
            (0, true) => format!(" {}", style.minus()),
            (_, false) => " + ".to_string(),
            (_, true) => format!(" {} ", style.minus()),
        };
        current.push_str(&connector);
        let body = if monomial.is_empty() { "1".to_string() } else { monomial.clone() };
        let Some(expr) = s.expr else {
            current.push_str(&magnitude_times(&s.number, &body, style));
            continue;
        };
        let head = if monomial.is_empty() {
            String::new()
        } else {
            magnitude_times(&s.number, &monomial, style) + " "
        };
        let expression = expression_lines(expr, namer, style);
        let inline = expression[0].trim_start_matches("= ");
        if expression.len() == 1 && inline.chars().count() <= 40 {
            current.push_str(&format!("{head}({inline})"));
            continue;
        }
        current.push_str(&format!("{head}("));
        lines.push(std::mem::take(&mut current));
        for line in expression {
            let line = match line.strip_prefix("= ") {
                Some(first) => format!("  {first}"),
                None => line,
            };
            lines.push(format!("    {line}"));
        }
        current = ")".to_string();
    }
    lines.push(current);
    lines
}

/// The lines of a request on pairs of functions. Free coefficients: the value and the overlap
/// as forms in the coefficients. `roots`: every pair, <f|H|g> with its expression and <f|g>.
fn block_lines(program: &Program, d: &Derivation, block: &BlockDerivation, style: &Style) -> String {
    let mut out = String::new();
    if d.kind == RequestKind::Roots {
        for (pair, pd) in block.block.pairs.iter().zip(&block.pairs) {
            let namer = Namer::new(program, &[&pd.value, &pd.overlap]);
            let renamed = renaming_text(program, &pair.renamed);
            out.push_str(&format!("  <{}|H|{}>{renamed}\n", pd.bra, pd.ket));
            for line in expression_lines(&pd.value, &namer, style) {
                out.push_str(&format!("    {line}\n"));
            }
            let overlap = expression_lines(&pd.overlap, &namer, style);
            out.push_str(&format!("  <{}|{}> {}\n", pd.bra, pd.ket, overlap[0]));
            for line in &overlap[1..] {
                out.push_str(&format!("    {line}\n"));
            }
        }
        return out;
    }
    let monomials = block.monomials();
    let expressions: Vec<&Expr> = monomials.iter().flat_map(|m| [&m.value, &m.overlap]).collect();
    let namer = Namer::new(program, &expressions);
    let (bra, ket) = (&d.bra, &d.ket);
    let mut forms = vec![];
    match d.kind {
        RequestKind::Energy => {
            forms.push((format!("<{bra}|H|{bra}>"), false));
            forms.push((format!("<{bra}|{bra}>"), true));
        }
        RequestKind::Overlap => forms.push((format!("<{bra}|{ket}>"), false)),
        _ => {
            forms.push((format!("<{bra}|H|{ket}>"), false));
            forms.push((format!("<{bra}|{ket}>"), true));
        }
    }
    for (lhs, overlap) in forms {
        for line in form_lines(&lhs, &summands(program, &monomials, overlap), &namer, style) {
            out.push_str(&format!("  {line}\n"));
        }
    }
    out
}

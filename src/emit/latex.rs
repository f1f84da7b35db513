//! The LaTeX form of derivations (amsmath): one `align*` per request, sums labelled with their
//! spaces, exact fractions and radicals, and names escaped so input text cannot inject TeX.

use super::{Group, Namer, groups, integral_parts, join_signed, uses_fock, verification_line};
use crate::derive::Derivation;
use crate::exact::Exact;
use crate::expression::{Expr, Factor, IntegralKind, Term};
use crate::program::{Program, RequestKind};
use crate::verify::Report;
use num_traits::{One, Signed};

/// A name in math mode: a single letter stays italic, longer names go upright, digits after
/// letters become a subscript-free suffix; anything outside [A-Za-z0-9_] is dropped by the
/// grammar already, and `_` is escaped.
fn name(n: &str) -> String {
    let escaped = n.replace('_', r"\_");
    if n.chars().count() == 1 { escaped } else { format!(r"\mathrm{{{escaped}}}") }
}

fn subscript(names: &[String]) -> String {
    let single = names.iter().all(|n| n.chars().count() == 1);
    let body = names.iter().map(|n| name(n)).collect::<Vec<_>>().join(if single { "" } else { "," });
    format!("_{{{body}}}")
}

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
            let sep = if n.iter().all(|x| x.chars().count() == 1) { "" } else { r"\," };
            let m: Vec<String> = n.iter().map(|x| name(x)).collect();
            format!(r"({}{sep}{}\vert {}{sep}{})", m[0], m[1], m[2], m[3])
        }
    }
}

fn times(c: &Exact, body: &str) -> String {
    if c.abs() == Exact::one() {
        body.to_string()
    } else if body == "1" {
        magnitude(c)
    } else {
        format!(r"{}\,{body}", magnitude(c))
    }
}

fn group(g: &Group, namer: &Namer) -> (bool, String) {
    let summed = namer.summed_names(g.sums);
    let o = |x| namer.orb(x, &summed);
    let mut prefix = String::new();
    for &(a, b) in g.deltas {
        prefix.push_str(&format!(r"\delta{}", subscript(&[o(a), o(b)])));
    }
    let mut k = 0;
    while k < g.sums.len() {
        let mut names = vec![name(&summed[k])];
        while k + 1 < g.sums.len() && g.sums[k + 1] == g.sums[k] {
            k += 1;
            names.push(name(&summed[k]));
        }
        prefix.push_str(&format!(
            r"\sum_{{{} \in \mathrm{{{}}}}}",
            names.join(","),
            namer.space(g.sums[k]).replace('_', r"\_")
        ));
        k += 1;
    }
    let body = |t: &Term| factor(&t.factor, namer, &summed);
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
        return (t.coeff.is_negative(), text);
    }
    let items = g.terms.iter().map(|t| (t.coeff.is_negative(), times(&t.coeff, &body(t))));
    let (negative, inner) = join_signed(items, "-");
    if prefix.is_empty() {
        (negative, inner)
    } else {
        let inner = if negative { format!("-{inner}") } else { inner };
        (false, format!(r"{prefix} \left( {inner} \right)"))
    }
}

/// Text from the input (state labels) shown verbatim and safely.
fn verbatim(text: &str) -> String {
    let mut out = String::new();
    for c in text.chars() {
        match c {
            '\\' => out.push_str(r"\textbackslash{}"),
            '{' | '}' | '$' | '&' | '#' | '_' | '%' => {
                out.push('\\');
                out.push(c);
            }
            '^' => out.push_str(r"\^{}"),
            '~' => out.push_str(r"\~{}"),
            '|' => out.push_str(r"\textbar{}"),
            '<' => out.push_str(r"\textless{}"),
            '>' => out.push_str(r"\textgreater{}"),
            '\'' => out.push_str(r"\textquotesingle{}"),
            _ => out.push(c),
        }
    }
    out
}

fn label(state: &str) -> String {
    format!(r"\text{{\texttt{{{}}}}}", verbatim(state))
}

fn left_side(d: &Derivation) -> String {
    let (b, k) = (label(&d.bra), label(&d.ket));
    match d.kind {
        RequestKind::Energy => format!(
            r"\frac{{\langle {b} \vert \hat{{H}} \vert {b} \rangle}}{{\langle {b} \vert {b} \rangle}}"
        ),
        RequestKind::Element => format!(r"\langle {b} \vert \hat{{H}} \vert {k} \rangle"),
        RequestKind::Overlap => format!(r"\langle {b} \vert {k} \rangle"),
        RequestKind::Spin => format!(r"\langle \hat{{S}}^2 \rangle_{{{b}}}"),
    }
}

/// The `align*` body lines: at most three groups per line, so long expressions break.
fn expression(expr: &Expr, namer: &Namer) -> String {
    if expr.is_zero() {
        return "&= 0".into();
    }
    let mut out = String::from("&= ");
    for (k, g) in groups(expr).iter().enumerate() {
        let (negative, text) = group(g, namer);
        if k > 0 && k % 3 == 0 {
            out.push_str(r" \\");
            out.push_str("\n  &\\quad ");
        }
        out.push_str(match (k, negative) {
            (0, false) => "",
            (0, true) => "-",
            (_, false) => " + ",
            (_, true) => " - ",
        });
        out.push_str(&text);
    }
    out
}

/// The LaTeX of every derivation; with `standalone`, a complete document.
pub fn render(program: &Program, derivations: &[(Derivation, Option<Report>)], standalone: bool) -> String {
    let mut out = String::new();
    if standalone {
        out.push_str(
            "\\documentclass{article}\n\\usepackage{amsmath}\n\\usepackage[T1]{fontenc}\n\\begin{document}\n",
        );
        out.push_str(&format!("\\section*{{\\texttt{{{}}}}}\n", verbatim(&program.source.name)));
    }
    for (d, report) in derivations {
        let namer = Namer::new(program, &[&d.value]);
        out.push_str(&format!("% {}\n", d.text.replace('\n', " ")));
        out.push_str(&format!("% {}\n", verification_line(report.as_ref())));
        out.push_str("\\begin{align*}\n");
        out.push_str(&format!("  {}\n  {}\n", left_side(d), expression(&d.value, &namer)));
        if d.kind == RequestKind::Spin {
            out.push_str(&format!(
                "  \\\\\n  \\langle \\hat{{S}}_z \\rangle_{{{}}}\n  {}\n",
                label(&d.bra),
                expression(&d.s_z, &namer)
            ));
        }
        if uses_fock(&d.value) {
            let over = d
                .closed
                .members()
                .iter()
                .map(|&s| format!(r"\mathrm{{{}}}", namer.space(s).replace('_', r"\_")))
                .collect::<Vec<_>>()
                .join(r" \cup ");
            out.push_str(&format!(
                "  \\\\\n  &\\text{{with }} f_{{pq}} = h_{{pq}} + \\sum_{{k \\in {over}}} \\left( 2\\,(pq\\vert kk) - (pk\\vert kq) \\right),\\quad E_{{\\mathrm{{ref}}}} = 2\\sum_{{k \\in {over}}} h_{{kk}} + \\sum_{{k,l \\in {over}}} \\left( 2\\,J_{{kl}} - K_{{kl}} \\right)\n"
            ));
        }
        out.push_str("\\end{align*}\n");
        for note in &d.notes {
            out.push_str(&format!("% note: {note}\n"));
        }
    }
    if standalone {
        out.push_str("\\end{document}\n");
    }
    out
}

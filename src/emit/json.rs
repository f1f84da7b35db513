//! The JSON form of derivations: a stable, documented schema (README.md, "JSON output") with
//! every term's exact coefficient, deltas, summed indices and integral.

use super::{Definitions, Namer, integral_parts, monomial_text};
use crate::check::verify::Report;
use crate::engine::block_derivation::BlockDerivation;
use crate::engine::density::representatives;
use crate::engine::derive::Derivation;
use crate::engine::exact::Exact;
use crate::engine::expression::{Expr, IntegralKind};
use crate::engine::shells::{Shell, ShellForm};
use crate::language::program::{Program, RequestKind};
use serde::Serialize;

pub const SCHEMA_VERSION: u32 = 1;

#[derive(Serialize)]
struct Document<'a> {
    schema: &'static str,
    version: u32,
    input: &'a str,
    requests: Vec<RequestOut<'a>>,
}

#[derive(Serialize)]
struct RequestOut<'a> {
    request: &'a str,
    kind: RequestKind,
    bra: &'a str,
    ket: &'a str,
    /// The expression; absent for a request on pairs of functions, whose `monomials` (free
    /// coefficients) and `elements` hold it.
    #[serde(skip_serializing_if = "Option::is_none")]
    terms: Option<Vec<TermOut>>,
    #[serde(skip_serializing_if = "Option::is_none")]
    overlap: Option<Vec<TermOut>>,
    /// The free coefficients of the request, in declaration order.
    #[serde(skip_serializing_if = "Option::is_none")]
    coefficients: Option<Vec<String>>,
    /// value = Σ monomial × terms, overlap = Σ monomial × overlap.
    #[serde(skip_serializing_if = "Option::is_none")]
    monomials: Option<Vec<MonomialOut>>,
    /// For `roots`: the operands and the generic indices their members run over.
    #[serde(skip_serializing_if = "Option::is_none")]
    operands: Option<Vec<OperandOut>>,
    /// The pairs of functions, each derived and verified as an element.
    #[serde(skip_serializing_if = "Option::is_none")]
    elements: Option<Vec<ElementOut<'a>>>,
    /// For `spin` requests: <S_z>; `terms` then hold <S²>.
    #[serde(skip_serializing_if = "Option::is_none")]
    s_z: Option<Vec<TermOut>>,
    /// For `density`: the symmetry of the density; `terms` then list one element of each set
    /// it relates, and each term adds its coefficient to its element.
    #[serde(skip_serializing_if = "Option::is_none")]
    symmetry: Option<&'static str>,
    /// For `shells`: the energy (in `terms`) in the open-shell form.
    #[serde(skip_serializing_if = "Option::is_none")]
    shells: Option<ShellsOut>,
    /// The closed spaces that `fock` and `reference_energy` terms sum over.
    closed_spaces: Vec<String>,
    /// The definitions of the `fock` and `reference_energy` terms, as text, for those the
    /// terms use (only with --fock).
    #[serde(skip_serializing_if = "serde_json::Map::is_empty")]
    definitions: serde_json::Map<String, serde_json::Value>,
    notes: &'a [String],
    verification: Option<&'a Report>,
}

#[derive(Serialize)]
struct ShellOut {
    name: String,
    /// "orbital" or "space" (a closed space, its members summed)
    kind: &'static str,
}

/// E = Σ_s f[s] h_ss + Σ_{s,t} (a[s][t] J_st + b[s][t] K_st) over ordered pairs, in the order
/// of `shells`.
#[derive(Serialize)]
struct ShellsOut {
    shells: Vec<ShellOut>,
    f: Vec<CoefficientOut>,
    a: Vec<Vec<CoefficientOut>>,
    b: Vec<Vec<CoefficientOut>>,
}

fn shells(form: &ShellForm, namer: &Namer) -> ShellsOut {
    let table = |t: &Vec<Vec<Exact>>| t.iter().map(|row| row.iter().map(coefficient).collect()).collect();
    ShellsOut {
        shells: form
            .shells
            .iter()
            .map(|&s| ShellOut {
                name: super::text::shell_name(s, namer),
                kind: if matches!(s, Shell::Space(_)) { "space" } else { "orbital" },
            })
            .collect(),
        f: form.f.iter().map(coefficient).collect(),
        a: table(&form.a),
        b: table(&form.b),
    }
}

#[derive(Serialize)]
struct MonomialOut {
    /// The coefficients multiplied, a square twice; [] for the fixed part with itself.
    coefficients: Vec<String>,
    /// The same as text: `cg^2`, `cg cu`, `1`.
    monomial: String,
    terms: Vec<TermOut>,
    overlap: Vec<TermOut>,
}

#[derive(Serialize)]
struct OperandOut {
    operand: String,
    indices: Vec<String>,
}

#[derive(Serialize)]
struct ElementOut<'a> {
    /// Positions of the bra and ket functions (operands of `roots`, parts otherwise).
    row: usize,
    column: usize,
    bra: &'a str,
    ket: &'a str,
    /// Generic indices of the ket renamed apart from the bra's: original → used in the terms.
    renamed: serde_json::Map<String, serde_json::Value>,
    /// <bra|H|ket> (for an overlap request <bra|ket>).
    terms: Vec<TermOut>,
    overlap: Vec<TermOut>,
    notes: &'a [String],
    verification: Option<&'a Report>,
}

#[derive(Serialize)]
struct Part {
    rational: String,
    radicand: u64,
}

#[derive(Serialize)]
pub(super) struct CoefficientOut {
    exact: String,
    parts: Vec<Part>,
    value: f64,
}

#[derive(Serialize)]
struct SumOut {
    index: String,
    space: String,
}

#[derive(Serialize)]
struct IntegralOut {
    kind: &'static str,
    indices: Vec<String>,
}

#[derive(Serialize)]
struct TermOut {
    coefficient: CoefficientOut,
    deltas: Vec<[String; 2]>,
    sums: Vec<SumOut>,
    integral: IntegralOut,
}

pub(super) fn coefficient(c: &Exact) -> CoefficientOut {
    CoefficientOut {
        exact: c.to_string(),
        parts: c.parts().map(|(q, n)| Part { rational: q.to_string(), radicand: n }).collect(),
        // + 0.0 prints a value that rounds to zero from below as 0.0, not -0.0
        value: c.to_f64() + 0.0,
    }
}

/// The name of an integral kind in the schema.
fn json_kind(kind: IntegralKind) -> &'static str {
    match kind {
        IntegralKind::Number => "number",
        IntegralKind::RefEnergy => "reference_energy",
        IntegralKind::Fock => "fock",
        IntegralKind::OneElectron => "h",
        IntegralKind::Coulomb => "coulomb",
        IntegralKind::Exchange => "exchange",
        IntegralKind::General => "eri",
        IntegralKind::OneDensity => "gamma",
        IntegralKind::TwoDensity => "Gamma",
    }
}

fn terms(expr: &Expr, namer: &Namer) -> Vec<TermOut> {
    expr.terms
        .iter()
        .map(|t| {
            let summed = namer.summed_names(&t.sums);
            let o = |x| namer.orb(x, &summed);
            let (kind, indices) = integral_parts(&t.factor, namer, &summed);
            TermOut {
                coefficient: coefficient(&t.coeff),
                deltas: t.deltas.iter().map(|&(a, b)| [o(a), o(b)]).collect(),
                sums: t
                    .sums
                    .iter()
                    .zip(&summed)
                    .map(|(&s, n)| SumOut { index: n.clone(), space: namer.space(s).into() })
                    .collect(),
                integral: IntegralOut { kind: json_kind(kind), indices },
            }
        })
        .collect()
}

/// The monomials of a request with free coefficients, each with its weight folded into its terms.
fn monomials(program: &Program, block: &BlockDerivation, namer: &Namer) -> Vec<MonomialOut> {
    block
        .monomials()
        .iter()
        .map(|m| {
            let names: Vec<String> =
                m.coefficients.iter().map(|&c| program.coefficients[c as usize].name.clone()).collect();
            let text = monomial_text(&names, &|n| format!("{n}^2"), " ");
            let weight = Exact::integer(m.weight.into());
            MonomialOut {
                monomial: if text.is_empty() { "1".into() } else { text },
                coefficients: names,
                terms: terms(&m.value.scaled(&weight), namer),
                overlap: terms(&m.overlap.scaled(&weight), namer),
            }
        })
        .collect()
}

fn elements<'a>(
    program: &Program,
    block: &'a BlockDerivation,
    report: Option<&'a Report>,
) -> Vec<ElementOut<'a>> {
    let reports = report.and_then(|r| r.block.as_ref()).map(|b| &b.pairs);
    let name = |k: u32| program.indices[k as usize].name.clone();
    block
        .block
        .pairs
        .iter()
        .zip(&block.pairs)
        .enumerate()
        .map(|(k, (pair, d))| {
            let namer = Namer::new(program, &[&d.value, &d.overlap]);
            ElementOut {
                row: pair.row,
                column: pair.column,
                bra: &d.bra,
                ket: &d.ket,
                renamed: pair.renamed.iter().map(|&(a, b)| (name(a), name(b).into())).collect(),
                terms: terms(&d.value, &namer),
                overlap: terms(&d.overlap, &namer),
                notes: &d.notes,
                verification: reports.and_then(|r| r.get(k)),
            }
        })
        .collect()
}

pub fn render(program: &Program, derivations: &[(Derivation, Option<Report>)]) -> String {
    let requests = derivations
        .iter()
        .map(|(d, report)| {
            let namer = Namer::new(program, &super::expressions(d));
            let block = d.block.as_deref();
            let free = block.filter(|_| d.kind != RequestKind::Roots);
            RequestOut {
                request: &d.text,
                kind: d.kind,
                bra: &d.bra,
                ket: &d.ket,
                terms: block.is_none().then(|| match d.density_symmetry() {
                    Some(symmetry) => terms(&representatives(&d.value, symmetry), &namer),
                    None => terms(&d.value, &namer),
                }),
                symmetry: d.density_symmetry().map(|s| s.text()),
                shells: d.shells.as_deref().map(|form| shells(form, &namer)),
                overlap: block.is_none().then(|| terms(&d.overlap, &namer)),
                coefficients: free.map(|b| {
                    b.block
                        .coefficients()
                        .iter()
                        .map(|&c| program.coefficients[c as usize].name.clone())
                        .collect()
                }),
                monomials: free.map(|b| monomials(program, b, &namer)),
                operands: block.filter(|_| d.kind == RequestKind::Roots).map(|b| {
                    b.block
                        .rows
                        .iter()
                        .map(|f| OperandOut {
                            operand: f.label.clone(),
                            indices: f
                                .indices
                                .iter()
                                .map(|&k| program.indices[k as usize].name.clone())
                                .collect(),
                        })
                        .collect()
                }),
                elements: block.map(|b| elements(program, b, report.as_ref())),
                s_z: (d.kind == RequestKind::Spin).then(|| terms(&d.s_z, &namer)),
                closed_spaces: d.closed.members().iter().map(|&s| namer.space(s).to_string()).collect(),
                definitions: super::text::definitions(
                    d,
                    &namer,
                    Definitions::used_in(&super::expressions(d)),
                    false,
                )
                .into_iter()
                .map(|(kind, text)| (json_kind(kind).to_string(), text.into()))
                .collect(),
                notes: &d.notes,
                verification: report.as_ref(),
            }
        })
        .collect();
    let doc = Document {
        schema: "spinfold-derivation",
        version: SCHEMA_VERSION,
        input: &program.source.name,
        requests,
    };
    serde_json::to_string_pretty(&doc).expect("plain data serializes") + "\n"
}

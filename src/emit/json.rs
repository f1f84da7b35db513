//! The JSON form of derivations: a stable, documented schema (README.md, "JSON output") with
//! every term's exact coefficient, deltas, summed indices and integral.

use super::{Definitions, Namer, integral_parts};
use crate::check::verify::Report;
use crate::engine::derive::Derivation;
use crate::engine::exact::Exact;
use crate::engine::expression::{Expr, IntegralKind};
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
    terms: Vec<TermOut>,
    overlap: Vec<TermOut>,
    /// For `spin` requests: <S_z>; `terms` then hold <S²>.
    #[serde(skip_serializing_if = "Option::is_none")]
    s_z: Option<Vec<TermOut>>,
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

pub fn render(program: &Program, derivations: &[(Derivation, Option<Report>)]) -> String {
    let requests = derivations
        .iter()
        .map(|(d, report)| {
            let namer = Namer::new(program, &[&d.value, &d.overlap]);
            RequestOut {
                request: &d.text,
                kind: d.kind,
                bra: &d.bra,
                ket: &d.ket,
                terms: terms(&d.value, &namer),
                overlap: terms(&d.overlap, &namer),
                s_z: (d.kind == RequestKind::Spin).then(|| terms(&d.s_z, &namer)),
                closed_spaces: d.closed.members().iter().map(|&s| namer.space(s).to_string()).collect(),
                definitions: super::text::definitions(d, &namer, Definitions::used_in(&d.value), false)
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

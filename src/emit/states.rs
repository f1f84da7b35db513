//! The determinant expansion of every named state, as text or JSON: what a coupled state or a
//! combination is made of, with exact coefficients, for inspection or for other programs.

use crate::engine::exact::Exact;
use crate::engine::exact::ExactDisplay;
use crate::language::orbital::Spin;
use crate::language::program::{DetSpec, NamedState, Occupant, Program};
use serde::Serialize;

fn det_text(program: &Program, det: &DetSpec) -> String {
    let mut parts = vec![];
    for occupant in &det.occupants {
        parts.push(match *occupant {
            Occupant::Closed(s) => format!("{}^2", program.spaces[s as usize].name),
            Occupant::Electron(so) => program.spin_orbital_name(so),
        });
    }
    let mut out = format!("| {} |", parts.join(" "));
    for e in &det.excitations {
        let list = |v: &[crate::language::orbital::SpinOrbital]| {
            v.iter().map(|&so| program.spin_orbital_name(so)).collect::<Vec<_>>().join(" ")
        };
        out.push_str(&format!("[{} -> {}]", list(&e.from), list(&e.to)));
    }
    out
}

/// A state's terms: (the free coefficient that multiplies it, if any, exact coefficient,
/// determinant), the fixed part first.
fn terms<'a>(program: &Program, s: &'a NamedState) -> Vec<(Option<String>, &'a Exact, &'a DetSpec)> {
    match &s.free {
        Some(linear) => linear
            .functions()
            .flat_map(|(c, part)| {
                let name = c.map(|c| program.coefficients[c as usize].name.clone());
                part.terms.iter().map(move |(x, det)| (name.clone(), x, det))
            })
            .collect(),
        None => s.state.terms.iter().map(|(x, det)| (None, x, det)).collect(),
    }
}

/// Every named state with its determinants, one per line.
pub fn render_text(program: &Program) -> String {
    let mut out = String::new();
    for s in &program.states {
        if let Some(c) = s.state.coupling.as_ref().filter(|_| s.state.is_unexpanded()) {
            out.push_str(&format!("{}  (not expanded: {} determinants)\n", s.name, c.determinants));
            continue;
        }
        let terms = terms(program, s);
        out.push_str(&format!("{}  ({} determinant(s))\n", s.name, terms.len()));
        for (free, c, det) in terms {
            let number = ExactDisplay { value: c, ascii: true }.to_string();
            let coefficient = match free {
                Some(name) if *c == Exact::one() => name,
                Some(name) => format!("{number} {name}"),
                None => number,
            };
            out.push_str(&format!("  {coefficient:>12}  {}\n", det_text(program, det)));
        }
    }
    out
}

#[derive(Serialize)]
struct OccupantOut {
    #[serde(skip_serializing_if = "Option::is_none")]
    space: Option<String>,
    #[serde(skip_serializing_if = "Option::is_none")]
    orbital: Option<String>,
    #[serde(skip_serializing_if = "Option::is_none")]
    spin: Option<Spin>,
}

#[derive(Serialize)]
struct DetOut {
    coefficient: super::json::CoefficientOut,
    /// The free coefficient that multiplies `coefficient`, for a state with free coefficients.
    #[serde(skip_serializing_if = "Option::is_none")]
    free: Option<String>,
    /// In creation order, as written.
    occupants: Vec<OccupantOut>,
    /// Applied after the occupants, in order; `from` and `to` as spin-orbital names.
    excitations: Vec<(Vec<String>, Vec<String>)>,
}

#[derive(Serialize)]
struct StateOut {
    name: String,
    determinants: Vec<DetOut>,
    /// For a coupled state too large to expand: how many determinants it spans (the list is
    /// empty), a number, or a string of digits past 2^64.
    #[serde(skip_serializing_if = "Option::is_none")]
    unexpanded: Option<serde_json::Value>,
}

/// `{"states": [{"name", "determinants": [{"coefficient", "occupants", "excitations"}]}]}`.
pub fn render_json(program: &Program) -> String {
    let states: Vec<StateOut> = program
        .states
        .iter()
        .map(|s| StateOut {
            unexpanded: s.state.coupling.as_ref().filter(|_| s.state.is_unexpanded()).map(|c| {
                // exact: a number while it fits 64 bits, its decimal digits past that
                u64::try_from(&c.determinants)
                    .map_or_else(|_| c.determinants.to_string().into(), serde_json::Value::from)
            }),
            name: s.name.clone(),
            determinants: terms(program, s)
                .into_iter()
                .map(|(free, c, det)| DetOut {
                    coefficient: super::json::coefficient(c),
                    free,
                    occupants: det
                        .occupants
                        .iter()
                        .map(|o| match *o {
                            Occupant::Closed(k) => OccupantOut {
                                space: Some(program.spaces[k as usize].name.clone()),
                                orbital: None,
                                spin: None,
                            },
                            Occupant::Electron(so) => OccupantOut {
                                space: None,
                                orbital: Some(program.orb_name(so.orb)),
                                spin: Some(so.spin),
                            },
                        })
                        .collect(),
                    excitations: det
                        .excitations
                        .iter()
                        .map(|e| {
                            let names = |v: &[crate::language::orbital::SpinOrbital]| {
                                v.iter().map(|&so| program.spin_orbital_name(so)).collect()
                            };
                            (names(&e.from), names(&e.to))
                        })
                        .collect(),
                })
                .collect(),
        })
        .collect();
    serde_json::to_string_pretty(&serde_json::json!({ "states": states })).expect("plain data serializes")
        + "\n"
}

//! The check of a request on pairs of functions: every pair verified as the element it is, and
//! for states with free coefficients the assembled forms at random coefficients against brute force.

use crate::check::verify::{Report, TOLERANCE, block_configurations, fits_whole_check, verify, verify_sized};
use crate::engine::block_derivation::BlockDerivation;
use crate::engine::derive::Derivation;
use crate::engine::exact::{Exact, ExactDisplay};
use crate::engine::expression::Expr;
use crate::error::Result;
use crate::language::program::{Program, Request, RequestKind};
use itertools::Itertools;
use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use std::collections::BTreeMap;

/// How many random sets of values the free coefficients are checked at.
pub const COEFFICIENT_SETS: usize = 3;

/// The reports of a block's checks.
#[derive(Clone, Debug, PartialEq)]
pub struct BlockReport {
    /// One per pair of the block.
    pub pairs: Vec<Report>,
    /// For free coefficients: the assembled value and overlap at each random set of values.
    pub assembled: Vec<Report>,
    /// What the assembled forms are, in words (`<P|H|P> and <P|P>`).
    pub assembled_what: String,
}

impl BlockReport {
    pub fn summary(&self, total: &Report) -> String {
        let checks = |reports: &[Report]| reports.iter().map(|r| r.checks).sum::<usize>();
        let sampled =
            if self.pairs.iter().chain(&self.assembled).any(|r| r.sampled || r.determinant_pairs.is_some()) {
                ", some on a seeded sample of index assignments or determinant pairs (see each element)"
            } else {
                ""
            };
        let pairs = self.pairs.len();
        let mut out = format!(
            "verified against brute-force determinant algebra: {pairs} pair element{}, {} as an element ({} check(s))",
            if pairs == 1 { "" } else { "s" },
            if pairs == 1 { "checked" } else { "each checked" },
            checks(&self.pairs)
        );
        if !self.assembled.is_empty() {
            out.push_str(&format!(
                ", and {} assembled at {} random sets of the free coefficients ({} check(s))",
                self.assembled_what,
                self.assembled.len(),
                checks(&self.assembled)
            ));
        }
        let sizes = if total.configurations.iter().all(|c| c.is_empty()) {
            String::new()
        } else {
            format!(" with spaces sized {}", total.configurations.iter().map(|c| format!("({c})")).join(", "))
        };
        out.push_str(&format!(
            ", on random integrals (seed {}){sizes}{sampled}, all within {:.0e} relative",
            total.seed, TOLERANCE
        ));
        out
    }
}

/// Random exact values for the free coefficients: n/4 with 0 < |n| <= 8.
fn random_values(coefficients: impl Iterator<Item = u32>, rng: &mut ChaCha8Rng) -> BTreeMap<u32, Exact> {
    coefficients
        .map(|c| {
            let n = rng.random_range(1..=8i64) * if rng.random_bool(0.5) { 1 } else { -1 };
            (c, Exact::fraction(n, 4))
        })
        .collect()
}

/// Verifies every pair; for free coefficients also the value and overlap assembled from the
/// pairs at random coefficients, each an ordinary element (or overlap) of the states those
/// coefficients make, checked against brute force on their vectors.
pub fn verify_block(
    program: &Program,
    request: &Request,
    derivation: &Derivation,
    block: &BlockDerivation,
    seed: u64,
) -> Result<Report> {
    // every pair taken whole on the same configurations; a pair too large is sampled its own way
    let configurations = block_configurations(program, request, &block.pairs);
    let check = |request: &Request, d: &Derivation, seed: u64| {
        if fits_whole_check(request) {
            verify_sized(program, request, d, seed, configurations.clone())
        } else {
            verify(program, request, d, seed)
        }
    };
    let pairs = block.block.each_pair(|k, pair| check(&pair.request, &block.pairs[k], seed))?;
    let mut assembled = vec![];
    let kind = if request.kind == RequestKind::Overlap { RequestKind::Overlap } else { RequestKind::Element };
    if request.kind != RequestKind::Roots {
        let mut rng = ChaCha8Rng::seed_from_u64(seed ^ 0xc0ef);
        let used = block.block.coefficients();
        for k in 0..COEFFICIENT_SETS {
            let values = random_values(used.iter().copied(), &mut rng);
            let named = values
                .iter()
                .map(|(&c, x)| {
                    format!(
                        "{} = {}",
                        program.coefficients[c as usize].name,
                        ExactDisplay { value: x, ascii: true }
                    )
                })
                .join(", ");
            let (bra, ket) = block.block.states_at(&values);
            let at = Request {
                kind,
                text: format!("{} at {named}", request.text),
                bra,
                ket,
                block: None,
                ..request.clone()
            };
            // past the size brute force takes whole, the pairs' own (sampled) checks stand alone
            if !fits_whole_check(&at) {
                continue;
            }
            let (value, overlap) = block.at(&values);
            let d = Derivation {
                kind,
                text: at.text.clone(),
                value,
                overlap,
                s_z: Expr::zero(),
                notes: vec![],
                vanishing: vec![],
                block: None,
                shells: None,
                ..derivation.clone()
            };
            assembled.push(check(&at, &d, seed.wrapping_add(k as u64))?);
        }
    }
    let all = || pairs.iter().chain(&assembled);
    let mut report = Report::empty(derivation, seed);
    report.checks = all().map(|r| r.checks).sum();
    report.max_deviation = all().map(|r| r.max_deviation).fold(0.0, f64::max);
    report.sampled = all().any(|r| r.sampled);
    report.determinant_pairs = all().filter_map(|r| r.determinant_pairs).reduce(|a, b| a + b);
    report.configurations =
        all().map(|r| r.configurations.clone()).max_by_key(|c| c.len()).unwrap_or_default();
    let assembled_what = match request.kind {
        RequestKind::Energy => format!("<{0}|H|{0}> and <{0}|{0}>", request.bra_text),
        RequestKind::Overlap => format!("<{}|{}>", request.bra_text, request.ket_text),
        _ => format!("<{0}|H|{1}> and <{0}|{1}>", request.bra_text, request.ket_text),
    };
    report.block = Some(Box::new(BlockReport { pairs, assembled, assembled_what }));
    Ok(report)
}

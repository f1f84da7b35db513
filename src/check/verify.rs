//! Built-in verification: every derived expression is evaluated on random integrals for
//! several space sizes and every index assignment, and compared with brute-force algebra.

use crate::check::block_check::{BlockReport, verify_block};
use crate::check::brute_force;
use crate::engine::coincidence;
use crate::engine::density::{self as shown, Symmetry};
use crate::engine::derive::{Derivation, Options, Route, derive};
use crate::engine::exact::Exact;
use crate::error::{Error, ErrorKind, Result};
use crate::language::orbital::{Orb, SpaceId, Spin};
use crate::language::program::{DetSpec, Occupant, Program, Request, RequestKind, State};
use crate::numbers::bind::symbols_of;
use crate::numbers::density;
use crate::numbers::evaluate::{Binding, Evaluations, density_elements};
use crate::numbers::integrals::{IntegralTable, Integrals};
use itertools::Itertools;
use rand::seq::IndexedRandom;
use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rustc_hash::FxHashMap;
use serde::Serialize;
use std::collections::{BTreeMap, BTreeSet, HashSet};

/// Relative agreement demanded between the derived expression and brute force.
pub const TOLERANCE: f64 = 1e-10;

/// The largest number of index assignments checked per space-size configuration; past it a
/// seeded sample is checked (see `assignments`).
const MAX_ASSIGNMENTS: usize = 400;

/// The brute-force work a sampled request may spend, in determinant pairs scanned by the
/// matrix element (distinct bra determinants × distinct ket determinants per assignment),
/// summed over the configurations. Large states thus get fewer sampled assignments; one per
/// pattern of coinciding indices is checked however large they are.
const WORK_BUDGET: usize = 10_000_000;

/// A derivation together with the report of its check, if it was checked.
pub type Checked = (Derivation, Option<Report>);

/// What was checked, for the output.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct Report {
    pub checks: usize,
    /// The sizes of the spaces the request uses, per configuration, e.g. "core=2, act=3".
    pub configurations: Vec<String>,
    pub seed: u64,
    /// The largest relative deviation seen, rounded up to a power of ten (0 when exact).
    pub max_deviation: f64,
    /// True when the request has generic indices, checked at every assignment or a sample.
    pub indices: bool,
    /// True when index assignments were sampled rather than all checked.
    pub sampled: bool,
    /// How the index assignments were sampled, when they were.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub sample: Option<Sample>,
    /// For states too large to check whole: how many determinant pairs were checked.
    pub determinant_pairs: Option<usize>,
    /// Why nothing could be checked by brute force, when that is so.
    pub not_checked: Option<String>,
    /// For a request on pairs of functions: the report of each pair and of the assembled
    /// forms; the counts above are their totals. The JSON output places each pair's report
    /// beside its element.
    #[serde(skip)]
    pub block: Option<Box<BlockReport>>,
}

impl Report {
    /// Nothing checked yet.
    pub(super) fn empty(derivation: &Derivation, seed: u64) -> Report {
        Report {
            checks: 0,
            configurations: vec![],
            seed,
            max_deviation: 0.0,
            indices: !derivation.free_indices.is_empty(),
            sampled: false,
            sample: None,
            determinant_pairs: None,
            not_checked: None,
            block: None,
        }
    }

    pub fn summary(&self) -> String {
        if let Some(block) = &self.block {
            return block.summary(self);
        }
        if let Some(why) = &self.not_checked {
            return format!("not checked by brute force: {why}");
        }
        let sizes = if self.configurations.iter().all(|c| c.is_empty()) {
            String::new()
        } else {
            format!(" with spaces sized {}", self.configurations.iter().map(|c| format!("({c})")).join(", "))
        };
        let what = match self.determinant_pairs {
            Some(n) => format!(
                " of a seeded sample of {n} determinant pairs (the state is too large to check whole)"
            ),
            None => String::new(),
        };
        format!(
            "verified against brute-force determinant algebra: {} check(s){what} on random integrals (seed {}){}{}, all within {:.0e} relative",
            self.checks,
            self.seed,
            sizes,
            match (self.indices, &self.sample) {
                (false, _) => String::new(),
                (true, None) => ", every assignment of the generic indices".into(),
                (true, Some(s)) => format!(
                    ", a seeded sample of {} of {} generic-index assignments including every pattern of coinciding indices in each configuration",
                    s.drawn, s.of
                ),
            },
            TOLERANCE
        )
    }
}

/// A sample of index assignments, summed over the configurations.
#[derive(Clone, Copy, Debug, Serialize, PartialEq)]
pub struct Sample {
    /// Assignments drawn (an assignment at which the state vanishes is drawn but not checked).
    pub drawn: usize,
    /// Assignments there are.
    pub of: u128,
}

impl Sample {
    fn plus(self, other: Sample) -> Sample {
        Sample { drawn: self.drawn + other.drawn, of: self.of.saturating_add(other.of) }
    }
}

/// Sizes to instantiate each space with, per configuration: three configurations in which every
/// space the request uses takes three different sizes (so no two configurations are alike), a
/// space with generic indices at least three members and room for all of them to differ. A
/// space the request does not use stays empty.
fn size_configurations(program: &Program, request: &Request, derivation: &Derivation) -> Vec<Vec<usize>> {
    let (_, used, _) = symbols_of(program, request);
    let needed =
        |s: u32| derivation.free_indices.iter().filter(|&&k| program.indices[k as usize].space == s).count();
    sizes(program, &used, &needed)
}

/// Three configurations of sizes for the spaces `used`, a space with `needed(s)` generic
/// indices getting room for all of them to differ (see `size_configurations`).
fn sizes(program: &Program, used: &BTreeSet<u32>, needed: &dyn Fn(u32) -> usize) -> Vec<Vec<usize>> {
    (0..3)
        .map(|c| {
            (0..program.spaces.len() as u32)
                .map(|s| {
                    let Some(rank) = used.iter().position(|&u| u == s) else { return 0 };
                    let smallest = match needed(s) {
                        0 => 1,
                        n => n.max(3),
                    };
                    // the used spaces step through their sizes out of phase with each other
                    smallest + (c + rank) % 3
                })
                .collect()
        })
        .collect()
}

/// Under --distinct only assignments giving different letters of one space different orbitals
/// are in the result's domain.
fn all_different_within_spaces(program: &Program, assignment: &[(u32, usize)]) -> bool {
    assignment.iter().enumerate().all(|(n, &(k, m))| {
        assignment[..n].iter().all(|&(k2, m2)| {
            program.indices[k as usize].space != program.indices[k2 as usize].space || m != m2
        })
    })
}

/// A derived number beside its brute-force value.
#[derive(Clone, Debug, PartialEq)]
pub struct Comparison {
    /// "value", "overlap", or the density element compared
    pub what: String,
    pub brute_force: f64,
    pub derived: f64,
    /// The size of the numbers the value is a sum of: the product of the norms of the bra and
    /// ket vectors for elements and overlaps, 1 for normalized values. A floating-point sum is
    /// good to its precision relative to this, whatever cancellation leaves of it.
    pub scale: f64,
}

impl Comparison {
    /// |derived − brute force| relative to the larger of 1, the value and its scale.
    pub fn deviation(&self) -> f64 {
        (self.derived - self.brute_force).abs() / self.brute_force.abs().max(self.scale).max(1.0)
    }
}

/// The derived value of a request (and, for an element, its overlap) beside brute-force
/// determinant algebra, for one binding and one set of integrals (electronic energies, no
/// constant). Every symbol the request uses must be bound, to orbitals below 64. Ok(None) when
/// an energy's state vanishes for this binding.
pub fn compare(
    program: &Program,
    request: &Request,
    derivation: &Derivation,
    binding: &Binding,
    ints: &dyn Integrals,
) -> Result<Option<Vec<Comparison>>> {
    compare_with(program, request, derivation, binding, ints, &Evaluations::default())
}

/// `compare`, with the derived expressions evaluated through `evaluations`, which keeps their
/// specializations from one binding to the next.
fn compare_with<'e>(
    program: &Program,
    request: &Request,
    derivation: &'e Derivation,
    binding: &Binding,
    ints: &dyn Integrals,
    evaluations: &Evaluations<'e>,
) -> Result<Option<Vec<Comparison>>> {
    let (orbitals, spaces, indices) = symbols_of(program, request);
    let bound = orbitals
        .iter()
        .map(|&k| binding.orbitals.get(k as usize).copied())
        .chain(indices.iter().map(|&k| binding.indices.get(k as usize).copied().flatten()))
        .chain(
            spaces
                .iter()
                .flat_map(|&s| binding.spaces.get(s as usize).into_iter().flatten().map(|&m| Some(m))),
        )
        .collect::<Option<Vec<usize>>>();
    match bound {
        Some(all) if all.iter().all(|&m| m < brute_force::MAX_ORBITALS) => {}
        _ => {
            return Err(Error::new(ErrorKind::Binding {
                why: format!(
                    "the brute-force check of `{}` needs every orbital, space and index bound, to orbitals 1 to {}",
                    request.text,
                    brute_force::MAX_ORBITALS
                ),
            }));
        }
    }
    let bra = brute_force::state_vector(&request.bra, binding);
    let ket = brute_force::state_vector(&request.ket, binding);
    let overlap = brute_force::dot(&bra, &ket);
    let scale: f64 = request.bra.terms.iter().map(|(c, _)| c.to_f64().powi(2)).sum();
    // "vanishes" relative to the size of the coefficients, not in absolute terms
    let norm = brute_force::dot(&bra, &bra);
    let vanishes = norm.abs() < 1e-12 * scale;
    let (expected, second) = match request.kind {
        RequestKind::Density if vanishes => return Ok(None),
        RequestKind::Density => {
            return Ok(Some(density_comparisons(derivation, binding, (&bra, &ket), Symmetry::Expectation)));
        }
        RequestKind::TransitionDensity => {
            return Ok(Some(density_comparisons(derivation, binding, (&bra, &ket), Symmetry::Transition)));
        }
        RequestKind::Overlap => (overlap, None),
        // a `roots` request is checked through its pairs, which are elements
        RequestKind::Element | RequestKind::Roots => {
            (brute_force::matrix_element(&bra, &ket, ints), Some(("overlap", overlap, &derivation.overlap)))
        }
        RequestKind::Energy | RequestKind::Shells if vanishes => return Ok(None),
        RequestKind::Energy | RequestKind::Shells => {
            (brute_force::matrix_element(&bra, &bra, ints) / norm, None)
        }
        RequestKind::Spin if vanishes => return Ok(None),
        RequestKind::Spin => (
            brute_force::dot(&bra, &brute_force::apply_s_squared(&bra)) / norm,
            Some(("<S_z>", brute_force::s_z(&bra), &derivation.s_z)),
        ),
    };
    let scale = match request.kind {
        RequestKind::Overlap | RequestKind::Element | RequestKind::Roots | RequestKind::TransitionDensity => {
            (norm * brute_force::dot(&ket, &ket)).sqrt()
        }
        _ => 1.0,
    };
    let mut out = vec![Comparison {
        what: "value".into(),
        brute_force: expected,
        derived: evaluations.evaluate(&derivation.value, binding, ints),
        scale,
    }];
    if let Some((what, brute_force, expr)) = second {
        let scale = if request.kind == RequestKind::Spin { 1.0 } else { scale };
        out.push(Comparison {
            what: what.into(),
            brute_force,
            derived: evaluations.evaluate(expr, binding, ints),
            scale,
        });
    }
    Ok(Some(out))
}

/// The symbolic densities of a derivation beside the densities of the brute-force vectors, for
/// one binding: for γ and for Γ, the element where they differ most.
fn density_comparisons(
    derivation: &Derivation,
    binding: &Binding,
    (bra, ket): (&brute_force::Vector, &brute_force::Vector),
    symmetry: Symmetry,
) -> Vec<Comparison> {
    let n = binding
        .orbitals
        .iter()
        .chain(binding.spaces.iter().flatten())
        .chain(binding.indices.iter().flatten())
        .max()
        // one orbital at least: a state of no electrons still has elements to compare (zeros)
        .map_or(1, |m| m + 1);
    let (norm_bra, norm_ket) = (brute_force::dot(bra, bra), brute_force::dot(ket, ket));
    let (expected, scale) = match symmetry {
        // `density S` is normalized; a transition density is not
        Symmetry::Expectation => {
            let mut d = density::densities(ket, ket, n);
            d.one.iter_mut().chain(d.two.iter_mut()).for_each(|x| *x /= norm_ket);
            (d, 1.0)
        }
        Symmetry::Transition => (density::densities(bra, ket, n), (norm_bra * norm_ket).sqrt()),
    };
    let derived = density_elements(&derivation.value, binding).dense(n);
    // the element of `rank` orbitals where derived and expected differ most, found without
    // building its name until it is known
    let worst = |what: &str, rank: u32, expected: &[f64], derived: &[f64]| {
        let deviation =
            |at: usize| (derived[at] - expected[at]).abs() / expected[at].abs().max(scale).max(1.0);
        let at = (0..expected.len()).max_by(|&a, &b| deviation(a).total_cmp(&deviation(b)))?;
        let orbitals: Vec<String> = (0..rank).rev().map(|k| (at / n.pow(k) % n + 1).to_string()).collect();
        Some(Comparison {
            what: format!("{what}({})", orbitals.join(",")),
            brute_force: expected[at],
            derived: derived[at],
            scale,
        })
    };
    worst("one-particle density element γ", 2, &expected.one, &derived.one)
        .into_iter()
        .chain(worst("two-particle density element Γ", 4, &expected.two, &derived.two))
        .collect()
}

/// The exact checks of a density or shells request: a density has its symmetry (the listed
/// elements give back every element) and gives the derived energy (`density S`) or <S|H|T>
/// (`density S T`); an open-shell form gives back the energy it was read from.
fn verify_exact(program: &Program, request: &Request, derivation: &Derivation) -> Result<()> {
    let failed = |report: String| {
        Error::at(ErrorKind::VerificationFailed { request: request.text.clone(), report }, &request.span)
    };
    if let Some(form) = &derivation.shells
        && form.energy() != derivation.value
    {
        return Err(failed("the open-shell form does not give back the energy it was read from".into()));
    }
    let Some(symmetry) = derivation.density_symmetry() else { return Ok(()) };
    if shown::complete(&shown::representatives(&derivation.value, symmetry), symmetry) != derivation.value {
        return Err(failed(format!("the density does not have the symmetry {}", symmetry.text())));
    }
    let kind = if symmetry == Symmetry::Expectation { RequestKind::Energy } else { RequestKind::Element };
    let options = Options { distinct: derivation.distinct, route: Route::Determinants, ..Options::default() };
    let energy = derive(program, &Request { kind, block: None, ..request.clone() }, &options)?;
    if shown::energy(&derivation.value) != energy.value {
        let what = if kind == RequestKind::Energy { "energy" } else { "element <bra|H|ket>" };
        return Err(failed(format!(
            "Σ γ_pq h_pq + ½ Σ Γ_pqrs (pq|rs) of the densities is not the derived {what}"
        )));
    }
    Ok(())
}

/// Past this many distinct determinants in bra and ket together the check samples determinant
/// pairs.
pub const FULL_CHECK_LIMIT: usize = 300;

/// A state's distinct determinants with their coefficients (see `distinct_determinants`).
type Distinct<'a> = Vec<(Exact, &'a DetSpec)>;

/// A state's determinants with equal ones combined (coefficients summed, vanishing sums
/// dropped), in the order they first appear: what the check counts and samples.
fn distinct_determinants(state: &State) -> Distinct<'_> {
    let mut position: FxHashMap<&DetSpec, usize> = FxHashMap::default();
    let mut out: Vec<(Exact, &DetSpec)> = vec![];
    for (coeff, det) in state.terms.iter() {
        match position.get(det) {
            Some(&k) => out[k].0 += coeff,
            None => {
                position.insert(det, out.len());
                out.push((coeff.clone(), det));
            }
        }
    }
    out.retain(|(c, _)| !c.is_zero());
    out
}

/// True when bra and ket are small enough, counted in distinct determinants, to be checked
/// whole by brute force at every index assignment.
pub fn fits_whole_check(request: &Request) -> bool {
    let (bras, kets) = distinct_bra_and_ket(request);
    fits(&bras, &kets)
}

fn fits(bras: &[(Exact, &DetSpec)], kets: &[(Exact, &DetSpec)]) -> bool {
    bras.len() + kets.len() <= FULL_CHECK_LIMIT
}

/// The distinct determinants of bra and ket; one pass when both are the same state.
fn distinct_bra_and_ket(request: &Request) -> (Distinct<'_>, Distinct<'_>) {
    let bras = distinct_determinants(&request.bra);
    let kets = if std::sync::Arc::ptr_eq(&request.bra.terms, &request.ket.terms) {
        bras.clone()
    } else {
        distinct_determinants(&request.ket)
    };
    (bras, kets)
}

/// How many determinant pairs a sampled check takes.
const SAMPLED_PAIRS: usize = 40;

/// The check of a large request: a seeded sample of pairs of distinct determinants, half of
/// them chosen to interact (a spin exchange between two open shells, or the same determinant),
/// each derived alone by the engine and checked whole against brute force.
fn verify_pairs(
    program: &Program,
    request: &Request,
    derivation: &Derivation,
    seed: u64,
    (bras, kets): (Distinct<'_>, Distinct<'_>),
) -> Result<Report> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed ^ 0xda7a);
    let ket_index: FxHashMap<&DetSpec, usize> = kets.iter().enumerate().map(|(k, &(_, d))| (d, k)).collect();
    let mut pairs = vec![];
    for n in 0..SAMPLED_PAIRS {
        let i = rng.random_range(0..bras.len());
        let bra = bras[i].1;
        let partner = match n % 4 {
            0 => ket_index.get(bra).copied(),
            1 | 2 => spin_exchanged(bra, &mut rng).and_then(|d| ket_index.get(&d).copied()),
            _ => None,
        };
        pairs.push((i, partner.unwrap_or_else(|| rng.random_range(0..kets.len()))));
    }
    let mut report = Report { determinant_pairs: Some(pairs.len()), ..Report::empty(derivation, seed) };
    let options = Options { distinct: derivation.distinct, ..Options::default() };
    for (i, j) in pairs {
        let single = |d: &DetSpec| State::new(vec![(Exact::one(), d.clone())]);
        let pair = Request {
            kind: if derivation.density_symmetry().is_some() {
                RequestKind::TransitionDensity
            } else {
                RequestKind::Element
            },
            text: format!("{} (distinct determinants {} and {})", request.text, i + 1, j + 1),
            bra: single(bras[i].1),
            ket: single(kets[j].1),
            bra_text: request.bra_text.clone(),
            ket_text: request.ket_text.clone(),
            span: request.span.clone(),
            block: None,
        };
        let d = derive(program, &pair, &options)?;
        let r = verify(program, &pair, &d, seed)?;
        report.checks += r.checks;
        report.max_deviation = report.max_deviation.max(r.max_deviation);
        report.sampled |= r.sampled;
        report.sample = match (report.sample, r.sample) {
            (Some(a), Some(b)) => Some(a.plus(b)),
            (a, b) => a.or(b),
        };
        report.configurations = r.configurations;
    }
    Ok(report)
}

/// The determinant with the spins of one alpha and one beta open shell exchanged, if it has both.
fn spin_exchanged(det: &DetSpec, rng: &mut ChaCha8Rng) -> Option<DetSpec> {
    let open = det.open_shells();
    let spin = |k: usize| match det.occupants[k] {
        Occupant::Electron(so) => so.spin,
        Occupant::Closed(_) => Spin::Alpha,
    };
    let alphas: Vec<usize> = open.iter().copied().filter(|&k| spin(k) == Spin::Alpha).collect();
    let betas: Vec<usize> = open.iter().copied().filter(|&k| spin(k) == Spin::Beta).collect();
    if alphas.is_empty() || betas.is_empty() {
        return None;
    }
    let (a, b) = (alphas[rng.random_range(0..alphas.len())], betas[rng.random_range(0..betas.len())]);
    let mut out = det.clone();
    for (k, to) in [(a, Spin::Beta), (b, Spin::Alpha)] {
        if let Occupant::Electron(so) = &mut out.occupants[k] {
            so.spin = to;
        }
    }
    Some(out)
}

/// The index assignments checked in one configuration (`spaces` holds each space's orbitals):
/// all of them when there are at most `cap`. Past that, a seeded sample of `cap` (or of one per
/// pattern, when the patterns are more): first one assignment for every pattern of coinciding
/// indices, so that every Kronecker-delta case of the result is checked, then uniformly drawn
/// ones. Under --distinct only assignments giving different letters of one space different
/// orbitals are in the result's domain. Returns them, whether they are a sample, and how many
/// assignments there are.
fn assignments(
    program: &Program,
    derivation: &Derivation,
    spaces: &[Vec<usize>],
    cap: usize,
    rng: &mut ChaCha8Rng,
) -> (Vec<Vec<(u32, usize)>>, bool, u128) {
    let mut by_space: BTreeMap<SpaceId, Vec<u32>> = BTreeMap::new();
    for &k in &derivation.free_indices {
        by_space.entry(program.indices[k as usize].space).or_default().push(k);
    }
    let members = |s: SpaceId| &spaces[s as usize];
    let total = by_space.iter().fold(1u128, |acc, (&s, indices)| {
        (0..indices.len()).fold(acc, |acc, n| {
            let n = if derivation.distinct { n } else { 0 };
            acc.saturating_mul(members(s).len().saturating_sub(n) as u128)
        })
    });
    if total <= cap as u128 {
        let choices = derivation
            .free_indices
            .iter()
            .map(|&k| members(program.indices[k as usize].space).iter().map(move |&m| (k, m)));
        let mut all: Vec<Vec<(u32, usize)>> = choices
            .multi_cartesian_product()
            .filter(|a| !derivation.distinct || all_different_within_spaces(program, a))
            .collect();
        if all.is_empty() {
            all.push(vec![]);
        }
        return (all, false, total);
    }
    // each space's letters, grouped into blocks that name one orbital, get different orbitals
    let draw = |block_of: &dyn Fn(u32) -> u32, rng: &mut ChaCha8Rng| -> Vec<(u32, usize)> {
        let mut orbital: BTreeMap<u32, usize> = BTreeMap::new();
        for (&s, indices) in &by_space {
            let blocks: Vec<u32> = indices.iter().map(|&k| block_of(k)).unique().collect();
            orbital.extend(blocks.iter().copied().zip(members(s).sample(rng, blocks.len()).copied()));
        }
        derivation.free_indices.iter().map(|&k| (k, orbital[&block_of(k)])).collect()
    };
    let mut seen: HashSet<Vec<(u32, usize)>> = HashSet::new();
    let mut out = vec![];
    for case in coincidence::cases(&by_space, &[], derivation.distinct) {
        let block_of = |k| match case.orb(Orb::Index(k)) {
            Orb::Index(representative) => representative,
            _ => k,
        };
        let a = draw(&block_of, rng);
        if seen.insert(a.clone()) {
            out.push(a);
        }
    }
    while out.len() < cap {
        // every letter a block of its own draws different orbitals: only under --distinct
        let a = if derivation.distinct {
            draw(&|k| k, rng)
        } else {
            derivation
                .free_indices
                .iter()
                .map(|&k| {
                    let m = members(program.indices[k as usize].space);
                    (k, m[rng.random_range(0..m.len())])
                })
                .collect()
        };
        if seen.insert(a.clone()) {
            out.push(a);
        }
    }
    (out, true, total)
}

/// Checks one derivation of `request`; returns the report or a verification failure.
pub fn verify(program: &Program, request: &Request, derivation: &Derivation, seed: u64) -> Result<Report> {
    if let Some(block) = &derivation.block {
        return verify_block(program, request, derivation, block, seed);
    }
    // exact, whatever the size: an open-shell form read off an energy of spin algebra included
    verify_exact(program, request, derivation)?;
    let mut report = Report::empty(derivation, seed);
    if request.bra.is_unexpanded() {
        report.not_checked = Some(format!(
            "`{}` has too many determinants to expand; the spin-coupling route is tested against determinants in the test suite",
            request.bra_text
        ));
        return Ok(report);
    }
    // S² is cheap to apply by brute force at any size; H is not
    let distinct = distinct_bra_and_ket(request);
    if !fits(&distinct.0, &distinct.1) && request.kind != RequestKind::Spin {
        return verify_pairs(program, request, derivation, seed, distinct);
    }
    verify_sized(program, request, derivation, seed, size_configurations(program, request, derivation))
}

/// Sizes for the checks of the pairs of a block: the spaces the whole request uses, each with
/// room for as many different indices as any pair has there, so that every pair is checked on
/// the same three configurations.
pub(super) fn block_configurations(
    program: &Program,
    request: &Request,
    pairs: &[Derivation],
) -> Vec<Vec<usize>> {
    let needed = |s: u32| {
        pairs
            .iter()
            .map(|d| d.free_indices.iter().filter(|&&k| program.indices[k as usize].space == s).count())
            .max()
            .unwrap_or(0)
    };
    let (_, used, _) = symbols_of(program, request);
    sizes(program, &used, &needed)
}

/// Checks a request that brute force takes whole on the configurations given (see
/// `size_configurations`).
pub(super) fn verify_sized(
    program: &Program,
    request: &Request,
    derivation: &Derivation,
    seed: u64,
    configurations: Vec<Vec<usize>>,
) -> Result<Report> {
    let mut report = Report::empty(derivation, seed);
    let pairs = distinct_determinants(&request.bra).len() * distinct_determinants(&request.ket).len();
    let cap = (WORK_BUDGET / (configurations.len() * pairs).max(1)).clamp(1, MAX_ASSIGNMENTS);
    let mut rng = ChaCha8Rng::seed_from_u64(seed ^ 0x5eed);
    let mut sample = Sample { drawn: 0, of: 0 };
    let evaluations = Evaluations::default();
    for (c, sizes) in configurations.into_iter().enumerate() {
        let mut next = program.orbitals.len();
        let spaces: Vec<Vec<usize>> = sizes
            .iter()
            .map(|&n| {
                next += n;
                (next - n..next).collect()
            })
            .collect();
        report.configurations.push(
            program
                .spaces
                .iter()
                .zip(&sizes)
                .filter(|&(_, &n)| n > 0)
                .map(|(s, n)| format!("{}={n}", s.name))
                .join(", "),
        );
        let ints = IntegralTable::random(next, seed.wrapping_add(c as u64));
        let (assignments, sampled, of) = assignments(program, derivation, &spaces, cap, &mut rng);
        report.sampled |= sampled;
        sample = sample.plus(Sample { drawn: assignments.len(), of });
        for assignment in assignments {
            let mut binding = Binding {
                orbitals: (0..program.orbitals.len()).collect(),
                spaces: spaces.clone(),
                indices: vec![None; program.indices.len()],
            };
            for &(k, m) in &assignment {
                binding.indices[k as usize] = Some(m);
            }
            let Some(pairs) = compare_with(program, request, derivation, &binding, &ints, &evaluations)?
            else {
                continue; // the state vanishes for this assignment; the notes say so
            };
            for comparison in pairs {
                let deviation = comparison.deviation();
                let Comparison { what, brute_force: expected, derived, .. } = comparison;
                report.max_deviation = report.max_deviation.max(deviation);
                report.checks += 1;
                if deviation > TOLERANCE || !derived.is_finite() {
                    let at = assignment
                        .iter()
                        .map(|&(k, m)| format!("{}={}", program.indices[k as usize].name, m + 1))
                        .join(", ");
                    // + 0.0: a zero is printed as 0.000…, never -0.000…
                    let (derived, expected) = (derived + 0.0, expected + 0.0);
                    return Err(Error::at(
                        ErrorKind::VerificationFailed {
                            request: request.text.clone(),
                            report: format!(
                                "the derived {what} is {derived:.15} but brute-force determinant algebra gives {expected:.15} (spaces {}{}{}, random integrals seed {})",
                                report.configurations.last().map_or("", |s| s.as_str()),
                                if at.is_empty() { "" } else { "; indices " },
                                at,
                                seed.wrapping_add(c as u64)
                            ),
                        },
                        &request.span,
                    ));
                }
            }
        }
    }
    if report.checks == 0 {
        return Err(Error::at(
            ErrorKind::VerificationFailed {
                request: request.text.clone(),
                report: "no instantiation could be checked: the state vanishes in every one".into(),
            },
            &request.span,
        ));
    }
    report.sample = report.sampled.then_some(sample);
    if report.max_deviation > 0.0 {
        report.max_deviation = 10f64.powi(report.max_deviation.log10().ceil() as i32);
    }
    Ok(report)
}

//! Orbital optimization of one state's energy: the state as functions with fixed transition
//! densities, its lowest energy at given orbitals, and quasi-Newton steps U ← U exp(κ).

use crate::check::brute_force::{Vector, dot};
use crate::error::{Error, ErrorKind, Result};
use crate::numbers::density::{Densities, densities};
use crate::numbers::eigen::{Entry, Pencil, lowest_roots};
use crate::numbers::generalized_fock::{energy, generalized_fock, gradient};
use crate::numbers::integrals::{Integrals, pair_index};
use crate::numbers::rotation::exp_antisymmetric;
use crate::numbers::transform::{Rotated, rotate};
use faer::Mat;

/// A state spanned by functions (one for a state without free coefficients, its parts
/// otherwise) over the active orbitals: the transition densities and overlaps of every pair,
/// which rotations of the orbitals do not change (they are in the current orbitals).
#[derive(Clone, Debug)]
pub struct Model {
    /// File orbitals, in the order the densities number them.
    pub active: Vec<usize>,
    /// <f_i| ... |f_j> at i·m + j.
    transition: Vec<Densities>,
    /// <f_i|f_j> at i·m + j.
    overlap: Vec<f64>,
    m: usize,
}

/// The lowest energy of a model at given orbitals: the total energy (constant included), the
/// coefficients of its functions (Cᵀ S C = 1, the largest positive), and its densities.
#[derive(Clone, Debug)]
pub struct Point {
    pub energy: f64,
    pub coefficients: Vec<f64>,
    pub density: Densities,
}

impl Model {
    /// `functions` are vectors over compact orbitals, compact k being file orbital `active[k]`.
    pub fn new(functions: &[Vector], active: Vec<usize>) -> Model {
        let m = functions.len();
        let o = active.len();
        let mut transition = vec![];
        let mut overlap = vec![];
        for bra in functions {
            for ket in functions {
                transition.push(densities(bra, ket, o));
                overlap.push(dot(bra, ket));
            }
        }
        Model { active, transition, overlap, m }
    }

    /// The lowest energy over the span of the functions with the integrals `r`.
    pub fn at(&self, r: &Rotated) -> Result<Point> {
        let m = self.m;
        let h: Vec<f64> =
            (0..m * m).map(|k| energy(&self.transition[k], r) + r.constant * self.overlap[k]).collect();
        let (value, c) = if m == 1 {
            (h[0] / self.overlap[0], vec![1.0 / self.overlap[0].sqrt()])
        } else {
            let rows = (0..m)
                .map(|i| {
                    (i..m)
                        .map(|j| Entry { column: j as u32, h: h[i * m + j], s: self.overlap[i * m + j] })
                        .filter(|e| e.h != 0.0 || e.s != 0.0 || e.column as usize == i)
                        .collect()
                })
                .collect();
            let solution = lowest_roots(&Pencil { rows }, 1, &|_| {})?;
            (solution.values[0], solution.vectors[0].clone())
        };
        let mut density = Densities::zeros(self.active.len());
        for i in 0..m {
            for j in 0..m {
                if c[i] * c[j] != 0.0 {
                    density.add_scaled(&self.transition[i * m + j], c[i] * c[j]);
                }
            }
        }
        Ok(Point { energy: value, coefficients: c, density })
    }
}

/// When to stop.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Controls {
    pub gradient_tol: f64,
    pub max_iter: usize,
}

/// Where the optimization stopped.
#[derive(Clone, Debug)]
pub struct Outcome {
    pub energy: f64,
    pub iterations: usize,
    pub gradient_norm: f64,
    pub converged: bool,
    /// The functions' coefficients at the end (Cᵀ S C = 1).
    pub coefficients: Vec<f64>,
    /// The new orbitals as columns over the file's orbitals.
    pub orbitals: Mat<f64>,
}

/// Steps longer than this (the Euclidean norm of κ, radians) are shortened: far from the
/// minimum the quadratic model can ask for rotations past a quarter turn.
const MAX_STEP: f64 = 0.5;

/// Pairs of steps and gradient changes L-BFGS remembers.
const MEMORY: usize = 10;

/// The smallest diagonal Hessian guess: near-degenerate or negative estimates would make the
/// first steps huge.
const HESSIAN_FLOOR: f64 = 0.05;

/// Sufficient decrease (Armijo) constant of the line search.
const ARMIJO: f64 = 1e-4;

/// Energies that differ by less than this times max(1, |E|) are equal to rounding: a step
/// that raises the energy by no more is accepted, so that the line search does not stall
/// where the gradient is small and the energy no longer changes visibly.
const ROUNDING: f64 = 1e-12;

/// Trial steps per line search before giving up.
const TRIALS: usize = 30;

/// The orbitals and the point there, with what the next step needs.
struct Current {
    orbitals: Mat<f64>,
    rotated: Rotated,
    point: Point,
    gradient: Vec<f64>,
}

fn at_orbitals(
    model: &Model,
    ints: &dyn Integrals,
    pairs: &[(usize, usize)],
    orbitals: Mat<f64>,
) -> Result<Current> {
    let rotated = rotate(ints, orbitals.as_ref(), &model.active);
    let point = model.at(&rotated)?;
    let gradient = gradient(&generalized_fock(&point.density, &rotated), pairs);
    Ok(Current { orbitals, rotated, point, gradient })
}

/// The diagonal Hessian guess per pair: 2(γ_pp f_qq + γ_qq f_pp) − 2(F_pp + F_qq), with f
/// the Coulomb part of a Fock operator of the density, f_pp = h_pp + Σ_st γ_st (pp|st) (what
/// the exact diagonal is for a closed shell, less exchange), its magnitude at least
/// `HESSIAN_FLOOR`.
fn hessian_guess(current: &Current, pairs: &[(usize, usize)]) -> Vec<f64> {
    let r = &current.rotated;
    let d = &current.point.density;
    let (n, o) = (r.n, d.n);
    let coulomb_file = Mat::from_fn(n, n, |m, v| {
        let block = &r.half[pair_index(m as u64, v as u64) as usize * o * o..][..o * o];
        block.iter().zip(&d.one).map(|(x, g)| x * g).sum::<f64>()
    });
    let c = &current.orbitals;
    let coulomb = c.transpose() * &coulomb_file * c;
    let mut occupation = vec![0.0; n];
    for (a, &p) in r.active.iter().enumerate() {
        occupation[p] = d.one[d.pair(a, a)];
    }
    let f: Vec<f64> = (0..n).map(|p| r.h[(p, p)] + coulomb[(p, p)]).collect();
    let fock = generalized_fock(d, r);
    pairs
        .iter()
        .map(|&(p, q)| {
            let guess =
                2.0 * (occupation[p] * f[q] + occupation[q] * f[p]) - 2.0 * (fock[(p, p)] + fock[(q, q)]);
            guess.abs().max(HESSIAN_FLOOR)
        })
        .collect()
}

fn dot_slices(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}

fn norm(a: &[f64]) -> f64 {
    dot_slices(a, a).sqrt()
}

/// −H g by the L-BFGS two-loop recursion from the diagonal guess. The steps and gradient
/// changes are taken in the local coordinates κ of successive points without transport: the
/// charts of nearby points differ to second order in the step, which the updates absorb.
fn direction(g: &[f64], diagonal: &[f64], history: &[(Vec<f64>, Vec<f64>)]) -> Vec<f64> {
    let mut q = g.to_vec();
    let mut alphas = vec![];
    for (s, y) in history.iter().rev() {
        let rho = 1.0 / dot_slices(y, s);
        let alpha = rho * dot_slices(s, &q);
        q.iter_mut().zip(y).for_each(|(x, yi)| *x -= alpha * yi);
        alphas.push((alpha, rho));
    }
    let mut r: Vec<f64> = q.iter().zip(diagonal).map(|(x, h)| x / h).collect();
    for ((s, y), (alpha, rho)) in history.iter().zip(alphas.iter().rev()) {
        let beta = rho * dot_slices(y, &r);
        r.iter_mut().zip(s).for_each(|(x, si)| *x += si * (alpha - beta));
    }
    r.iter().map(|x| -x).collect()
}

/// U exp(κ) with κ holding `step` at the pairs.
fn rotated_orbitals(orbitals: &Mat<f64>, pairs: &[(usize, usize)], step: &[f64]) -> Result<Mat<f64>> {
    let n = orbitals.nrows();
    let mut kappa = Mat::<f64>::zeros(n, n);
    for (&(p, q), &x) in pairs.iter().zip(step) {
        kappa[(p, q)] = x;
        kappa[(q, p)] = -x;
    }
    Ok(orbitals * exp_antisymmetric(kappa.as_ref())?)
}

/// Minimizes the model's lowest energy over rotations of the given pairs of orbitals from the
/// file's orbitals, by L-BFGS with a backtracking (Armijo) line search and steps of at most
/// `MAX_STEP`. `report` hears one line per iteration. A run that reaches `max_iter`, or
/// whose line search finds no lower energy, ends with `converged` false.
pub fn optimize(
    model: &Model,
    ints: &dyn Integrals,
    pairs: &[(usize, usize)],
    controls: Controls,
    report: &dyn Fn(&str),
) -> Result<Outcome> {
    let n = ints.orbital_count();
    let mut current = at_orbitals(model, ints, pairs, Mat::identity(n, n))?;
    let mut history: Vec<(Vec<f64>, Vec<f64>)> = vec![];
    let mut iterations = 0;
    let mut stalled = false;
    let line = |k: usize, c: &Current, step: f64| {
        format!(
            "iteration {k:>4}  energy {:>20.12}  gradient {:.3e}  step {step:.3e}",
            c.point.energy,
            norm(&c.gradient)
        )
    };
    report(&line(0, &current, 0.0));
    while norm(&current.gradient) >= controls.gradient_tol && iterations < controls.max_iter && !stalled {
        let diagonal = hessian_guess(&current, pairs);
        let g = current.gradient.clone();
        let mut d = direction(&g, &diagonal, &history);
        if dot_slices(&g, &d) >= 0.0 {
            history.clear();
            d = g.iter().zip(&diagonal).map(|(x, h)| -x / h).collect();
        }
        let length = norm(&d);
        if length > MAX_STEP {
            d.iter_mut().for_each(|x| *x *= MAX_STEP / length);
        }
        let slope = dot_slices(&g, &d);
        let e0 = current.point.energy;
        let mut alpha = 1.0;
        let mut accepted = None;
        for _ in 0..TRIALS {
            let step: Vec<f64> = d.iter().map(|x| alpha * x).collect();
            let orbitals = rotated_orbitals(&current.orbitals, pairs, &step)?;
            let rotated = rotate(ints, orbitals.as_ref(), &model.active);
            let point = model.at(&rotated)?;
            if point.energy <= e0 + ARMIJO * alpha * slope + ROUNDING * e0.abs().max(1.0) {
                accepted = Some((step, orbitals, rotated, point));
                break;
            }
            // the minimum of the parabola through E(0), E'(0) and E(α), kept within [α/10, α/2]
            let curvature = 2.0 * (point.energy - e0 - slope * alpha);
            let minimum = if curvature > 0.0 { -slope * alpha * alpha / curvature } else { 0.5 * alpha };
            alpha = minimum.clamp(0.1 * alpha, 0.5 * alpha);
        }
        let Some((step, orbitals, rotated, point)) = accepted else {
            if history.is_empty() {
                stalled = true;
            }
            history.clear();
            continue;
        };
        let gradient = gradient(&generalized_fock(&point.density, &rotated), pairs);
        let y: Vec<f64> = gradient.iter().zip(&g).map(|(a, b)| a - b).collect();
        // only pairs of positive curvature keep the inverse Hessian positive definite
        if dot_slices(&step, &y) > 1e-12 * norm(&step) * norm(&y) {
            history.push((step.clone(), y));
            if history.len() > MEMORY {
                history.remove(0);
            }
        }
        current = Current { orbitals, rotated, point, gradient };
        iterations += 1;
        report(&line(iterations, &current, norm(&step)));
    }
    let gradient_norm = norm(&current.gradient);
    Ok(Outcome {
        energy: current.point.energy,
        iterations,
        gradient_norm,
        converged: gradient_norm < controls.gradient_tol,
        coefficients: current.point.coefficients,
        orbitals: current.orbitals,
    })
}

/// The error for a run that stopped before its gradient fell below the tolerance.
pub fn not_converged(request: &str, outcome: &Outcome, controls: Controls) -> Error {
    Error::new(ErrorKind::NotConverged {
        request: request.to_string(),
        iterations: outcome.iterations,
        energy: outcome.energy,
        gradient_norm: outcome.gradient_norm,
        tolerance: controls.gradient_tol,
        stalled: outcome.iterations < controls.max_iter,
    })
}

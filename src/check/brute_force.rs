//! The independent check: states built as vectors over occupation bit strings by applying
//! creation and annihilation operators, and H applied term by term in second quantization.

use crate::language::orbital::{Orb, Spin, SpinOrbital};
use crate::language::program::{Occupant, State};
use crate::numbers::evaluate::Binding;
use crate::numbers::integrals::Integrals;
use rustc_hash::FxHashMap;

/// Spatial orbitals a bit string can hold.
pub const MAX_ORBITALS: usize = 64;

/// A vector in the determinant space: occupation bit string → amplitude.
/// Bit 2p is p-alpha, bit 2p+1 is p-beta; a basis string means its creators in ascending
/// bit order applied to the vacuum, the lowest leftmost.
pub type Vector = FxHashMap<u128, f64>;

fn bit(binding: &Binding, so: SpinOrbital) -> u32 {
    let p = match so.orb {
        Orb::Named(k) => binding.orbitals[k as usize],
        // callers bind every index a request uses, below MAX_ORBITALS
        Orb::Index(k) => binding.indices[k as usize].unwrap_or(0),
        Orb::Summed(_) => 0,
    };
    2 * p as u32 + if so.spin == Spin::Beta { 1 } else { 0 }
}

fn parity_below(det: u128, b: u32) -> f64 {
    if (det & ((1u128 << b) - 1)).count_ones().is_multiple_of(2) { 1.0 } else { -1.0 }
}

/// a+(b) on a basis string.
fn create(det: u128, b: u32) -> Option<(f64, u128)> {
    (det & (1 << b) == 0).then(|| (parity_below(det, b), det | (1 << b)))
}

/// a(b) on a basis string.
fn annihilate(det: u128, b: u32) -> Option<(f64, u128)> {
    (det & (1 << b) != 0).then(|| (parity_below(det, b), det & !(1 << b)))
}

/// Applies a string of operators, rightmost first: `true` creates, `false` annihilates.
fn apply(det: u128, operators: &[(bool, u32)]) -> Option<(f64, u128)> {
    let mut sign = 1.0;
    let mut d = det;
    for &(is_creation, b) in operators.iter().rev() {
        let (s, next) = if is_creation { create(d, b)? } else { annihilate(d, b)? };
        sign *= s;
        d = next;
    }
    Some((sign, d))
}

/// The state as a vector: each determinant is a+(x1) .. a+(xN)|0> in the order written,
/// closed spaces as k-alpha k-beta for every member, then each excitation
/// a+(y1) .. a+(yn) a(xn) .. a(x1) applied in turn.
pub fn state_vector(state: &State, binding: &Binding) -> Vector {
    let mut out = Vector::default();
    for (coeff, det) in state.terms.iter() {
        let mut operators: Vec<(bool, u32)> = vec![];
        for e in det.excitations.iter().rev() {
            operators.extend(e.to.iter().map(|&y| (true, bit(binding, y))));
            operators.extend(e.from.iter().rev().map(|&x| (false, bit(binding, x))));
        }
        for occupant in &det.occupants {
            match *occupant {
                Occupant::Closed(s) => {
                    for &k in &binding.spaces[s as usize] {
                        operators.push((true, 2 * k as u32));
                        operators.push((true, 2 * k as u32 + 1));
                    }
                }
                Occupant::Electron(so) => operators.push((true, bit(binding, so))),
            }
        }
        if let Some((sign, d)) = apply(0, &operators) {
            *out.entry(d).or_insert(0.0) += sign * coeff.to_f64();
        }
    }
    out
}

pub fn dot(a: &Vector, b: &Vector) -> f64 {
    a.iter().map(|(d, x)| x * b.get(d).copied().unwrap_or(0.0)).sum()
}

fn bits(det: u128) -> Vec<u32> {
    (0..128).filter(|b| det & (1 << b) != 0).collect()
}

/// <bra|H|ket> with H = Σ h_pq a+p aq + ½ Σ <pq|rs> a+p a+q as ar, electronic part only.
/// Creation operators run only over spin orbitals some bra determinant occupies: others
/// cannot reach the bra, so the sum is the same with or without them.
pub fn matrix_element(bra: &Vector, ket: &Vector, ints: &dyn Integrals) -> f64 {
    let reach: u128 = bra.keys().fold(0, |acc, d| acc | d);
    let targets = |free: u128, spin: u32| bits(reach & !free).into_iter().filter(move |b| b % 2 == spin);
    let mut total = 0.0;
    let overlap = |d: u128| bra.get(&d).copied().unwrap_or(0.0);
    for (&det, &amp) in ket {
        let occupied = bits(det);
        for &q in &occupied {
            let Some((s1, after)) = apply(det, &[(false, q)]) else { continue };
            for p in targets(after, q % 2) {
                if let Some((s2, d)) = apply(after, &[(true, p)]) {
                    total += overlap(d) * amp * s1 * s2 * ints.h((p / 2) as usize, (q / 2) as usize);
                }
            }
        }
        for &r in &occupied {
            for &s in &occupied {
                if r == s {
                    continue;
                }
                let Some((s1, after)) = apply(det, &[(false, s), (false, r)]) else { continue };
                for p in targets(after, r % 2) {
                    for q in targets(after, s % 2) {
                        // <pq|rs> = (pr|qs) for spatial orbitals, spins matched by the loops
                        if let Some((s2, d)) = apply(after, &[(true, p), (true, q)]) {
                            let g = ints.eri(
                                (p / 2) as usize,
                                (r / 2) as usize,
                                (q / 2) as usize,
                                (s / 2) as usize,
                            );
                            total += 0.5 * overlap(d) * amp * s1 * s2 * g;
                        }
                    }
                }
            }
        }
    }
    total
}

/// S²|v> = (S₋S₊ + S_z² + S_z)|v>, with S₊ = Σ_p a+(p α) a(p β).
pub fn apply_s_squared(v: &Vector) -> Vector {
    let mut out = Vector::default();
    for (&det, &amp) in v {
        let alpha = (det & ALPHA_BITS).count_ones() as f64;
        let beta = (det & !ALPHA_BITS).count_ones() as f64;
        let sz = (alpha - beta) / 2.0;
        *out.entry(det).or_insert(0.0) += amp * (sz * sz + sz);
        // a+(p α) a(p β) a+(q α) a(q β): q must hold a beta electron, p then an alpha one
        for q in bits(det & !ALPHA_BITS).into_iter().map(|b| b / 2) {
            let Some((s1, raised)) = apply(det, &[(true, 2 * q), (false, 2 * q + 1)]) else { continue };
            for p in bits(raised & ALPHA_BITS).into_iter().map(|b| b / 2) {
                if let Some((s2, d)) = apply(raised, &[(true, 2 * p + 1), (false, 2 * p)]) {
                    *out.entry(d).or_insert(0.0) += amp * s1 * s2;
                }
            }
        }
    }
    out
}

/// <v|S_z|v> / <v|v>.
pub fn s_z(v: &Vector) -> f64 {
    let weighted: f64 = v
        .iter()
        .map(|(&d, &x)| {
            x * x * ((d & ALPHA_BITS).count_ones() as f64 - (d & !ALPHA_BITS).count_ones() as f64) / 2.0
        })
        .sum();
    weighted / dot(v, v)
}

/// The bits of alpha spin orbitals.
const ALPHA_BITS: u128 = 0x5555_5555_5555_5555_5555_5555_5555_5555;

#[cfg(test)]
mod tests {
    use super::*;
    use crate::engine::exact::Exact;
    use crate::language::program::DetSpec;
    use crate::numbers::integrals::IntegralTable;

    #[test]
    fn closed_shell_energy_matches_the_textbook_formula() {
        // one doubly occupied orbital: E = 2 h_11 + (11|11)
        let ints = IntegralTable::random(2, 3);
        let state = State::new(vec![(
            Exact::one(),
            DetSpec { occupants: vec![Occupant::Closed(0)], excitations: vec![] },
        )]);
        let binding = Binding { orbitals: vec![], spaces: vec![vec![0]], indices: vec![] };
        let v = state_vector(&state, &binding);
        let e = matrix_element(&v, &v, &ints);
        assert!((e - (2.0 * ints.h(0, 0) + ints.eri(0, 0, 0, 0))).abs() < 1e-12);
    }
}

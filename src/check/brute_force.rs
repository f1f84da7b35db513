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
pub(crate) fn apply(det: u128, operators: &[(bool, u32)]) -> Option<(f64, u128)> {
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

/// The set bits of a string, lowest first.
pub(crate) fn bits(det: u128) -> impl Iterator<Item = u32> {
    let mut rest = det;
    std::iter::from_fn(move || {
        (rest != 0).then(|| {
            let b = rest.trailing_zeros();
            rest &= rest - 1;
            b
        })
    })
}

/// <bra|H|ket> with H = Σ h_pq a+p aq + ½ Σ <pq|rs> a+p a+q as ar, electronic part only,
/// summed over every pair of basis strings. H changes at most two spin orbitals, so a pair
/// further apart contributes nothing and is skipped.
pub fn matrix_element(bra: &Vector, ket: &Vector, ints: &dyn Integrals) -> f64 {
    let mut total = 0.0;
    for (&from, &amp) in ket {
        for (&to, &weight) in bra {
            let (removed, added) = ((from & !to).count_ones(), (to & !from).count_ones());
            if removed == added && removed <= 2 {
                total += weight * amp * connecting_terms(from, to, ints);
            }
        }
    }
    total
}

/// <to|H|from> for two basis strings, as the sum of the terms of H applied as operator
/// strings. Only terms that can carry `from` into `to` are visited: their annihilators take
/// every spin orbital `to` lacks and otherwise spin orbitals both strings hold, and their
/// creators then restore `to`. Any other term leaves a string orthogonal to `to`.
fn connecting_terms(from: u128, to: u128, ints: &dyn Integrals) -> f64 {
    let removed = from & !to;
    let common = from & to;
    // the sets of `size` spin orbitals such terms annihilate
    let annihilated = |size: u32| -> Vec<u128> {
        match size.checked_sub(removed.count_ones()) {
            Some(0) => vec![removed],
            Some(1) => bits(common).map(|j| removed | 1 << j).collect(),
            Some(2) => bits(common)
                .flat_map(|i| {
                    bits(common & !(1 << i) & (u128::MAX << i)).map(move |j| removed | 1 << i | 1 << j)
                })
                .collect(),
            _ => vec![],
        }
    };
    // what the creators must put back once `set` is annihilated
    let created = |set: u128| to & !(from & !set);
    let mut total = 0.0;
    for set in annihilated(1) {
        let (q, p) = (set.trailing_zeros(), created(set).trailing_zeros());
        if p % 2 == q % 2
            && let Some((sign, out)) = apply(from, &[(true, p), (false, q)])
        {
            debug_assert_eq!(out, to);
            total += sign * ints.h((p / 2) as usize, (q / 2) as usize);
        }
    }
    for set in annihilated(2) {
        let ([r0, r1], [p0, p1]) = (two(set), two(created(set)));
        for (r, s) in [(r0, r1), (r1, r0)] {
            for (p, q) in [(p0, p1), (p1, p0)] {
                // <pq|rs> = (pr|qs) for spatial orbitals when the spins of p, r and of q, s agree
                if p % 2 == r % 2
                    && q % 2 == s % 2
                    && let Some((sign, out)) = apply(from, &[(true, p), (true, q), (false, s), (false, r)])
                {
                    debug_assert_eq!(out, to);
                    let g = ints.eri((p / 2) as usize, (r / 2) as usize, (q / 2) as usize, (s / 2) as usize);
                    total += 0.5 * sign * g;
                }
            }
        }
    }
    total
}

/// The two set bits of a string that has exactly two.
fn two(set: u128) -> [u32; 2] {
    let low = set.trailing_zeros();
    [low, (set & !(1 << low)).trailing_zeros()]
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
        for q in bits(det & !ALPHA_BITS).map(|b| b / 2) {
            let Some((s1, raised)) = apply(det, &[(true, 2 * q), (false, 2 * q + 1)]) else { continue };
            for p in bits(raised & ALPHA_BITS).map(|b| b / 2) {
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
    use itertools::Itertools;
    use rand::{RngExt, SeedableRng};
    use rand_chacha::ChaCha8Rng;

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

    /// <bra|H|ket> as the definition reads: every term of H, over all spin orbitals p, q, r,
    /// s, applied to every ket string and projected on the bra.
    fn every_term_of_h(bra: &Vector, ket: &Vector, ints: &dyn Integrals, spin_orbitals: u32) -> f64 {
        let all = || 0..spin_orbitals;
        let same_spin = |x: u32, y: u32| x % 2 == y % 2;
        let project = |operators: &[(bool, u32)]| -> f64 {
            ket.iter()
                .filter_map(|(&d, &amp)| apply(d, operators).map(|(sign, out)| (sign * amp, out)))
                .map(|(x, out)| x * bra.get(&out).copied().unwrap_or(0.0))
                .sum()
        };
        let mut total = 0.0;
        for (p, q) in all().cartesian_product(all()).filter(|&(p, q)| same_spin(p, q)) {
            total += ints.h((p / 2) as usize, (q / 2) as usize) * project(&[(true, p), (false, q)]);
        }
        for (p, q, r, s) in all()
            .cartesian_product(all())
            .cartesian_product(all().cartesian_product(all()))
            .map(|((p, q), (r, s))| (p, q, r, s))
        {
            if same_spin(p, r) && same_spin(q, s) {
                let g = ints.eri((p / 2) as usize, (r / 2) as usize, (q / 2) as usize, (s / 2) as usize);
                total += 0.5 * g * project(&[(true, p), (true, q), (false, s), (false, r)]);
            }
        }
        total
    }

    #[test]
    fn visiting_only_connected_pairs_gives_the_sum_over_every_term_of_h() {
        // every string of 3 electrons in 4 orbitals (8 spin orbitals), with seeded amplitudes
        let mut rng = ChaCha8Rng::seed_from_u64(11);
        let strings: Vec<u128> = (0u128..256).filter(|d| d.count_ones() == 3).collect();
        let mut random_vector = || -> Vector {
            let mut out = Vector::default();
            for &d in &strings {
                if rng.random_bool(0.4) {
                    out.insert(d, rng.random_range(-1.0..1.0));
                }
            }
            out
        };
        let ints = IntegralTable::random(4, 5);
        for _ in 0..6 {
            let (bra, ket) = (random_vector(), random_vector());
            let expected = every_term_of_h(&bra, &ket, &ints, 8);
            let got = matrix_element(&bra, &ket, &ints);
            assert!((got - expected).abs() < 1e-12 * expected.abs().max(1.0), "{got} vs {expected}");
            let diagonal = every_term_of_h(&bra, &bra, &ints, 8);
            assert!((matrix_element(&bra, &bra, &ints) - diagonal).abs() < 1e-12 * diagonal.abs().max(1.0));
        }
    }
}

//! The Slater–Condon rules between two determinants of one coincidence case: maximum
//! coincidence and its phase, then the zero-, one- and two-difference formulas.

use crate::determinant::CaseDet;
use crate::exact::Exact;
use crate::expression::{Factor, RawTerm, RestrictedSum};
use crate::orbital::{Orb, Spin, SpinOrbital};
use crate::spin_integrate::{antisymmetrized, one_electron};

/// The two spin orbitals every member k of a closed space brings.
fn closed_pair(k: Orb) -> [SpinOrbital; 2] {
    [SpinOrbital::new(k, Spin::Alpha), SpinOrbital::new(k, Spin::Beta)]
}

/// The bra and ket in maximum coincidence: the phase of the permutation that lines the ket
/// up with the bra, the differing bra and ket spin orbitals pairwise, and the common ones.
pub struct Coincidence {
    pub phase: i32,
    pub from: Vec<SpinOrbital>,
    pub to: Vec<SpinOrbital>,
    pub common: Vec<SpinOrbital>,
}

pub fn coincidence(bra: &[SpinOrbital], ket: &[SpinOrbital]) -> Coincidence {
    // ket entries in the bra's positions where shared, unshared ones filling the gaps in order
    let mut unshared = ket.iter().enumerate().filter(|(_, k)| !bra.contains(k)).map(|(i, _)| i);
    let order: Vec<usize> = bra
        .iter()
        .map(|b| match ket.iter().position(|k| k == b) {
            Some(i) => i,
            None => unshared.next().expect("equal electron counts"),
        })
        .collect();
    let mut inversions = 0;
    for i in 0..order.len() {
        for j in i + 1..order.len() {
            if order[i] > order[j] {
                inversions += 1;
            }
        }
    }
    let mut c = Coincidence {
        phase: if inversions % 2 == 0 { 1 } else { -1 },
        from: vec![],
        to: vec![],
        common: vec![],
    };
    for (b, &i) in bra.iter().zip(&order) {
        if *b == ket[i] {
            c.common.push(*b);
        } else {
            c.from.push(*b);
            c.to.push(ket[i]);
        }
    }
    c
}

/// Collects signed integrals into raw terms.
struct Collector {
    terms: Vec<RawTerm>,
    scale: Exact,
}

impl Collector {
    fn push(&mut self, coeff: Exact, factor: Option<Factor>, sums: &[RestrictedSum]) {
        if let Some(factor) = factor {
            self.terms.push(RawTerm { coeff: &coeff * &self.scale, sums: sums.to_vec(), factor });
        }
    }

    fn push_antisymmetrized(
        &mut self,
        weight: &Exact,
        integrals: Vec<(i64, Factor)>,
        sums: &[RestrictedSum],
    ) {
        for (sign, factor) in integrals {
            self.push(weight * &Exact::integer(sign), Some(factor), sums);
        }
    }
}

/// <bra|H|ket> (electronic part) for determinants sharing the closed spaces `closed`.
/// Every closed member k contributes its pair k, k' through the same spin-orbital formulas
/// as an explicit electron, summed over the space.
pub fn hamiltonian(bra: &CaseDet, ket: &CaseDet, closed: &[RestrictedSum]) -> Vec<RawTerm> {
    let c = coincidence(&bra.electrons, &ket.electrons);
    let mut out = Collector { terms: vec![], scale: Exact::integer(c.phase as i64) };
    let one = Exact::one();
    let half = Exact::fraction(1, 2);
    let (k, l) = (Orb::Summed(0), Orb::Summed(1));
    match c.from.len() {
        0 => {
            let electrons = &bra.electrons;
            for &m in electrons {
                out.push(one.clone(), one_electron(m, m), &[]);
            }
            for (i, &m) in electrons.iter().enumerate() {
                for &n in &electrons[i + 1..] {
                    out.push_antisymmetrized(&one, antisymmetrized(m, n, m, n), &[]);
                }
            }
            for space in closed {
                let one_space = std::slice::from_ref(space);
                for kk in closed_pair(k) {
                    out.push(one.clone(), one_electron(kk, kk), one_space);
                    for &m in electrons {
                        out.push_antisymmetrized(&one, antisymmetrized(m, kk, m, kk), one_space);
                    }
                }
                for other in closed {
                    let both = [space.clone(), other.clone()];
                    for kk in closed_pair(k) {
                        for ll in closed_pair(l) {
                            out.push_antisymmetrized(&half, antisymmetrized(kk, ll, kk, ll), &both);
                        }
                    }
                }
            }
        }
        1 => {
            let (m, p) = (c.from[0], c.to[0]);
            out.push(one.clone(), one_electron(m, p), &[]);
            for &n in &c.common {
                out.push_antisymmetrized(&one, antisymmetrized(m, n, p, n), &[]);
            }
            for space in closed {
                for kk in closed_pair(k) {
                    out.push_antisymmetrized(
                        &one,
                        antisymmetrized(m, kk, p, kk),
                        std::slice::from_ref(space),
                    );
                }
            }
        }
        2 => {
            let (m, n, p, q) = (c.from[0], c.from[1], c.to[0], c.to[1]);
            out.push_antisymmetrized(&one, antisymmetrized(m, n, p, q), &[]);
        }
        _ => {}
    }
    out.terms
}

#[cfg(test)]
mod tests {
    use super::*;

    fn so(k: u32, spin: Spin) -> SpinOrbital {
        SpinOrbital::new(Orb::Named(k), spin)
    }

    #[test]
    fn phase_counts_the_permutation_to_coincidence() {
        let (a, b, c) = (so(0, Spin::Alpha), so(1, Spin::Alpha), so(2, Spin::Alpha));
        // |a b| vs |b c|: line up b, then a -> c; the ket becomes (c b) from (b c): one swap
        let co = coincidence(&[a, b], &[b, c]);
        assert_eq!(co.phase, -1);
        assert_eq!((co.from, co.to, co.common), (vec![a], vec![c], vec![b]));
        let same = coincidence(&[a, b], &[b, a]);
        assert_eq!(same.phase, -1);
        assert!(same.from.is_empty());
    }
}

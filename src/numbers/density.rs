//! Spin-summed one- and two-particle (transition) density matrices <bra| ... |ket> of concrete
//! state vectors, dense over their spatial orbitals, and the energy they give with integrals.

use crate::check::brute_force::{Vector, apply, bits};
use crate::numbers::integrals::Integrals;

/// Spin-summed one- and two-particle (transition) densities <bra| ... |ket> of concrete state
/// vectors (check::brute_force::Vector), dense over `n` spatial orbitals (0-based, bits 2k
/// alpha and 2k+1 beta as in brute_force), Γ stored as [p][q][r][s] in a flat Vec.
/// γ_pq = Σ_σ <a+_pσ a_qσ>, Γ_pqrs = Σ_στ <a+_pσ a+_rτ a_sτ a_qσ>, so that
/// E = Σ γ_pq h_pq + ½ Σ Γ_pqrs (pq|rs).
#[derive(Clone, Debug, PartialEq)]
pub struct Densities {
    pub n: usize,
    pub one: Vec<f64>,
    pub two: Vec<f64>,
}

/// The densities <bra| ... |ket> over the first `n` spatial orbitals (n at most
/// brute_force::MAX_ORBITALS; every occupied bit of either vector lies below 2n).
pub fn densities(bra: &Vector, ket: &Vector, n: usize) -> Densities {
    let mut out = Densities::zeros(n);
    // creators only ever need to reach the spin orbitals some bra string holds
    let reachable = bra.keys().fold(0u128, |acc, d| acc | d);
    let same_spin = |x: u32, y: u32| x % 2 == y % 2;
    let project = |d: u128| bra.get(&d).copied().unwrap_or(0.0);
    for (&d, &amplitude) in ket {
        for q in bits(d) {
            let Some((s1, d1)) = apply(d, &[(false, q)]) else { continue };
            for p in bits(reachable & !d1).filter(|&p| same_spin(p, q)) {
                if let Some((s2, d2)) = apply(d1, &[(true, p)]) {
                    let at = out.pair(spatial(p), spatial(q));
                    out.one[at] += amplitude * s1 * s2 * project(d2);
                }
            }
            // a+_pσ a+_rτ a_sτ a_qσ: a_q first, then a_s, a+_r and a+_p
            for s in bits(d1) {
                let Some((s2, d2)) = apply(d1, &[(false, s)]) else { continue };
                for r in bits(reachable & !d2).filter(|&r| same_spin(r, s)) {
                    let Some((s3, d3)) = apply(d2, &[(true, r)]) else { continue };
                    for p in bits(reachable & !d3).filter(|&p| same_spin(p, q)) {
                        if let Some((s4, d4)) = apply(d3, &[(true, p)]) {
                            let value = amplitude * s1 * s2 * s3 * s4 * project(d4);
                            if value != 0.0 {
                                let at = out.quadruple(spatial(p), spatial(q), spatial(r), spatial(s));
                                out.two[at] += value;
                            }
                        }
                    }
                }
            }
        }
    }
    out
}

/// The spatial orbital of a spin-orbital bit.
fn spatial(bit: u32) -> usize {
    (bit / 2) as usize
}

impl Densities {
    pub fn zeros(n: usize) -> Densities {
        Densities { n, one: vec![0.0; n * n], two: vec![0.0; n * n * n * n] }
    }

    /// The position of γ_pq in `one`.
    pub fn pair(&self, p: usize, q: usize) -> usize {
        p * self.n + q
    }

    /// The position of Γ_pqrs in `two`.
    pub fn quadruple(&self, p: usize, q: usize, r: usize, s: usize) -> usize {
        ((p * self.n + q) * self.n + r) * self.n + s
    }

    /// self += factor · other (densities over the same orbitals): how the densities of a
    /// combination of functions are assembled from their transition densities.
    pub fn add_scaled(&mut self, other: &Densities, factor: f64) {
        debug_assert_eq!(self.n, other.n);
        for (x, y) in self.one.iter_mut().zip(&other.one) {
            *x += factor * y;
        }
        for (x, y) in self.two.iter_mut().zip(&other.two) {
            *x += factor * y;
        }
    }

    /// Σ γ h + ½ Σ Γ (pq|rs) with integrals of the same orbital numbering.
    pub fn energy(&self, ints: &dyn Integrals) -> f64 {
        let n = self.n;
        let mut total = 0.0;
        for p in 0..n {
            for q in 0..n {
                total += self.one[self.pair(p, q)] * ints.h(p, q);
            }
        }
        for p in 0..n {
            for q in 0..n {
                for r in 0..n {
                    for s in 0..n {
                        let g = self.two[self.quadruple(p, q, r, s)];
                        if g != 0.0 {
                            total += 0.5 * g * ints.eri(p, q, r, s);
                        }
                    }
                }
            }
        }
        total
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::check::brute_force::matrix_element;
    use crate::numbers::integrals::IntegralTable;
    use rand::{RngExt, SeedableRng};
    use rand_chacha::ChaCha8Rng;

    /// Random vectors of `electrons` electrons in `n` spatial orbitals.
    fn random_vector(rng: &mut ChaCha8Rng, n: usize, electrons: u32) -> Vector {
        let mut out = Vector::default();
        for d in 0u128..(1 << (2 * n)) {
            if d.count_ones() == electrons && rng.random_bool(0.5) {
                out.insert(d, rng.random_range(-1.0..1.0));
            }
        }
        out
    }

    #[test]
    fn the_energy_of_the_densities_is_the_matrix_element_of_h() {
        let mut rng = ChaCha8Rng::seed_from_u64(3);
        for (n, electrons) in [(3, 2), (4, 3), (4, 4), (5, 5)] {
            let ints = IntegralTable::random(n, 11 + n as u64);
            for _ in 0..4 {
                let (bra, ket) =
                    (random_vector(&mut rng, n, electrons), random_vector(&mut rng, n, electrons));
                let expected = matrix_element(&bra, &ket, &ints);
                let got = densities(&bra, &ket, n).energy(&ints);
                assert!((got - expected).abs() < 1e-11 * expected.abs().max(1.0), "{got} vs {expected}");
                let diagonal = matrix_element(&ket, &ket, &ints);
                let got = densities(&ket, &ket, n).energy(&ints);
                assert!((got - diagonal).abs() < 1e-11 * diagonal.abs().max(1.0), "{got} vs {diagonal}");
            }
        }
    }

    #[test]
    fn densities_have_the_symmetries_of_their_definition() {
        let mut rng = ChaCha8Rng::seed_from_u64(5);
        let n = 4;
        let close = |a: f64, b: f64| (a - b).abs() < 1e-12;
        for _ in 0..3 {
            let (bra, ket) = (random_vector(&mut rng, n, 3), random_vector(&mut rng, n, 3));
            let t = densities(&bra, &ket, n);
            let own = densities(&ket, &ket, n);
            let norm = crate::check::brute_force::dot(&ket, &ket);
            // the trace of γ is the number of electrons times the norm; Γ traces to N(N−1)
            let trace: f64 = (0..n).map(|p| own.one[own.pair(p, p)]).sum();
            assert!(close(trace, 3.0 * norm));
            let pairs: f64 = (0..n)
                .flat_map(|p| (0..n).map(move |r| (p, r)))
                .map(|(p, r)| own.two[own.quadruple(p, p, r, r)])
                .sum();
            assert!(close(pairs, 6.0 * norm));
            for p in 0..n {
                for q in 0..n {
                    assert!(close(own.one[own.pair(p, q)], own.one[own.pair(q, p)]));
                    for r in 0..n {
                        for s in 0..n {
                            // pair exchange holds for transition densities too
                            assert!(close(t.two[t.quadruple(p, q, r, s)], t.two[t.quadruple(r, s, p, q)]));
                            let g = own.two[own.quadruple(p, q, r, s)];
                            assert!(close(g, own.two[own.quadruple(r, s, p, q)]));
                            assert!(close(g, own.two[own.quadruple(q, p, s, r)]));
                        }
                    }
                }
            }
        }
    }
}

//! The generalized Fock matrix F_pq = Σ_r γ_pr h_qr + Σ_rst Γ_prst (qr|st) of a state's
//! densities in rotated orbitals, the energy they give, and the orbital gradient from it.

use crate::numbers::density::Densities;
use crate::numbers::transform::Rotated;
use faer::Mat;

/// Σ γ_pq h_pq + ½ Σ Γ_pqrs (pq|rs) over the active orbitals (densities numbered as
/// `r.active`), without the constant.
pub fn energy(d: &Densities, r: &Rotated) -> f64 {
    let o = d.n;
    let mut total = 0.0;
    for a in 0..o {
        for b in 0..o {
            total += d.one[d.pair(a, b)] * r.h[(r.active[a], r.active[b])];
        }
    }
    for (k, &g) in d.two.iter().enumerate().filter(|(_, g)| **g != 0.0) {
        let (a, rest) = (k / (o * o * o), k % (o * o * o));
        total += 0.5 * g * r.eri[r.active[a] * o * o * o + rest];
    }
    total
}

/// F_pq over all orbitals; rows of orbitals outside the active ones are zero.
pub fn generalized_fock(d: &Densities, r: &Rotated) -> Mat<f64> {
    let (o, n) = (d.n, r.n);
    let cube = o * o * o;
    let mut f = Mat::<f64>::zeros(n, n);
    for a in 0..o {
        let p = r.active[a];
        for b in 0..o {
            let g = d.one[d.pair(a, b)];
            if g != 0.0 {
                for q in 0..n {
                    f[(p, q)] += g * r.h[(q, r.active[b])];
                }
            }
        }
        let row = &d.two[a * cube..(a + 1) * cube];
        for (rest, &g) in row.iter().enumerate().filter(|(_, g)| **g != 0.0) {
            for q in 0..n {
                f[(p, q)] += g * r.eri[q * cube + rest];
            }
        }
    }
    f
}

/// dE/dκ_pq for each pair (p, q), with U = exp(κ), φ'_p = Σ_q φ_q U_qp and κ_qp = −κ_pq:
/// 2 (F_qp − F_pq). (The sign follows from dh'_pq = Σ_r κ_rp h_rq + h_pr κ_rq; the tests
/// compare it with central finite differences.)
pub fn gradient(f: &Mat<f64>, pairs: &[(usize, usize)]) -> Vec<f64> {
    pairs.iter().map(|&(p, q)| 2.0 * (f[(q, p)] - f[(p, q)])).collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::check::brute_force::Vector;
    use crate::numbers::density::densities;
    use crate::numbers::integrals::IntegralTable;
    use crate::numbers::rotation::exp_antisymmetric;
    use crate::numbers::transform::rotate;

    /// The gradient from F equals central differences of the energy under U exp(κ) with one
    /// pair rotated, for a two-determinant state of 3 electrons in 3 of 5 orbitals.
    #[test]
    fn the_gradient_is_the_derivative_of_the_energy() {
        let n = 5;
        let ints = IntegralTable::random(n, 4);
        let active = [0, 2, 3];
        // compact orbitals 0, 1, 2: |0α 0β 1α> and |0α 1β 2α>
        let mut v = Vector::default();
        v.insert(0b000111, 0.8);
        v.insert(0b011001, -0.6);
        let d = densities(&v, &v, 3);
        let start = exp_antisymmetric(
            Mat::from_fn(n, n, |p, q| {
                if p == q { 0.0 } else { 0.1 * (p as f64 - q as f64).cos() * (p as f64 - q as f64).signum() }
            })
            .as_ref(),
        )
        .unwrap();
        let pairs: Vec<(usize, usize)> = (0..n).flat_map(|p| (0..p).map(move |q| (p, q))).collect();
        let at = |k: Option<(usize, f64)>| {
            let kappa = Mat::from_fn(n, n, |a, b| match k {
                Some((i, h)) if (a, b) == pairs[i] => h,
                Some((i, h)) if (b, a) == pairs[i] => -h,
                _ => 0.0,
            });
            let u = &start * exp_antisymmetric(kappa.as_ref()).unwrap();
            rotate(&ints, u.as_ref(), &active)
        };
        let here = at(None);
        let g = gradient(&generalized_fock(&d, &here), &pairs);
        let step = 1e-4;
        for (i, &gi) in g.iter().enumerate() {
            let numeric =
                (energy(&d, &at(Some((i, step)))) - energy(&d, &at(Some((i, -step))))) / (2.0 * step);
            assert!((numeric - gi).abs() < 1e-7, "pair {:?}: {gi} vs {numeric}", pairs[i]);
        }
        assert!(g.iter().any(|x| x.abs() > 1e-3));
    }
}

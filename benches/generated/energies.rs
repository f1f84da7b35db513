//! Closed formulas derived by spinfold from `benches/generated/energies.spinfold`, verified against brute-force
//! determinant algebra. Regenerate rather than edit.

/// Integral access for the functions of this module: 0-based orbital numbers, real orbitals.
pub trait Integrals {
    /// The one-electron integral h_pq.
    fn h(&self, p: usize, q: usize) -> f64;
    /// The two-electron integral (pq|rs) in chemists' notation.
    fn eri(&self, p: usize, q: usize, r: usize, s: usize) -> f64;
}

/// `energy ground`: the energy <X|H|X>/<X|X>, electronic part (add the constant energy).
///
/// ```text
///   = 2 sum_{k in occ} h_kk
///   + sum_{k,l in occ} (2 J_kl - K_kl)
/// ```
pub fn energy_ground<I: Integrals + ?Sized>(ints: &I, occ: &[usize]) -> f64 {
    let mut value = 0.0;
    for &k in occ {
        value += 2.0 * ints.h(k, k);
    }
    for &k in occ {
        for &l in occ {
            value += 2.0 * ints.eri(k, k, l, l);
            value -= ints.eri(k, l, k, l);
        }
    }
    value
}

/// `energy singlet`: the energy <X|H|X>/<X|X>, electronic part (add the constant energy).
///
/// ```text
///   = h_aa + h_bb + J_ab + K_ab
///   + 2 sum_{k in core} h_kk
///   + sum_{k in core} (2 J_ak + 2 J_bk - K_ak - K_bk)
///   + sum_{k,l in core} (2 J_kl - K_kl)
/// ```
pub fn energy_singlet<I: Integrals + ?Sized>(ints: &I, a: usize, b: usize, core: &[usize]) -> f64 {
    let mut value = 0.0;
    value += ints.h(a, a);
    value += ints.h(b, b);
    value += ints.eri(a, a, b, b);
    value += ints.eri(a, b, a, b);
    for &k in core {
        value += 2.0 * ints.h(k, k);
    }
    for &k in core {
        value += 2.0 * ints.eri(a, a, k, k);
        value += 2.0 * ints.eri(b, b, k, k);
        value -= ints.eri(a, k, a, k);
        value -= ints.eri(b, k, b, k);
    }
    for &k in core {
        for &l in core {
            value += 2.0 * ints.eri(k, k, l, l);
            value -= ints.eri(k, l, k, l);
        }
    }
    value
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The integrals the expected values were computed on: each canonical integral's key
    /// (h_pq: 2 pair(p, q); (pq|rs): 2 pair(pair(p, q), pair(r, s)) + 1) through splitmix64.
    struct Hashed;

    fn pair(x: usize, y: usize) -> u64 {
        let (hi, lo) = (x.max(y) as u64, x.min(y) as u64);
        hi * (hi + 1) / 2 + lo
    }

    fn hashed(key: u64) -> f64 {
        let mut z = (key ^ 0x5eed2026).wrapping_add(0x9e37_79b9_7f4a_7c15);
        z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
        z ^= z >> 31;
        (z >> 11) as f64 / (1u64 << 53) as f64 - 0.5
    }

    impl Integrals for Hashed {
        fn h(&self, p: usize, q: usize) -> f64 {
            hashed(2 * pair(p, q))
        }
        fn eri(&self, p: usize, q: usize, r: usize, s: usize) -> f64 {
            hashed(2 * pair(pair(p, q) as usize, pair(r, s) as usize) + 1)
        }
    }

    fn close(derived: f64, expected: f64) -> bool {
        (derived - expected).abs() <= 1e-10 * expected.abs().max(1.0)
    }

    #[test]
    fn check_energy_ground_1() {
        // expected value: brute force
        let derived = energy_ground(&Hashed, &[2, 3]);
        assert!(close(derived, -1.1540025714469362), "{derived}");
    }

    #[test]
    fn check_energy_ground_2() {
        // expected value: brute force
        let derived = energy_ground(&Hashed, &[2, 3, 4]);
        assert!(close(derived, -1.8737937585269206), "{derived}");
    }

    #[test]
    fn check_energy_singlet_1() {
        // expected value: brute force
        let derived = energy_singlet(&Hashed, 0, 1, &[4, 5]);
        assert!(close(derived, -0.2255793660379367), "{derived}");
    }

    #[test]
    fn check_energy_singlet_2() {
        // expected value: brute force
        let derived = energy_singlet(&Hashed, 0, 1, &[5, 6, 7]);
        assert!(close(derived, 2.69270988399274), "{derived}");
    }
}

//! Integration over spin: spin-orbital integrals become spatial integrals times Kronecker
//! deltas on spin, so only h_pq and (pq|rs) remain.

use crate::engine::expression::Factor;
use crate::language::orbital::SpinOrbital;

/// h over spin orbitals: δ(σp, σq) h_pq.
pub fn one_electron(p: SpinOrbital, q: SpinOrbital) -> Option<Factor> {
    (p.spin == q.spin).then_some(Factor::H(p.orb, q.orb))
}

/// <pq|rs> over spin orbitals = δ(σp, σr) δ(σq, σs) (pr|qs).
pub fn two_electron(p: SpinOrbital, q: SpinOrbital, r: SpinOrbital, s: SpinOrbital) -> Option<Factor> {
    (p.spin == r.spin && q.spin == s.spin).then_some(Factor::Eri(p.orb, r.orb, q.orb, s.orb))
}

/// <pq||rs> = <pq|rs> − <pq|sr>, as signed spatial integrals.
pub fn antisymmetrized(p: SpinOrbital, q: SpinOrbital, r: SpinOrbital, s: SpinOrbital) -> Vec<(i64, Factor)> {
    let direct = two_electron(p, q, r, s).map(|f| (1, f));
    let exchange = two_electron(p, q, s, r).map(|f| (-1, f));
    direct.into_iter().chain(exchange).collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::engine::expression::IntegralKind;
    use crate::language::orbital::{Orb, Spin};

    #[test]
    fn equal_spins_give_coulomb_minus_exchange_and_opposite_spins_coulomb_alone() {
        let a = |s| SpinOrbital::new(Orb::Named(0), s);
        let b = |s| SpinOrbital::new(Orb::Named(1), s);
        let same = antisymmetrized(a(Spin::Alpha), b(Spin::Alpha), a(Spin::Alpha), b(Spin::Alpha));
        let kinds: Vec<_> = same.iter().map(|(c, f)| (*c, f.canonical().kind())).collect();
        assert_eq!(kinds, vec![(1, IntegralKind::Coulomb), (-1, IntegralKind::Exchange)]);
        let opposite = antisymmetrized(a(Spin::Alpha), b(Spin::Beta), a(Spin::Alpha), b(Spin::Beta));
        assert_eq!(opposite.len(), 1);
        assert_eq!(opposite[0].1.canonical().kind(), IntegralKind::Coulomb);
    }
}

//! Determinants as the engine sees them for one coincidence case: the closed spaces and the
//! explicit spin orbitals in a normal order, with the sign that ordering cost.

use crate::engine::coincidence::Case;
use crate::language::orbital::{SpaceId, Spin, SpinOrbital};
use crate::language::program::{DetSpec, Occupant};

/// A normalized determinant: every member of each closed space doubly occupied (less the
/// members the case writes out explicitly) and the explicit spin orbitals in ascending order.
#[derive(Clone, PartialEq, Eq, Hash, PartialOrd, Ord, Debug)]
pub struct CaseDet {
    pub closed: Vec<SpaceId>,
    pub electrons: Vec<SpinOrbital>,
}

/// Why a determinant is zero in a case.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Vanishing {
    /// A spin orbital would be occupied twice.
    Pauli(SpinOrbital),
    /// An excitation removes a spin orbital that is not occupied.
    Empty(SpinOrbital),
}

/// Applies a(x) to an ordered list of creators: the sign is (−1)^(position of x).
pub(crate) fn annihilate(list: &mut Vec<SpinOrbital>, x: SpinOrbital) -> Result<i32, Vanishing> {
    let position = list.iter().position(|&y| y == x).ok_or(Vanishing::Empty(x))?;
    list.remove(position);
    Ok(if position % 2 == 0 { 1 } else { -1 })
}

/// Applies a+(y): it goes in front, so no sign.
pub(crate) fn create(list: &mut Vec<SpinOrbital>, y: SpinOrbital) -> Result<(), Vanishing> {
    if list.contains(&y) {
        return Err(Vanishing::Pauli(y));
    }
    list.insert(0, y);
    Ok(())
}

/// Sorts a list of distinct creators, returning the parity of the permutation.
pub fn sort_with_sign(list: &mut [SpinOrbital]) -> i32 {
    let mut sign = 1;
    // insertion sort: every swap of neighbours flips the sign
    for k in 1..list.len() {
        let mut j = k;
        while j > 0 && list[j - 1] > list[j] {
            list.swap(j - 1, j);
            sign = -sign;
            j -= 1;
        }
    }
    sign
}

impl CaseDet {
    /// The determinant `det` in the coincidence case `case`: generic indices replaced by their
    /// representatives, case-extracted members of closed spaces written out as k k', the
    /// excitations applied as creation and annihilation operators, then normal ordered.
    pub fn build(det: &DetSpec, case: &Case) -> Result<(i32, CaseDet), Vanishing> {
        let mut list: Vec<SpinOrbital> = vec![];
        let mut closed = vec![];
        for occupant in &det.occupants {
            match *occupant {
                Occupant::Closed(space) => {
                    closed.push(space);
                    for &x in case.extracted(space) {
                        list.push(SpinOrbital::new(x, Spin::Alpha));
                        list.push(SpinOrbital::new(x, Spin::Beta));
                    }
                }
                Occupant::Electron(so) => list.push(case.spin_orbital(so)),
            }
        }
        for (k, so) in list.iter().enumerate() {
            if list[..k].contains(so) {
                return Err(Vanishing::Pauli(*so));
            }
        }
        let mut sign = 1;
        for excitation in &det.excitations {
            for &x in &excitation.from {
                sign *= annihilate(&mut list, case.spin_orbital(x))?;
            }
            for &y in excitation.to.iter().rev() {
                create(&mut list, case.spin_orbital(y))?;
            }
        }
        sign *= sort_with_sign(&mut list);
        closed.sort();
        Ok((sign, CaseDet { closed, electrons: list }))
    }
}

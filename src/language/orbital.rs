//! Orbitals and spin orbitals: a spin orbital is a spatial orbital paired with a spin, so no
//! index ever has to be halved or doubled to find one from the other.

use serde::Serialize;

#[derive(Copy, Clone, PartialEq, Eq, Hash, PartialOrd, Ord, Debug, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Spin {
    Alpha,
    Beta,
}

/// A spatial orbital as it appears in a derivation: a named orbital, a generic index
/// ranging over a space, or a summation index bound by a sum in a term.
/// The derived order (named < index < summed, then by number) is the canonical order
/// used when integrals are brought to standard form.
#[derive(Copy, Clone, PartialEq, Eq, Hash, PartialOrd, Ord, Debug)]
pub enum Orb {
    Named(u32),
    Index(u32),
    Summed(u8),
}

#[derive(Copy, Clone, PartialEq, Eq, Hash, PartialOrd, Ord, Debug)]
pub struct SpinOrbital {
    pub orb: Orb,
    pub spin: Spin,
}

impl SpinOrbital {
    pub fn new(orb: Orb, spin: Spin) -> SpinOrbital {
        SpinOrbital { orb, spin }
    }
}

pub type SpaceId = u32;

/// A set of spaces (at most 64), as the closed spaces a Fock matrix or reference energy sums over.
#[derive(Copy, Clone, PartialEq, Eq, Hash, PartialOrd, Ord, Debug, Default)]
pub struct SpaceSet(pub u64);

impl SpaceSet {
    pub fn of(spaces: &[SpaceId]) -> SpaceSet {
        SpaceSet(spaces.iter().fold(0, |m, &s| m | (1 << s)))
    }

    pub fn members(self) -> Vec<SpaceId> {
        (0..64).filter(|s| self.0 & (1 << s) != 0).collect()
    }
}

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

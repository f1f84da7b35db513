//! Spatial integrals of real orbitals in chemists' notation: the access trait every evaluator
//! uses, tables holding one value per symmetry class (packed or hashed), and seeded random ones.

use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rustc_hash::FxHashMap;

/// Integral access with 0-based orbital numbers.
pub trait Integrals: Sync {
    fn orbital_count(&self) -> usize;
    fn h(&self, p: usize, q: usize) -> f64;
    /// (pq|rs) in chemists' notation.
    fn eri(&self, p: usize, q: usize, r: usize, s: usize) -> f64;
    /// The constant energy (nuclear repulsion and any frozen-core energy).
    fn constant(&self) -> f64;
}

/// The memory one table of integrals (h or (pq|rs)) may take: packed with one slot per
/// symmetry class when that fits, else as a hash map of the classes the file gives, which
/// must fit too.
pub const TABLE_BUDGET_BYTES: u64 = 4 << 30;

/// What one given class costs in the hash map, counted generously: key, value, control byte
/// and the spare capacity the map keeps.
const LISTED_BYTES_PER_CLASS: u64 = 40;

/// The number of symmetry classes of pairs p ≥ q among n items, if it fits 64 bits.
pub fn pair_classes(n: u64) -> Option<u64> {
    let n = u128::from(n);
    u64::try_from(n * (n + 1) / 2).ok()
}

/// The number of 8-fold symmetry classes of (pq|rs) for n orbitals, if it fits 64 bits.
pub fn eri_classes(n: u64) -> Option<u64> {
    pair_classes(pair_classes(n)?)
}

/// The symmetry class of an integral: every ordering of one integral has the same class.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum Class {
    /// The constant energy.
    Constant,
    /// h_pq = h_qp, by pair index.
    H(u64),
    /// (pq|rs) and its seven partners, by the pair index of the pair indices.
    Eri(u64),
}

fn h_key(p: usize, q: usize) -> u64 {
    pair_index(p as u64, q as u64)
}

fn eri_key(p: usize, q: usize, r: usize, s: usize) -> u64 {
    pair_index(h_key(p, q), h_key(r, s))
}

impl Class {
    pub fn h(p: usize, q: usize) -> Class {
        Class::H(h_key(p, q))
    }

    pub fn eri(p: usize, q: usize, r: usize, s: usize) -> Class {
        Class::Eri(eri_key(p, q, r, s))
    }
}

/// A table that cannot take another class within its memory budget.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct TableFull {
    /// How many classes it holds.
    pub classes: u64,
    pub budget_bytes: u64,
}

/// One value per symmetry class: packed (a slot for every class, and a bit saying whether it
/// was given) when that fits the budget, else a hash map of the classes given.
#[derive(Clone, Debug)]
enum Classes {
    Packed { values: Vec<f64>, given: Vec<u64> },
    Listed { values: FxHashMap<u64, f64>, limit: u64 },
}

impl Classes {
    fn new(count: u64, budget_bytes: u64) -> Classes {
        match usize::try_from(count) {
            Ok(n) if count.saturating_mul(8) <= budget_bytes => {
                Classes::Packed { values: vec![0.0; n], given: vec![0; n.div_ceil(64)] }
            }
            _ => {
                Classes::Listed { values: FxHashMap::default(), limit: budget_bytes / LISTED_BYTES_PER_CLASS }
            }
        }
    }

    fn get(&self, key: u64) -> f64 {
        match self {
            Classes::Packed { values, .. } => values[key as usize],
            Classes::Listed { values, .. } => values.get(&key).copied().unwrap_or(0.0),
        }
    }

    /// Stores the value of a class not given before; returns the value already there otherwise.
    fn insert(&mut self, key: u64, value: f64, budget_bytes: u64) -> Result<Option<f64>, TableFull> {
        match self {
            Classes::Packed { values, given } => {
                let (word, bit) = (key as usize / 64, 1u64 << (key % 64));
                if given[word] & bit != 0 {
                    return Ok(Some(values[key as usize]));
                }
                given[word] |= bit;
                values[key as usize] = value;
            }
            Classes::Listed { values, limit } => {
                if let Some(&old) = values.get(&key) {
                    return Ok(Some(old));
                }
                if values.len() as u64 >= *limit {
                    return Err(TableFull { classes: values.len() as u64, budget_bytes });
                }
                values.insert(key, value);
            }
        }
        Ok(None)
    }

    fn set(&mut self, key: u64, value: f64) {
        match self {
            Classes::Packed { values, given } => {
                values[key as usize] = value;
                given[key as usize / 64] |= 1 << (key % 64);
            }
            Classes::Listed { values, .. } => {
                values.insert(key, value);
            }
        }
    }

    fn is_packed(&self) -> bool {
        matches!(self, Classes::Packed { .. })
    }
}

/// A table of h_pq and (pq|rs) for real orbitals, one value per symmetry class.
#[derive(Clone, Debug)]
pub struct IntegralTable {
    n: usize,
    h: Classes,
    eri: Classes,
    constant: Option<f64>,
    budget_bytes: u64,
}

impl IntegralTable {
    /// An all-zero table for n orbitals within the default memory budget.
    pub fn zeros(n: usize) -> IntegralTable {
        IntegralTable::within(n, TABLE_BUDGET_BYTES).expect("a table for a number of orbitals checked first")
    }

    /// An all-zero table whose h and (pq|rs) each take at most `budget_bytes`; None when the
    /// classes of n orbitals cannot be numbered in 64 bits.
    pub fn within(n: usize, budget_bytes: u64) -> Option<IntegralTable> {
        let (h, eri) = (pair_classes(n as u64)?, eri_classes(n as u64)?);
        Some(IntegralTable {
            n,
            h: Classes::new(h, budget_bytes),
            eri: Classes::new(eri, budget_bytes),
            constant: None,
            budget_bytes,
        })
    }

    /// True when the two-electron integrals have a slot for every class.
    pub fn eri_packed(&self) -> bool {
        self.eri.is_packed()
    }

    /// Gives the value of a class once: returns the value it already had if it was given
    /// before (and keeps that one), or says that the table is full.
    pub fn give(&mut self, class: Class, value: f64) -> Result<Option<f64>, TableFull> {
        let budget = self.budget_bytes;
        match class {
            Class::Constant => Ok(self.constant.or_else(|| {
                self.constant = Some(value);
                None
            })),
            Class::H(key) => self.h.insert(key, value, budget),
            Class::Eri(key) => self.eri.insert(key, value, budget),
        }
    }

    /// True when the constant energy was given.
    pub fn has_constant(&self) -> bool {
        self.constant.is_some()
    }

    pub fn set_h(&mut self, p: usize, q: usize, value: f64) {
        self.h.set(h_key(p, q), value);
    }

    /// Sets (pq|rs) and its seven partners under the real 8-fold symmetry.
    pub fn set_eri(&mut self, p: usize, q: usize, r: usize, s: usize, value: f64) {
        self.eri.set(eri_key(p, q, r, s), value);
    }

    pub fn set_constant(&mut self, value: f64) {
        self.constant = Some(value);
    }

    /// Random integrals in [-1, 1] with the 8-fold symmetry, reproducible from the seed.
    pub fn random(n: usize, seed: u64) -> IntegralTable {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let mut out = IntegralTable::zeros(n);
        for p in 0..n {
            for q in 0..=p {
                out.set_h(p, q, rng.random_range(-1.0..1.0));
            }
        }
        for p in 0..n {
            for q in 0..=p {
                for r in 0..n {
                    for s in 0..=r {
                        if (p * (p + 1) / 2 + q) >= (r * (r + 1) / 2 + s) {
                            out.set_eri(p, q, r, s, rng.random_range(-1.0..1.0));
                        }
                    }
                }
            }
        }
        out
    }
}

impl Integrals for IntegralTable {
    fn orbital_count(&self) -> usize {
        self.n
    }
    fn h(&self, p: usize, q: usize) -> f64 {
        self.h.get(h_key(p, q))
    }
    fn eri(&self, p: usize, q: usize, r: usize, s: usize) -> f64 {
        self.eri.get(eri_key(p, q, r, s))
    }
    fn constant(&self) -> f64 {
        self.constant.unwrap_or(0.0)
    }
}

/// Integrals defined by a formula anyone can reproduce, so that generated code can check itself
/// without carrying tables: the canonical index of an integral under the 8-fold symmetry is
/// hashed with splitmix64 and mapped to [-0.5, 0.5). h_pq uses key 2·pair(p,q), (pq|rs) key
/// 2·pair(pair(p,q), pair(r,s)) + 1, with pair(x,y) = max·(max+1)/2 + min.
#[derive(Clone, Copy, Debug)]
pub struct HashedIntegrals {
    pub seed: u64,
    pub orbitals: usize,
}

/// The pair index of the 8-fold symmetry: max(x,y)(max(x,y)+1)/2 + min(x,y). The product is
/// taken in 128 bits: for the pair of pairs of a large file it passes 64 bits before halving.
pub fn pair_index(x: u64, y: u64) -> u64 {
    let (hi, lo) = if x >= y { (x, y) } else { (y, x) };
    let half = u128::from(hi) * (u128::from(hi) + 1) / 2;
    u64::try_from(half + u128::from(lo)).expect("pair indices of checked orbital counts fit 64 bits")
}

/// splitmix64 of key ^ seed, as a float in [-0.5, 0.5).
pub fn hashed_value(key: u64, seed: u64) -> f64 {
    let mut z = (key ^ seed).wrapping_add(0x9e37_79b9_7f4a_7c15);
    z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
    z ^= z >> 31;
    (z >> 11) as f64 / (1u64 << 53) as f64 - 0.5
}

impl Integrals for HashedIntegrals {
    fn orbital_count(&self) -> usize {
        self.orbitals
    }
    fn h(&self, p: usize, q: usize) -> f64 {
        hashed_value(2 * h_key(p, q), self.seed)
    }
    fn eri(&self, p: usize, q: usize, r: usize, s: usize) -> f64 {
        hashed_value(2 * eri_key(p, q, r, s) + 1, self.seed)
    }
    fn constant(&self) -> f64 {
        0.0
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The last class of the largest accepted orbital count is numbered without overflow, and
    /// one more orbital would not fit.
    #[test]
    fn the_largest_class_index_fits() {
        let n = 110_217u64;
        let last = n as usize - 1;
        assert_eq!(Class::eri(last, last, last, last), Class::Eri(eri_classes(n).unwrap() - 1));
        assert_eq!(Class::h(last, last), Class::H(pair_classes(n).unwrap() - 1));
        assert_eq!(eri_classes(n + 1), None);
    }

    #[test]
    fn random_integrals_have_the_eightfold_symmetry() {
        let t = IntegralTable::random(4, 7);
        let v = t.eri(0, 1, 2, 3);
        for (a, b, c, d) in [(1, 0, 2, 3), (0, 1, 3, 2), (2, 3, 0, 1), (3, 2, 1, 0)] {
            assert_eq!(t.eri(a, b, c, d), v);
        }
        assert_eq!(t.h(1, 3), t.h(3, 1));
        assert_ne!(t.eri(0, 0, 1, 1), t.eri(0, 1, 0, 1));
    }
}

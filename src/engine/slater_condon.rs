//! The Slater–Condon rules on bit-string determinants: only pairs that differ by at most two
//! spin orbitals are visited, their phases come from the bits, and contributions accumulate
//! in exact integers per spin-orbital integral before spin integration.

use crate::engine::density::Operator;
use crate::engine::determinant::CaseDet;
use crate::engine::exact::Exact;
use crate::engine::expression::{Expr, Factor, RawTerm, RestrictedSum};
use crate::engine::spin_integrate::{antisymmetrized, one_electron};
use crate::error::{Change, Error, ErrorKind, Limit, Result};
use crate::language::orbital::{Orb, Spin, SpinOrbital};
use num_bigint::BigInt;
use num_integer::Integer;
use num_rational::BigRational;
use num_traits::{ToPrimitive, Zero};
use rayon::prelude::*;
use rustc_hash::{FxHashMap, FxHashSet};
use std::collections::BTreeMap;

/// The explicit spatial orbitals of a request in one case, in canonical order: bit 2k is the
/// alpha and bit 2k+1 the beta spin orbital of the k-th, so ascending bits are the normal order.
pub struct Universe {
    orbs: Vec<Orb>,
}

const ALPHA: u128 = 0x5555_5555_5555_5555_5555_5555_5555_5555;

impl Universe {
    pub fn new<'a>(dets: impl Iterator<Item = &'a CaseDet>) -> Result<Universe> {
        // a hash set, not a sorted list of every electron: large states repeat few orbitals
        let mut orbs: Vec<Orb> = dets
            .flat_map(|d| d.electrons.iter().map(|e| e.orb))
            .collect::<FxHashSet<Orb>>()
            .into_iter()
            .collect();
        orbs.sort();
        if orbs.len() > 64 {
            return Err(Error::new(ErrorKind::TooLarge {
                what: "this request occupies".into(),
                count: orbs.len().to_string(),
                limit: Box::new(Limit {
                    value: 64,
                    unit: "explicit orbitals",
                    change: Change::Fixed(
                        "a determinant is held as a 128-bit string, two bits per orbital".into(),
                    ),
                }),
            }));
        }
        Ok(Universe { orbs })
    }

    fn bits(&self, det: &CaseDet) -> u128 {
        det.electrons.iter().fold(0, |acc, e| {
            let k = self.orbs.binary_search(&e.orb).expect("the universe holds every orbital");
            acc | 1 << (2 * k + usize::from(e.spin == Spin::Beta))
        })
    }

    fn spin_orbital(&self, bit: u32) -> SpinOrbital {
        let spin = if bit.is_multiple_of(2) { Spin::Alpha } else { Spin::Beta };
        SpinOrbital::new(self.orbs[(bit / 2) as usize], spin)
    }
}

/// One determinant of a state with the coefficient (a / denominator) √r, r square-free.
struct Entry {
    bits: u128,
    a: i128,
    r: u64,
}

/// A state over the universe; a determinant whose coefficient has several square roots
/// stands once per root.
pub struct BitState {
    entries: Vec<Entry>,
    denominator: BigInt,
    by_alpha: Groups,
    by_beta: Groups,
    /// Entries by their alpha string less one electron: two alpha strings one replacement apart
    /// share exactly one such string, so a ket entry finds them in one lookup per alpha electron.
    by_alpha_less_one: Groups,
}

/// Entries grouped by a key (a string of bits), each group's members stored together with their
/// bits: the pair search reads a group as one run of memory instead of one entry at a time.
struct Groups {
    group_of: FxHashMap<u128, u32>,
    /// group g holds members[start[g]..start[g + 1]]
    start: Vec<usize>,
    /// (bits, entry), entries ascending within a group
    members: Vec<(u128, usize)>,
}

impl Groups {
    /// `keys` gives the keys of an entry's bits (an entry may be in several groups).
    fn new<K: Iterator<Item = u128>>(entries: &[Entry], keys: impl Fn(u128) -> K) -> Groups {
        let mut group_of = FxHashMap::default();
        let mut count: Vec<usize> = vec![];
        let mut keyed: Vec<(u32, usize)> = Vec::with_capacity(entries.len());
        for (k, e) in entries.iter().enumerate() {
            for key in keys(e.bits) {
                let next = count.len() as u32;
                let g = *group_of.entry(key).or_insert(next);
                if g == next {
                    count.push(0);
                }
                count[g as usize] += 1;
                keyed.push((g, k));
            }
        }
        let start: Vec<usize> = std::iter::once(0)
            .chain(count.iter().scan(0, |total, c| {
                *total += c;
                Some(*total)
            }))
            .collect();
        let mut fill = start.clone();
        let mut members = vec![(0, 0); keyed.len()];
        for (g, k) in keyed {
            members[fill[g as usize]] = (entries[k].bits, k);
            fill[g as usize] += 1;
        }
        Groups { group_of, start, members }
    }

    fn get(&self, key: u128) -> &[(u128, usize)] {
        match self.group_of.get(&key) {
            Some(&g) => &self.members[self.start[g as usize]..self.start[g as usize + 1]],
            None => &[],
        }
    }
}

impl BitState {
    pub fn new(state: &BTreeMap<CaseDet, Exact>, universe: &Universe) -> Result<BitState> {
        let denominator = state
            .values()
            .flat_map(|c| c.parts().map(|(q, _)| q.denom().clone()))
            .fold(BigInt::from(1), |l, d| l.lcm(&d));
        let mut entries = vec![];
        // L / d for each denominator d met, so that a = numerator × (L / d)
        let mut multiplier: FxHashMap<BigInt, BigInt> = FxHashMap::default();
        for (det, c) in state {
            let bits = universe.bits(det);
            for (q, r) in c.parts() {
                let scale = multiplier.entry(q.denom().clone()).or_insert_with(|| &denominator / q.denom());
                let numerator = q.numer() * &*scale;
                let a = numerator.to_i128().ok_or_else(|| {
                    Error::new(ErrorKind::TooLarge {
                        what: "a coefficient, over the common denominator of the state, has a numerator of".into(),
                        count: numerator.bits().to_string(),
                        limit: Box::new(Limit {
                            value: 127,
                            unit: "bits",
                            change: Change::Fixed(
                                "the Slater–Condon sums run in 128-bit integers; coefficients with fewer different denominators keep the numerators small".into(),
                            ),
                        }),
                    })
                })?;
                entries.push(Entry { bits, a, r });
            }
        }
        let by_alpha = Groups::new(&entries, |bits| std::iter::once(bits & ALPHA));
        let by_beta = Groups::new(&entries, |bits| std::iter::once(bits & !ALPHA));
        let by_alpha_less_one =
            Groups::new(&entries, |bits| ones(bits & ALPHA).map(move |m| bits & ALPHA & !(1 << m)));
        Ok(BitState { entries, denominator, by_alpha, by_beta, by_alpha_less_one })
    }

    /// Every bra entry differing from ket entry `j` by at most two spin orbitals, each once:
    /// found through the alpha and beta strings rather than by trying all pairs. With `half`
    /// (bra and ket the same state) only the entries i that come before j in the order of
    /// (alpha string, position), and j itself.
    fn interacting(&self, ket: &BitState, j: usize, half: bool, mut visit: impl FnMut(usize, usize)) {
        let differ = |x: u128, y: u128| (x ^ y).count_ones() / 2;
        let e = &ket.entries[j];
        let (alpha, beta) = (e.bits & ALPHA, e.bits & !ALPHA);
        // same alpha string: beta may differ by up to two
        for &(bits, i) in self.by_alpha.get(alpha) {
            if (!half || i <= j) && differ(bits & !ALPHA, beta) <= 2 {
                visit(i, j);
            }
        }
        // alpha strings one replacement away: beta may differ by up to one
        for m in ones(alpha) {
            for &(bits, i) in self.by_alpha_less_one.get(alpha & !(1 << m)) {
                let other = bits & ALPHA;
                if other != alpha && (!half || other < alpha) && differ(bits & !ALPHA, beta) <= 1 {
                    visit(i, j);
                }
            }
        }
        // alpha strings two replacements away: beta must be the same
        for &(bits, i) in self.by_beta.get(beta) {
            let other = bits & ALPHA;
            if (!half || other < alpha) && differ(other, alpha) == 2 {
                visit(i, j);
            }
        }
    }
}

/// The positions of the set bits, ascending.
fn ones(mut bits: u128) -> impl Iterator<Item = u32> {
    std::iter::from_fn(move || {
        (bits != 0).then(|| {
            let b = bits.trailing_zeros();
            bits &= bits - 1;
            b
        })
    })
}

/// (−1)^(number of occupied bits below `bit`).
fn parity_below(det: u128, bit: u32) -> i128 {
    if (det & ((1u128 << bit) - 1)).count_ones().is_multiple_of(2) { 1 } else { -1 }
}

/// An exact integer sum that spills into a big integer only when 128 bits overflow.
#[derive(Default, Clone)]
struct Sum {
    fast: i128,
    spill: BigInt,
}

impl Sum {
    fn add(&mut self, x: i128) {
        match self.fast.checked_add(x) {
            Some(v) => self.fast = v,
            None => {
                self.spill += BigInt::from(self.fast) + BigInt::from(x);
                self.fast = 0;
            }
        }
    }

    fn add_product(&mut self, factors: [i128; 3]) {
        match factors[0].checked_mul(factors[1]).and_then(|v| v.checked_mul(factors[2])) {
            Some(v) => self.add(v),
            None => self.spill += factors.iter().map(|&f| BigInt::from(f)).product::<BigInt>(),
        }
    }

    fn merge(&mut self, other: Sum) {
        self.add(other.fast);
        self.spill += other.spill;
    }

    fn total(&self) -> BigInt {
        &self.spill + BigInt::from(self.fast)
    }
}

/// A spin-orbital contribution, in universe bits.
#[derive(Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
enum Key {
    /// h between spin orbitals m (bra) and p (ket)
    One(u32, u32),
    /// <mn||pq>
    Two(u32, u32, u32, u32),
    /// Σ over closed spin orbitals c of <mc||pc>
    ClosedOne(u32, u32),
    /// the closed spaces' own energy
    Core,
}

/// Sums of weights per key and square root. The diagonal, the hot path of large states, goes to
/// dense arrays by spin orbital and pair of spin orbitals, one set per square root.
struct Accumulator {
    keyed: FxHashMap<(Key, u64), Sum>,
    diagonal: BTreeMap<u64, Diagonal>,
    /// The spin orbitals of the universe: the diagonal arrays' size.
    width: usize,
}

/// The diagonal contributions of one square root: the closed spaces' own energy, each occupied
/// spin orbital (h_mm and its closed-space interactions), each occupied pair (<mn||mn>).
struct Diagonal {
    core: Sum,
    single: Vec<Sum>,
    pair: Vec<Sum>,
}

/// The fewest ket entries one thread takes at a time: enough to outweigh an accumulator's setup.
const PAIRS_CHUNK: usize = 2048;

impl Diagonal {
    fn new(width: usize) -> Diagonal {
        Diagonal {
            core: Sum::default(),
            single: vec![Sum::default(); width],
            pair: vec![Sum::default(); width * width],
        }
    }

    fn merge(&mut self, other: Diagonal) {
        self.core.merge(other.core);
        for (mine, theirs) in
            self.single.iter_mut().zip(other.single).chain(self.pair.iter_mut().zip(other.pair))
        {
            mine.merge(theirs);
        }
    }

    fn add(&mut self, bits: u128, w: [i128; 3]) {
        self.core.add_product(w);
        let mut m_bits = bits;
        while m_bits != 0 {
            let m = m_bits.trailing_zeros();
            m_bits &= m_bits - 1;
            self.single[m as usize].add_product(w);
            let mut n_bits = m_bits;
            while n_bits != 0 {
                let n = n_bits.trailing_zeros();
                n_bits &= n_bits - 1;
                self.pair[m as usize * self.single.len() + n as usize].add_product(w);
            }
        }
    }
}

impl Accumulator {
    /// Sized to the universe: a case of a few orbitals sets up and reads a few sums only.
    fn new(universe: &Universe) -> Accumulator {
        Accumulator { keyed: FxHashMap::default(), diagonal: BTreeMap::new(), width: 2 * universe.orbs.len() }
    }

    fn add(&mut self, key: Key, root: u64, weight: [i128; 3]) {
        self.keyed.entry((key, root)).or_default().add_product(weight);
    }

    /// The sums of two accumulators: exact, so the order in which parts meet does not matter.
    fn merge(mut self, other: Accumulator) -> Accumulator {
        for (key, sum) in other.keyed {
            self.keyed.entry(key).or_default().merge(sum);
        }
        for (root, d) in other.diagonal {
            match self.diagonal.entry(root) {
                std::collections::btree_map::Entry::Vacant(v) => {
                    v.insert(d);
                }
                std::collections::btree_map::Entry::Occupied(mut o) => o.get_mut().merge(d),
            }
        }
        self
    }

    /// The contributions of the pair of bra entry `b` and ket entry `k`, `times` times.
    fn visit(&mut self, b: &Entry, k: &Entry, times: i128) {
        let ([x, y], g, root) = pair_weight(b, k);
        let g = g * times;
        let (only_bra, only_ket) = (b.bits & !k.bits, k.bits & !b.bits);
        match only_bra.count_ones() {
            0 => {
                self.diagonal.entry(root).or_insert_with(|| Diagonal::new(self.width)).add(b.bits, [x, y, g])
            }
            1 => {
                let (m, p) = (only_bra.trailing_zeros(), only_ket.trailing_zeros());
                // |bra> = s a+(m) a(p) |ket>
                let s = parity_below(k.bits, p) * parity_below(k.bits & !(1 << p), m);
                let w = [x * s, y, g];
                self.add(Key::One(m, p), root, w);
                self.add(Key::ClosedOne(m, p), root, w);
                let mut common = b.bits & k.bits;
                while common != 0 {
                    let n = common.trailing_zeros();
                    common &= common - 1;
                    self.add(Key::Two(m, n, p, n), root, w);
                }
            }
            2 => {
                let (m, n) = (only_bra.trailing_zeros(), 127 - only_bra.leading_zeros());
                let (p, q) = (only_ket.trailing_zeros(), 127 - only_ket.leading_zeros());
                // |bra> = s a+(m) a+(n) a(q) a(p) |ket>: m replaces p and n replaces q in place
                let k1 = k.bits & !(1 << p);
                let k2 = k1 & !(1 << q);
                let k3 = k2 | (1 << n);
                let s =
                    parity_below(k.bits, p) * parity_below(k1, q) * parity_below(k2, n) * parity_below(k3, m);
                self.add(Key::Two(m, n, p, q), root, [x * s, y, g]);
            }
            _ => {}
        }
    }
}

/// The weight of a pair, c_i c_j = (a_i a_j g / (L_bra L_ket)) √(r_i r_j / g²), as its integer
/// factors and the square-free root.
fn pair_weight(bra: &Entry, ket: &Entry) -> ([i128; 2], i128, u64) {
    let g = bra.r.gcd(&ket.r);
    ([bra.a, ket.a], g as i128, (bra.r / g) * (ket.r / g))
}

/// <bra|H|ket> (electronic part) for states over the same closed spaces `closed`, or with
/// `Operator::Densities` the transition densities <bra| … |ket>: the same contributions, each
/// read as the density elements it multiplies (see `density.rs`).
pub fn hamiltonian(
    bra: &BitState,
    ket: &BitState,
    universe: &Universe,
    closed: &[RestrictedSum],
    operator: Operator,
) -> Expr {
    // <I|H|J> = <J|H|I> for real orbitals, and every integral stands in its canonical form: of
    // an expectation value of H each pair of different entries is visited once and counted twice
    let half = std::ptr::eq(bra, ket) && operator == Operator::Hamiltonian;
    // the ket entries are shared among threads, each summing into an accumulator of its own
    let acc = (0..ket.entries.len())
        .into_par_iter()
        .with_min_len(PAIRS_CHUNK)
        .fold(
            || Accumulator::new(universe),
            |mut acc, j| {
                bra.interacting(ket, j, half, |i, j| {
                    acc.visit(&bra.entries[i], &ket.entries[j], if half && i != j { 2 } else { 1 })
                });
                acc
            },
        )
        .reduce(|| Accumulator::new(universe), Accumulator::merge);
    let mut terms = Expr::weighted();
    let mut emit = |key: Key, root: u64, total: BigInt| {
        if total.is_zero() {
            return;
        }
        for raw in contributions(key, universe, closed).into_iter().flat_map(|r| operator.terms(r)) {
            for term in raw.expand() {
                terms.add(&term, &total, root);
            }
        }
    };
    for (&root, d) in &acc.diagonal {
        emit(Key::Core, root, d.core.total());
        let width = d.single.len();
        for m in 0..width {
            let total = d.single[m].total();
            emit(Key::One(m as u32, m as u32), root, total.clone());
            emit(Key::ClosedOne(m as u32, m as u32), root, total);
            for n in m + 1..width {
                emit(Key::Two(m as u32, n as u32, m as u32, n as u32), root, d.pair[m * width + n].total());
            }
        }
    }
    let mut keyed: Vec<_> = acc.keyed.into_iter().collect();
    keyed.sort_by_key(|((key, root), _)| (*key, *root));
    for ((key, root), sum) in keyed {
        emit(key, root, sum.total());
    }
    terms.finish(&(&bra.denominator * &ket.denominator))
}

/// <bra|ket>.
pub fn overlap(bra: &BitState, ket: &BitState) -> Exact {
    let mut sums: BTreeMap<u64, Sum> = BTreeMap::new();
    for (j, k) in ket.entries.iter().enumerate() {
        for &(bits, i) in bra.by_alpha.get(k.bits & ALPHA) {
            let b = &bra.entries[i];
            if bits == k.bits {
                let ([x, y], g, root) = pair_weight(b, &ket.entries[j]);
                sums.entry(root).or_default().add_product([x, y, g]);
            }
        }
    }
    let scale = BigRational::new(BigInt::from(1), &bra.denominator * &ket.denominator);
    sums.into_iter().fold(Exact::zero(), |acc, (root, sum)| {
        let root = Exact::sqrt_of_rational(&BigRational::from_integer(root.into()))
            .expect("square-free roots are small");
        &acc + &(&Exact::rational(BigRational::from_integer(sum.total()) * &scale) * &root)
    })
}

/// The two spin orbitals every member k of a closed space brings.
fn closed_pair(k: Orb) -> [SpinOrbital; 2] {
    [SpinOrbital::new(k, Spin::Alpha), SpinOrbital::new(k, Spin::Beta)]
}

/// The spatial terms of one spin-orbital contribution with unit weight: the rules themselves.
/// Closed members enter as the pair k, k' of a summation index, through the same formulas
/// as explicit electrons.
fn contributions(key: Key, universe: &Universe, closed: &[RestrictedSum]) -> Vec<RawTerm> {
    let so = |b: u32| universe.spin_orbital(b);
    let mut out = vec![];
    let mut push = |coeff: Exact, factor: Option<Factor>, sums: &[RestrictedSum]| {
        if let Some(factor) = factor {
            out.push(RawTerm { coeff, sums: sums.to_vec(), factor });
        }
    };
    let signed = |integrals: Vec<(i64, Factor)>, weight: &Exact| -> Vec<(Exact, Factor)> {
        integrals.into_iter().map(|(s, f)| (weight * &Exact::integer(s), f)).collect()
    };
    let (k, l) = (Orb::Summed(0), Orb::Summed(1));
    match key {
        Key::One(m, p) => push(Exact::one(), one_electron(so(m), so(p)), &[]),
        Key::Two(m, n, p, q) => {
            for (c, f) in signed(antisymmetrized(so(m), so(n), so(p), so(q)), &Exact::one()) {
                push(c, Some(f), &[]);
            }
        }
        Key::ClosedOne(m, p) => {
            for space in closed {
                for kk in closed_pair(k) {
                    for (c, f) in signed(antisymmetrized(so(m), kk, so(p), kk), &Exact::one()) {
                        push(c, Some(f), std::slice::from_ref(space));
                    }
                }
            }
        }
        Key::Core => {
            let half = Exact::fraction(1, 2);
            for space in closed {
                for kk in closed_pair(k) {
                    push(Exact::one(), one_electron(kk, kk), std::slice::from_ref(space));
                }
                for other in closed {
                    for kk in closed_pair(k) {
                        for ll in closed_pair(l) {
                            for (c, f) in signed(antisymmetrized(kk, ll, kk, ll), &half) {
                                push(c, Some(f), &[space.clone(), other.clone()]);
                            }
                        }
                    }
                }
            }
        }
    }
    out
}

//! Coincidence cases of generic indices: which indices of one space denote the same orbital.
//! A result that holds for every case is assembled from the cases with Kronecker deltas.

use crate::language::orbital::{Orb, SpaceId, SpinOrbital};
use num_bigint::BigUint;
use num_traits::One;
use std::collections::BTreeMap;

/// One pattern of equalities: every used index mapped to the representative (smallest) index
/// of its block, and per closed space the representatives that must be written out.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Case {
    /// (index, representative), ascending by index.
    representative: Vec<(u32, u32)>,
    extracted: BTreeMap<SpaceId, Vec<Orb>>,
    /// Which pairs of its indices share a block, as bits: pair (i, j), i < j positions in
    /// `representative`, at bit j(j − 1)/2 + i. Set by `cases`.
    together: Vec<u64>,
}

impl Case {
    /// The representative of index `k` (itself when the case does not know it).
    fn representative_of(&self, k: u32) -> Option<u32> {
        self.representative.binary_search_by_key(&k, |&(x, _)| x).ok().map(|at| self.representative[at].1)
    }

    pub fn orb(&self, orb: Orb) -> Orb {
        match orb {
            Orb::Index(k) => Orb::Index(self.representative_of(k).unwrap_or(k)),
            other => other,
        }
    }

    pub fn spin_orbital(&self, so: SpinOrbital) -> SpinOrbital {
        SpinOrbital::new(self.orb(so.orb), so.spin)
    }

    /// The members of a closed space that this case writes out explicitly.
    pub fn extracted(&self, space: SpaceId) -> &[Orb] {
        self.extracted.get(&space).map_or(&[], |v| v.as_slice())
    }

    /// The deltas that select this case among coarser ones: δ(rep, x) for every x of a block.
    pub fn deltas(&self) -> Vec<(Orb, Orb)> {
        self.representative
            .iter()
            .filter(|(k, r)| k != r)
            .map(|(k, r)| (Orb::Index(*r), Orb::Index(*k)))
            .collect()
    }

    /// True when every block of `self` lies inside a block of `coarser` (two cases of one
    /// `cases` call): its pairs of equal indices are among those of `coarser`. A bit test, since
    /// the assembly asks it of every pair of cases.
    pub fn refines(&self, coarser: &Case) -> bool {
        self.together.iter().zip(&coarser.together).all(|(mine, theirs)| mine & !theirs == 0)
    }

    fn with_pairs_together(mut self) -> Case {
        let n = self.representative.len();
        self.together = vec![0; (n * n.saturating_sub(1) / 2).div_ceil(64)];
        for j in 0..n {
            for i in 0..j {
                if self.representative[i].1 == self.representative[j].1 {
                    let bit = j * (j - 1) / 2 + i;
                    self.together[bit / 64] |= 1 << (bit % 64);
                }
            }
        }
        self
    }

    pub fn block_count(&self) -> usize {
        self.representative.iter().filter(|(k, r)| k == r).count()
    }
}

/// All set partitions of `items`, each as item → smallest item of its block.
fn partitions(items: &[u32]) -> Vec<Vec<(u32, u32)>> {
    let Some((&last, rest)) = items.split_last() else {
        return vec![vec![]];
    };
    let mut out = vec![];
    for partial in partitions(rest) {
        let mut blocks: Vec<u32> = partial.iter().map(|&(_, r)| r).collect();
        blocks.sort();
        blocks.dedup();
        for rep in blocks {
            let mut p = partial.clone();
            p.push((last, rep));
            out.push(p);
        }
        let mut alone = partial;
        alone.push((last, last));
        out.push(alone);
    }
    out
}

/// Every coincidence case for the generic indices used (grouped by their spaces; indices of
/// different spaces never coincide), finest first. `closed` lists the spaces that stand
/// closed in some determinant: their used indices are written out explicitly.
/// With `distinct`, only the case in which all indices differ.
pub fn cases(used: &BTreeMap<SpaceId, Vec<u32>>, closed: &[SpaceId], distinct: bool) -> Vec<Case> {
    let per_space: Vec<Vec<Vec<(u32, u32)>>> = used
        .values()
        .map(
            |indices| {
                if distinct { vec![indices.iter().map(|&k| (k, k)).collect()] } else { partitions(indices) }
            },
        )
        .collect();
    let mut out: Vec<Case> =
        vec![Case { representative: vec![], extracted: BTreeMap::new(), together: vec![] }];
    for (space_choices, (&space, _)) in per_space.iter().zip(used) {
        let mut next = vec![];
        for case in &out {
            for choice in space_choices {
                let mut c = case.clone();
                c.representative.extend(choice.iter().copied());
                c.representative.sort_unstable();
                if closed.contains(&space) {
                    let mut reps: Vec<Orb> = choice.iter().map(|&(_, r)| Orb::Index(r)).collect();
                    reps.sort();
                    reps.dedup();
                    c.extracted.insert(space, reps);
                }
                next.push(c);
            }
        }
        out = next;
    }
    out.sort_by_key(|c| std::cmp::Reverse(c.block_count()));
    out.into_iter().map(Case::with_pairs_together).collect()
}

/// How many cases `cases` makes, without making them: the product over spaces of the Bell
/// number of the indices used there, or 1 with `distinct`.
pub fn count(used: &BTreeMap<SpaceId, Vec<u32>>, distinct: bool) -> BigUint {
    if distinct {
        return BigUint::one();
    }
    used.values().map(|indices| bell(indices.len())).product()
}

/// The Bell number B(n), the number of partitions of n items, by the Bell triangle.
fn bell(n: usize) -> BigUint {
    let mut row = vec![BigUint::one()];
    for _ in 0..n {
        let mut next = vec![row.last().expect("a row is never empty").clone()];
        for x in &row {
            let sum = next.last().expect("started with one entry") + x;
            next.push(sum);
        }
        row = next;
    }
    row[0].clone()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn partitions_are_counted_by_bell_numbers() {
        assert_eq!(partitions(&[]).len(), 1);
        assert_eq!(partitions(&[0, 1]).len(), 2);
        assert_eq!(partitions(&[0, 1, 2]).len(), 5);
        assert_eq!(partitions(&[0, 1, 2, 3]).len(), 15);
    }

    #[test]
    fn counted_cases_match_the_cases_made() {
        // Bell numbers 1, 1, 2, 5, 15, 52, 203 (common practice)
        assert_eq!(
            (0..7).map(|n| bell(n).to_string()).collect::<Vec<_>>(),
            ["1", "1", "2", "5", "15", "52", "203"]
        );
        let used = BTreeMap::from([(0, vec![0, 1, 2]), (1, vec![3, 4]), (2, vec![5, 6, 7, 8])]);
        assert_eq!(count(&used, false), BigUint::from(cases(&used, &[0], false).len()));
        assert_eq!(count(&used, false), BigUint::from(5u32 * 2 * 15));
        assert_eq!(count(&used, true), BigUint::from(cases(&used, &[], true).len()));
    }

    #[test]
    fn refinement_is_blocks_inside_blocks() {
        // the definition, read off the representatives, against the bit test, for every pair
        // of cases of two spaces (one of four indices, one of three)
        let used = BTreeMap::from([(0, vec![0, 1, 2, 3]), (1, vec![4, 5, 6])]);
        let all = cases(&used, &[], false);
        let by_definition = |fine: &Case, coarse: &Case| {
            fine.representative
                .iter()
                .all(|&(k, mine)| coarse.representative_of(mine) == coarse.representative_of(k))
        };
        let mut refining = 0;
        for fine in &all {
            for coarse in &all {
                assert_eq!(fine.refines(coarse), by_definition(fine, coarse), "{fine:?} {coarse:?}");
                refining += usize::from(fine.refines(coarse));
            }
        }
        // pairs (finer, coarser) of partitions: 60 for four items, 12 for three (from memory)
        assert_eq!(refining, 60 * 12);
    }

    #[test]
    fn finest_case_comes_first_and_refines_all() {
        let used = BTreeMap::from([(0, vec![0, 1]), (1, vec![2, 3])]);
        let all = cases(&used, &[0], false);
        assert_eq!(all.len(), 4);
        assert!(all[0].deltas().is_empty());
        assert!(all.iter().all(|c| all[0].refines(c)));
        assert_eq!(all[3].deltas().len(), 2);
    }
}

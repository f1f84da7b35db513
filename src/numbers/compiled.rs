//! Compiled forms of derived expressions: per pattern of coinciding generic indices, the
//! expressions specialized exactly once and each term made a table over its free indices.

use crate::engine::expression::{Expr, Factor, Term};
use crate::language::orbital::{Orb, SpaceId};
use crate::numbers::evaluate::{Binding, specialized, term_value};
use crate::numbers::integrals::Integrals;
use rustc_hash::FxHashMap;
use std::sync::{Arc, Mutex, RwLock};

/// The most entries a table of one term may have (8 bytes each); a term whose free indices
/// span more is evaluated from the integrals each time instead.
pub const TABLE_ENTRIES: usize = 1 << 21;

/// A term with its free generic indices numbered in order of appearance (`Orb::Index(axis)`),
/// and the spaces those axes run over: terms equal up to the names of their indices share one
/// table.
#[derive(Clone, PartialEq, Eq, Hash, Debug)]
struct TableKey {
    sums: Vec<SpaceId>,
    factor: Factor,
    axes: Vec<SpaceId>,
}

/// The values of one term with unit coefficient over every assignment of its axes to members of
/// their spaces, the last axis fastest.
#[derive(Debug)]
struct Table {
    values: Vec<f64>,
}

/// What the compiled forms of a space share: the binding of its spaces and orbitals, the
/// integrals, each orbital's position in each space, and the tables made so far.
pub struct Tables<'a> {
    binding: &'a Binding,
    ints: &'a dyn Integrals,
    /// Per space, per orbital: its position among the space's members (u32::MAX if not one).
    position: Vec<Vec<u32>>,
    /// Per generic index: the space it runs over.
    space_of: Vec<SpaceId>,
    cache: Mutex<FxHashMap<TableKey, Arc<Table>>>,
}

impl<'a> Tables<'a> {
    /// `space_of`: the space of every generic index that the expressions use.
    pub fn new(binding: &'a Binding, ints: &'a dyn Integrals, space_of: Vec<SpaceId>) -> Tables<'a> {
        let norb = binding.spaces.iter().flatten().copied().max().map_or(0, |m| m + 1);
        let position = binding
            .spaces
            .iter()
            .map(|members| {
                let mut at = vec![u32::MAX; norb];
                for (k, &m) in members.iter().enumerate() {
                    at[m] = k as u32;
                }
                at
            })
            .collect();
        Tables { binding, ints, position, space_of, cache: Mutex::new(FxHashMap::default()) }
    }

    fn size(&self, axes: &[SpaceId]) -> Option<usize> {
        axes.iter().try_fold(1usize, |n, &s| n.checked_mul(self.binding.spaces[s as usize].len()))
    }

    /// The table of a term (its coefficient and deltas ignored), made on first use.
    fn table(&self, key: &TableKey) -> Arc<Table> {
        if let Some(t) = self.cache.lock().expect("no panic holds the lock").get(key) {
            return t.clone();
        }
        let spaces: Vec<&[usize]> =
            key.axes.iter().map(|&s| self.binding.spaces[s as usize].as_slice()).collect();
        let size = self.size(&key.axes).expect("a table is made only within TABLE_ENTRIES");
        let term = Term {
            coeff: crate::engine::exact::Exact::one(),
            deltas: vec![],
            sums: key.sums.clone(),
            factor: key.factor,
        };
        let mut scratch = Binding { indices: vec![None; spaces.len()], ..self.binding.clone() };
        let mut values = Vec::with_capacity(size);
        for entry in 0..size {
            let mut rest = entry;
            for (axis, members) in spaces.iter().enumerate().rev() {
                scratch.indices[axis] = Some(members[rest % members.len()]);
                rest /= members.len();
            }
            values.push(term_value(&term, &scratch, self.ints));
        }
        let table = Arc::new(Table { values });
        self.cache.lock().expect("no panic holds the lock").entry(key.clone()).or_insert(table).clone()
    }
}

/// One term of a compiled form.
#[derive(Debug)]
enum Compiled {
    /// coefficient × table[position of each axis' index].
    Tabulated { coeff: f64, table: Arc<Table>, axes: Vec<(u32, usize)> },
    /// A term whose table would be too large: evaluated from the integrals.
    Direct(Term),
}

/// The expressions specialized for one pattern of coinciding indices, term by term.
#[derive(Debug)]
struct Form<const N: usize> {
    terms: [Vec<Compiled>; N],
}

/// N expressions evaluated together for bindings of their generic indices: the pattern of which
/// indices coincide selects a form, compiled on first use and kept.
pub struct CompiledExprs<'e, 't, const N: usize> {
    exprs: [&'e Expr; N],
    /// Every free generic index of the expressions, ascending.
    indices: Vec<u32>,
    tables: &'t Tables<'t>,
    forms: RwLock<FxHashMap<Box<[u16]>, Arc<Form<N>>>>,
}

fn free_indices(expr: &Expr) -> impl Iterator<Item = u32> + '_ {
    expr.free_orbs().into_iter().filter_map(|o| if let Orb::Index(k) = o { Some(k) } else { None })
}

impl<'e, 't, const N: usize> CompiledExprs<'e, 't, N> {
    pub fn new(exprs: [&'e Expr; N], tables: &'t Tables<'t>) -> CompiledExprs<'e, 't, N> {
        let mut indices: Vec<u32> = exprs.iter().flat_map(|e| free_indices(e)).collect();
        indices.sort();
        indices.dedup();
        CompiledExprs { exprs, indices, tables, forms: RwLock::new(FxHashMap::default()) }
    }

    /// The values of the expressions, equal to `evaluate` of each: where the binding puts
    /// generic indices on one orbital the form holds the exactly specialized expression.
    /// `key` is scratch space.
    pub fn values(&self, binding: &Binding, key: &mut Vec<u16>) -> [f64; N] {
        key.clear();
        for (t, &k) in self.indices.iter().enumerate() {
            let value = binding.indices[k as usize];
            let first = self.indices[..t].iter().position(|&j| binding.indices[j as usize] == value);
            key.push(first.unwrap_or(t) as u16);
        }
        let found = self.forms.read().expect("no panic holds the lock").get(key.as_slice()).cloned();
        let form = found.unwrap_or_else(|| {
            let form = Arc::new(self.compile(binding));
            let mut forms = self.forms.write().expect("no panic holds the lock");
            forms.entry(key.as_slice().into()).or_insert(form).clone()
        });
        std::array::from_fn(|n| {
            form.terms[n]
                .iter()
                .map(|c| match c {
                    Compiled::Tabulated { coeff, table, axes } => {
                        let offset = axes.iter().fold(0, |offset, &(k, size)| {
                            let orbital =
                                binding.indices[k as usize].expect("every index of the expression is bound");
                            let space = self.tables.space_of[k as usize] as usize;
                            offset * size + self.tables.position[space][orbital] as usize
                        });
                        coeff * table.values[offset]
                    }
                    Compiled::Direct(term) => term_value(term, binding, self.tables.ints),
                })
                .sum()
        })
    }

    /// The form for the coincidences of this binding.
    fn compile(&self, binding: &Binding) -> Form<N> {
        Form {
            terms: std::array::from_fn(|n| {
                let expr = self.exprs[n];
                match specialized(expr, binding) {
                    Some(exact) => exact.terms.iter().map(|t| self.compile_term(t)).collect(),
                    // all indices differ, so every delta between two of them is zero
                    None => expr
                        .terms
                        .iter()
                        .filter(|t| t.deltas.is_empty())
                        .map(|t| self.compile_term(t))
                        .collect(),
                }
            }),
        }
    }

    fn compile_term(&self, term: &Term) -> Compiled {
        let mut axes: Vec<u32> = vec![];
        for o in term.factor.orbs() {
            if let Orb::Index(k) = o
                && !axes.contains(&k)
            {
                axes.push(k);
            }
        }
        let factor = term.factor.map(|o| match o {
            Orb::Index(k) => Orb::Index(axes.iter().position(|&a| a == k).expect("listed above") as u32),
            other => other,
        });
        let spaces: Vec<SpaceId> = axes.iter().map(|&k| self.tables.space_of[k as usize]).collect();
        match self.tables.size(&spaces).filter(|&n| n <= TABLE_ENTRIES) {
            Some(_) => {
                let key = TableKey { sums: term.sums.clone(), factor, axes: spaces.clone() };
                let sizes = spaces.iter().map(|&s| self.tables.binding.spaces[s as usize].len());
                Compiled::Tabulated {
                    coeff: term.coeff.to_f64(),
                    table: self.tables.table(&key),
                    axes: axes.iter().copied().zip(sizes).collect(),
                }
            }
            None => Compiled::Direct(term.clone()),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::engine::derive::{Options, derive};
    use crate::language::parser::parse;
    use crate::language::program::Program;
    use crate::numbers::evaluate::evaluate;
    use crate::numbers::integrals::IntegralTable;
    use rand::{RngExt, SeedableRng};
    use rand_chacha::ChaCha8Rng;

    /// Pairs of the determinant CISD space, whose elements have eight generic indices.
    const CISD_PAIRS: &str = "
space occ: i j k l
space vir: a b c d
det ref = | occ^2 |
element ref[i j -> a b] ref[k l -> c d]
element ref[i j' -> a b'] ref[k l' -> c d']
element ref[i j -> a b] ref[k' l' -> c' d']
element ref[i -> a] ref[k l' -> c d']
element ref[i' -> a'] ref[k' -> c']
";

    /// Every bundled example and the CISD pairs.
    fn programs() -> Vec<Program> {
        let dir = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("examples");
        let mut texts: Vec<(String, String)> = std::fs::read_dir(&dir)
            .expect("examples/ exists")
            .map(|e| e.expect("an entry").path())
            .filter(|p| p.extension().is_some_and(|x| x == "spinfold"))
            .map(|p| (p.display().to_string(), std::fs::read_to_string(&p).expect("readable")))
            .collect();
        texts.sort();
        texts.push(("cisd".into(), CISD_PAIRS.into()));
        texts.iter().map(|(name, text)| parse(name, text).expect("the example parses")).collect()
    }

    /// Named orbitals first, then three orbitals per space; indices drawn from the first two
    /// members of their space, so that they coincide often.
    fn random_binding(program: &Program, rng: &mut ChaCha8Rng) -> Binding {
        let named = program.orbitals.len();
        let spaces: Vec<Vec<usize>> =
            (0..program.spaces.len()).map(|s| (0..3).map(|m| named + 3 * s + m).collect()).collect();
        let indices =
            program.indices.iter().map(|i| Some(spaces[i.space as usize][rng.random_range(0..2)])).collect();
        Binding { orbitals: (0..named).collect(), spaces, indices }
    }

    /// Compiled values equal `evaluate` on every example and on random bindings, coincident
    /// indices included, each binding taking its own pattern's form.
    #[test]
    fn compiled_values_equal_evaluate() {
        let mut rng = ChaCha8Rng::seed_from_u64(11);
        let mut checked = 0;
        for program in programs() {
            let norb = program.orbitals.len() + 3 * program.spaces.len();
            let ints = IntegralTable::random(norb, 5);
            let space_of = program.indices.iter().map(|i| i.space).collect();
            let base = random_binding(&program, &mut rng);
            let tables = Tables::new(&base, &ints, space_of);
            for request in &program.requests {
                let d = derive(&program, request, &Options::default()).expect("the request derives");
                let compiled = CompiledExprs::new([&d.value, &d.overlap, &d.s_z], &tables);
                let mut key = vec![];
                for _ in 0..40 {
                    let binding = random_binding(&program, &mut rng);
                    let got = compiled.values(&binding, &mut key);
                    for (expr, value) in [&d.value, &d.overlap, &d.s_z].into_iter().zip(got) {
                        let expected = evaluate(expr, &binding, &ints);
                        assert!(
                            (value - expected).abs() <= 1e-12 * expected.abs().max(1.0),
                            "{}: compiled {value} vs evaluate {expected} at {binding:?}",
                            request.text
                        );
                        checked += 1;
                    }
                }
            }
        }
        assert!(checked > 1000);
    }

    /// A term whose table would pass TABLE_ENTRIES is evaluated from the integrals, with the
    /// same value.
    #[test]
    fn terms_too_large_to_tabulate_are_evaluated_directly() {
        let program = parse("cisd", CISD_PAIRS).expect("parses");
        let d = derive(&program, &program.requests[0], &Options::default()).expect("derives");
        // 40 orbitals per space: a four-index table has 2.56 million entries
        let spaces = vec![(0..40).collect::<Vec<usize>>(), (40..80).collect()];
        let mut rng = ChaCha8Rng::seed_from_u64(3);
        let ints = IntegralTable::random(80, 9);
        let base = Binding { orbitals: vec![], spaces: spaces.clone(), indices: vec![None; 8] };
        let tables = Tables::new(&base, &ints, program.indices.iter().map(|i| i.space).collect());
        let compiled = CompiledExprs::new([&d.value], &tables);
        let mut key = vec![];
        let mut direct = 0;
        for _ in 0..30 {
            let indices = program
                .indices
                .iter()
                .map(|i| Some(spaces[i.space as usize][rng.random_range(0..3)]))
                .collect();
            let binding = Binding { indices, ..base.clone() };
            let [value] = compiled.values(&binding, &mut key);
            let expected = evaluate(&d.value, &binding, &ints);
            assert!((value - expected).abs() <= 1e-12 * expected.abs().max(1.0));
            let forms = compiled.forms.read().expect("unlocked");
            direct =
                forms.values().flat_map(|f| &f.terms[0]).filter(|c| matches!(c, Compiled::Direct(_))).count();
        }
        assert!(direct > 0, "some four-index term was too large for a table");
    }
}

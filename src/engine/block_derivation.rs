//! A request on pairs of functions derived: each pair an ordinary element, and for states with
//! free coefficients the quadratic forms they make, monomial by monomial.

use crate::engine::derive::{Derivation, Options, derive};
use crate::engine::exact::Exact;
use crate::engine::expression::Expr;
use crate::error::Result;
use crate::language::block::Block;
use crate::language::program::{Program, Request, RequestKind, Symbols};
use std::collections::BTreeMap;
use std::sync::Arc;

/// The pairs of a block, each derived.
#[derive(Clone, Debug)]
pub struct BlockDerivation {
    pub block: Arc<Block>,
    /// One per pair of `block`, in its order.
    pub pairs: Vec<Derivation>,
}

/// One monomial of the free coefficients and what it multiplies: the request's value is
/// Σ weight × (the coefficients' product) × value, and its overlap the same with `overlap`.
#[derive(Clone, Debug, PartialEq)]
pub struct Monomial {
    /// The free coefficients multiplied, ascending, a square twice; none for the fixed part
    /// with itself, one for the fixed part with a part.
    pub coefficients: Vec<u32>,
    /// 2 for the two equal pairs <f|H|g> = <g|H|f> of an energy, else 1.
    pub weight: u32,
    /// <f|H|g>, electronic; for an `overlap` request <f|g>.
    pub value: Expr,
    pub overlap: Expr,
}

impl BlockDerivation {
    /// For states with free coefficients: the monomials in the order their pairs come, pairs
    /// of equal monomials added (as the two cross pairs of `element P P` are).
    pub fn monomials(&self) -> Vec<Monomial> {
        let block = &self.block;
        let mut out: Vec<Monomial> = vec![];
        for (pair, d) in block.pairs.iter().zip(&self.pairs) {
            let mut coefficients: Vec<u32> =
                [block.rows[pair.row].coefficient, block.columns[pair.column].coefficient]
                    .into_iter()
                    .flatten()
                    .collect();
            coefficients.sort();
            let weight = if block.symmetric && pair.row != pair.column { 2 } else { 1 };
            match out.iter_mut().find(|m| m.coefficients == coefficients) {
                Some(m) => {
                    let (mine, theirs) = (Exact::integer(m.weight.into()), Exact::integer(weight.into()));
                    m.value = m.value.scaled(&mine).plus(&d.value.scaled(&theirs));
                    m.overlap = m.overlap.scaled(&mine).plus(&d.overlap.scaled(&theirs));
                    m.weight = 1;
                }
                None => out.push(Monomial {
                    coefficients,
                    weight,
                    value: d.value.clone(),
                    overlap: d.overlap.clone(),
                }),
            }
        }
        out
    }

    /// The value and overlap with the free coefficients set to exact numbers (`values[c]` for
    /// coefficient c): Σ weight × product × value, as one expression each.
    pub fn at(&self, values: &BTreeMap<u32, Exact>) -> (Expr, Expr) {
        let mut value = Expr::zero();
        let mut overlap = Expr::zero();
        for m in self.monomials() {
            let factor =
                m.coefficients.iter().fold(Exact::integer(m.weight.into()), |acc, c| &acc * &values[c]);
            value = value.plus(&m.value.scaled(&factor));
            overlap = overlap.plus(&m.overlap.scaled(&factor));
        }
        (value, overlap)
    }
}

/// Derives every pair of a block as the ordinary request it is. The pairs of `roots` are derived
/// without --distinct: a member pairs with itself and with members sharing its orbitals.
pub fn derive_block(
    program: &Program,
    request: &Request,
    block: &Arc<Block>,
    options: &Options,
) -> Result<Derivation> {
    let roots = request.kind == RequestKind::Roots;
    let pair_options = Options { distinct: options.distinct && !roots, ..options.clone() };
    let mut pairs = block.each_pair(|_, p| derive(program, &p.request, &pair_options))?;
    // a copy made for an equal pair still names the pair it was derived for
    for (d, p) in pairs.iter_mut().zip(&block.pairs) {
        (d.text, d.bra, d.ket) =
            (p.request.text.clone(), p.request.bra_text.clone(), p.request.ket_text.clone());
    }
    let mut notes = vec![];
    if roots && options.distinct {
        notes.push(
            "derived without --distinct: a member of the space pairs with itself and with members that share its orbitals"
                .to_string(),
        );
    }
    let closed = pairs.first().map(|d| d.closed).unwrap_or_default();
    Ok(Derivation {
        kind: request.kind,
        text: request.text.clone(),
        bra: request.bra_text.clone(),
        ket: request.ket_text.clone(),
        value: Expr::zero(),
        overlap: Expr::zero(),
        s_z: Expr::zero(),
        notes,
        vanishing: vec![],
        free_indices: Symbols::of([&request.bra, &request.ket]).indices.into_iter().collect(),
        closed,
        distinct: pair_options.distinct,
        block: Some(Arc::new(BlockDerivation { block: block.clone(), pairs })),
        shells: None,
    })
}

//! The energy of one configuration state function from spin-coupling algebra, with no
//! determinant expansion: each open pair's exchange coefficient follows from <s_i·s_j>.

use crate::engine::coupling::Twice;
use crate::engine::exact::Exact;
use crate::engine::expression::{Expr, Factor, Term};
use crate::language::program::Coupling;
use num_bigint::BigInt;
use num_rational::BigRational;
use num_traits::Zero;

/// S(S+1) for a doubled spin.
fn casimir(twice: Twice) -> BigRational {
    BigRational::new(BigInt::from(twice * (twice + 2)), BigInt::from(4))
}

/// <s_i·s_j> for every pair i < j of a genealogical function with intermediate spins `path`.
///
/// Within the functions of the first k shells that share their path, any vector operator of
/// those shells is proportional to their total spin S⁽ᵏ⁾ (Wigner–Eckart), so
/// <s_i·s_j> = <s_i·S⁽ʲ⁻¹⁾> <S⁽ʲ⁻¹⁾·s_j> / S_{j−1}(S_{j−1}+1), with
/// <S⁽ʲ⁻¹⁾·s_j> = (S_j(S_j+1) − S_{j−1}(S_{j−1}+1) − 3/4)/2 and <s_i·S⁽ᵏ⁾> built up shell by shell.
pub fn spin_products(path: &[Twice]) -> Vec<Vec<BigRational>> {
    let n = path.len();
    let spin = |k: usize| if k == 0 { 0 } else { path[k - 1] };
    let three_quarters = BigRational::new(3.into(), 4.into());
    let half = BigRational::new(1.into(), 2.into());
    // <S^(j-1) · s_j> for shell j (1-based)
    let coupling = |j: usize| (casimir(spin(j)) - casimir(spin(j - 1)) - &three_quarters) * &half;
    let mut out = vec![vec![BigRational::zero(); n]; n];
    for i in 1..=n {
        // <s_i · S^(i)> = <s_i · S^(i-1)> + 3/4
        let mut with_total = coupling(i) + &three_quarters;
        for j in i + 1..=n {
            let before = casimir(spin(j - 1));
            let product =
                if before.is_zero() { BigRational::zero() } else { &with_total * coupling(j) / before };
            with_total += &product;
            out[i - 1][j - 1] = product.clone();
            out[j - 1][i - 1] = product;
        }
    }
    out
}

/// E(csf) = E(reference with every open shell alpha) + Σ_{i<j} (1/2 − 2<s_i·s_j>) K_ij:
/// singly occupied shells i, j exchange with weight −(1/2 + 2 s_i·s_j), and the all-alpha
/// determinant has weight −1 for every pair.
pub fn exchange_corrections(coupling: &Coupling) -> Expr {
    let products = spin_products(&coupling.path);
    let half = BigRational::new(1.into(), 2.into());
    let mut terms = vec![];
    for (i, (&p, row)) in coupling.open.iter().zip(&products).enumerate() {
        for (&q, product) in coupling.open.iter().zip(row).skip(i + 1) {
            let weight = &half - BigRational::from_integer(2.into()) * product;
            terms.push(Term::new(Exact::rational(weight), Factor::Eri(p, q, q, p)));
        }
    }
    Expr::from_terms(terms)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn two_shells_give_the_singlet_and_triplet_values() {
        assert_eq!(spin_products(&[1, 0])[0][1], BigRational::new((-3).into(), 4.into()));
        assert_eq!(spin_products(&[1, 2])[0][1], BigRational::new(1.into(), 4.into()));
    }

    #[test]
    fn pair_products_sum_to_the_total_spin() {
        // Σ_{i<j} 2 <s_i·s_j> = S(S+1) − 3n/4 for every path
        for path in crate::engine::coupling::paths(8, 2) {
            let p = spin_products(&path);
            let total: BigRational = (0..8)
                .flat_map(|i| (i + 1..8).map(move |j| (i, j)))
                .map(|(i, j)| BigRational::from_integer(2.into()) * &p[i][j])
                .sum();
            assert_eq!(total, casimir(2) - BigRational::new(6.into(), 1.into()));
        }
    }
}

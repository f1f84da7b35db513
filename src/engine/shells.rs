//! The open-shell form of an energy: E = Σ_s f_s h_ss + Σ_{s,t} (a_st J_st + b_st K_st) over
//! shells (orbitals, and closed spaces whose members are summed), read off the derived energy.

use crate::engine::exact::Exact;
use crate::engine::expression::{Expr, Factor, IntegralKind, Term};
use crate::language::orbital::{Orb, SpaceId};

/// One shell: an orbital (named, or a generic index) or a closed space, all of whose members
/// enter alike.
#[derive(Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Debug)]
pub enum Shell {
    Orbital(Orb),
    Space(SpaceId),
}

/// The coupling coefficients. The double sum runs over ordered pairs (s, t), s = t included;
/// a and b are symmetric, so a term c J_st with s ≠ t is a_st = a_ts = c/2. Within a closed
/// space S, J_SS stands for Σ_{k,l ∈ S} J_kl (and h_SS for Σ_{k∈S} h_kk); between a space and an
/// orbital, J_Sa stands for Σ_{k∈S} J_ka.
#[derive(Clone, Debug, PartialEq)]
pub struct ShellForm {
    /// The shells: spaces first, then orbitals, each in canonical order.
    pub shells: Vec<Shell>,
    pub f: Vec<Exact>,
    pub a: Vec<Vec<Exact>>,
    pub b: Vec<Vec<Exact>>,
}

/// Why a term of an energy has no place in the open-shell form.
#[derive(Clone, Debug, PartialEq)]
pub struct Outside {
    /// The offending term, in canonical form (for the error to write out).
    pub term: Box<Term>,
    pub why: &'static str,
}

/// The shell an orbital of a term stands for: a summation index is its space.
fn shell(orb: Orb, sums: &[SpaceId]) -> Shell {
    match orb {
        Orb::Summed(d) => Shell::Space(sums[d as usize]),
        other => Shell::Orbital(other),
    }
}

/// What a term contributes: (shell, f) or (shells, J or K coefficient, is exchange).
enum Piece {
    One(Shell),
    Two(Shell, Shell, bool),
}

fn piece(t: &Term) -> Result<Piece, &'static str> {
    if !t.deltas.is_empty() {
        return Err(
            "a Kronecker delta between generic indices has no place in the form; declare the indices in different spaces, or derive with --distinct",
        );
    }
    let (orbs, kind) = match (t.factor, t.kind()) {
        (Factor::H(p, q), _) if p == q => (vec![p], None),
        (Factor::H(..), _) => return Err("an off-diagonal one-electron integral is outside the form"),
        (Factor::Eri(p, _, r, _), IntegralKind::Coulomb) => (vec![p, r], Some(false)),
        (Factor::Eri(p, q, _, _), IntegralKind::Exchange) => (vec![p, q], Some(true)),
        (Factor::Eri(..), _) => {
            return Err("a general two-electron integral (neither J nor K) is outside the form");
        }
        (Factor::One, _) => return Err("a constant is outside the form"),
        _ => return Err("only h, J and K integrals make the form"),
    };
    // every summation index must run over its space alone, once per shell it stands for
    let summed: Vec<u8> =
        orbs.iter().filter_map(|o| if let Orb::Summed(d) = o { Some(*d) } else { None }).collect();
    let distinct = summed.iter().collect::<std::collections::BTreeSet<_>>().len();
    if distinct != summed.len() || distinct != t.sums.len() {
        return Err(
            "a closed space enters with its members not all summed alike (as a shell's members must be)",
        );
    }
    let shells: Vec<Shell> = orbs.iter().map(|&o| shell(o, &t.sums)).collect();
    Ok(match kind {
        None => Piece::One(shells[0]),
        Some(exchange) => Piece::Two(shells[0], shells[1], exchange),
    })
}

/// The open-shell form of an energy (electronic part), or the first term outside it.
pub fn shell_form(energy: &Expr) -> Result<ShellForm, Outside> {
    let pieces: Vec<(Piece, &Exact)> = energy
        .terms
        .iter()
        .map(|t| piece(t).map(|p| (p, &t.coeff)).map_err(|why| Outside { term: Box::new(t.clone()), why }))
        .collect::<Result<_, _>>()?;
    let mut shells: Vec<Shell> = pieces
        .iter()
        .flat_map(|(p, _)| match *p {
            Piece::One(s) => vec![s],
            Piece::Two(s, t, _) => vec![s, t],
        })
        .collect();
    // spaces first: the closed core reads first, as in the energy
    shells.sort_by_key(|s| (matches!(s, Shell::Orbital(_)), *s));
    shells.dedup();
    let n = shells.len();
    let at = |s: Shell| {
        shells
            .binary_search_by_key(&(matches!(s, Shell::Orbital(_)), s), |x| {
                (matches!(x, Shell::Orbital(_)), *x)
            })
            .expect("every shell is listed")
    };
    let mut form = ShellForm {
        f: vec![Exact::zero(); n],
        a: vec![vec![Exact::zero(); n]; n],
        b: vec![vec![Exact::zero(); n]; n],
        shells: shells.clone(),
    };
    let half = Exact::fraction(1, 2);
    for (p, c) in pieces {
        match p {
            Piece::One(s) => form.f[at(s)] += c,
            Piece::Two(s, t, exchange) => {
                let table = if exchange { &mut form.b } else { &mut form.a };
                let (i, j) = (at(s), at(t));
                if i == j {
                    table[i][i] += c;
                } else {
                    let share = c * &half;
                    table[i][j] += &share;
                    table[j][i] += &share;
                }
            }
        }
    }
    Ok(form)
}

impl ShellForm {
    /// The energy the form stands for, in canonical form: equal to the energy it was read from.
    pub fn energy(&self) -> Expr {
        // an orbital of a shell, and the sums it brings: a space is summed over its members
        let place = |s: Shell, d: u8| match s {
            Shell::Orbital(o) => (o, None),
            Shell::Space(space) => (Orb::Summed(d), Some(space)),
        };
        let mut terms = vec![];
        for (i, &s) in self.shells.iter().enumerate() {
            let (p, space) = place(s, 0);
            terms.push(Term {
                coeff: self.f[i].clone(),
                deltas: vec![],
                sums: space.into_iter().collect(),
                factor: Factor::H(p, p),
            });
            for (j, &t) in self.shells.iter().enumerate() {
                let (p, first) = place(s, 0);
                let (q, second) = place(t, first.map_or(0, |_| 1));
                let sums: Vec<SpaceId> = first.into_iter().chain(second).collect();
                terms.push(Term {
                    coeff: self.a[i][j].clone(),
                    deltas: vec![],
                    sums: sums.clone(),
                    factor: Factor::Eri(p, p, q, q),
                });
                terms.push(Term {
                    coeff: self.b[i][j].clone(),
                    deltas: vec![],
                    sums,
                    factor: Factor::Eri(p, q, q, p),
                });
            }
        }
        Expr::from_terms(terms)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_closed_shell_is_one_shell_with_f_2_a_2_b_minus_1() {
        // the closed-shell energy 2 Σ_k h_kk + Σ_kl (2 J_kl − K_kl) (common practice)
        let (k, l) = (Orb::Summed(0), Orb::Summed(1));
        let energy = Expr::from_terms([
            Term { coeff: Exact::integer(2), deltas: vec![], sums: vec![0], factor: Factor::H(k, k) },
            Term {
                coeff: Exact::integer(2),
                deltas: vec![],
                sums: vec![0, 0],
                factor: Factor::Eri(k, k, l, l),
            },
            Term {
                coeff: Exact::integer(-1),
                deltas: vec![],
                sums: vec![0, 0],
                factor: Factor::Eri(k, l, l, k),
            },
        ]);
        let form = shell_form(&energy).expect("in the form");
        assert_eq!(form.shells, vec![Shell::Space(0)]);
        assert_eq!(
            (form.f[0].clone(), form.a[0][0].clone(), form.b[0][0].clone()),
            (Exact::integer(2), Exact::integer(2), Exact::integer(-1))
        );
        assert_eq!(form.energy(), energy);
    }

    #[test]
    fn an_off_diagonal_h_is_named_as_outside_the_form() {
        let (a, b) = (Orb::Named(0), Orb::Named(1));
        let energy = Expr::from_terms([
            Term::new(Exact::one(), Factor::H(a, a)),
            Term::new(Exact::one(), Factor::H(a, b)),
        ]);
        let outside = shell_form(&energy).expect_err("h_ab is off-diagonal");
        assert_eq!(outside.term.factor, Factor::H(a, b));
    }
}

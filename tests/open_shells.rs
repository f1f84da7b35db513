//! Open shells over a closed core: the singlet and triplet of two open shells (J_ab ± K_ab),
//! high-spin shells (J − K for every pair) and the two doublet couplings of three open shells.
//! Check values are common practice (CONVENTIONS.md) or derived by hand.

mod common;

use spinfold::{DEFAULT_SEED, Options, parse};

/// Each request's expression as one line of ASCII.
fn bodies(input: &str) -> Vec<String> {
    common::expression_lines(&parse("t.spinfold", input).unwrap(), &Options::default(), DEFAULT_SEED)
}

const CORE: &str = "+ 2 sum_{k in core} h_kk";

#[test]
fn two_open_shells_singlet_has_plus_exchange_and_triplet_minus() {
    let out = bodies(
        "orbitals a b\nspace core\ndet ab = | core^2 a b' |\ndet ba = | core^2 a' b |\n\
         state S = (ab - ba)/sqrt(2)\nstate T = (ab + ba)/sqrt(2)\n\
         energy S\nenergy T\nenergy | core^2 a b |\nenergy | core^2 a' b' |\n",
    );
    let closed = "+ 2 sum_{k in core} h_kk + sum_{k in core} (2 J_ak + 2 J_bk - K_ak - K_bk) + sum_{k,l in core} (2 J_kl - K_kl)";
    assert_eq!(out[0], format!("= h_aa + h_bb + J_ab + K_ab {closed}"));
    // every triplet component, M = 0, 1 and -1, has J_ab - K_ab
    for triplet in &out[1..] {
        assert_eq!(*triplet, format!("= h_aa + h_bb + J_ab - K_ab {closed}"));
    }
}

#[test]
fn high_spin_shells_interact_by_coulomb_minus_exchange() {
    let out = bodies("orbitals p q r s\nspace core\nenergy | core^2 p q r s |\n");
    assert!(out[0].starts_with(
        "= h_pp + h_qq + h_rr + h_ss + J_pq + J_pr + J_ps + J_qr + J_qs + J_rs - K_pq - K_pr - K_ps - K_qr - K_qs - K_rs"
    ));
    assert!(out[0].contains(CORE));
}

#[test]
fn three_open_shells_doublet_couplings() {
    // p q coupled to a singlet, then r: +K_pq - K_pr/2 - K_qr/2; to a triplet: the opposite;
    // their coupling is sqrt(3)/2 (K_pr - K_qr) (derived by hand).
    let out = bodies(
        "orbitals p q r\nspace core\n\
         det aab = | core^2 p q r' |\ndet aba = | core^2 p q' r |\ndet baa = | core^2 p' q r |\n\
         state D1 = (aba - baa)/sqrt(2)\nstate D2 = (2 aab - aba - baa)/sqrt(6)\n\
         energy D1\nenergy D2\nelement D1 D2\noverlap D1 D2\n",
    );
    assert!(out[0].starts_with("= h_pp + h_qq + h_rr + J_pq + J_pr + J_qr + K_pq - 1/2 K_pr - 1/2 K_qr"));
    assert!(out[1].starts_with("= h_pp + h_qq + h_rr + J_pq + J_pr + J_qr - K_pq + 1/2 K_pr + 1/2 K_qr"));
    assert_eq!(out[2], "= sqrt(3)/2 K_pr - sqrt(3)/2 K_qr");
    assert_eq!(out[3], "= 0");
}

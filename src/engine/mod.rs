//! The engine: exact numbers, determinants in each coincidence case of the generic indices,
//! the Slater–Condon rules, spin integration, spin coupling, and the expander that joins them.

pub mod block_derivation;
pub mod bounds;
pub mod coincidence;
pub mod coupling;
pub mod coupling_energy;
pub mod density;
pub mod derive;
pub mod determinant;
pub mod exact;
pub mod expression;
pub mod fock;
pub mod shells;
pub mod slater_condon;
pub mod spin_adapted_excitation;
pub mod spin_integrate;
pub mod spin_operator;

//! The check: an independent brute-force evaluation in second quantization, and the
//! verification of every derivation against it on random integrals.

pub mod block_check;
pub mod brute_force;
pub mod verify;

//! The language: the grammar binding and the resolver that turns input text into a checked
//! `Program` of orbitals, spaces, determinants, states and requests.

pub mod block;
pub mod orbital;
pub mod parser;
pub mod program;

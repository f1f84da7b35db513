//! Numbers: integral tables and the integral-dump reader, `--bind` bindings of input symbols
//! to orbitals, and the evaluation of derived expressions with them, row by row.

pub mod bind;
pub mod block_values;
pub mod compiled;
pub mod davidson;
pub mod density;
pub mod density_listing;
pub mod eigen;
pub mod evaluate;
pub mod fcidump;
pub mod generalized_fock;
pub mod integrals;
pub mod optimize;
pub mod optimize_request;
pub mod rotation;
pub mod settings;
pub mod space;
pub mod tabulate;
pub mod transform;

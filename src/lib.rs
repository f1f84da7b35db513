//! spinfold derives exact closed formulas for the energies of determinants, spin-adapted
//! configurations and their linear combinations, and for Hamiltonian matrix elements between
//! them, in spatial integrals (h_pq, Coulomb J, exchange K, general (pq|rs)). Every result is
//! checked numerically against brute-force determinant algebra.
//!
//! ```
//! use spinfold::{parse, derive_checked, render, Format, Options};
//!
//! let input = "
//! orbitals a b
//! space core
//! det ab = | core^2 a b' |
//! det ba = | core^2 a' b |
//! state S = (ab - ba)/sqrt(2)
//! energy S
//! ";
//! let program = parse("singlet.spinfold", input).unwrap();
//! // derive every request and verify it against brute force (seeded random integrals)
//! let derived = derive_checked(&program, &Options::default(), Some(7)).unwrap();
//! let text = render(&program, &derived, Format::Text { ascii: true }).unwrap();
//! assert!(text.contains("= h_aa + h_bb + J_ab + K_ab"));
//! assert!(text.contains("sum_{k,l in core} (2 J_kl - K_kl)"));
//! ```
//!
//! The pipeline: [`parse`] reads the input language into a [`Program`]; [`derive`] applies the
//! Slater–Condon rules and integrates out spin for one request; [`derive_checked`] does every
//! request and verifies each; [`render`] writes text, LaTeX or JSON; [`read_dump`],
//! [`Bindings`] and [`evaluate_all`] give numbers with the integrals of a real molecule.

mod check;
mod emit;
mod engine;
mod error;
mod language;
mod numbers;
mod output;
mod pipeline;

pub use check::verify::{Checked, Comparison, Report, TOLERANCE, compare, verify};
pub use engine::density::{Symmetry, complete, energy as density_energy, representatives};
pub use engine::derive::{Derivation, MAX_CASES, Options, Route, VanishingCase, derive};
pub use engine::exact::Exact;
pub use engine::expression::{Expr, Factor, IntegralKind, Term};
pub use engine::shells::{Shell, ShellForm, shell_form};
pub use error::{Change, Error, ErrorKind, Limit, Result, Source, Span};
pub use language::orbital::{Orb, SpaceId, SpaceSet, Spin, SpinOrbital};
pub use language::parser::{Limits, MAX_NESTING, parse, parse_with};
pub use language::program::{Coupling, Program, Request, RequestKind, State};
pub use numbers::bind::Bindings;
pub use numbers::density::{Densities, densities};
pub use numbers::density_listing::{DensityRow, DensityValues, ElementValue};
pub use numbers::evaluate::{Binding, DensityElements, density_elements, evaluate};
pub use numbers::fcidump::{DumpHeader, IntegralDump, parse_dump, read_dump, write_dump};
pub use numbers::integrals::{IntegralTable, Integrals, TABLE_BUDGET_BYTES};
pub use numbers::optimize::Controls;
pub use numbers::optimize_request::{Optimized, Prepared, orbitals_text, prepare};
pub use numbers::rotation::exp_antisymmetric;
pub use numbers::settings::{DEFAULT_ROOTS, Settings};
pub use numbers::space::{
    Component, DEPENDENCE_THRESHOLD, MEMBER_LIMIT, Operand, PairElement, Root, SpaceRoots, Timing,
    solve_space,
};
pub use numbers::tabulate::{ComponentValue, Entry, Evaluated, FreeValue, Omitted, RootValue, RootsOut};
pub use numbers::transform::rotate_all;
pub use output::{remove_temporaries_on_signal, write_files, write_output};
pub use pipeline::{
    DEFAULT_SEED, Format, derive_checked, eval_warnings, evaluate_all, evaluate_with, optimize_all,
    optimized_dump, optimized_json, optimized_text, render, render_each, render_states, results_json,
    results_text,
};

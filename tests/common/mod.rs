//! What several specification tests share: the bundled examples, and a request's expression as
//! one line of ASCII text.

#![allow(dead_code)]

pub mod blocks;
pub mod space;

use spinfold::{Format, Options, Program, derive_checked, render};
use std::path::Path;

/// Two open shells a, b over a closed core: the closed shell a², the high-spin triplet and the
/// open-shell singlet, as the density and open-shell-form tests use them.
pub const TWO_SHELL_STATES: &str = "\
orbitals a b
space core
det closed = | core^2 a^2 |
det triplet = | core^2 a b |
state singlet = (| core^2 a b' | - | core^2 a' b |)/sqrt(2)
";

/// Every `examples/*.spinfold` as (stem, text), sorted by name.
pub fn examples() -> Vec<(String, String)> {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("examples");
    let mut out: Vec<(String, String)> = std::fs::read_dir(&dir)
        .expect("examples/ exists")
        .map(|e| e.expect("readable entry").path())
        .filter(|p| p.extension().is_some_and(|x| x == "spinfold"))
        .map(|p| {
            let stem = p.file_stem().expect("a file name").to_string_lossy().into_owned();
            (stem, std::fs::read_to_string(&p).expect("readable example"))
        })
        .collect();
    out.sort();
    out
}

/// Each request's expression in ASCII on one line (`= ...`), without the request line, the
/// Fock legend and the verification line; derived and verified with `seed`.
pub fn expression_lines(program: &Program, options: &Options, seed: u64) -> Vec<String> {
    let derived = derive_checked(program, options, Some(seed)).expect("derives and verifies");
    derived
        .iter()
        .map(|one| {
            render(program, std::slice::from_ref(one), Format::Text { ascii: true })
                .expect("text always renders")
                .lines()
                .skip(1)
                .filter(|l| !l.contains("verified") && !l.trim_start().starts_with("with "))
                .map(str::trim)
                .collect::<Vec<_>>()
                .join(" ")
        })
        .collect()
}

/// The PySCF reference values committed in tests/fixtures/pyscf_reference.json.
pub fn pyscf_reference() -> serde_json::Value {
    let path = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/fixtures/pyscf_reference.json");
    let text = std::fs::read_to_string(path).expect("the reference file is committed");
    serde_json::from_str(&text).expect("the reference file is JSON")
}

/// The number at a JSON pointer of the reference values.
pub fn recorded(reference: &serde_json::Value, pointer: &str) -> f64 {
    reference
        .pointer(pointer)
        .and_then(|v| v.as_f64())
        .unwrap_or_else(|| panic!("pyscf_reference.json has a number at {pointer}"))
}

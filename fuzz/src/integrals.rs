//! The integral file every evaluation uses: random real integrals with the 8-fold symmetry of
//! real orbitals, written once per run in the integral-dump format (unique entries only).

use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use std::fmt::Write;

/// The number of orbitals in the file: room for every name of a small program.
pub const NORB: usize = 12;

/// The text of a file of `norb` orbitals, the same for the same seed.
pub fn dump_text(seed: u64, norb: usize) -> String {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut out = format!(
        " &FCI NORB={norb},NELEC=2,MS2=0,\n  ORBSYM={}\n  ISYM=1,\n &END\n",
        vec!["1"; norb].join(",")
    );
    let pair = |i: usize, j: usize| i * (i + 1) / 2 + j;
    for i in 1..=norb {
        for j in 1..=i {
            for k in 1..=norb {
                for l in 1..=k {
                    if pair(i, j) >= pair(k, l) {
                        let v: f64 = rng.random_range(-0.5..0.5);
                        writeln!(out, "{v:24.16e} {i:4} {j:4} {k:4} {l:4}").expect("writing to a string");
                    }
                }
            }
        }
    }
    for i in 1..=norb {
        for j in 1..=i {
            let v: f64 = rng.random_range(-2.0..1.0);
            writeln!(out, "{v:24.16e} {i:4} {j:4}    0    0").expect("writing to a string");
        }
    }
    let constant: f64 = rng.random_range(0.0..10.0);
    writeln!(out, "{constant:24.16e}    0    0    0    0").expect("writing to a string");
    out
}

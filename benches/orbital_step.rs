//! One orbital step of `spinfold optimize` for a high-spin triplet over a closed core: the
//! integral transformation, the densities contracted into the generalized Fock matrix and the
//! gradient, and one line-search energy at rotated orbitals; with the peak memory.
//!
//! Run with `cargo bench --bench orbital_step` (optionally `-- 40 60` for numbers of orbitals);
//! each size runs in its own child process, so that its peak memory is its own. The state is
//! | core^2 a b | with a 10-orbital core and two open shells, on seeded random integrals.

use faer::Mat;
use spinfold::{Bindings, DumpHeader, IntegralDump, IntegralTable, exp_antisymmetric, parse, prepare};
use std::time::Instant;

/// The peak resident memory of this process (VmHWM), KiB.
fn peak_memory_kib() -> u64 {
    let status = std::fs::read_to_string("/proc/self/status").unwrap_or_default();
    let line = status.lines().find(|l| l.starts_with("VmHWM:")).unwrap_or("VmHWM: 0 kB");
    line.split_whitespace().nth(1).and_then(|k| k.parse().ok()).unwrap_or(0)
}

fn child(n: usize) {
    let program = parse("step.spinfold", "orbitals a b\nspace core\nenergy | core^2 a b |\n").unwrap();
    let dump = IntegralDump {
        header: DumpHeader { norb: n, nelec: Some(22), ms2: Some(2), orbsym: None, isym: None },
        integrals: IntegralTable::random(n, 5),
        warnings: vec![],
    };
    let binds = ["core=1-10".to_string(), "a=11".to_string(), "b=12".to_string()];
    let bindings = Bindings::parse(&program, &binds, n).unwrap();
    let start = Instant::now();
    let prepared = prepare(&program, &program.requests[0], &bindings, &dump, 1000).unwrap();
    let preparation = start.elapsed();
    let orbitals = Mat::<f64>::identity(n, n);
    let start = Instant::now();
    let (energy, gradient) = prepared.energy_gradient(&dump.integrals, orbitals.as_ref()).unwrap();
    let first = start.elapsed();
    // a step along minus the gradient, and the energy there (one line-search trial)
    let mut kappa = Mat::<f64>::zeros(n, n);
    for (&(p, q), g) in prepared.pairs().iter().zip(&gradient) {
        kappa[(p, q)] = -1e-3 * g;
        kappa[(q, p)] = 1e-3 * g;
    }
    let trial = &orbitals * exp_antisymmetric(kappa.as_ref()).unwrap();
    let (lower, _) = prepared.energy_gradient(&dump.integrals, trial.as_ref()).unwrap();
    let step = start.elapsed();
    assert!(lower < energy, "a small step down the gradient lowers the energy");
    println!(
        "| {n} | {} | {:.3} | {:.3} | {:.3} | {:.1} |",
        prepared.pairs().len(),
        preparation.as_secs_f64(),
        first.as_secs_f64(),
        step.as_secs_f64(),
        peak_memory_kib() as f64 / 1024.0
    );
}

fn main() {
    if let Ok(size) = std::env::var("SPINFOLD_BENCH_CHILD") {
        child(size.parse().expect("a number of orbitals"));
        return;
    }
    let sizes: Vec<usize> = std::env::args().skip(1).filter_map(|a| a.parse().ok()).collect();
    let sizes = if sizes.is_empty() { vec![20, 40, 60] } else { sizes };
    println!("| orbitals | rotations | preparation s | energy + gradient s | one step s | peak MiB |");
    println!("|---:|---:|---:|---:|---:|---:|");
    for n in sizes {
        let status = std::process::Command::new(std::env::current_exe().expect("this benchmark"))
            .env("SPINFOLD_BENCH_CHILD", n.to_string())
            .status()
            .expect("the child runs");
        assert!(status.success());
    }
}

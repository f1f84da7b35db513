//! Benchmark: the generated closed-shell and open-shell-singlet energies at N = 100 orbitals
//! against hand-written loops over the same integral arrays.
//!
//! Run with `cargo bench --bench generated_code`. The module under test is
//! `benches/generated/energies.rs`, the Rust emitter's output for `energies.spinfold` (a test keeps
//! the two in step). `benches/generated_code.py` times NumPy einsum on the same expressions.

#[path = "generated/energies.rs"]
#[allow(dead_code)]
mod energies;

use energies::Integrals;
use std::hint::black_box;
use std::time::Instant;

/// Dense h and (pq|rs) tables with the 8-fold symmetry, filled from a simple formula.
struct Dense {
    n: usize,
    h: Vec<f64>,
    eri: Vec<f64>,
}

impl Dense {
    fn new(n: usize) -> Dense {
        let value = |p: usize, q: usize| 1.0 / (1.0 + (p + q) as f64) + 0.01 * ((p * q) % 7) as f64;
        let mut h = vec![0.0; n * n];
        let mut eri = vec![0.0; n * n * n * n];
        for p in 0..n {
            for q in 0..n {
                h[p * n + q] = -value(p, q) - value(q, p);
                for r in 0..n {
                    for s in 0..n {
                        // symmetric under p<->q, r<->s and (pq)<->(rs)
                        eri[((p * n + q) * n + r) * n + s] =
                            (value(p, q) + value(q, p)) * (value(r, s) + value(s, r)) * 0.25;
                    }
                }
            }
        }
        Dense { n, h, eri }
    }
}

impl Integrals for Dense {
    #[inline]
    fn h(&self, p: usize, q: usize) -> f64 {
        self.h[p * self.n + q]
    }
    #[inline]
    fn eri(&self, p: usize, q: usize, r: usize, s: usize) -> f64 {
        self.eri[((p * self.n + q) * self.n + r) * self.n + s]
    }
}

/// E = 2 Σ_k h_kk + Σ_kl (2 J_kl − K_kl), written by hand.
fn closed_by_hand(t: &Dense, occ: &[usize]) -> f64 {
    let n = t.n;
    let mut e = 0.0;
    for &k in occ {
        e += 2.0 * t.h[k * n + k];
    }
    for &k in occ {
        for &l in occ {
            e += 2.0 * t.eri[((k * n + k) * n + l) * n + l] - t.eri[((k * n + l) * n + k) * n + l];
        }
    }
    e
}

/// The open-shell singlet of a, b over core, written by hand.
fn singlet_by_hand(t: &Dense, a: usize, b: usize, core: &[usize]) -> f64 {
    let n = t.n;
    let g = |p: usize, q: usize, r: usize, s: usize| t.eri[((p * n + q) * n + r) * n + s];
    let mut e = t.h[a * n + a] + t.h[b * n + b] + g(a, a, b, b) + g(a, b, a, b);
    for &k in core {
        e += 2.0 * t.h[k * n + k] + 2.0 * g(a, a, k, k) + 2.0 * g(b, b, k, k) - g(a, k, a, k) - g(b, k, b, k);
    }
    for &k in core {
        for &l in core {
            e += 2.0 * g(k, k, l, l) - g(k, l, k, l);
        }
    }
    e
}

/// The median time of one call, in microseconds.
fn time(mut f: impl FnMut() -> f64) -> f64 {
    let mut samples = vec![];
    for _ in 0..31 {
        let start = Instant::now();
        for _ in 0..200 {
            black_box(f());
        }
        samples.push(start.elapsed().as_secs_f64() / 200.0 * 1e6);
    }
    samples.sort_by(f64::total_cmp);
    samples[samples.len() / 2]
}

fn main() {
    let n = 100;
    let t = Dense::new(n);
    let occ: Vec<usize> = (0..n / 2).collect();
    let (a, b) = (n / 2 - 1, n / 2);
    let core: Vec<usize> = (0..n / 2 - 1).collect();
    assert!((energies::energy_ground(&t, &occ) - closed_by_hand(&t, &occ)).abs() < 1e-9);
    assert!((energies::energy_singlet(&t, a, b, &core) - singlet_by_hand(&t, a, b, &core)).abs() < 1e-9);
    println!(
        "values: closed shell {:.12}, singlet {:.12}",
        energies::energy_ground(&t, &occ),
        energies::energy_singlet(&t, a, b, &core)
    );
    println!("| energy (N = {n}) | generated (µs) | hand-written (µs) | ratio |");
    println!("|---|---:|---:|---:|");
    let rows = [
        (
            "closed shell, 50 doubly occupied",
            time(|| energies::energy_ground(&t, black_box(&occ))),
            time(|| closed_by_hand(&t, black_box(&occ))),
        ),
        (
            "open-shell singlet over 49 core",
            time(|| energies::energy_singlet(&t, black_box(a), black_box(b), black_box(&core))),
            time(|| singlet_by_hand(&t, black_box(a), black_box(b), black_box(&core))),
        ),
    ];
    for (what, generated, by_hand) in rows {
        println!("| {what} | {generated:.2} | {by_hand:.2} | {:.3} |", generated / by_hand);
    }
}

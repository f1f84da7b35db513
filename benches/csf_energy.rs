//! Benchmark: the derived energy of one S = 0 configuration state function of n open shells
//! over a closed core, verification included, with its wall time and peak memory.
//!
//! Run with `cargo bench --bench csf_energy` (optionally `-- 12 16 20` to choose n). The path
//! climbs 1/2, 1, ..., n/4 and comes back down, so the function spans all C(n, n/2)
//! determinants. Each size runs in a child process so that its peak memory is its own. Past a
//! million determinants (n = 40) the state is not expanded and its energy comes from
//! spin-coupling algebra.

#[path = "shared/singlet.rs"]
mod singlet;

use singlet::singlet_input;
use spinfold::{DEFAULT_SEED, Limits, Options, derive_checked, parse_with};
use std::process::Command;
use std::time::Instant;

fn peak_memory_kib() -> Option<u64> {
    let status = std::fs::read_to_string("/proc/self/status").ok()?;
    let line = status.lines().find(|l| l.starts_with("VmHWM:"))?;
    line.split_whitespace().nth(1)?.parse().ok()
}

/// In the child: derive and verify once, print "seconds peak_kib determinants terms".
fn child(n: usize) {
    let start = Instant::now();
    let program = parse_with(
        "bench.spinfold",
        &singlet_input(n),
        Limits { max_determinants: 1_000_000, ..Limits::default() },
    )
    .expect("the input parses");
    let options = Options { max_determinants: 1_000_000, ..Options::default() };
    let derived =
        derive_checked(&program, &options, Some(DEFAULT_SEED)).expect("derivation and verification pass");
    let seconds = start.elapsed().as_secs_f64();
    let (d, report) = &derived[0];
    // checked by brute force, or (past the expansion limit) derived by spin algebra and said so
    assert!(report.as_ref().is_some_and(|r| r.checks > 0 || r.not_checked.is_some()));
    println!(
        "{seconds} {} {} {}",
        peak_memory_kib().unwrap_or(0),
        program.requests[0].bra.terms.len(),
        d.value.terms.len()
    );
}

fn main() {
    if let Ok(n) = std::env::var("SPINFOLD_BENCH_CHILD") {
        child(n.parse().expect("a number of open shells"));
        return;
    }
    let sizes: Vec<usize> = std::env::args().skip(1).filter_map(|a| a.parse().ok()).collect();
    let sizes = if sizes.is_empty() { vec![12, 16, 20, 40] } else { sizes };
    println!("| open shells | determinants | terms | seconds | peak memory (MiB) |");
    println!("|---:|---:|---:|---:|---:|");
    for n in sizes {
        let out = Command::new(std::env::current_exe().expect("the bench knows its path"))
            .env("SPINFOLD_BENCH_CHILD", n.to_string())
            .output()
            .expect("the child runs");
        let text = String::from_utf8_lossy(&out.stdout);
        let fields: Vec<&str> = text.split_whitespace().collect();
        if !out.status.success() || fields.len() != 4 {
            println!("| {n} | failed: {} |", String::from_utf8_lossy(&out.stderr).trim());
            continue;
        }
        let kib: f64 = fields[1].parse().unwrap_or(0.0);
        let seconds: f64 = fields[0].parse().unwrap_or(f64::NAN);
        println!("| {n} | {} | {} | {seconds:.3} | {:.0} |", fields[2], fields[3], kib / 1024.0);
    }
}

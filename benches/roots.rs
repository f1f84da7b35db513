//! Benchmark: the roots of the determinant CISD space of a closed-shell determinant with `o`
//! occupied and `v` virtual orbitals, with the wall time of each stage and the peak memory.
//!
//! Run with `cargo bench --bench roots` (optionally `-- 8 4 6 6` for (o, v) pairs). The operands
//! are ref, ref[i -> a], ref[i' -> a'], ref[i j' -> a b'], ref[i j -> a b], ref[i' j' -> a' b'];
//! their pair elements are derived through the library (one `element` request per pair, the
//! column's letters renamed apart by hand), and `solve_space` evaluates them with seeded random
//! integrals of o + v orbitals that have the 8-fold symmetry. Each size runs in a child process
//! so that its peak memory is its own.

#[path = "../tests/common/space.rs"]
mod space;

use spinfold::{IntegralTable, solve_space};
use std::process::Command;
use std::time::Instant;

const DECLARATIONS: &str = "
space occ: i j k l
space vir: a b c d
det ref = | occ^2 |
";

const OPERANDS: [&str; 6] =
    ["ref", "ref[i -> a]", "ref[i' -> a']", "ref[i j' -> a b']", "ref[i j -> a b]", "ref[i' j' -> a' b']"];

const FRESH: &[(&str, &str)] = &[("i", "k"), ("j", "l"), ("a", "c"), ("b", "d")];

/// The peak resident memory of this process (VmHWM, the figure getrusage reports as
/// ru_maxrss), KiB.
fn peak_memory_kib() -> u64 {
    let status = std::fs::read_to_string("/proc/self/status").unwrap_or_default();
    let line = status.lines().find(|l| l.starts_with("VmHWM:")).unwrap_or("VmHWM: 0 kB");
    line.split_whitespace().nth(1).and_then(|k| k.parse().ok()).unwrap_or(0)
}

/// In the child: derive, solve, print one line of figures.
fn child(o: usize, v: usize) {
    let start = Instant::now();
    let s = space::space(DECLARATIONS, &OPERANDS, FRESH);
    let derivation = start.elapsed().as_secs_f64();
    let ints = IntegralTable::random(o + v, 2024);
    let occ: Vec<usize> = (0..o).collect();
    let vir: Vec<usize> = (o..o + v).collect();
    let binding = s.binding(&[("occ", &occ), ("vir", &vir)]);
    let elements = s.elements();
    let solved = Instant::now();
    let roots =
        solve_space(&s.program, &s.operands, &elements, &binding, &ints, 10, &|line| eprintln!("{line}"))
            .expect("the space is solved");
    let total = solved.elapsed().as_secs_f64();
    let members = roots.dimension + roots.dropped + roots.vanishing;
    let t = &roots.timing;
    println!(
        "{o} {v} {members} {} {} {} {derivation:.3} {:.3} {:.3} {:.3} {total:.3} {} {:.10}",
        roots.vanishing,
        roots.dropped,
        roots.dimension,
        t.assembly.as_secs_f64(),
        t.orthogonalization.as_secs_f64(),
        t.diagonalization.as_secs_f64(),
        peak_memory_kib(),
        roots.roots[0].value,
    );
}

fn main() {
    if let Ok(size) = std::env::var("SPINFOLD_BENCH_CHILD") {
        let (o, v) = size.split_once(' ').expect("o v");
        child(o.parse().expect("o"), v.parse().expect("v"));
        return;
    }
    let numbers: Vec<usize> = std::env::args().skip(1).filter_map(|a| a.parse().ok()).collect();
    let sizes: Vec<(usize, usize)> = if numbers.len() < 2 {
        vec![(8, 4)]
    } else {
        numbers.chunks_exact(2).map(|c| (c[0], c[1])).collect()
    };
    println!(
        "| o | v | members | vanishing | dropped | dimension | derivation s | assembly s | orthogonalization s | eigen s | solve_space s | peak MiB | lowest root |"
    );
    println!("|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|");
    for (o, v) in sizes {
        let out = Command::new(std::env::current_exe().expect("the bench knows its path"))
            .env("SPINFOLD_BENCH_CHILD", format!("{o} {v}"))
            .stderr(std::process::Stdio::inherit())
            .output()
            .expect("the child runs");
        let text = String::from_utf8_lossy(&out.stdout);
        let f: Vec<&str> = text.split_whitespace().collect();
        if !out.status.success() || f.len() != 13 {
            println!("| {o} | {v} | failed |");
            continue;
        }
        let mib = f[11].parse::<f64>().unwrap_or(0.0) / 1024.0;
        println!(
            "| {} | {} | {} | {} | {} | {} | {} | {} | {} | {} | {} | {mib:.0} | {} |",
            f[0], f[1], f[2], f[3], f[4], f[5], f[6], f[7], f[8], f[9], f[10], f[12]
        );
    }
}

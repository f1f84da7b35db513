//! `--bind` options for an input, found from its declarations as written (not through the
//! library, so that they are known even when the tool dies on the input): every orbital and
//! space gets orbitals of the integral file, generic indices sometimes a member; and `--set`
//! values for the free coefficients, `--roots` counts.

use crate::plan::Evaluation;
use rand::seq::{IndexedRandom, SliceRandom};
use rand::{Rng, RngExt};

/// The names an input declares: orbitals, and spaces with their generic indices.
#[derive(Default)]
struct Declared {
    orbitals: Vec<String>,
    spaces: Vec<(String, Vec<String>)>,
    coefficients: Vec<String>,
}

fn declared(text: &str) -> Declared {
    let mut out = Declared::default();
    for line in text.lines() {
        let line = line.split('#').next().unwrap_or("");
        let words: Vec<&str> =
            line.split(|c: char| c.is_whitespace() || c == ':').filter(|w| !w.is_empty()).collect();
        match words.split_first() {
            Some((&"orbitals", names)) => out.orbitals.extend(names.iter().map(|s| s.to_string())),
            Some((&"coefficients", names)) => out.coefficients.extend(names.iter().map(|s| s.to_string())),
            Some((&"space", [name, indices @ ..])) => {
                out.spaces.push((name.to_string(), indices.iter().map(|s| s.to_string()).collect()))
            }
            _ => {}
        }
    }
    out
}

/// Bindings for every declared name that fits into `norb` orbitals; now and then one that is
/// wrong on purpose (overlapping, beyond the file, or of a name that does not exist). Spaces get
/// one to three orbitals, or up to `widest` (roots spaces grow with them).
pub fn binds(text: &str, norb: usize, widest: usize, rng: &mut impl Rng) -> Vec<String> {
    let declared = declared(text);
    let mut free: Vec<usize> = (1..=norb).collect();
    free.shuffle(rng);
    let mut out = Vec::new();
    for name in &declared.orbitals {
        if let Some(m) = free.pop() {
            out.push(format!("{name}={m}"));
        }
    }
    for (name, indices) in &declared.spaces {
        let size = rng.random_range(1..=widest.max(3)).min(free.len());
        if size == 0 {
            break;
        }
        let mut members: Vec<usize> = free.split_off(free.len() - size);
        members.sort();
        let spec = match rng.random_range(0..3) {
            0 if members.windows(2).all(|w| w[1] == w[0] + 1) && size > 1 => {
                format!("{}-{}", members[0], members[size - 1])
            }
            _ => members.iter().map(|m| m.to_string()).collect::<Vec<_>>().join(","),
        };
        out.push(format!("{name}={spec}"));
        for index in indices {
            if rng.random_bool(0.25) {
                out.push(format!("{index}={}", members.choose(rng).expect("a space has members")));
            }
        }
    }
    if rng.random_bool(0.03) {
        let wrong = match rng.random_range(0..4) {
            0 => format!("nowhere={}", norb + 1),
            1 => out.first().cloned().unwrap_or_else(|| "a=1".into()),
            2 => format!("{}=0", out.first().and_then(|b| b.split('=').next()).unwrap_or("a")),
            _ => "=".into(),
        };
        out.push(wrong);
    }
    out
}

/// `--set` values and `--roots`: mostly nothing set (stationary energies) or every coefficient
/// set to a finite value; now and then one missing, repeated, unknown, not a number, not finite,
/// or every value zero. `--roots` mostly absent or small, sometimes huge.
pub fn evaluation(text: &str, rng: &mut impl Rng) -> Evaluation {
    let names = declared(text).coefficients;
    const VALUES: [&str; 10] = ["0.9", "-0.2", "1", "0.5", "-1", "2.5", "0.001", "1e-3", "-0.75", "3"];
    let mut sets: Vec<String> = Vec::new();
    if !names.is_empty() && rng.random_bool(0.55) {
        sets = names.iter().map(|n| format!("{n}={}", VALUES.choose(rng).expect("values"))).collect();
        if rng.random_bool(0.15) {
            match rng.random_range(0..7) {
                0 => {
                    sets.pop();
                }
                1 => sets.push(sets[0].clone()),
                2 => sets.push("nothere=1".into()),
                3 => sets[0] = format!("{}=nan", names[0]),
                4 => sets[0] = format!("{}=1e999", names[0]),
                5 => sets[0] = names[0].clone(),
                _ => sets = names.iter().map(|n| format!("{n}=0")).collect(),
            }
        }
    } else if rng.random_bool(0.02) {
        sets.push(["cg=1", "=", "x=y", " cg = 0.5 "].choose(rng).expect("odd settings").to_string());
    }
    let roots = match rng.random_range(0..20) {
        0..=11 => None,
        12..=17 => Some(rng.random_range(1..=4)),
        18 => Some(1_000_000),
        _ => Some(u64::MAX),
    };
    Evaluation { sets, roots }
}

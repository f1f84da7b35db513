//! Input number k of a seeded run: its category, its bytes, the steps a worker runs on it and
//! the commands of the real binary run on it. The same seed and k always give the same input.

use crate::binding::{binds, evaluation};
use crate::generate;
use crate::integrals::{self, NORB};
use crate::mutate;
use crate::plan::{self, Step};
use rand::seq::IndexedRandom;
use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};

#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord)]
pub enum Category {
    /// a random valid program
    Generated,
    /// a random valid program of the larger size, probing limits
    Large,
    /// text-level mutations of an example or a generated program
    Mutated,
    /// byte-level mutations: control characters, non-UTF-8, byte-order marks
    Bytes,
    /// a generated program evaluated with a mutated integral file
    Dump,
}

impl Category {
    pub const ALL: [Category; 5] =
        [Category::Generated, Category::Large, Category::Mutated, Category::Bytes, Category::Dump];

    pub fn name(self) -> &'static str {
        match self {
            Category::Generated => "generated",
            Category::Large => "generated-large",
            Category::Mutated => "mutated",
            Category::Bytes => "bytes",
            Category::Dump => "integral-file",
        }
    }
}

/// Where `-o` points in a binary run: a file to be written whole or not at all.
pub const OUTPUT: &str = "out/result";

/// One command of the real binary on the input.
#[derive(Clone, Debug, Serialize, Deserialize)]
pub struct BinaryRun {
    pub argv: Vec<String>,
    /// the input goes to standard input (the command names `-`)
    pub stdin: bool,
    /// the command writes with `-o` into the directory `out`
    pub writes: bool,
}

#[derive(Clone, Debug)]
pub struct Input {
    pub index: u64,
    pub category: Category,
    pub bytes: Vec<u8>,
    /// steps for a worker; empty when the input is not UTF-8 (the library takes text)
    pub steps: Vec<Step>,
    pub binary: Vec<BinaryRun>,
    /// an integral file of its own for the binary runs (else the run's)
    pub integrals: Option<Vec<u8>>,
}

/// The generator of input k of a run with `seed`.
fn rng_for(seed: u64, index: u64) -> ChaCha8Rng {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    rng.set_stream(index);
    rng
}

/// Input k of a run: 42% small generated programs, 5% larger ones, 40% text mutations of the
/// examples (or of a generated program), 10% byte mutations, 3% mutated integral files.
pub fn make(seed: u64, index: u64, examples: &[String]) -> Input {
    let mut rng = rng_for(seed, index);
    let roll = rng.random_range(0..100);
    let pick_seed = |rng: &mut ChaCha8Rng| {
        if examples.is_empty() || rng.random_bool(0.3) {
            generate::program(rng, generate::SMALL)
        } else {
            examples.choose(rng).expect("examples").clone()
        }
    };
    let (category, bytes) = match roll {
        0..42 => (Category::Generated, generate::program(&mut rng, generate::SMALL).into_bytes()),
        42..47 => (Category::Large, generate::program(&mut rng, generate::LARGE).into_bytes()),
        47..87 => {
            let (a, b) = (pick_seed(&mut rng), pick_seed(&mut rng));
            (Category::Mutated, mutate::text(&mut rng, &a, &b).into_bytes())
        }
        87..97 => {
            let a = pick_seed(&mut rng);
            (Category::Bytes, mutate::bytes(&mut rng, &a))
        }
        _ => (Category::Dump, generate::program(&mut rng, generate::SMALL).into_bytes()),
    };
    if category == Category::Dump {
        // the binary alone, on a small integral file with odd entries
        let text = String::from_utf8(bytes.clone()).expect("generated programs are text");
        let norb = 6;
        let clean = integrals::dump_text(rng.random(), norb);
        let dump = mutate::dump(&mut rng, &clean);
        let mut argv: Vec<String> = ["eval", plan::INPUT_FILE, "--integrals", plan::INTEGRALS_FILE]
            .iter()
            .map(|s| s.to_string())
            .collect();
        for b in binds(&text, norb, 3, &mut rng) {
            argv.extend(["--bind".into(), b]);
        }
        for s in evaluation(&text, &mut rng).sets {
            argv.extend(["--set".into(), s]);
        }
        if rng.random_bool(0.5) {
            argv.push("--json".into());
        }
        let binary = vec![BinaryRun { argv, stdin: false, writes: false }];
        return Input { index, category, bytes, steps: Vec::new(), binary, integrals: Some(dump) };
    }
    let text = String::from_utf8(bytes.clone()).ok();
    let seed_option = rng.random_bool(0.2).then(|| rng.random_range(0..1_000_000));
    let steps = match &text {
        Some(text) => {
            // wide spaces make big roots spaces, probing their limits
            let wide = text.contains("roots")
                && rng.random_bool(if category == Category::Large { 0.5 } else { 0.1 });
            let b = binds(text, NORB, if wide { 6 } else { 3 }, &mut rng);
            let e = evaluation(text, &mut rng);
            plan::full(seed_option, b, e, rng.random_bool(0.5))
        }
        None => Vec::new(),
    };
    let mut binary = Vec::new();
    if text.is_none() || category == Category::Bytes {
        // what the library cannot be given: bytes as read by the binary, from a file and stdin
        for argv in [&["derive", plan::INPUT_FILE][..], &["states", plan::INPUT_FILE], &["derive", "-"]] {
            let argv: Vec<String> = argv.iter().map(|s| s.to_string()).collect();
            let stdin = argv[1] == "-";
            binary.push(BinaryRun { argv, stdin, writes: false });
        }
    } else if rng.random_bool(0.05) {
        // now and then one step through the binary, writing with -o or reading stdin
        let step = steps.choose(&mut rng).expect("a full plan has steps");
        let mut argv = step.argv();
        let stdin = rng.random_bool(0.3);
        if stdin {
            argv[1] = "-".into();
        }
        let writes = rng.random_bool(0.7);
        if writes {
            let per_request = matches!(step, Step::Derive { .. }) && rng.random_bool(0.3);
            if per_request {
                argv.push("--per-request".into());
            }
            let target =
                *["out/result", "out/result", "out/missing/result", "out"].choose(&mut rng).expect("targets");
            argv.extend(["-o".into(), target.into()]);
        }
        binary.push(BinaryRun { argv, stdin, writes });
    }
    Input { index, category, bytes, steps, binary, integrals: None }
}

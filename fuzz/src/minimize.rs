//! Shrinks a saved finding: removes runs of lines, then of tokens (then of bytes, for input
//! that is not text) for as long as the same bug still shows, and writes `minimal.spinfold`.

use crate::findings::{Replay, classify};
use crate::input::{Category, Input};
use crate::mutate::tokens;
use crate::plan::{INPUT_FILE, INTEGRALS_FILE};
use crate::pool::{Limits, Worker, WorkerResult, run_binary};
use crate::worker::Job;
use std::path::Path;
use std::time::{Duration, Instant};

/// Replays one candidate input the way the finding was seen.
struct Probe<'a> {
    replay: Replay,
    dir: &'a Path,
    spinfold: &'a Path,
    limits: &'a Limits,
    worker: Option<Worker>,
    scratch: tempfile::TempDir,
    tries: u64,
}

impl Probe<'_> {
    fn shows_bug(&mut self, bytes: &[u8]) -> bool {
        self.tries += 1;
        let text = String::from_utf8(bytes.to_vec()).ok();
        let by_worker = !self.replay.steps.is_empty();
        if by_worker && text.is_none() {
            return false;
        }
        let input = Input {
            index: 0,
            category: Category::Mutated,
            bytes: bytes.to_vec(),
            steps: self.replay.steps.clone(),
            binary: if by_worker { Vec::new() } else { vec![self.replay.run.clone()] },
            integrals: None,
        };
        let (result, binary) = if by_worker {
            let integrals = self.dir.join(INTEGRALS_FILE);
            let worker = self.worker.get_or_insert_with(|| Worker::spawn(&integrals, self.limits));
            let job = Job {
                id: self.tries,
                input: text.expect("checked above"),
                steps: input.steps.clone(),
                // a broken claim is replayed with the claims it broke
                claims: self.replay.signature.starts_with("claim-broken"),
            };
            let result = worker.run(&job, self.limits.timeout);
            if matches!(result, WorkerResult::Died { .. } | WorkerResult::TimedOut { .. }) {
                self.worker = None;
            }
            (result, Vec::new())
        } else {
            let integrals = std::fs::read(self.dir.join(INTEGRALS_FILE)).unwrap_or_default();
            let b = run_binary(
                self.spinfold,
                self.scratch.path(),
                bytes,
                &integrals,
                &self.replay.run,
                self.limits,
            );
            (WorkerResult::Skipped, vec![b])
        };
        classify(&input, &result, &binary).iter().any(|f| f.signature == self.replay.signature)
    }
}

/// Removes runs of `units` (halving their length) while the bug still shows.
fn reduce(units: Vec<Vec<u8>>, probe: &mut Probe, deadline: Instant) -> Vec<Vec<u8>> {
    let mut units = units;
    let mut chunk = (units.len() / 2).max(1);
    loop {
        let mut i = 0;
        while i < units.len() {
            if Instant::now() > deadline {
                return units;
            }
            let end = (i + chunk).min(units.len());
            let candidate: Vec<Vec<u8>> = units[..i].iter().chain(&units[end..]).cloned().collect();
            if probe.shows_bug(&candidate.concat()) {
                units = candidate;
            } else {
                i = end;
            }
        }
        if chunk == 1 {
            return units;
        }
        chunk /= 2;
    }
}

fn lines(bytes: &[u8]) -> Vec<Vec<u8>> {
    bytes.split_inclusive(|&b| b == b'\n').map(<[u8]>::to_vec).collect()
}

/// Shrinks the finding saved in `dir` within `budget`, and writes `dir/minimal.spinfold`.
pub fn minimize(dir: &Path, spinfold: &Path, limits: &Limits, budget: Duration) -> std::io::Result<Vec<u8>> {
    let replay: Replay = serde_json::from_str(&std::fs::read_to_string(dir.join("finding.json"))?)
        .map_err(|e| std::io::Error::other(e.to_string()))?;
    let original = std::fs::read(dir.join(INPUT_FILE))?;
    let mut probe =
        Probe { replay, dir, spinfold, limits, worker: None, scratch: tempfile::tempdir()?, tries: 0 };
    let deadline = Instant::now() + budget;
    if !probe.shows_bug(&original) {
        return Err(std::io::Error::other("the saved input no longer shows the bug"));
    }
    let mut best = reduce(lines(&original), &mut probe, deadline).concat();
    best = match String::from_utf8(best.clone()) {
        Ok(text) => reduce(tokens(&text).into_iter().map(String::into_bytes).collect(), &mut probe, deadline),
        Err(_) => reduce(best.iter().map(|&b| vec![b]).collect(), &mut probe, deadline),
    }
    .concat();
    // whole lines again: token removal may have emptied some
    best = reduce(lines(&best), &mut probe, deadline).concat();
    std::fs::write(dir.join("minimal.spinfold"), &best)?;
    eprintln!(
        "{}: {} -> {} bytes in {} tries{}",
        dir.display(),
        original.len(),
        best.len(),
        probe.tries,
        if Instant::now() > deadline { " (budget spent)" } else { "" }
    );
    Ok(best)
}

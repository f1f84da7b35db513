//! What the tests of free coefficients and of roots share: the binary run on an input, and
//! reference values computed by numpy from a fixture's integrals (tests/numpy/reference.py).

use std::path::Path;
use std::process::{Command, Stdio};

const ROOT: &str = env!("CARGO_MANIFEST_DIR");

/// One run of the binary.
pub struct Run {
    pub code: Option<i32>,
    pub stdout: String,
    pub stderr: String,
}

impl Run {
    /// Standard output as JSON, the run having succeeded.
    pub fn json(&self) -> serde_json::Value {
        assert_eq!(self.code, Some(0), "the run succeeds:\n{}", self.stderr);
        serde_json::from_str(&self.stdout).expect("JSON output")
    }

    /// Standard output, the run having succeeded.
    pub fn text(&self) -> &str {
        assert_eq!(self.code, Some(0), "the run succeeds:\n{}", self.stderr);
        &self.stdout
    }
}

/// The path of a committed fixture.
pub fn fixture(name: &str) -> String {
    format!("{ROOT}/tests/fixtures/{name}")
}

/// Writes `input` as `input.spinfold` in a fresh directory and runs `spinfold COMMAND
/// input.spinfold ARGS...` there.
pub fn spinfold(command: &str, input: &str, args: &[&str]) -> Run {
    let dir = tempfile::tempdir().expect("a temporary directory");
    std::fs::write(dir.path().join("input.spinfold"), input).expect("the input is written");
    let out = Command::new(env!("CARGO_BIN_EXE_spinfold"))
        .arg(command)
        .arg("input.spinfold")
        .args(args)
        .current_dir(dir.path())
        .stdin(Stdio::null())
        .output()
        .expect("the binary runs");
    Run {
        code: out.status.code(),
        stdout: String::from_utf8_lossy(&out.stdout).into_owned(),
        stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
    }
}

/// `python3 tests/numpy/reference.py DUMP ARGS...` as JSON. Outside CI, without python3 and
/// numpy, None (the caller skips its check with a message); under CI they must be there.
pub fn numpy_reference(dump: &str, args: &[&str]) -> Option<serde_json::Value> {
    let ready =
        Command::new("python3").args(["-c", "import numpy"]).output().is_ok_and(|o| o.status.success());
    if !ready {
        assert!(std::env::var_os("CI").is_none(), "python3 with numpy is required under CI");
        eprintln!("skipping a numpy reference: python3 with numpy not found");
        return None;
    }
    let out = Command::new("python3")
        .arg(Path::new(ROOT).join("tests/numpy/reference.py"))
        .arg(fixture(dump))
        .args(args)
        .output()
        .expect("python3 runs");
    assert!(out.status.success(), "reference.py fails:\n{}", String::from_utf8_lossy(&out.stderr));
    Some(serde_json::from_slice(&out.stdout).expect("reference.py prints JSON"))
}

/// The number at a JSON pointer.
pub fn number(value: &serde_json::Value, pointer: &str) -> f64 {
    value
        .pointer(pointer)
        .and_then(|v| v.as_f64())
        .unwrap_or_else(|| panic!("a number at {pointer} in {value}"))
}

//! README.md tells the truth: it opens with the job and two commands that set everything up on
//! a fresh machine (run the main job on a bundled example, run the tests), it says how to get
//! the `spinfold` command before using it, every `spinfold` command it shows runs, and every
//! output it shows is what that command prints.

#![cfg(unix)]

use std::path::Path;
use std::process::{Command, Stdio};

const ROOT: &str = env!("CARGO_MANIFEST_DIR");

fn readme() -> String {
    std::fs::read_to_string(Path::new(ROOT).join("README.md")).expect("README.md is readable")
}

/// The fenced code blocks of a Markdown text, as their lines.
fn code_blocks(text: &str) -> Vec<Vec<&str>> {
    let mut blocks = vec![];
    let mut current: Option<Vec<&str>> = None;
    for line in text.lines() {
        if line.starts_with("```") {
            match current.take() {
                Some(block) => blocks.push(block),
                None => current = Some(vec![]),
            }
        } else if let Some(block) = current.as_mut() {
            block.push(line);
        }
    }
    blocks
}

/// Shell lines with their `\` continuations joined.
fn joined(lines: &[&str]) -> Vec<String> {
    let mut out: Vec<String> = vec![];
    let mut continued = false;
    for line in lines {
        let text = line.trim_end();
        let (body, more) = match text.strip_suffix('\\') {
            Some(b) => (b.trim_end(), true),
            None => (text, false),
        };
        if continued {
            let last = out.last_mut().expect("a line to continue");
            last.push(' ');
            last.push_str(body.trim_start());
        } else {
            out.push(body.to_string());
        }
        continued = more;
    }
    out
}

#[test]
fn it_opens_with_the_job_and_two_setup_commands() {
    let text = readme();
    let mut lines = text.lines();
    assert_eq!(lines.next(), Some("# spinfold"));
    let before_code: Vec<&str> = text.split("```").next().unwrap().lines().skip(1).collect();
    assert!(
        before_code.iter().filter(|l| !l.trim().is_empty()).count() >= 3,
        "a paragraph on the job comes first"
    );
    assert!(before_code.iter().all(|l| !l.starts_with('#')), "no heading between the title and the commands");
    let first = &code_blocks(&text)[0];
    let commands: Vec<&str> =
        first.iter().copied().filter(|l| !l.trim().is_empty() && !l.starts_with('#')).collect();
    assert_eq!(commands.len(), 2, "two commands: {commands:?}");
    let example = commands[0]
        .strip_prefix("cargo run --release -- derive ")
        .unwrap_or_else(|| panic!("the first runs the main job through cargo: {}", commands[0]));
    assert!(
        example.starts_with("examples/") && Path::new(ROOT).join(example).is_file(),
        "a bundled example: {example}"
    );
    assert_eq!(commands[1], "cargo test --release");
    let ci = std::fs::read_to_string(Path::new(ROOT).join(".ci/run")).expect(".ci/run");
    assert_eq!(
        ci.lines().rev().find(|l| !l.trim().is_empty()),
        Some("cargo test --release"),
        "CI runs the same command"
    );
}

#[test]
fn it_says_how_to_get_the_command_before_using_it() {
    let text = readme();
    let install = text.find("cargo install --path .").expect("README gives the install step");
    let first_use = text
        .lines()
        .filter(|l| l.starts_with("spinfold ") || l.starts_with("$ spinfold "))
        .map(|l| text.find(l).unwrap())
        .min()
        .expect("README shows spinfold commands");
    assert!(install < first_use, "the install step comes before the first `spinfold` command");
}

/// A scratch directory in which README's relative paths resolve: the examples and test
/// fixtures of the repository, and a `src/` for generated modules.
fn scratch() -> tempfile::TempDir {
    let dir = tempfile::tempdir().expect("a temporary directory");
    for name in ["examples", "tests"] {
        std::os::unix::fs::symlink(Path::new(ROOT).join(name), dir.path().join(name)).expect("a link");
    }
    std::fs::create_dir(dir.path().join("src")).unwrap();
    dir
}

/// Runs a command line README shows (`spinfold …`) with the built binary.
fn run(dir: &Path, command: &str) -> String {
    let args: Vec<&str> = command.split_whitespace().skip(1).collect();
    let out = Command::new(env!("CARGO_BIN_EXE_spinfold"))
        .args(&args)
        .current_dir(dir)
        .stdin(Stdio::null())
        .output()
        .expect("the binary runs");
    assert!(out.status.success(), "`{command}` fails:\n{}", String::from_utf8_lossy(&out.stderr));
    String::from_utf8(out.stdout).expect("UTF-8 output")
}

#[test]
fn every_command_shown_runs_and_prints_what_is_shown() {
    let text = readme();
    let dir = scratch();
    let mut ran = 0;
    for block in code_blocks(&text) {
        let lines = joined(&block);
        let mut k = 0;
        while k < lines.len() {
            let line = &lines[k];
            k += 1;
            // a synopsis with placeholders is not a command
            let command = match line.strip_prefix("$ ") {
                Some(c) => c,
                None if line.starts_with("spinfold ") && !line.contains("...") => line.as_str(),
                None => continue,
            };
            if !command.starts_with("spinfold ") {
                continue;
            }
            let printed = run(dir.path(), command);
            ran += 1;
            // what follows a `$ ` command up to the next one is its output; `...` elides lines
            let shown: Vec<&String> = lines[k..].iter().take_while(|l| !l.starts_with("$ ")).collect();
            if !line.starts_with("$ ") {
                continue;
            }
            let actual: Vec<&str> = printed.lines().collect();
            let mut from = 0;
            for chunk in shown.split(|l| l.trim() == "...").filter(|c| !c.is_empty()) {
                let at = (from..=actual.len().saturating_sub(chunk.len()))
                    .find(|&s| chunk.iter().zip(&actual[s..]).all(|(a, b)| a.as_str() == *b))
                    .unwrap_or_else(|| {
                        panic!(
                            "`{command}` does not print:\n{}\nbut:\n{printed}",
                            chunk.iter().map(|s| s.as_str()).collect::<Vec<_>>().join("\n")
                        )
                    });
                from = at + chunk.len();
            }
        }
    }
    assert!(ran >= 5, "README shows at least five spinfold commands, ran {ran}");
}

//! The standalone LaTeX of every bundled example, plain and in the Fock form, compiled with
//! pdflatex: it must build without an error or a font substitution, and no line may stick out
//! of the text block by more than a hair. Long expressions (a twelve-open-shell singlet) and
//! state labels made of every kind of name and operand compile too. Without pdflatex the test
//! is skipped, except under CI (the environment variable CI set), where it fails.

mod common;

use common::examples;
use spinfold::{Format, Options, derive_checked, parse, render};
use std::path::Path;
use std::process::Command;

/// The most an `Overfull \hbox` may stick out, in points.
const OVERFULL_LIMIT: f32 = 1.0;

/// Inputs beyond the examples: a very long energy, and labels of every kind.
fn extra_inputs() -> Vec<(String, String)> {
    let shells = (1..=12).map(|k| format!("o{k}")).collect::<Vec<_>>().join(" ");
    let long = format!(
        "orbitals {shells}\nspace core\n\
         csf X = | core^2 {shells} | S=0 path=1/2,1,3/2,2,5/2,3,5/2,2,3/2,1,1/2,0\n\
         energy X\nspin X\n"
    );
    let labels = "\
orbitals a b c_1 p2 long_name x
space core_2
space occ: i j
space vir: s t
det ab_1 = | core_2^2 a b' |
det ba_1 = | core_2^2 a' b |
det ref = | occ^2 |
state S_1 = (ab_1 - ba_1)/sqrt(2)
state T1 = sqrt(1/2) ab_1 + sqrt(1/2) | core_2^2 a' b |
csfs fam = | core_2^2 a b c_1 | S=1/2
energy S_1
energy T1
energy fam.1
element fam.1 fam.2
spin fam.2
energy | core_2^2 p2 long_name |
element ab_1 | core_2^2 a' b |
element ((ab_1 - ba_1)/sqrt(2)) (2 ab_1)
energy ref[i -> s]
element ref ref[i j' -> s t']
element ref ref[i -> s][j' -> t']
energy | core_2^2 a b x |[x -> c_1]
";
    vec![("long_energy".into(), long), ("labels".into(), labels.into())]
}

/// The name the input goes by, which the standalone document shows as its title: for the
/// labels, one made of every character special to TeX.
fn source_name(stem: &str) -> String {
    if stem == "labels" { r"labels #$%&~_^\{}|<>'é.spinfold".into() } else { format!("{stem}.spinfold") }
}

/// (points, line) of every `Overfull \hbox` in a log.
fn overfull(log: &str) -> Vec<(f32, String)> {
    log.lines()
        .filter(|l| l.starts_with("Overfull \\hbox"))
        .map(|l| {
            let points = l
                .split_once('(')
                .and_then(|(_, rest)| rest.split_once("pt"))
                .and_then(|(n, _)| n.parse().ok())
                .unwrap_or(f32::INFINITY);
            (points, l.to_string())
        })
        .collect()
}

/// The first page of `job.pdf` as `job.png` (pdftoppm), as docs/single_excitations.png is
/// made; skipped without pdftoppm outside CI.
fn first_page_as_png(dir: &Path, job: &str) -> Result<(), String> {
    let run = Command::new("pdftoppm")
        .args(["-png", "-r", "60", "-singlefile", &format!("{job}.pdf"), job])
        .current_dir(dir)
        .output();
    match run {
        Err(_) if std::env::var_os("CI").is_none() => {
            eprintln!("skipped the PNG: pdftoppm is not installed");
            Ok(())
        }
        Err(e) => Err(format!("pdftoppm does not run ({e}), and CI needs it (see .ci/run)")),
        Ok(out) if !out.status.success() => {
            Err(format!("pdftoppm failed: {}", String::from_utf8_lossy(&out.stderr)))
        }
        Ok(_) => {
            let png =
                std::fs::read(dir.join(format!("{job}.png"))).map_err(|e| format!("no PNG written: {e}"))?;
            if png.starts_with(b"\x89PNG") { Ok(()) } else { Err("pdftoppm wrote no PNG".into()) }
        }
    }
}

#[test]
fn standalone_latex_compiles() {
    if Command::new("pdflatex").arg("--version").output().is_err() {
        assert!(std::env::var_os("CI").is_none(), "pdflatex is not installed, and CI needs it (see .ci/run)");
        eprintln!("skipped: pdflatex is not installed");
        return;
    }
    let dir = tempfile::tempdir().expect("a temporary directory");
    let mut failures = vec![];
    let mut compiled = 0;
    let inputs: Vec<(String, String, bool)> = examples()
        .into_iter()
        .map(|(stem, text)| (stem, text, true))
        .chain(extra_inputs().into_iter().map(|(stem, text)| (stem, text, false)))
        .collect();
    for (stem, text, example) in inputs {
        let program = parse(&source_name(&stem), &text).unwrap_or_else(|e| panic!("{stem}: {e}"));
        for fock in [false, true] {
            if fock && !example {
                continue;
            }
            // the layout does not depend on the check, which the snapshot tests make
            let derived = derive_checked(&program, &Options { fock, ..Options::default() }, None)
                .unwrap_or_else(|e| panic!("{stem}: {e}"));
            let tex = render(&program, &derived, Format::Latex { standalone: true }).expect("LaTeX renders");
            let job = if fock { format!("{stem}_fock") } else { stem.clone() };
            std::fs::write(dir.path().join(format!("{job}.tex")), &tex).expect("writable temporary file");
            let run = Command::new("pdflatex")
                .args(["-interaction=nonstopmode", "-halt-on-error", &format!("{job}.tex")])
                .current_dir(dir.path())
                .output()
                .expect("pdflatex runs");
            let log = std::fs::read_to_string(dir.path().join(format!("{job}.log"))).unwrap_or_default();
            compiled += 1;
            if !run.status.success() || log.lines().any(|l| l.starts_with('!')) {
                let errors: Vec<&str> = log.lines().skip_while(|l| !l.starts_with('!')).take(12).collect();
                failures.push(format!("{job}: pdflatex failed\n{}", errors.join("\n")));
                continue;
            }
            if !dir.path().join(format!("{job}.pdf")).exists() {
                failures.push(format!("{job}: no PDF written"));
                continue;
            }
            if job == "single_excitations"
                && let Err(why) = first_page_as_png(dir.path(), &job)
            {
                failures.push(format!("{job}: {why}"));
            }
            // a character set in a font that lacks it is substituted, and then looks wrong
            for line in log.lines().filter(|l| l.contains("Font Warning")) {
                failures.push(format!("{job}: {line}"));
            }
            for (points, line) in overfull(&log) {
                eprintln!("{job}: {line}");
                if points > OVERFULL_LIMIT {
                    failures.push(format!("{job}: {line}"));
                }
            }
        }
    }
    assert!(compiled >= 18, "every example, plain and with --fock, and the extra inputs");
    assert!(failures.is_empty(), "{}", failures.join("\n\n"));
}

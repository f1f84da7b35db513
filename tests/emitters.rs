//! Every bundled example through every emitter, held as snapshots in `snapshots/`: a change
//! in any derived formula or in any output layout shows up as a reviewed diff.

mod common;

use common::examples;
use spinfold::{DEFAULT_SEED, Format, Options, derive_checked, parse, render};

fn snapshot(name: &str, text: &str) {
    insta::with_settings!({
        snapshot_path => concat!(env!("CARGO_MANIFEST_DIR"), "/snapshots"),
        prepend_module_to_snapshot => false,
        // the size of rounding errors depends on the build; the tolerance is what is promised
        filters => vec![(r#""max_deviation": [^,\n]+"#, r#""max_deviation": "[rounding]""#)],
    }, {
        insta::assert_snapshot!(name, text);
    });
}

#[test]
fn every_example_in_every_format() {
    let all = examples();
    assert!(all.len() >= 5, "at least five bundled examples");
    for (stem, text) in all {
        let program = parse(&format!("{stem}.spinfold"), &text).expect("examples parse");
        let derived = derive_checked(&program, &Options::default(), Some(DEFAULT_SEED))
            .unwrap_or_else(|e| panic!("{stem}: {e}"));
        assert!(derived.iter().all(|(_, report)| report.as_ref().is_some_and(|r| r.checks > 0)));
        for (format, suffix) in [
            (Format::Text { ascii: false }, "txt"),
            (Format::Text { ascii: true }, "ascii"),
            (Format::Latex { standalone: true }, "tex"),
            (Format::Json, "json"),
            (Format::Python, "py"),
            (Format::Rust, "rs"),
        ] {
            let code = matches!(format, Format::Python | Format::Rust);
            let output = match render(&program, &derived, format) {
                Ok(text) => text,
                // densities and open-shell forms have no generated code yet: the refusal is the output
                Err(e) if code && !common::has_code(&text) => format!("{e}\n"),
                Err(e) => panic!("{stem}.{suffix}: {e}"),
            };
            snapshot(&format!("{stem}.{suffix}"), &output);
        }
        // the Fock-operator presentation, as text and LaTeX
        let fock = Options { fock: true, ..Options::default() };
        let derived =
            derive_checked(&program, &fock, Some(DEFAULT_SEED)).unwrap_or_else(|e| panic!("{stem}: {e}"));
        snapshot(
            &format!("{stem}.fock.txt"),
            &render(&program, &derived, Format::Text { ascii: false }).unwrap(),
        );
        snapshot(
            &format!("{stem}.fock.tex"),
            &render(&program, &derived, Format::Latex { standalone: false }).unwrap(),
        );
    }
}

//! What the verification report promises: three configurations of space sizes that are all
//! different, every space the request uses at three sizes, a space with generic indices large
//! enough for all of them to differ, and only the spaces the request uses listed.

mod common;

use common::examples;
use spinfold::{DEFAULT_SEED, Derivation, Options, Program, Report, derive_checked, parse};
use std::collections::{BTreeMap, BTreeSet};

/// The sizes of each space across the configurations of a report: "core=1, act=4" → core: 1, …
fn sizes(report: &Report) -> BTreeMap<String, Vec<usize>> {
    let mut out: BTreeMap<String, Vec<usize>> = BTreeMap::new();
    for configuration in &report.configurations {
        for pair in configuration.split(", ").filter(|p| !p.is_empty()) {
            let (space, n) = pair.split_once('=').expect("space=size");
            out.entry(space.to_string()).or_default().push(n.parse().expect("a size"));
        }
    }
    out
}

fn checked(name: &str, input: &str) -> (Program, Vec<(Derivation, Report)>) {
    let program = parse(name, input).expect("parses");
    let derived = derive_checked(&program, &Options::default(), Some(DEFAULT_SEED)).expect("verifies");
    let derived = derived.into_iter().map(|(d, r)| (d, r.expect("verified"))).collect();
    (program, derived)
}

#[test]
fn configurations_differ_and_every_space_takes_three_sizes() {
    for (stem, text) in examples() {
        let (program, derived) = checked(&format!("{stem}.spinfold"), &text);
        for (d, report) in derived.iter().filter(|(_, r)| r.not_checked.is_none()) {
            let at = format!("{stem}: {}: {:?}", d.text, report.configurations);
            assert_eq!(report.configurations.len(), 3, "{at}");
            let distinct: BTreeSet<&String> = report.configurations.iter().collect();
            assert_eq!(distinct.len(), 3, "three different configurations: {at}");
            for (space, sizes) in sizes(report) {
                assert_eq!(sizes.len(), 3, "{space} is sized in every configuration: {at}");
                assert_eq!(sizes.iter().collect::<BTreeSet<_>>().len(), 3, "{space} takes three sizes: {at}");
                let s = program.spaces.iter().position(|x| x.name == space).expect("a declared space") as u32;
                let indices =
                    d.free_indices.iter().filter(|&&k| program.indices[k as usize].space == s).count();
                if indices > 0 {
                    let smallest = *sizes.iter().min().unwrap();
                    assert!(
                        smallest >= 3.max(indices),
                        "{space}: room for {indices} different indices: {at}"
                    );
                }
            }
        }
    }
}

#[test]
fn only_the_spaces_a_request_uses_are_listed() {
    let input = "orbitals a\nspace core\nspace val\nspace act: t u\nspace unused: w\n\
                 energy | core^2 a |\nenergy | core^2 t |\nelement | val^2 t | | val^2 u |\nenergy | a |\n";
    let (_, derived) = checked("spaces.spinfold", input);
    let listed: Vec<Vec<String>> = derived.iter().map(|(_, r)| sizes(r).into_keys().collect()).collect();
    assert_eq!(listed, [vec!["core"], vec!["act", "core"], vec!["act", "val"], vec![]]);
    let summary = |k: usize| derived[k].1.summary();
    assert!(summary(0).contains("with spaces sized (core=1), (core=2), (core=3),"), "{}", summary(0));
    assert!(
        summary(1).contains("with spaces sized (core=1, act=4), (core=2, act=5), (core=3, act=3),"),
        "{}",
        summary(1)
    );
    // a request without spaces says nothing of sizes
    assert!(!summary(3).contains("sized"), "{}", summary(3));
    assert!(summary(3).contains("3 check(s)"), "{}", summary(3));
}

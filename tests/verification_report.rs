//! What the verification report promises: three configurations of space sizes that are all
//! different, every space the request uses at three sizes, a space with generic indices large
//! enough for all of them to differ, and only the spaces the request uses listed. Past 400
//! assignments of the generic indices per configuration a seeded sample is checked that holds
//! every pattern of coinciding indices, and the report says how many of how many; the work stays
//! proportionate to the derivation; equal determinants count once when deciding whether a state
//! is small enough to check whole.

mod common;

use common::examples;
use spinfold::{
    DEFAULT_SEED, Derivation, ErrorKind, Exact, Expr, Factor, Options, Orb, Program, Report, Term, derive,
    derive_checked, parse, verify,
};
use std::collections::{BTreeMap, BTreeSet};
use std::time::{Duration, Instant};

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

/// Eight open shells coupled to a singlet (70 determinants) and five generic indices in two
/// spaces: thousands of index assignments per configuration.
const SEVENTY_DETERMINANTS: &str = "orbitals x s a b y E r z v
space core
space occ: h i n
space C: k l
csf triplet = | core^2 h a v z y^2 n x C^2 r i | S=0 path=1/2,1,1/2,0,1/2,0,1/2,0
element triplet triplet[l' y k -> b' E' b][l -> s]
";

#[test]
fn a_sampled_check_says_how_many_assignments_of_how_many() {
    let (_, derived) = checked("seventy.spinfold", SEVENTY_DETERMINANTS);
    let report = &derived[0].1;
    // occ holds h, i, n and C holds k, l: occ^3 × C^2 assignments per configuration
    let there_are: usize =
        sizes(report)["occ"].iter().zip(&sizes(report)["C"]).map(|(o, c)| o.pow(3) * c.pow(2)).sum();
    assert_eq!(there_are, 3157, "{:?}", report.configurations);
    let sample = report.sample.expect("the assignments are sampled");
    assert_eq!((sample.drawn, sample.of), (3 * 400, 3157));
    assert!(report.sampled);
    assert!(
        report.summary().contains(
            "a seeded sample of 1200 of 3157 generic-index assignments including every pattern of coinciding indices in each configuration"
        ),
        "{}",
        report.summary()
    );
    // the value and the overlap at every drawn assignment
    assert_eq!(report.checks, 2 * 1200);
}

#[test]
fn checking_a_seventy_determinant_request_stays_fast() {
    let program = parse("seventy.spinfold", SEVENTY_DETERMINANTS).expect("parses");
    let request = &program.requests[0];
    let start = Instant::now();
    let derivation = derive(&program, request, &Options::default()).expect("derives");
    let deriving = start.elapsed();
    let start = Instant::now();
    verify(&program, request, &derivation, DEFAULT_SEED).expect("verifies");
    let checking = start.elapsed();
    // 2,400 brute-force checks once took about 20 s here against milliseconds of derivation
    assert!(
        checking < Duration::from_secs(3) + 100 * deriving,
        "deriving {deriving:?}, checking {checking:?}"
    );
}

#[test]
fn every_pattern_of_coinciding_indices_is_checked_when_assignments_are_sampled() {
    // six letters of one space: 6^6, 7^6 and 8^6 assignments, of which only 6, 7 and 8 make
    // all six equal; a term wrong only there must still be caught
    let input = "space act: t u v w x y\nelement | t u' v | | w x' y |\n";
    let program = parse("six.spinfold", input).expect("parses");
    let request = &program.requests[0];
    let mut derivation = derive(&program, request, &Options::default()).expect("derives");
    let index = |name: &str| {
        Orb::Index(program.indices.iter().position(|i| i.name == name).expect("a declared index") as u32)
    };
    let t = index("t");
    let all_equal = Term {
        deltas: ["u", "v", "w", "x", "y"].map(|n| (t, index(n))).to_vec(),
        ..Term::new(Exact::one(), Factor::H(t, t))
    };
    derivation.value = derivation.value.plus(&Expr::from_terms([all_equal]));
    let error = verify(&program, request, &derivation, DEFAULT_SEED).expect_err("the wrong term is caught");
    assert!(matches!(error.kind, ErrorKind::VerificationFailed { .. }), "{error}");
}

#[test]
fn equal_determinants_count_once_when_deciding_to_check_a_state_whole() {
    let copies = vec!["d"; 20_000].join(" + ");
    let input = format!("orbitals a b\nspace core\ndet d = | core^2 a b' |\nstate s = {copies}\nenergy s\n");
    let (_, derived) = checked("copies.spinfold", &input);
    let report = &derived[0].1;
    assert_eq!(report.determinant_pairs, None, "{}", report.summary());
    assert_eq!(report.checks, 3, "one check per configuration: {}", report.summary());
    assert!(!report.summary().contains("determinant pairs"), "{}", report.summary());
}

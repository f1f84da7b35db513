//! Spin-adapted configurations built by genealogical coupling: their energies against hand-built
//! combinations, closed forms for three open shells (derived by hand), exact spin, and clear
//! errors for couplings that cannot exist.

mod common;

use spinfold::{DEFAULT_SEED, Exact, Expr, Limits, Options, derive, derive_checked, parse, parse_with};

fn derived_values(input: &str) -> Vec<Expr> {
    let program = parse("t.spinfold", input).unwrap();
    derive_checked(&program, &Options::default(), Some(DEFAULT_SEED))
        .unwrap()
        .into_iter()
        .map(|(d, _)| d.value)
        .collect()
}

/// Each request's expression up to its closed-space sums, as one line of ASCII.
fn text_lines(input: &str) -> Vec<String> {
    let program = parse("t.spinfold", input).unwrap();
    common::expression_lines(&program, &Options::default(), DEFAULT_SEED)
        .into_iter()
        .map(|l| l.split(" + 2 sum_{k in core}").next().unwrap_or("").to_string())
        .collect()
}

#[test]
fn two_open_shells_from_csfs_equal_the_hand_built_states() {
    let v = derived_values(
        "orbitals a b\nspace core\n\
         csf S = | core^2 a b | S=0\ncsf T = | core^2 a b | S=1 M=0\n\
         state S2 = (| core^2 a b' | - | core^2 a' b |)/sqrt(2)\nstate T2 = (| core^2 a b' | + | core^2 a' b |)/sqrt(2)\n\
         energy S\nenergy S2\nenergy T\nenergy T2\nenergy | core^2 a b |\n",
    );
    assert_eq!(v[0], v[1], "singlet: J_ab + K_ab");
    assert_eq!(v[2], v[3], "triplet M = 0: J_ab - K_ab");
    assert_eq!(v[2], v[4], "every triplet component has the same energy");
    assert_ne!(v[0], v[2]);
}

#[test]
fn a_doubly_occupied_orbital_in_a_csf_stays_doubly_occupied() {
    // the open shells b, c couple to a singlet over a^2: the hand-built singlet pair over a^2
    let input = "orbitals a b c\nspace core\ncsf X = | core^2 a^2 b c | S=0\n\
                 state Y = (| core^2 a^2 b c' | - | core^2 a^2 b' c |)/sqrt(2)\nenergy X\nenergy Y\n";
    let program = parse("double.spinfold", input).unwrap();
    assert_eq!(program.states[0].state.terms.len(), 2);
    let energy = |k: usize, route| {
        derive(&program, &program.requests[k], &Options { route, ..Options::default() }).unwrap().value
    };
    let hand_built = energy(1, spinfold::Route::Auto);
    assert_eq!(energy(0, spinfold::Route::Determinants), hand_built);
    assert_eq!(energy(0, spinfold::Route::SpinAlgebra), hand_built);
}

const THREE: &str = "orbitals p q r\nspace core\n\
    csf D1 = | core^2 p q r | S=1/2 path=1/2,0,1/2\n\
    csf D2 = | core^2 p q r | S=1/2 path=1/2,1,1/2\n\
    csf Q  = | core^2 p q r | S=3/2 M=1/2\n\
    csfs all = | core^2 p q r | S=1/2\n";

#[test]
fn three_open_shell_doublets_in_closed_form() {
    let lines =
        text_lines(&format!("{THREE}energy D1\nenergy D2\nelement D1 D2\nenergy Q\nelement all.1 all.2\n"));
    // the common h and J terms, then the couplings (derived by hand, common practice)
    assert_eq!(lines[0], "= h_pp + h_qq + h_rr + J_pq + J_pr + J_qr + K_pq - 1/2 K_pr - 1/2 K_qr");
    assert_eq!(lines[1], "= h_pp + h_qq + h_rr + J_pq + J_pr + J_qr - K_pq + 1/2 K_pr + 1/2 K_qr");
    // |<D1|H|D2>| = (sqrt(3)/2) |K_pr - K_qr|
    assert_eq!(lines[2], "= sqrt(3)/2 K_pr - sqrt(3)/2 K_qr");
    // quartet: every open pair J - K
    assert_eq!(lines[3], "= h_pp + h_qq + h_rr + J_pq + J_pr + J_qr - K_pq - K_pr - K_qr");
    // csfs numbers the paths with the lower intermediate spins first
    assert_eq!(lines[4], lines[2]);
}

#[test]
fn every_coupled_state_has_exact_spin() {
    // <S^2> = S(S+1) and <S_z> = M exactly, for every path of up to eight open shells, both as
    // read off the coupling and as computed from the determinants
    for n in 1..=8usize {
        let names: Vec<String> = (1..=n).map(|k| format!("o{k}")).collect();
        for twice_s in (0..=n).rev().step_by(2) {
            let s = |t: i64| if t % 2 == 0 { format!("{}", t / 2) } else { format!("{t}/2") };
            for twice_m in [twice_s as i64, -(twice_s as i64)] {
                let input = format!(
                    "orbitals {0}\nspace core\ncsfs F = | core^2 {0} | S={1} M={2}\n",
                    names.join(" "),
                    s(twice_s as i64),
                    s(twice_m)
                );
                let mut program = parse("spin.spinfold", &input).unwrap();
                let count = program.states.len();
                let requests: String = (1..=count).map(|k| format!("spin F.{k}\n")).collect();
                program = parse("spin.spinfold", &format!("{input}{requests}")).unwrap();
                let expected = Exact::fraction((twice_s * (twice_s + 2)) as i64, 4);
                for request in &program.requests {
                    // read off the coupling, and computed from the determinants
                    for route in [spinfold::Route::Auto, spinfold::Route::Determinants] {
                        let d = derive(&program, request, &Options { route, ..Options::default() }).unwrap();
                        assert_eq!(d.value, Expr::constant(expected.clone()), "{input}{}", request.text);
                        assert_eq!(d.s_z, Expr::constant(Exact::fraction(twice_m, 2)));
                        assert!(d.notes.is_empty(), "an eigenfunction draws no warning");
                    }
                }
            }
        }
    }
}

#[test]
fn a_single_determinant_of_mixed_spin_is_flagged_but_still_derived() {
    let program = parse("mixed.spinfold", "orbitals a b\nspin | a b' |\nenergy | a b' |\n").unwrap();
    let derived = derive_checked(&program, &Options::default(), Some(DEFAULT_SEED)).unwrap();
    assert_eq!(derived[0].0.value, Expr::constant(Exact::one()), "<S^2> = 1: half singlet, half triplet");
    assert!(derived[0].0.notes[0].starts_with("warning:"));
    assert!(!derived[1].0.value.is_zero());
}

fn error_of(input: &str) -> String {
    parse("bad.spinfold", input).unwrap_err().render()
}

#[test]
fn couplings_that_cannot_exist_are_refused_with_a_reason() {
    let base = "orbitals p q r\nspace core\n";
    let cases = [
        ("csf X = | core^2 p q r | S=1", "3 open shell(s) cannot couple to S = 1"),
        ("csf X = | core^2 p q r | S=1/2", "in 2 ways: give `path=` or use `csfs`"),
        ("csf X = | core^2 p q r | S=1/2 path=1/2,1", "2 intermediate spins but there are 3 open shells"),
        ("csf X = | core^2 p q r | S=1/2 path=1/2,3/2,1/2", "each shell changes it by 1/2"),
        ("csf X = | core^2 p q r | S=1/2 path=1/2,1,3/2", "ends at 3/2 but S = 1/2"),
        ("csf X = | core^2 p q r | S=3/2 M=5/2", "M = 5/2 is not one of"),
        ("csf X = | core^2 p q' r | S=1/2 path=1/2,0,1/2", "carries a spin mark"),
        ("csf X = | core^2 p q r |", "needs its total spin"),
        ("csfs X = | core^2 p q r | S=1/2 path=1/2,0,1/2", "leave out `path=`"),
        ("csfs X = | core^2 p q r | S=1/2\nenergy X", "a family of 2 coupled states"),
    ];
    for (line, message) in cases {
        let report = error_of(&format!("{base}{line}\n"));
        assert!(report.contains(message), "{line}\n{report}");
        let line_number = 2 + line.lines().count();
        assert!(report.contains(&format!("bad.spinfold:{line_number}:")), "{report}");
    }
}

#[test]
fn a_request_past_the_size_limit_stops_with_a_clear_error() {
    let names: Vec<String> = (1..=16).map(|k| format!("o{k}")).collect();
    let input = format!(
        "orbitals {0}\nspace core\ncsf X = | core^2 {0} | S=0 path=1/2,1,3/2,2,5/2,3,7/2,4,7/2,3,5/2,2,3/2,1,1/2,0\n\
         element X X\n",
        names.join(" ")
    );
    let small = Limits { max_determinants: 10_000, ..Limits::default() };
    // past the limit the function is kept unexpanded: its energy still comes from spin algebra,
    // but a request that needs its 12870 determinants stops
    let program = parse_with("big.spinfold", &input, small).unwrap();
    assert!(program.states[0].state.is_unexpanded());
    let error =
        derive(&program, &program.requests[0], &Options { max_determinants: 10_000, ..Options::default() })
            .unwrap_err();
    assert!(error.render().contains("12870 determinants"), "{}", error.render());
    assert!(error.render().contains("--max-determinants"), "names the option that lifts it");
    assert_eq!(error.exit_code(), 2);
    // so does a family of coupled states past the limit, where it is defined
    let family = format!("orbitals {0}\nspace core\ncsfs F = | core^2 {0} | S=0\n", names.join(" "));
    assert!(
        parse_with("big.spinfold", &family, small)
            .unwrap_err()
            .render()
            .contains("exceeds the limit of 10000")
    );
    assert!(
        parse_with("big.spinfold", &input, Limits { max_determinants: 20_000, ..Limits::default() })
            .unwrap()
            .states[0]
            .state
            .terms
            .len()
            == 12870
    );
}

#[test]
fn spin_algebra_and_determinants_agree_for_every_path_up_to_ten_open_shells() {
    // the exchange coefficients from <s_i·s_j> along the path against the full determinant route
    let mut compared = 0;
    for n in 2..=10usize {
        let names: Vec<String> = (1..=n).map(|k| format!("o{k}")).collect();
        for twice_s in (0..=n).rev().step_by(2) {
            let s = if twice_s % 2 == 0 { format!("{}", twice_s / 2) } else { format!("{twice_s}/2") };
            let base = format!("orbitals {0}\nspace core\ncsfs F = | core^2 {0} | S={s}\n", names.join(" "));
            let count = parse("routes.spinfold", &base).unwrap().states.len();
            let requests: String = (1..=count).map(|k| format!("energy F.{k}\n")).collect();
            let program = parse("routes.spinfold", &format!("{base}{requests}")).unwrap();
            for request in &program.requests {
                let by = |route| {
                    derive(&program, request, &Options { route, ..Options::default() }).unwrap().value
                };
                assert_eq!(
                    by(spinfold::Route::SpinAlgebra),
                    by(spinfold::Route::Determinants),
                    "n={n} S={s} {}",
                    request.text
                );
                compared += 1;
            }
        }
    }
    assert!(compared > 400, "{compared} paths compared");
}

#[test]
fn forty_open_shells_come_from_spin_algebra_without_expansion() {
    let names: Vec<String> = (1..=40).map(|k| format!("o{k}")).collect();
    let path: Vec<String> = (1..=20)
        .chain((0..20).rev())
        .map(|t| if t % 2 == 0 { format!("{}", t / 2) } else { format!("{t}/2") })
        .collect();
    let input = format!(
        "orbitals {0}\nspace core\ncsf X = | core^2 {0} | S=0 path={1}\nenergy X\n",
        names.join(" "),
        path.join(",")
    );
    let program = parse("forty.spinfold", &input).unwrap();
    assert!(program.states[0].state.is_unexpanded());
    let derived = derive_checked(&program, &Options::default(), Some(DEFAULT_SEED)).unwrap();
    let (d, report) = &derived[0];
    assert!(d.notes[0].contains("137846528820 determinants"));
    assert!(
        report.as_ref().is_some_and(|r| r.not_checked.is_some()),
        "says that brute force was not possible"
    );
    // 40 h, 780 J and 780 K terms among the open shells, and the core terms
    assert_eq!(d.value.terms.iter().filter(|t| t.sums.is_empty()).count(), 40 + 780 + 780);
    // asking for more than its energy and spin needs the determinants, which no option allows
    let more = parse("forty.spinfold", &format!("{input}overlap X X\n")).unwrap();
    let report = derive(&more, &more.requests[1], &Options::default()).unwrap_err().render();
    assert!(report.contains("137846528820 determinants"), "{report}");
    assert!(report.contains("40 open shells, which exceeds the limit of 24 open shells"), "{report}");
    assert!(report.contains("no option changes this limit") && !report.contains("--max"), "{report}");
}

#[test]
fn coupled_states_agree_with_pyscf_on_spin_and_energy() {
    // PySCF (general-purpose reference library): spin_square and <c|H|c> of the CI vector each
    // csf of tests/inputs/csf_water.spinfold spans, on water RHF orbitals (fixture committed)
    let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR"));
    let reference: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(root.join("tests/fixtures/csf_water_reference.json")).unwrap(),
    )
    .unwrap();
    let input = std::fs::read_to_string(root.join("tests/inputs/csf_water.spinfold")).unwrap();
    let program = parse("csf_water.spinfold", &input).unwrap();
    let derived = derive_checked(&program, &Options::default(), Some(DEFAULT_SEED)).unwrap();
    let dump =
        spinfold::read_dump(root.join("tests/fixtures/water_sto3g_rhf.fcidump").to_str().unwrap()).unwrap();
    let binds: Vec<String> = ["core=1-3", "p=4", "q=5", "r=6", "s=7"].map(String::from).to_vec();
    let bindings = spinfold::Bindings::parse(&program, &binds, dump.header.norb).unwrap();
    let values = spinfold::evaluate_all(&program, &derived, &bindings, &dump.integrals).unwrap();
    let mut checked = 0;
    for ((request, (d, _)), value) in program.requests.iter().zip(&derived).zip(&values) {
        let (kind, name) = request.text.split_once(' ').unwrap();
        let number = value.entries[0].value;
        match kind {
            "spin" => {
                let s2 = reference["states"][name]["s2"]["value"].as_f64().unwrap();
                // exact S(S+1) from spinfold, numeric spin square from PySCF
                assert!((number - s2).abs() < 1e-10, "{name}: {number} vs {s2}");
                assert!(d.notes.is_empty(), "{name} is an eigenfunction");
            }
            "energy" => {
                let e = reference["states"][name]["energy"]["value"].as_f64().unwrap();
                assert!((number - e).abs() < 1e-8, "{name}: {number} vs {e}");
            }
            _ => {
                let e = reference["elements"][&request.text]["value"].as_f64().unwrap();
                assert!((number - e).abs() < 1e-8, "{}: {number} vs {e}", request.text);
            }
        }
        checked += 1;
    }
    assert_eq!(checked, 20);
}

#[test]
fn a_coupled_state_excites_and_combines_like_any_state() {
    // D1[r -> s] moves the third open shell to s: the same as coupling p q s directly
    let program = parse(
        "e.spinfold",
        "orbitals p q r s\nspace core\n\
         csf D1 = | core^2 p q r | S=1/2 path=1/2,0,1/2\ncsf D1s = | core^2 p q s | S=1/2 path=1/2,0,1/2\n\
         csf D2 = | core^2 p q r | S=1/2 path=1/2,1,1/2\n\
         state mix = sqrt(1/3) D1 + sqrt(2/3) D2\n\
         overlap D1[r -> s] D1s\nenergy D1[r -> s]\nenergy D1s\nspin mix\noverlap mix mix\n",
    )
    .unwrap();
    let derived = derive_checked(&program, &Options::default(), Some(DEFAULT_SEED)).unwrap();
    assert_eq!(derived[0].0.value, Expr::constant(Exact::one()));
    assert_eq!(derived[1].0.value, derived[2].0.value);
    assert_eq!(
        derived[3].0.value,
        Expr::constant(Exact::fraction(3, 4)),
        "a mixture of doublets is a doublet"
    );
    assert_eq!(derived[4].0.value, Expr::constant(Exact::one()));
}

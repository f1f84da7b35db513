//! Inputs that once took the machine: deep nesting, coupled states with many open shells,
//! families of coupled states, and requests with many coinciding generic indices. Each is
//! refused early with a located error naming its limit, or made cheap.

use num_bigint::BigUint;
use spinfold::{Exact, Expr, Limits, MAX_NESTING, Options, Route, derive, parse, parse_with};

fn shells(n: usize) -> String {
    (1..=n).map(|k| format!("o{k}")).collect::<Vec<_>>().join(" ")
}

fn error_of(input: &str) -> String {
    parse("limits.spinfold", input).unwrap_err().render()
}

/// The Catalan number C_m by its recurrence C_{k+1} = C_k 2(2k + 1)/(k + 2), independent of the
/// branching-diagram formula: the number of S = 0 coupling paths of 2m open shells.
fn catalan(m: u32) -> BigUint {
    (0..m).fold(BigUint::from(1u32), |c, k| c * (2 * (2 * k + 1)) / (k + 2))
}

#[test]
fn nesting_up_to_the_limit_parses_on_a_test_thread() {
    // test threads have 2 MiB of stack, a quarter of a main thread's, and a debug build spends
    // some 32 KiB of it per level (about 220 levels overflow 8 MiB): the limit leaves room
    let input = format!(
        "orbitals a b\ndet D = | a b |\nstate S = {}D{}\nstate T = {}1{} D\n",
        "(".repeat(MAX_NESTING),
        ")".repeat(MAX_NESTING),
        "sqrt(".repeat(MAX_NESTING),
        ")".repeat(MAX_NESTING)
    );
    let program = parse("deep.spinfold", &input).unwrap();
    assert_eq!(program.states.len(), 3);
    let deeper =
        format!("orbitals a b\ndet D = | a b |\nstate S = {0}D{1}\n", "(".repeat(33), ")".repeat(33));
    assert!(error_of(&deeper).contains("limits.spinfold:3:43"), "{}", error_of(&deeper));
}

#[test]
fn long_flat_inputs_parse_without_recursion_trouble() {
    // 100000 terms in one sum, and a file of 100000 lines
    let sum = vec!["| a b |"; 100_000].join(" + ");
    let program = parse("wide.spinfold", &format!("orbitals a b\nstate S = {sum}\nenergy S\n")).unwrap();
    assert_eq!(program.states[0].state.terms.len(), 100_000);
    let d = derive(&program, &program.requests[0], &Options::default()).unwrap();
    let single = parse("one.spinfold", "orbitals a b\nenergy | a b |\n").unwrap();
    assert_eq!(d.value, derive(&single, &single.requests[0], &Options::default()).unwrap().value);
    let mut long = String::from("orbitals a b\n");
    for k in 0..100_000 {
        long.push_str(&format!("# line {k}\n\n"));
    }
    long.push_str("energy | a b |\n");
    assert_eq!(parse("long.spinfold", &long).unwrap().requests.len(), 1);
}

#[test]
fn coupling_paths_are_counted_not_listed() {
    // 30 open shells: C(30,15) - C(30,14) = 9694845 paths (the 15th Catalan number); listing
    // them took 2.6 GB
    let report = error_of(&format!("orbitals {0}\ncsf X = | {0} | S=0\n", shells(30)));
    assert!(report.contains(&format!("in {} ways: give `path=`", catalan(15))), "{report}");
    assert!(report.contains("in 9694845 ways"), "{report}");
    // 140 open shells: past 128 bits, still exact
    let report = error_of(&format!("orbitals {0}\ncsf X = | {0} | S=0\n", shells(140)));
    assert!(catalan(70) > BigUint::from(u128::MAX));
    assert!(report.contains(&format!("in {} ways", catalan(70))), "{report}");
}

#[test]
fn a_family_of_coupled_states_is_bounded_and_named_with_its_count() {
    // 16 open shells couple to S = 0 in 1430 ways (the 8th Catalan number)
    let input = format!("orbitals {0}\nspace core\ncsfs F = | core^2 {0} | S=0\n", shells(16));
    let report = error_of(&input);
    assert!(report.contains("make 1430 coupled states, which exceeds the limit of 1000"), "{report}");
    assert!(report.contains("--max-paths"), "{report}");
    let limits = Limits { max_paths: 1430, ..Limits::default() };
    assert_eq!(parse_with("family.spinfold", &input, limits).unwrap().states.len(), 1430);
}

#[test]
fn a_family_is_expanded_only_where_it_is_used() {
    // 14 open shells, 429 coupled states of 3432 determinants each: defining them costs
    // nothing until a request or definition names one
    let family = format!("orbitals {0}\nspace core\ncsfs F = | core^2 {0} | S=0\n", shells(14));
    let program = parse("lazy.spinfold", &family).unwrap();
    assert_eq!(program.states.len(), 429);
    assert!(program.states.iter().all(|s| s.state.is_unexpanded()));
    let used = parse("lazy.spinfold", &format!("{family}state G = F.2 + F.3\nenergy F.7\n")).unwrap();
    let expanded: Vec<&str> =
        used.states.iter().filter(|s| !s.state.is_unexpanded()).map(|s| s.name.as_str()).collect();
    assert_eq!(expanded, ["F.2", "F.3", "F.7", "G"]);
    assert_eq!(used.requests[0].bra.terms, used.states[6].state.terms);
    // listing every state expands every member, within C(14, 7) = 3432 determinants each
    let all =
        parse_with("lazy.spinfold", &family, Limits { expand_unused: true, ..Limits::default() }).unwrap();
    assert!(all.states.iter().all(|s| (1..=3432).contains(&s.state.terms.len())));
    assert_eq!(all.states.iter().map(|s| s.state.terms.len()).max(), Some(3432));
    // a member expanded when used is the member expanded up front
    assert_eq!(all.states[6].state.terms, used.states[6].state.terms);
}

#[test]
fn the_spin_of_a_coupled_state_is_read_off_its_coupling() {
    // <S^2> = S(S+1) and <S_z> = M by construction; the determinants say the same
    let path = "1/2,1,3/2,1,1/2,1,3/2,2,3/2,1";
    let program = parse(
        "spin.spinfold",
        &format!(
            "orbitals {0}\nspace core\ncsf X = | core^2 {0} | S=1 M=0 path={path}\nspin X\n",
            shells(10)
        ),
    )
    .unwrap();
    let by =
        |route| derive(&program, &program.requests[0], &Options { route, ..Options::default() }).unwrap();
    let (read, computed) = (by(Route::Auto), by(Route::Determinants));
    assert_eq!(read.value, Expr::constant(Exact::integer(2)), "S(S+1) for S = 1");
    assert_eq!(read.s_z, Expr::constant(Exact::zero()));
    assert_eq!((&read.value, &read.s_z), (&computed.value, &computed.s_z));
    // 40 open shells, too many to expand: the spin is still known
    let forty: String = (1..=20)
        .chain((0..20).rev())
        .map(|t| if t % 2 == 0 { format!("{},", t / 2) } else { format!("{t}/2,") })
        .collect();
    let program = parse(
        "forty.spinfold",
        &format!(
            "orbitals {0}\nspace core\ncsf X = | core^2 {0} | S=0 path={1}\nspin X\n",
            shells(40),
            forty.trim_end_matches(',')
        ),
    )
    .unwrap();
    let d = derive(&program, &program.requests[0], &Options::default()).unwrap();
    assert_eq!(d.value, Expr::constant(Exact::zero()));
    assert!(d.notes[0].contains("without expanding the 137846528820 determinants"), "{:?}", d.notes);
}

#[test]
fn coincidence_cases_are_counted_before_any_is_derived() {
    // 7 occupied and 6 virtual generic indices: 877 x 203 = 178031 cases (Bell numbers)
    let input = "space occ: i j k l m n o\nspace vir: a b c d e f\ndet ref = | occ^2 |\n\
                 element ref[i j k' l -> a b c' d] ref[m n' o -> e f' a]\n";
    let program = parse("cases.spinfold", input).unwrap();
    let error = derive(&program, &program.requests[0], &Options::default()).unwrap_err();
    let report = error.render();
    assert!(report.contains("cases.spinfold:4:1"), "{report}");
    assert!(report.contains("coincide in 178031 cases, which exceeds the limit of 50000 cases"), "{report}");
    assert!(report.contains("--max-cases") && report.contains("--distinct"), "{report}");
    assert_eq!(error.exit_code(), 2);
    // under --distinct the indices are all different: one case
    let distinct = Options { distinct: true, ..Options::default() };
    assert!(derive(&program, &program.requests[0], &distinct).is_ok());
    // 10 indices of one space: B(10) = 115975 cases; the limit is adjustable
    let ten =
        parse("ten.spinfold", "space act: t u v w x y z q r s\nenergy | t u v w x y z q r s |\n").unwrap();
    let report = derive(&ten, &ten.requests[0], &Options::default()).unwrap_err().render();
    assert!(report.contains("115975 cases"), "{report}");
    let six = parse("six.spinfold", "space act: t u v w x y\nenergy | t u v w x y |\n").unwrap();
    assert!(derive(&six, &six.requests[0], &Options { max_cases: 202, ..Options::default() }).is_err());
    assert!(derive(&six, &six.requests[0], &Options { max_cases: 203, ..Options::default() }).is_ok());
}

//! Spin-adapted excitations, `csf X = ref[i -> a] S=0`: the open shells that an excitation of
//! a closed-shell determinant makes (holes, then particles) are coupled as `csf` couples an
//! explicit determinant. Specification:
//! - the singlet single is (ref[i -> a] + ref[i' -> a'])/sqrt(2), the M = 0 triplet is
//!   −(ref[i -> a] − ref[i' -> a'])/sqrt(2), the M = ±1 triplets are ref[i' -> a] and
//!   −ref[i -> a'], and their energies are the diagonal CIS elements;
//! - in general the function is the coupled function of | C h1 .. hn p1 .. pn |, the closed
//!   part C first, exactly what `csf` makes of that determinant written out;
//! - <S²> and <S_z> are exact, read off the coupling and from the determinants alike;
//! - open shells that could coincide (two indices of one space) need `--distinct`, or the
//!   definition is refused, naming the cases;
//! - these states work in every request, and with real integrals they give water's diagonal
//!   CIS energies.

mod common;

use spinfold::{
    Checked, DEFAULT_SEED, Exact, Expr, Limits, Options, Program, Route, derive, derive_checked, parse,
    parse_with,
};
use std::process::Command;

const SINGLES: &str = "space occ: i j\nspace vir: a b\ndet ref = | occ^2 |\n\
    csf S = ref[i -> a] S=0\n\
    csf T = ref[i -> a] S=1 M=0\n\
    csf Tup = ref[i -> a] S=1\n\
    csf Tdown = ref[i -> a] S=1 M=-1\n\
    state Sh = (ref[i -> a] + ref[i' -> a'])/sqrt(2)\n\
    state Th = (ref[i -> a] - ref[i' -> a'])/sqrt(2)\n\
    det ia = ref[i -> a]\n\
    csf Sia = ia S=0\n";

/// Derives and verifies every request; every one must have been checked by brute force.
fn checked(program: &Program, options: &Options) -> Vec<Expr> {
    derive_checked(program, options, Some(DEFAULT_SEED))
        .unwrap()
        .into_iter()
        .map(|(d, report): Checked| {
            let report = report.expect("a report");
            assert!(report.checks > 0 && report.not_checked.is_none(), "{}: {report:?}", d.text);
            d.value
        })
        .collect()
}

fn constant(n: i64) -> Expr {
    Expr::constant(Exact::integer(n))
}

#[test]
fn singles_are_the_hand_built_singlet_and_triplets() {
    let input = format!(
        "{SINGLES}energy S\nenergy Sh\noverlap S Sh\nenergy T\nenergy Th\noverlap T Th\n\
         overlap Tup ref[i' -> a]\noverlap Tdown ref[i -> a']\nenergy Tup\noverlap Sia S\n"
    );
    let program = parse("singles.spinfold", &input).unwrap();
    // exact expressions, each checked against brute-force determinant algebra at every
    // assignment of i, j, a, b
    let v = checked(&program, &Options::default());
    assert_eq!(v[0], v[1], "the singlet has the hand-built singlet's energy");
    assert_eq!(v[2], constant(1), "and is that state");
    assert_eq!(v[3], v[4], "the M = 0 triplet has the hand-built triplet's energy");
    assert_eq!(v[5], constant(-1), "and is that state with the opposite sign");
    assert_eq!(v[6], constant(1), "M = 1: the determinant ref[i' -> a]");
    assert_eq!(v[7], constant(-1), "M = -1: the determinant -ref[i -> a']");
    assert_eq!(v[8], v[3], "every triplet component has one energy");
    assert_ne!(v[0], v[3]);
    assert_eq!(v[9], constant(1), "a `det` that is an excitation couples as that excitation");
    let terms = |name: &str| program.states.iter().find(|s| s.name == name).unwrap().state.terms.len();
    assert_eq!((terms("S"), terms("T"), terms("Tup"), terms("Tdown")), (2, 2, 1, 1));
}

#[test]
fn singlet_and_triplet_energies_are_the_diagonal_cis_elements() {
    // E_ref + f_aa − f_ii + 2 (ia|ia) − (ii|aa) for the singlet, without 2 (ia|ia) for the
    // triplet (common practice); K_ia = (ia|ia) and J_ia = (ii|aa) for real orbitals
    let program = parse("cis.spinfold", &format!("{SINGLES}energy S\nenergy T\nenergy Tdown\n")).unwrap();
    let lines =
        common::expression_lines(&program, &Options { fock: true, ..Options::default() }, DEFAULT_SEED);
    assert_eq!(lines[0], "= E_ref - f_ii + f_aa - J_ia + 2 K_ia");
    assert_eq!(lines[1], "= E_ref - f_ii + f_aa - J_ia");
    assert_eq!(lines[2], lines[1]);
}

/// `csfs X = ref[...]` and `csfs Y = | core^2 x^2 y^2 z^2 <the open shells in order> |` over
/// named orbitals; the reference holds the holes in alphabetical order, each before one of the
/// doubly occupied orbitals x, y, z.
fn excitation_against_written(holes: &str, particles: &str, s: &str, m: &str) -> String {
    let open = format!("{holes} {particles}");
    let mut sorted: Vec<&str> = holes.split(' ').collect();
    sorted.sort();
    let reference: Vec<String> =
        sorted.iter().zip(["x", "y", "z"]).flat_map(|(h, o)| [format!("{h}^2"), format!("{o}^2")]).collect();
    let closed: Vec<&str> = ["x^2", "y^2", "z^2"][..sorted.len()].to_vec();
    format!(
        "orbitals x y z {open}\nspace core\ndet ref = | core^2 {} |\n\
         csfs X = ref[{holes} -> {particles}] S={s} M={m}\ncsfs Y = | core^2 {} {open} | S={s} M={m}\n",
        reference.join(" "),
        closed.join(" ")
    )
}

#[test]
fn an_excitation_couples_as_the_determinant_it_makes_written_out() {
    // holes listed out of their order in the determinant, doubly occupied orbitals around them
    for (holes, particles, s, m) in [
        ("p", "r", "0", "0"),
        ("p", "r", "1", "-1"),
        ("q p", "r s", "0", "0"),
        ("q p", "r s", "1", "1"),
        ("q p", "s r", "1", "0"),
        ("t p q", "r s u", "1", "-1"),
        ("t p q", "r s u", "2", "1"),
    ] {
        let input = excitation_against_written(holes, particles, s, m);
        let members = parse("x.spinfold", &input).unwrap().states.len() / 2;
        let requests: String =
            (1..=members).map(|k| format!("overlap X.{k} Y.{k}\nenergy X.{k}\nenergy Y.{k}\n")).collect();
        let program = parse("x.spinfold", &format!("{input}{requests}")).unwrap();
        let v = checked(&program, &Options::default());
        for member in v.chunks(3) {
            assert_eq!(member[0], constant(1), "{input}");
            assert_eq!(member[1], member[2], "{input}");
        }
        // the spin-algebra route reads the same function off its coupling
        for (k, request) in program.requests.iter().enumerate().filter(|(k, _)| k % 3 == 1) {
            let options = Options { route: Route::SpinAlgebra, ..Options::default() };
            let d = derive(&program, request, &options).unwrap();
            assert!(d.notes.iter().any(|n| n.contains("spin-coupling algebra")), "{input}");
            assert_eq!(d.value, v[k], "{input}{}", request.text);
        }
    }
}

#[test]
fn generic_doubly_occupied_orbitals_excite_as_written_ones() {
    // i, j: two doubly occupied generic orbitals of an open space; under --distinct
    let input = "space act: i j a b\nspace core\ndet ref = | core^2 i^2 j^2 |\n\
                 csfs X = ref[j i -> b a] S=0\ncsfs Y = | core^2 j i b a | S=0\n\
                 overlap X.1 Y.1\noverlap X.2 Y.2\noverlap X.1 Y.2\n";
    let limits = Limits { distinct: true, ..Limits::default() };
    let program = parse_with("act.spinfold", input, limits).unwrap();
    let v = checked(&program, &Options { distinct: true, ..Options::default() });
    assert_eq!(v, [constant(1), constant(1), constant(0)]);
}

#[test]
fn spin_is_exact() {
    // singles in any case; doubles of one space with --distinct; every path, several M
    let input = "space occ: i j\nspace vir: a b\ndet ref = | occ^2 |\n\
                 csf S = ref[i -> a] S=0\ncsf T = ref[i -> a] S=1 M=-1\n\
                 csfs D = ref[i j -> a b] S=0\ncsfs E = ref[i j -> a b] S=1 M=0\ncsf Q = ref[i j -> a b] S=2 M=1\n\
                 spin S\nspin T\nspin D.1\nspin D.2\nspin E.1\nspin E.2\nspin E.3\nspin Q\n";
    let expected = [(0, 0), (2, -1), (0, 0), (0, 0), (2, 0), (2, 0), (2, 0), (6, 1)];
    let program = parse_with("spin.spinfold", input, Limits { distinct: true, ..Limits::default() }).unwrap();
    for route in [Route::Auto, Route::Determinants] {
        let options = Options { distinct: true, route, ..Options::default() };
        for (request, &(s_squared, m)) in program.requests.iter().zip(&expected) {
            let d = derive(&program, request, &options).unwrap();
            assert_eq!(d.value, constant(s_squared), "{}", request.text);
            assert_eq!(d.s_z, constant(m), "{}", request.text);
            assert!(d.notes.is_empty(), "an eigenfunction draws no warning: {:?}", d.notes);
        }
    }
    // and against brute force
    checked(&program, &Options { distinct: true, ..Options::default() });
}

#[test]
fn doubles_of_one_space_are_orthonormal_spin_functions_under_distinct() {
    let input = "space occ: i j\nspace vir: a b\ndet ref = | occ^2 |\ncsfs D = ref[i j -> a b] S=0\n\
                 overlap D.1 D.1\noverlap D.2 D.2\noverlap D.1 D.2\nelement ref D.1\n";
    let program = parse_with("d.spinfold", input, Limits { distinct: true, ..Limits::default() }).unwrap();
    let v = checked(&program, &Options { distinct: true, ..Options::default() });
    assert_eq!(v[..3], [constant(1), constant(1), constant(0)]);
    assert!(!v[3].is_zero());
}

fn error_of(input: &str) -> String {
    parse("bad.spinfold", input).unwrap_err().render()
}

#[test]
fn open_shells_that_can_coincide_are_refused_naming_the_cases() {
    let base = "space occ: i j k\nspace vir: a b\nspace lone: n\nspace ryd: r\ndet ref = | occ^2 lone^2 |\n";
    let report = error_of(&format!("{base}csf D = ref[i j -> a b] S=0 path=1/2,0,1/2,0\n"));
    assert!(
        report.contains("bad.spinfold:6:9: the open shells of `ref[i j -> a b]` depend on which"),
        "{report}"
    );
    assert!(report.contains("when i = j the open shells are a, b only"), "{report}");
    assert!(report.contains("when a = b the open shells are i, j only"), "{report}");
    assert!(report.contains("--distinct"), "{report}");
    let triple = error_of(&format!("{base}csfs D = ref[i j k -> a b r] S=1/2\n"));
    assert!(triple.contains("when i = j the open shells are k, a, b, r only; when i = k"), "{triple}");
    // allowed: indices of different spaces, or --distinct
    parse("ok.spinfold", &format!("{base}csf D = ref[i n -> a r] S=0 path=1/2,0,1/2,0\n")).unwrap();
    let distinct = Limits { distinct: true, ..Limits::default() };
    parse_with("ok.spinfold", &format!("{base}csfs D = ref[i j -> a b] S=0\n"), distinct).unwrap();
}

#[test]
fn the_command_line_passes_distinct_to_the_definitions() {
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("double.spinfold");
    std::fs::write(
        &file,
        "space occ: i j\nspace vir: a b\ndet ref = | occ^2 |\ncsf D = ref[i j -> a b] S=2 M=0\nspin D\n",
    )
    .unwrap();
    let run =
        |args: &[&str]| Command::new(env!("CARGO_BIN_EXE_spinfold")).args(args).arg(&file).output().unwrap();
    let refused = run(&["derive"]);
    assert_eq!(refused.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&refused.stderr).contains("when i = j the open shells are a, b only"));
    let derived = run(&["derive", "--distinct", "--ascii"]);
    assert_eq!(derived.status.code(), Some(0), "{}", String::from_utf8_lossy(&derived.stderr));
    assert!(String::from_utf8_lossy(&derived.stdout).contains("<S^2> = 6"));
    assert_eq!(run(&["states"]).status.code(), Some(2));
    let listed = run(&["states", "--distinct"]);
    assert_eq!(listed.status.code(), Some(0));
    // S = 2, M = 0: every choice of two alpha shells among four
    assert!(String::from_utf8_lossy(&listed.stdout).contains("D  (6 determinant(s))"));
}

#[test]
fn operands_that_cannot_be_excited_into_open_shells_are_refused() {
    let base = "orbitals p\nspace occ: i j\nspace vir: a b\ndet ref = | occ^2 |\n";
    let cases = [
        ("csf X = ref[i -> a][j -> b] S=0", "`ref[i -> a][j -> b]` applies 2 excitations"),
        ("csf X = ref[i' -> a] S=0", "`i'` carries a spin mark"),
        (
            "csf X = ref[a -> b] S=0",
            "`a` cannot be a hole of this excitation: it is not doubly occupied in `ref`",
        ),
        ("csf X = ref[i -> j] S=0", "`j` cannot be a particle of this excitation: it is occupied in `ref`"),
        ("csf X = | occ^2 p |[i -> a] S=1/2 path=1/2,0,1/2", "`p` is singly occupied in `| occ^2 p |`"),
        ("state R = | occ^2 |\ncsf X = R[i -> a] S=0", "`R` is a state, but a determinant is needed here"),
        ("csf X = ref[i -> a] S=1/2", "2 open shell(s) cannot couple to S = 1/2"),
        ("csf X = (ref)[i -> a] S=0", "expected a determinant `| ... |` or the name of a `det`"),
    ];
    for (line, message) in cases {
        let report = error_of(&format!("{base}{line}\n"));
        assert!(report.contains(message), "{line}\n{report}");
        let line_number = 4 + line.lines().count();
        assert!(report.contains(&format!("bad.spinfold:{line_number}:")), "{report}");
    }
}

#[test]
fn coupled_excitations_work_in_every_request() {
    let input = format!(
        "{SINGLES}csf S2 = ref[j -> b] S=0\nstate Sh2 = (ref[j -> b] + ref[j' -> b'])/sqrt(2)\n\
         element S S2\nelement Sh Sh2\n\
         overlap S[a -> b] ref[i -> b]\n\
         energy (S + T)\nenergy ref[i' -> a']\n\
         element ref S\noverlap (2 S) Sh\noverlap Sh ref[i -> a]\n"
    );
    let program = parse("requests.spinfold", &input).unwrap();
    let v = checked(&program, &Options::default());
    assert_eq!(v[0], v[1], "an element between singlets, deltas where i = j or a = b");
    // S[a -> b] = ref[i -> b]/sqrt(2), also when a = b (then S itself)
    assert_eq!(v[2], v[7], "sqrt(2)/2");
    assert_eq!(v[3], v[4], "S + T = sqrt(2) ref[i' -> a']");
    assert!(!v[5].is_zero(), "the singlet couples to the reference through f_ia");
    assert_eq!(v[6], constant(2));
}

#[test]
fn too_large_to_expand_keeps_a_meaningful_coupling() {
    // four named open shells, S = 0: 6 determinants, past a limit of 5; energy and spin then
    // come from the coupling alone, and equal what the determinants give
    let input = "orbitals p q r s\nspace core\ndet ref = | core^2 p^2 q^2 |\n\
                 csf X = ref[p q -> r s] S=0 path=1/2,1,1/2,0\nenergy X\nspin X\n";
    let small =
        parse_with("big.spinfold", input, Limits { max_determinants: 5, ..Limits::default() }).unwrap();
    let full = parse("big.spinfold", input).unwrap();
    assert!(small.states[1].state.is_unexpanded());
    for k in 0..2 {
        let options = Options::default();
        let kept = derive(&small, &small.requests[k], &options).unwrap();
        let expanded = derive(&full, &full.requests[k], &options).unwrap();
        assert_eq!(kept.value, expanded.value, "{}", full.requests[k].text);
    }
    // with generic open shells the spin algebra does not apply, and an energy is refused
    let generic = "space occ: i\nspace vir: a\nspace lone: n\nspace ryd: r\ndet ref = | occ^2 lone^2 |\n\
                   csf X = ref[i n -> a r] S=0 path=1/2,1,1/2,0\nenergy X\n";
    let program =
        parse_with("g.spinfold", generic, Limits { max_determinants: 5, ..Limits::default() }).unwrap();
    let error = derive(&program, &program.requests[0], &Options::default()).unwrap_err().render();
    assert!(error.contains("determinants"), "{error}");
}

/// The diagonal CIS (TDA) energies recorded by tests/pyscf/make_cis_fixtures.py.
fn cis_reference() -> serde_json::Value {
    let path = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/fixtures/cis_water_reference.json");
    serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap()
}

#[test]
fn water_singlet_and_triplet_singles_are_the_pyscf_cis_diagonal() {
    // source: tests/fixtures/cis_water_reference.json, numpy from the same integral file
    // (E_ref + f_aa − f_ii + 2 (ia|ia) − (ii|aa), and without 2 (ia|ia)), cross-checked there
    // against PySCF CI vectors (direct_spin1) and PySCF's TDA matrix (tdscf.rhf.get_ab)
    let input = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/inputs/spin_adapted_singles_water.spinfold");
    let dump = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/fixtures/water_sto3g_rhf.fcidump");
    let output = Command::new(env!("CARGO_BIN_EXE_spinfold"))
        .args(["eval", input, "--integrals", dump, "--bind", "occ=1-5", "--bind", "vir=6-7", "--json"])
        .output()
        .unwrap();
    assert_eq!(output.status.code(), Some(0), "{}", String::from_utf8_lossy(&output.stderr));
    let results: serde_json::Value = serde_json::from_slice(&output.stdout).unwrap();
    let reference = cis_reference();
    let excitations = reference["excitations"].as_array().unwrap();
    let homo_lumo = |e: &&serde_json::Value| e["i"] == reference["homo"] && e["a"] == reference["lumo"];
    assert!(excitations.iter().any(|e| homo_lumo(&e)), "the reference holds HOMO -> LUMO");
    for (request, state) in [(0, "singlet"), (1, "triplet"), (2, "triplet")] {
        let rows = results["results"][request]["values"].as_array().unwrap();
        assert_eq!(rows.len(), excitations.len(), "one row per i, a");
        for expected in excitations {
            let row = rows
                .iter()
                .find(|r| r["indices"]["i"] == expected["i"] && r["indices"]["a"] == expected["a"])
                .unwrap();
            let (got, want) = (row["value"].as_f64().unwrap(), expected[state].as_f64().unwrap());
            assert!((got - want).abs() < 1e-9, "{state} {expected}: {got} vs {want}");
        }
    }
}

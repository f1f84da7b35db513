//! Excited configurations with generic indices: Brillouin's theorem, the singlet and triplet
//! single-excitation blocks, double excitations, and Kronecker deltas for coincident indices.
//! Numbers use the water integrals of a PySCF RHF run (tests/fixtures, general-purpose reference
//! library); forms are the standard textbook ones (from memory).

mod common;

use spinfold::{
    Binding, Bindings, Options, Program, compare, derive, derive_checked, evaluate_all, parse, read_dump,
};

/// Every request's expression as one ASCII line.
fn lines(program: &Program, options: &Options) -> Vec<String> {
    common::expression_lines(program, options, 11)
}

fn fixture(name: &str) -> String {
    format!("{}/tests/fixtures/{name}", env!("CARGO_MANIFEST_DIR"))
}

fn example(name: &str) -> Program {
    let path = format!("{}/examples/{name}", env!("CARGO_MANIFEST_DIR"));
    parse(name, &std::fs::read_to_string(path).unwrap()).unwrap()
}

const FOCK: Options = Options {
    distinct: false,
    max_determinants: 200_000,
    fock: true,
    route: spinfold::Route::Auto,
    max_cases: spinfold::MAX_CASES,
};

#[test]
fn cis_blocks_come_out_in_the_textbook_form() {
    let out = lines(&example("single_excitations.spinfold"), &FOCK);
    // requests: energy ref, energy ia, element ref S1, element S1 S2, element T1 T2, overlap S1 S2
    assert_eq!(out[0], "= E_ref");
    // singlet: δ_ij δ_ab E_ref + δ_ij f_ab − δ_ab f_ij + 2 (ia|jb) − (ij|ab)
    assert_eq!(out[3], "= delta_ij delta_ab E_ref + delta_ij f_ab - delta_ab f_ij - (ij|ab) + 2 (ia|jb)");
    // triplet (M = 0, minus combination): the same without 2 (ia|jb)
    assert_eq!(out[4], "= delta_ij delta_ab E_ref + delta_ij f_ab - delta_ab f_ij - (ij|ab)");
    assert_eq!(out[5], "= delta_ij delta_ab");
}

#[test]
fn brillouin_coupling_is_sqrt2_times_the_fock_element() {
    let program = example("single_excitations.spinfold");
    assert_eq!(lines(&program, &FOCK)[2], "= sqrt(2) f_ia");
    // without --fock the same in h and (pq|rs), the closed-space sum written out
    assert_eq!(
        lines(&program, &Options::default())[2],
        "= sqrt(2) h_ia + sum_{j in occ} (2sqrt(2) (ia|jj) - sqrt(2) (ij|aj))"
    );
}

#[test]
fn brillouin_coupling_vanishes_for_canonical_rhf_orbitals() {
    // canonical RHF orbitals of water from PySCF: <ref|H|S_i^a> = sqrt(2) f_ia = 0 (to 1e-7)
    let program = example("single_excitations.spinfold");
    let dump = read_dump(&fixture("water_sto3g_rhf.fcidump")).unwrap();
    let derived = derive_checked(&program, &Options::default(), None).unwrap();
    let binds: Vec<String> = ["occ=1-5", "vir=6-7"].map(String::from).to_vec();
    let bindings = Bindings::parse(&program, &binds, dump.header.norb).unwrap();
    let results = evaluate_all(&program, &derived, &bindings, &dump.integrals).unwrap();
    let brillouin = &results[2];
    assert_eq!(brillouin.request, "element ref S1");
    assert_eq!(brillouin.entries.len(), 10, "every i in occ, a in vir");
    for e in &brillouin.entries {
        assert!(e.value.abs() < 1e-7, "{:?}", e);
    }
    // and the reference energy is PySCF's RHF total energy
    let reference: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(fixture("pyscf_reference.json")).unwrap()).unwrap();
    let rhf = reference["cases"]["water_sto3g_rhf"]["energies"]["rhf"]["value"].as_f64().unwrap();
    assert!((results[0].entries[0].value - rhf).abs() < 1e-8);
}

#[test]
fn single_excitation_energy_relative_to_the_reference() {
    let program = example("single_excitations.spinfold");
    assert_eq!(lines(&program, &FOCK)[1], "= E_ref - f_ii + f_aa - J_ia + K_ia");
    // numerically, E(ia) - E_ref = eps_a - eps_i - J_ia + K_ia with PySCF's canonical orbital
    // energies for f_pp (water, RHF)
    let dump = read_dump(&fixture("water_sto3g_rhf.fcidump")).unwrap();
    let reference: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(fixture("pyscf_reference.json")).unwrap()).unwrap();
    let eps: Vec<f64> = reference["cases"]["water_sto3g_rhf"]["mo_energy"]["value"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_f64().unwrap())
        .collect();
    let derived = derive_checked(&program, &Options::default(), None).unwrap();
    let binds: Vec<String> = ["occ=1-5", "vir=6-7"].map(String::from).to_vec();
    let bindings = Bindings::parse(&program, &binds, dump.header.norb).unwrap();
    let results = evaluate_all(&program, &derived, &bindings, &dump.integrals).unwrap();
    let e_ref = results[0].entries[0].value;
    use spinfold::Integrals;
    for e in &results[1].entries {
        let (i, a) = (e.indices[0].1 - 1, e.indices[1].1 - 1);
        let g = &dump.integrals;
        let expected = eps[a] - eps[i] - g.eri(i, i, a, a) + g.eri(i, a, a, i);
        assert!((e.value - e_ref - expected).abs() < 1e-8, "i={} a={}", i + 1, a + 1);
    }
}

#[test]
fn double_excitation_elements() {
    let out = lines(&example("double_excitations.spinfold"), &Options::default());
    assert_eq!(out[0], "= K_ia"); // (ia|ia): both electrons of i to a
    assert_eq!(out[1], "= (ia|jb)"); // alpha-beta double
    assert_eq!(out[2], "= (ia|jb) - (ib|ja)"); // both alpha: direct minus exchange
}

#[test]
fn distinct_indices_drop_the_deltas() {
    let program = example("single_excitations.spinfold");
    let distinct = Options { distinct: true, ..FOCK };
    assert_eq!(lines(&program, &distinct)[3], "= -(ij|ab) + 2 (ia|jb)");
}

#[test]
fn every_formula_matches_brute_force_with_pyscf_integrals() {
    // The derived expressions evaluated with real water integrals against brute-force
    // determinant algebra on the same integrals, at every index assignment, coincidences included.
    let dump = read_dump(&fixture("water_sto3g_rhf.fcidump")).unwrap();
    let mut checked = 0;
    for name in ["single_excitations.spinfold", "double_excitations.spinfold"] {
        let program = example(name);
        for request in &program.requests {
            for options in [Options::default(), FOCK] {
                let d = derive(&program, request, &options).unwrap();
                let mut assignments = vec![vec![]];
                for (k, ix) in program.indices.iter().enumerate() {
                    if !d.free_indices.contains(&(k as u32)) {
                        continue;
                    }
                    let members: Vec<usize> = if program.spaces[ix.space as usize].name == "occ" {
                        (0..5).collect()
                    } else {
                        (5..7).collect()
                    };
                    assignments = assignments
                        .into_iter()
                        .flat_map(|a: Vec<(usize, usize)>| {
                            members.iter().map(move |&m| [a.clone(), vec![(k, m)]].concat())
                        })
                        .collect();
                }
                for assignment in assignments {
                    let mut binding = Binding {
                        orbitals: vec![],
                        spaces: vec![(0..5).collect(), (5..7).collect()],
                        indices: vec![None; program.indices.len()],
                    };
                    for (k, m) in assignment {
                        binding.indices[k] = Some(m);
                    }
                    if let Some(pairs) = compare(&program, request, &d, &binding, &dump.integrals).unwrap() {
                        for c in pairs {
                            assert!((c.derived - c.brute_force).abs() < 1e-10, "{}: {:?}", request.text, c);
                            checked += 1;
                        }
                    }
                }
            }
        }
    }
    assert!(checked > 500, "{checked} comparisons");
}

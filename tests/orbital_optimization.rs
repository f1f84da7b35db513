//! `spinfold optimize`: the orbital gradient against finite differences for every bundled
//! example, convergence to PySCF's SCF energies from rotated orbitals, the redundancy and
//! symmetry rules for rotations, the files it writes, and its errors.

mod common;

use faer::Mat;
use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use spinfold::{
    Bindings, DumpHeader, IntegralDump, IntegralTable, Prepared, RequestKind, exp_antisymmetric, parse,
    prepare, read_dump, rotate_all, write_dump,
};
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn fixture(name: &str) -> String {
    format!("{}/tests/fixtures/{name}", env!("CARGO_MANIFEST_DIR"))
}

fn example(name: &str) -> String {
    format!("{}/examples/{name}", env!("CARGO_MANIFEST_DIR"))
}

fn spinfold(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_spinfold")).args(args).output().expect("the binary runs")
}

fn stdout_json(output: &Output) -> serde_json::Value {
    assert!(output.status.success(), "{}", String::from_utf8_lossy(&output.stderr));
    serde_json::from_slice(&output.stdout).expect("JSON on standard output")
}

/// A seeded random rotation exp(κ) of n orbitals, κ_pq uniform in (−scale, scale), rotating
/// only orbitals of one symmetry label when `orbsym` is given.
fn random_rotation(n: usize, seed: u64, scale: f64, orbsym: Option<&[u32]>) -> Mat<f64> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut kappa = Mat::<f64>::zeros(n, n);
    for p in 0..n {
        for q in 0..p {
            if orbsym.is_none_or(|s| s[p] == s[q]) {
                let x = rng.random_range(-scale..scale);
                kappa[(p, q)] = x;
                kappa[(q, p)] = -x;
            }
        }
    }
    exp_antisymmetric(kappa.as_ref()).expect("the exponential of a small matrix")
}

/// The integral file `name` in randomly rotated orbitals, written into `dir`.
fn rotated_fixture(dir: &Path, name: &str, seed: u64, scale: f64) -> PathBuf {
    let dump = read_dump(&fixture(name)).unwrap();
    let u = random_rotation(dump.header.norb, seed, scale, dump.header.orbsym.as_deref());
    let path = dir.join(format!("rotated_{seed}_{name}"));
    std::fs::write(&path, write_dump(&dump.header, &rotate_all(&dump.integrals, u.as_ref()))).unwrap();
    path
}

fn write_input(dir: &Path, name: &str, text: &str) -> String {
    let path = dir.join(name);
    std::fs::write(&path, text).unwrap();
    path.display().to_string()
}

/// Central differences of the energy along each rotation, against the analytic gradient.
fn check_gradient(prepared: &Prepared, ints: &IntegralTable, orbitals: &Mat<f64>, what: &str) {
    let n = orbitals.nrows();
    let (_, analytic) = prepared.energy_gradient(ints, orbitals.as_ref()).unwrap();
    let step = 2e-5;
    let energy_along = |k: usize, x: f64| {
        let (p, q) = prepared.pairs()[k];
        let mut kappa = Mat::<f64>::zeros(n, n);
        kappa[(p, q)] = x;
        kappa[(q, p)] = -x;
        let u = orbitals * exp_antisymmetric(kappa.as_ref()).unwrap();
        prepared.energy_gradient(ints, u.as_ref()).unwrap().0
    };
    for (k, &g) in analytic.iter().enumerate() {
        let numeric = (energy_along(k, step) - energy_along(k, -step)) / (2.0 * step);
        assert!(
            (numeric - g).abs() < 1e-6,
            "{what}, pair {:?}: analytic {g}, numeric {numeric}",
            prepared.pairs()[k]
        );
    }
    assert!(analytic.iter().any(|g| g.abs() > 1e-3), "{what}: a gradient of zeros checks nothing");
}

/// Every energy request of every bundled example, with its names bound to orbitals of a
/// seeded random integral table (each space two orbitals more than its generic indices, every
/// index on its own member) at randomly rotated orbitals: the analytic gradient equals central
/// differences of the energy (the definition of a derivative), 1e-6.
#[test]
fn the_gradient_equals_central_differences_for_every_bundled_example() {
    let mut checked = 0;
    for (name, text) in common::examples() {
        let program = parse(&name, &text).unwrap();
        let mut next = 1usize;
        let mut specs = vec![];
        for (s, space) in program.spaces.iter().enumerate() {
            let members: Vec<usize> = (next..next + 2 + space.indices.len()).collect();
            next += members.len();
            specs.push(format!("{}={}-{}", space.name, members[0], members[members.len() - 1]));
            let indices = program.indices.iter().filter(|i| i.space as usize == s);
            for (index, member) in indices.zip(&members) {
                specs.push(format!("{}={member}", index.name));
            }
        }
        for orbital in &program.orbitals {
            specs.push(format!("{}={next}", orbital.name));
            next += 1;
        }
        let norb = next + 1;
        let dump = IntegralDump {
            header: DumpHeader { norb, nelec: None, ms2: None, orbsym: None, isym: None },
            integrals: IntegralTable::random(norb, 100 + checked),
            warnings: vec![],
        };
        let bindings = Bindings::parse(&program, &specs, norb).unwrap();
        let orbitals = random_rotation(norb, 7 + checked, 0.3, None);
        for request in program.requests.iter().filter(|r| r.kind == RequestKind::Energy) {
            let prepared = prepare(&program, request, &bindings, &dump, 200_000).unwrap();
            check_gradient(&prepared, &dump.integrals, &orbitals, &format!("{name}: {}", request.text));
            checked += 1;
        }
    }
    assert!(checked >= 15, "only {checked} energy requests among the examples");
}

/// The RHF energy of water (tests/fixtures/pyscf_reference.json, PySCF RHF) from the closed
/// shell's energy expression, starting from the RHF orbitals under a large random rotation.
#[test]
fn a_closed_shell_from_rotated_orbitals_reaches_the_rhf_energy() {
    let reference = common::pyscf_reference();
    let rhf = common::recorded(&reference, "/cases/water_sto3g_rhf/energies/rhf/value");
    let dir = tempfile::tempdir().unwrap();
    for seed in [1, 2] {
        let integrals = rotated_fixture(dir.path(), "water_sto3g_rhf.fcidump", seed, 1.0);
        let out = spinfold(&[
            "optimize",
            &example("closed_shell.spinfold"),
            "--integrals",
            integrals.to_str().unwrap(),
            "--bind",
            "occ=1-5",
            "--bind",
            "core=1-2",
            "--bind",
            "val=3-5",
            "--json",
        ]);
        let json = stdout_json(&out);
        for result in json["results"].as_array().unwrap() {
            let value = result["value"].as_f64().unwrap();
            assert!(
                (value - rhf).abs() < 1e-8,
                "seed {seed}: {} gives {value}, PySCF RHF {rhf}",
                result["request"]
            );
            assert!(result["gradient_norm"].as_f64().unwrap() < 1e-6);
            assert!(result["iterations"].as_u64().unwrap() > 0);
        }
        // progress: one line per iteration on standard error
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert!(stderr.lines().any(|l| l.contains("iteration") && l.contains("gradient")), "{stderr}");
    }
}

/// The high-spin triplet of CH2 (PySCF ROHF, pyscf_reference.json) from rotated ROHF orbitals.
#[test]
fn a_high_spin_triplet_from_rotated_orbitals_reaches_the_rohf_energy() {
    let reference = common::pyscf_reference();
    let rohf = common::recorded(&reference, "/cases/ch2_triplet_631g_rohf/energies/rohf/value");
    let dir = tempfile::tempdir().unwrap();
    let integrals = rotated_fixture(dir.path(), "ch2_triplet_631g_rohf.fcidump", 3, 0.5);
    let out = spinfold(&[
        "optimize",
        &example("high_spin.spinfold"),
        "--integrals",
        integrals.to_str().unwrap(),
        "--bind",
        "core=1-3",
        "--bind",
        "p=4",
        "--bind",
        "q=5",
        "--bind",
        "r=6",
        "--json",
    ]);
    let json = stdout_json(&out);
    let triplet = &json["results"][0];
    assert_eq!(triplet["request"], "energy triplet");
    let value = triplet["value"].as_f64().unwrap();
    assert!((value - rohf).abs() < 1e-8, "triplet {value}, PySCF ROHF {rohf}");
    assert!(triplet.get("coefficients").is_none());
    // the quartet on the same file is a cation: its electron count is said
    let warnings = json["warnings"].as_array().unwrap();
    assert!(warnings.iter().any(|w| w.as_str().unwrap().contains("NELEC=8")), "{warnings:?}");
}

/// Optimized integrals written out give the optimized energy again through `eval`; the
/// orbitals file holds an orthogonal matrix.
#[test]
fn written_integrals_and_orbitals_reproduce_the_optimized_state() {
    let dir = tempfile::tempdir().unwrap();
    let integrals = rotated_fixture(dir.path(), "ch2_triplet_631g_rohf.fcidump", 4, 0.3);
    let input =
        write_input(dir.path(), "triplet.spinfold", "orbitals p q\nspace core\nenergy | core^2 p q |\n");
    let (out_ints, out_orbs) = (dir.path().join("optimized.fcidump"), dir.path().join("orbitals.txt"));
    let binds = ["--bind", "core=1-3", "--bind", "p=4", "--bind", "q=5"];
    let mut args = vec!["optimize", &input, "--integrals", integrals.to_str().unwrap(), "--json"];
    args.extend(binds);
    args.extend([
        "--write-integrals",
        out_ints.to_str().unwrap(),
        "--write-orbitals",
        out_orbs.to_str().unwrap(),
    ]);
    let optimized = stdout_json(&spinfold(&args))["results"][0]["value"].as_f64().unwrap();
    let mut eval = vec!["eval", &input, "--integrals", out_ints.to_str().unwrap(), "--json"];
    eval.extend(binds);
    let again = stdout_json(&spinfold(&eval))["results"][0]["value"].as_f64().unwrap();
    assert!((again - optimized).abs() < 1e-9, "eval on the written file {again}, optimized {optimized}");
    let written = read_dump(out_ints.to_str().unwrap()).unwrap();
    assert_eq!(written.header.orbsym, Some(vec![1; 13]));
    assert_eq!((written.header.nelec, written.header.ms2), (Some(8), Some(2)));

    let text = std::fs::read_to_string(&out_orbs).unwrap();
    let mut lines = text.lines().filter(|l| !l.starts_with('#'));
    assert_eq!(lines.next(), Some("spinfold-orbitals 1"));
    assert_eq!(lines.next(), Some("norb 13"));
    let rows: Vec<Vec<f64>> =
        lines.map(|l| l.split_whitespace().map(|x| x.parse().unwrap()).collect()).collect();
    assert_eq!(rows.len(), 13);
    for p in 0..13 {
        for q in 0..13 {
            let product: f64 = (0..13).map(|m| rows[m][p] * rows[m][q]).sum();
            assert!(
                (product - if p == q { 1.0 } else { 0.0 }).abs() < 1e-10,
                "columns {p} and {q}: {product}"
            );
        }
    }
}

fn water_pairs(input: &str, binds: &[&str], orbsym: Option<&str>) -> Vec<(usize, usize)> {
    let program = parse("pairs.spinfold", input).unwrap();
    let mut text = std::fs::read_to_string(fixture("water_sto3g_rhf.fcidump")).unwrap();
    if let Some(labels) = orbsym {
        text = text.replace("ORBSYM=1,1,1,1,1,1,1", &format!("ORBSYM={labels}"));
    }
    let dump = spinfold::parse_dump("water", &text).unwrap();
    let binds: Vec<String> = binds.iter().map(|s| s.to_string()).collect();
    let bindings = Bindings::parse(&program, &binds, 7).unwrap();
    prepare(&program, &program.requests[0], &bindings, &dump, 1000).unwrap().pairs().to_vec()
}

/// Rotations that cannot change the energy are left out (common practice in SCF): within the
/// closed space, among empty orbitals, between parallel open shells; between the open shells of
/// the open-shell singlet they stay; a pair function keeps g–u unless its span is the whole
/// two-orbital space.
#[test]
fn redundant_rotations_are_left_out() {
    // water: 5 doubly occupied of 7 orbitals: only occupied-empty pairs (0-based, p > q)
    let closed = water_pairs("space occ\nenergy | occ^2 |\n", &["occ=1-5"], None);
    let expected: Vec<(usize, usize)> = (5..7).flat_map(|p| (0..5).map(move |q| (p, q))).collect();
    assert_eq!(closed, expected);
    // high-spin triplet over core 1-3: the open shells 4, 5 do not rotate into each other
    let triplet =
        water_pairs("orbitals a b\nspace core\nenergy | core^2 a b |\n", &["core=1-3", "a=4", "b=5"], None);
    assert!(!triplet.contains(&(4, 3)));
    assert!(!triplet.contains(&(1, 0)) && !triplet.contains(&(6, 5)));
    assert_eq!(triplet.len(), 2 * 3 + 2 * 3 + 2 * 2);
    // open-shell singlet: a–b changes the energy
    let singlet =
        "orbitals a b\nspace core\nstate S = (| core^2 a b' | - | core^2 a' b |)/sqrt(2)\nenergy S\n";
    let open = water_pairs(singlet, &["core=1-3", "a=4", "b=5"], None);
    assert!(open.contains(&(4, 3)));
    assert_eq!(open.len(), triplet.len() + 1);
    // a pair function of g², u² keeps g–u; with the open-shell singlet added it spans every
    // two-electron singlet of g and u, and g–u only mixes it within
    let pair = "orbitals g u\nspace core\ncoefficients cg cu\nstate P = cg | core^2 g^2 | + cu | core^2 u^2 |\nenergy P\n";
    assert!(water_pairs(pair, &["core=1-4", "g=5", "u=6"], None).contains(&(5, 4)));
    let full = "orbitals g u\nspace core\ncoefficients cg cu co\nstate P = cg | core^2 g^2 | + cu | core^2 u^2 | + co (| core^2 g u' | - | core^2 g' u |)\nenergy P\n";
    assert!(!water_pairs(full, &["core=1-4", "g=5", "u=6"], None).contains(&(5, 4)));
}

/// With ORBSYM, only orbitals of one symmetry label rotate into each other.
#[test]
fn orbitals_of_different_symmetry_do_not_rotate() {
    let labels = [1u32, 1, 2, 1, 3, 1, 2];
    let joined: Vec<String> = labels.iter().map(|l| l.to_string()).collect();
    let pairs = water_pairs("space occ\nenergy | occ^2 |\n", &["occ=1-5"], Some(&joined.join(",")));
    for &(p, q) in &pairs {
        assert_eq!(labels[p], labels[q], "pair {p}, {q}");
    }
    // occupied 0..5, empty 5, 6: the same-symmetry occupied-empty pairs
    assert_eq!(pairs, vec![(5, 0), (5, 1), (5, 3), (6, 2)]);
}

fn water_closed_shell(dir: &Path, extra: &[&str]) -> Output {
    let integrals = rotated_fixture(dir, "water_sto3g_rhf.fcidump", 5, 1.0);
    let input = write_input(dir, "closed.spinfold", "space occ\nenergy | occ^2 |\n");
    let mut args = vec!["optimize", &input, "--integrals", integrals.to_str().unwrap(), "--bind", "occ=1-5"];
    args.extend(extra);
    spinfold(&args)
}

/// A run that does not converge in --max-iter is an error (exit status 1) that says where it
/// stopped and what to try.
#[test]
fn not_converging_is_an_error_saying_where_it_stopped() {
    let dir = tempfile::tempdir().unwrap();
    let out = water_closed_shell(dir.path(), &["--max-iter", "1"]);
    assert_eq!(out.status.code(), Some(1));
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(stderr.contains("did not converge") && stderr.contains("limit of 1 iterations"), "{stderr}");
    assert!(stderr.contains("gradient norm") && stderr.contains("--max-iter"), "{stderr}");
    assert!(out.stdout.is_empty());
}

#[test]
fn unbound_generic_indices_are_named() {
    let dir = tempfile::tempdir().unwrap();
    let input = write_input(
        dir.path(),
        "single.spinfold",
        "space occ: i\nspace vir: a\ndet ref = | occ^2 |\nenergy ref[i -> a]\n",
    );
    let out = spinfold(&[
        "optimize",
        &input,
        "--integrals",
        &fixture("water_sto3g_rhf.fcidump"),
        "--bind",
        "occ=1-5",
        "--bind",
        "vir=6-7",
        "--bind",
        "a=6",
    ]);
    assert_eq!(out.status.code(), Some(2));
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(stderr.contains("not bound (i)") && stderr.contains("--bind i="), "{stderr}");
}

#[test]
fn bad_option_values_are_refused() {
    let dir = tempfile::tempdir().unwrap();
    for extra in
        [["--gradient-tol", "-1"], ["--gradient-tol", "abc"], ["--max-iter", "0"], ["--max-iter", "x"]]
    {
        let out = water_closed_shell(dir.path(), &extra);
        assert_eq!(out.status.code(), Some(2), "{extra:?}");
        assert!(String::from_utf8_lossy(&out.stderr).contains(extra[0]), "{extra:?}");
    }
}

/// The written files belong to one state: with two energy requests, the error names them.
#[test]
fn written_files_need_one_energy_request() {
    let dir = tempfile::tempdir().unwrap();
    let out_file = dir.path().join("out.fcidump");
    let out = spinfold(&[
        "optimize",
        &example("closed_shell.spinfold"),
        "--integrals",
        &fixture("water_sto3g_rhf.fcidump"),
        "--bind",
        "occ=1-5",
        "--bind",
        "core=1-2",
        "--bind",
        "val=3-5",
        "--write-integrals",
        out_file.to_str().unwrap(),
    ]);
    assert_eq!(out.status.code(), Some(2));
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(stderr.contains("`energy ground`, `energy split`"), "{stderr}");
    assert!(!out_file.exists());
}

/// Requests other than energies are skipped with a warning; free coefficients are reported
/// as `eval` reports a stationary energy's (the fixed part at its written weight).
#[test]
fn other_requests_are_skipped_and_free_coefficients_reported() {
    let out = spinfold(&[
        "optimize",
        &example("pair_function.spinfold"),
        "--integrals",
        &fixture("h2_sto3g_rhf.fcidump"),
        "--bind",
        "core=none",
        "--bind",
        "g=1",
        "--bind",
        "u=2",
        "--json",
    ]);
    let json = stdout_json(&out);
    let results = json["results"].as_array().unwrap();
    assert_eq!(results.len(), 2);
    // H2 in a minimal basis: the orbitals are fixed by symmetry, so the pair function is the
    // full CI (PySCF, pyscf_reference.json)
    let fci = common::recorded(&common::pyscf_reference(), "/cases/h2_sto3g_rhf/energies/fci/value");
    for r in results {
        assert!((r["value"].as_f64().unwrap() - fci).abs() < 1e-8, "{r}");
    }
    let p = &results[0]["coefficients"];
    assert!(p["cg"].as_f64().unwrap() > 0.9 && p["cu"].as_f64().unwrap() < 0.0, "{p}");
    // Q = g² − (cu/2) u² is P with the g² weight 1: cu(Q) = −2 cu(P)/cg(P)
    let (cg, cu) = (p["cg"].as_f64().unwrap(), p["cu"].as_f64().unwrap());
    assert!((results[1]["coefficients"]["cu"].as_f64().unwrap() + 2.0 * cu / cg).abs() < 1e-6);
}

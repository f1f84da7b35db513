//! Generated code for `density` requests: functions that fill γ and Γ, their energy, and the
//! generalized Fock matrix with the orbital gradient dE/dκ_pq = 2 (F_qp − F_pq), checked in
//! Python on water's orbitals against PySCF and finite differences, and in both languages by the
//! modules' own tests, which fail when a density element or the gradient's sign is wrong.

use serde_json::Value;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn root() -> &'static Path {
    Path::new(env!("CARGO_MANIFEST_DIR"))
}

fn output(command: &mut Command) -> (bool, String) {
    let out: Output = command.output().unwrap_or_else(|e| panic!("{command:?} could not start: {e}"));
    let text = format!("{}{}", String::from_utf8_lossy(&out.stdout), String::from_utf8_lossy(&out.stderr));
    (out.status.success(), text)
}

fn run(command: &mut Command) -> String {
    let (ok, text) = output(command);
    assert!(ok, "{command:?} failed:\n{text}");
    text
}

fn python() -> Command {
    let mut c = Command::new("python3");
    c.env("PYTHONDONTWRITEBYTECODE", "1");
    c
}

/// Whether python3 with NumPy and pytest is here; under CI a missing one is a failure.
fn python_ready(test: &str) -> bool {
    let ok = output(python().args(["-c", "import numpy, pytest"])).0;
    assert!(
        ok || std::env::var_os("CI").is_none(),
        "{test}: python3 with numpy and pytest is required under CI"
    );
    if !ok {
        eprintln!("skipping {test}: python3 with numpy and pytest not found");
    }
    ok
}

/// `input` derived by the command line `--to LANGUAGE` into `dir`; returns the module's path.
fn generate(dir: &Path, input: &str, language: &str) -> PathBuf {
    let source = dir.join("states.spinfold");
    std::fs::write(&source, input).unwrap();
    let module = dir.join(if language == "rust" { "states.rs" } else { "states.py" });
    run(Command::new(env!("CARGO_BIN_EXE_spinfold"))
        .args(["derive", "--to", language, "-o"])
        .arg(&module)
        .arg(&source));
    module
}

/// The closed shell core² a², the open-shell singlet of a and b over the core, their densities,
/// the transition densities between them, and the energies and element the densities give.
const WATER_STATES: &str = "orbitals a b
space core
det closed = | core^2 a^2 |
state singlet = (| core^2 a b' | - | core^2 a' b |)/sqrt(2)
density closed
density singlet
density closed singlet
energy closed
energy singlet
element closed singlet
";

/// The generated Python for WATER_STATES evaluated on water's RHF orbitals (STO-3G, core 1-4,
/// a = 5, b = 6) by tests/numpy/density_gradient.py.
fn water_numbers(dir: &Path) -> Value {
    let module = generate(dir, WATER_STATES, "python");
    let text = run(python().arg(root().join("tests/numpy/density_gradient.py")).arg(&module).args([
        root().join("tests/fixtures/water_sto3g_rhf.fcidump").to_str().unwrap(),
        "core=0,1,2,3",
        "a=4",
        "b=5",
        "--",
        "density_closed:energy_closed",
        "density_singlet:energy_singlet",
        "density_closed_singlet:element_closed_singlet",
    ]));
    serde_json::from_str(&text).unwrap_or_else(|e| panic!("{e}: {text}"))
}

fn pyscf_water(energy: &str) -> f64 {
    let text = std::fs::read_to_string(root().join("tests/fixtures/pyscf_reference.json")).unwrap();
    let all: Value = serde_json::from_str(&text).unwrap();
    all["cases"]["water_sto3g_rhf"]["energies"][energy]["value"].as_f64().unwrap()
}

fn numbers(v: &Value) -> Vec<f64> {
    v.as_array().unwrap().iter().map(|x| x.as_f64().unwrap()).collect()
}

#[test]
fn densities_of_water_give_the_pyscf_energies() {
    if !python_ready("densities_of_water_give_the_pyscf_energies") {
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let v = water_numbers(dir.path());
    let constant = v["constant"].as_f64().unwrap();
    // PySCF: RHF energy and the open-shell singlet's CI-vector energy on the RHF orbitals
    // (tests/fixtures/pyscf_reference.json, tests/pyscf/make_fixtures.py)
    for (density, reference) in [("density_closed", "rhf"), ("density_singlet", "open_shell_singlet")] {
        let from_densities = v[density]["from_densities"].as_f64().unwrap() + constant;
        assert!((from_densities - pyscf_water(reference)).abs() < 1e-8, "{density}: {from_densities}");
        let from_energy = v[density]["from_energy"].as_f64().unwrap() + constant;
        assert!((from_densities - from_energy).abs() < 1e-10, "{density}: {from_energy}");
    }
    // <closed|H|singlet> = √2 f_ab vanishes for canonical RHF orbitals (Brillouin; textbook,
    // from memory): the transition densities give that zero too
    let element = v["density_closed_singlet"]["from_densities"].as_f64().unwrap();
    assert!(element.abs() < 1e-9, "{element}");
}

#[test]
fn the_gradient_is_the_derivative_of_the_energy_under_rotations() {
    if !python_ready("the_gradient_is_the_derivative_of_the_energy_under_rotations") {
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let v = water_numbers(dir.path());
    // every pair p > q of the 7 orbitals, against central differences (step 1e-4) of the
    // generated energy or element function, not of the densities (common practice)
    for density in ["density_closed", "density_singlet", "density_closed_singlet"] {
        let gradient = numbers(&v[density]["gradient"]);
        let differences = numbers(&v[density]["finite_difference"]);
        assert_eq!(gradient.len(), 21);
        for (k, (g, d)) in gradient.iter().zip(&differences).enumerate() {
            assert!((g - d).abs() <= 1e-6 * d.abs().max(1.0), "{density} pair {k}: {g} vs {d}");
        }
        let (along, difference) =
            (v[density]["direction"].as_f64().unwrap(), v[density]["direction_difference"].as_f64().unwrap());
        assert!(
            (along - difference).abs() <= 1e-6 * difference.abs().max(1.0),
            "{density}: {along} vs {difference}"
        );
    }
    // RHF orbitals are stationary for the closed shell (PySCF converged them: the recorded
    // largest |F_ia| is 2e-11), not for the open-shell singlet or the element
    let largest = |density: &str| numbers(&v[density]["gradient"]).iter().fold(0.0f64, |m, g| m.max(g.abs()));
    assert!(largest("density_closed") < 1e-9, "{}", largest("density_closed"));
    assert!(largest("density_singlet") > 0.1, "{}", largest("density_singlet"));
    assert!(largest("density_closed_singlet") > 0.1, "{}", largest("density_closed_singlet"));
}

/// Generic indices with their coincidences, two spaces, a coupled open-shell function and
/// transition densities between singles.
const GENERIC_STATES: &str = "orbitals x
space occ: i j
space vir: a b
det ref = | occ^2 |
state S1 = (ref[i -> a] + ref[i' -> a'])/sqrt(2)
state S2 = (ref[j -> b] + ref[j' -> b'])/sqrt(2)
csf D = | occ^2 x a b | S=1/2 path=1/2,0,1/2
density S1
density S1 S2
density ref S1
density D
";

#[test]
fn the_python_module_proves_itself_and_fails_on_a_wrong_element_or_sign() {
    if !python_ready("the_python_module_proves_itself_and_fails_on_a_wrong_element_or_sign") {
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let module = generate(dir.path(), GENERIC_STATES, "python");
    let pytest = |path: &Path| {
        output(
            python().current_dir(dir.path()).args(["-m", "pytest", "-q", "-p", "no:cacheprovider"]).arg(path),
        )
    };
    let (ok, report) = pytest(&module);
    // one test per request and the check of the test integrals
    assert!(ok && report.contains("5 passed"), "{report}");
    let code = std::fs::read_to_string(&module).unwrap();
    for (right, wrong) in [
        ("np.add.at(_dm2, (j, k, k, j), -2.0)", "np.add.at(_dm2, (j, k, k, j), -1.0)"),
        ("return fock, total.T - total", "return fock, total - total.T"),
    ] {
        assert!(code.contains(right), "{right}\n{code}");
        let broken = dir.path().join("broken.py");
        std::fs::write(&broken, code.replacen(right, wrong, 1)).unwrap();
        let (ok, report) = pytest(&broken);
        assert!(!ok && report.contains("failed"), "{wrong}: {report}");
    }
}

#[test]
fn the_rust_module_proves_itself_and_fails_on_a_wrong_element_or_sign() {
    let dir = tempfile::tempdir().unwrap();
    let module = generate(dir.path(), GENERIC_STATES, "rust");
    let test = |path: &Path| {
        let binary = dir.path().join("check");
        run(Command::new("rustc")
            .args(["--edition", "2021", "--test", "-D", "warnings", "-O", "-o"])
            .arg(&binary)
            .arg(path));
        output(&mut Command::new(&binary))
    };
    let (ok, report) = test(&module);
    let passed: usize = report
        .lines()
        .filter_map(|l| l.strip_prefix("test result: ok. "))
        .filter_map(|l| l.split_whitespace().next()?.parse::<usize>().ok())
        .sum();
    // a test per density request at each test binding: the spaces sized 2 and 3, and for
    // indices sharing a space where they coincide
    assert!(ok && passed >= 8, "{report}");
    let code = std::fs::read_to_string(&module).unwrap();
    for (right, wrong) in [
        ("density.add_two(j, k, k, j, -2.0);", "density.add_two(j, k, k, j, -1.0);"),
        (
            "fock[q * n + p] + transposed[q * n + p] - fock[p * n + q] - transposed[p * n + q]",
            "fock[p * n + q] + transposed[p * n + q] - fock[q * n + p] - transposed[q * n + p]",
        ),
    ] {
        assert!(code.contains(right), "{right}\n{code}");
        let broken = dir.path().join("broken.rs");
        std::fs::write(&broken, code.replacen(right, wrong, 1)).unwrap();
        let (ok, report) = test(&broken);
        assert!(!ok && report.contains("FAILED"), "{wrong}: {report}");
    }
}

//! Numbers that derive and states print: a value that is zero, or that rounds to zero as a
//! float, is printed as zero, never as a negative zero (`-0.0`).

use std::process::{Command, Stdio};

/// A coefficient of −10⁻⁴⁰⁰: exact in the formulas, zero as a float, and negative.
fn tiny_negative() -> String {
    format!("orbitals a b\nstate X = -1/1{} | a b' |\nelement X | a b' |\n", "0".repeat(400))
}

fn spinfold(input: &str, args: &[&str]) -> String {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("tiny.spinfold"), input).unwrap();
    let out = Command::new(env!("CARGO_BIN_EXE_spinfold"))
        .args(args)
        .arg("tiny.spinfold")
        .current_dir(dir.path())
        .stdin(Stdio::null())
        .output()
        .expect("the binary runs");
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    String::from_utf8(out.stdout).expect("UTF-8 output")
}

/// Every number in a JSON document with the path that leads to it.
fn numbers(v: &serde_json::Value, path: String, out: &mut Vec<(String, f64)>) {
    match v {
        serde_json::Value::Number(n) => out.push((path, n.as_f64().expect("a float"))),
        serde_json::Value::Array(a) => {
            a.iter().enumerate().for_each(|(k, x)| numbers(x, format!("{path}/{k}"), out))
        }
        serde_json::Value::Object(o) => o.iter().for_each(|(k, x)| numbers(x, format!("{path}/{k}"), out)),
        _ => {}
    }
}

#[test]
fn json_values_that_round_to_zero_are_zero() {
    for args in [&["derive", "--to", "json"][..], &["states", "--json"][..]] {
        let text = spinfold(&tiny_negative(), args);
        let doc: serde_json::Value = serde_json::from_str(&text).expect("JSON");
        let mut all = vec![];
        numbers(&doc, String::new(), &mut all);
        let values: Vec<&(String, f64)> =
            all.iter().filter(|(p, _)| p.ends_with("/coefficient/value")).collect();
        assert!(!values.is_empty(), "{args:?}: coefficients with a float value:\n{text}");
        for (path, x) in &values {
            assert_eq!(*x, 0.0, "{args:?} {path}: −10⁻⁴⁰⁰ is zero as a float");
        }
        let negative_zeros: Vec<&(String, f64)> =
            all.iter().filter(|(_, x)| *x == 0.0 && x.is_sign_negative()).collect();
        assert!(negative_zeros.is_empty(), "{args:?}: negative zeros at {negative_zeros:?}");
        assert!(!text.contains("-0.0"), "{args:?}:\n{text}");
        // the exact value keeps its sign
        assert!(text.contains("\"exact\": \"-1/1000"), "{args:?}:\n{text}");
    }
}

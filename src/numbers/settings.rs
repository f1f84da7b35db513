//! What `eval` is told besides the bindings: `--set NAME=VALUE` for free coefficients, each
//! declared and given once, and `--roots N`, how many roots of a space to print.

use crate::error::{Error, ErrorKind, Result};
use crate::language::program::Program;
use std::collections::BTreeMap;

/// How many roots of a `roots` space are printed unless `--roots` says otherwise.
pub const DEFAULT_ROOTS: usize = 10;

/// Values of free coefficients and the number of roots wanted.
#[derive(Clone, Debug, PartialEq)]
pub struct Settings {
    /// By coefficient.
    values: BTreeMap<u32, f64>,
    /// The lowest roots of a space to print (all, when it has fewer).
    pub roots: usize,
}

impl Default for Settings {
    fn default() -> Settings {
        Settings { values: BTreeMap::new(), roots: DEFAULT_ROOTS }
    }
}

fn fail(why: String) -> Error {
    Error::new(ErrorKind::Setting { why })
}

impl Settings {
    /// The settings from `--set` options (`cg=0.98`) and `--roots`.
    pub fn parse(program: &Program, set: &[String], roots: Option<usize>) -> Result<Settings> {
        let mut values = BTreeMap::new();
        for option in set {
            let (name, value) = option
                .split_once('=')
                .ok_or_else(|| fail(format!("--set {option}: write NAME=VALUE, e.g. --set cg=0.98")))?;
            let (name, value) = (name.trim(), value.trim());
            let Some(c) = program.coefficients.iter().position(|c| c.name == name) else {
                let declared: Vec<&str> = program.coefficients.iter().map(|c| c.name.as_str()).collect();
                let known = if declared.is_empty() {
                    "the input declares none (`coefficients cg cu` declares two)".to_string()
                } else {
                    format!("its free coefficients are {}", declared.join(", "))
                };
                return Err(fail(format!(
                    "--set {option}: `{name}` is not a free coefficient of the input; {known}"
                )));
            };
            let number = value
                .parse::<f64>()
                .ok()
                .filter(|x| x.is_finite())
                .ok_or_else(|| fail(format!("--set {option}: `{value}` is not a finite number")))?;
            if values.insert(c as u32, number).is_some() {
                return Err(fail(format!(
                    "--set {option}: `{name}` is given twice; give each free coefficient one --set"
                )));
            }
        }
        Ok(Settings { values, roots: roots.unwrap_or(DEFAULT_ROOTS) })
    }

    /// The value given for coefficient `c`.
    pub fn value(&self, c: u32) -> Option<f64> {
        self.values.get(&c).copied()
    }
}

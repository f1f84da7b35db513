//! Python source for derived expressions: a NumPy module with one vectorized function per
//! request and a `test_` function that checks it against brute-force values.

use crate::error::Result;
use crate::pipeline::Checked;
use crate::program::Program;

pub fn render(_program: &Program, _derivations: &[Checked]) -> Result<String> {
    Ok(String::new())
}

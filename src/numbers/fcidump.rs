//! Reads the common integral-dump text format: a namelist header (NORB, NELEC, MS2, ORBSYM)
//! then lines `value i j k l` in chemists' notation, 1-based, unique 8-fold entries only.

use crate::error::{Error, ErrorKind, Result};
use crate::numbers::integrals::DenseIntegrals;

/// The header facts of an integral file.
#[derive(Clone, Debug, PartialEq)]
pub struct DumpHeader {
    pub norb: usize,
    pub nelec: Option<usize>,
    pub ms2: Option<i64>,
}

/// An integral file read into memory.
#[derive(Clone, Debug)]
pub struct IntegralDump {
    pub header: DumpHeader,
    pub integrals: DenseIntegrals,
}

/// The value of `KEY=` in a namelist text, up to the next comma or blank.
fn namelist_value<'a>(header: &'a str, key: &str) -> Option<&'a str> {
    let upper = header.to_ascii_uppercase();
    let mut from = 0;
    while let Some(found) = upper[from..].find(key) {
        let at = from + found;
        let before_ok = at == 0 || !upper.as_bytes()[at - 1].is_ascii_alphanumeric();
        let rest = header[at + key.len()..].trim_start();
        if before_ok && rest.starts_with('=') {
            let value = rest[1..].trim_start();
            let end = value
                .find(|c: char| c == ',' || c.is_whitespace() || c == '&' || c == '/')
                .unwrap_or(value.len());
            return Some(&value[..end]);
        }
        from = at + key.len();
    }
    None
}

/// Parses the text of an integral file; `path` names it in errors.
pub fn parse_dump(path: &str, text: &str) -> Result<IntegralDump> {
    let fail =
        |line: usize, why: String| Error::new(ErrorKind::IntegralFile { path: path.into(), line, why });
    let lines: Vec<&str> = text.lines().collect();
    let end = lines
        .iter()
        .position(|l| {
            let t = l.trim().to_ascii_uppercase();
            t.starts_with("&END") || t == "/" || t.ends_with("&END") || t.ends_with('/')
        })
        .ok_or_else(|| fail(1, "the namelist header never ends: expected a line `&END` or `/`".into()))?;
    let header_text = lines[..=end].join("\n");
    if !header_text.to_ascii_uppercase().contains("&FCI") {
        return Err(fail(
            1,
            "the file does not start with the namelist header `&FCI NORB=..., NELEC=..., MS2=...`".into(),
        ));
    }
    let norb_text =
        namelist_value(&header_text, "NORB").ok_or_else(|| fail(1, "the header has no NORB".into()))?;
    let norb: usize =
        norb_text.parse().map_err(|_| fail(1, format!("NORB={norb_text} is not a whole number")))?;
    if norb == 0 || norb > 2000 {
        return Err(fail(1, format!("NORB={norb} is out of range (1 to 2000)")));
    }
    let header = DumpHeader {
        norb,
        nelec: namelist_value(&header_text, "NELEC").and_then(|v| v.parse().ok()),
        ms2: namelist_value(&header_text, "MS2").and_then(|v| v.parse().ok()),
    };
    let mut integrals = DenseIntegrals::zeros(norb);
    for (k, line) in lines.iter().enumerate().skip(end + 1) {
        let number = k + 1;
        let fields: Vec<&str> = line.split_whitespace().collect();
        if fields.is_empty() {
            continue;
        }
        if fields.len() != 5 {
            return Err(fail(
                number,
                format!("expected `value i j k l` (5 fields), found {} field(s)", fields.len()),
            ));
        }
        let value: f64 = fields[0]
            .replace(['D', 'd'], "E")
            .parse::<f64>()
            .ok()
            .filter(|v| v.is_finite())
            .ok_or_else(|| fail(number, format!("`{}` is not a finite number", fields[0])))?;
        let mut idx = [0usize; 4];
        for (slot, field) in idx.iter_mut().zip(&fields[1..]) {
            *slot = field.parse().map_err(|_| fail(number, format!("`{field}` is not an orbital number")))?;
            if *slot > norb {
                return Err(fail(number, format!("orbital {slot} is beyond NORB={norb}")));
            }
        }
        match idx {
            [0, 0, 0, 0] => integrals.set_constant(value),
            [i, j, 0, 0] if i > 0 && j > 0 => integrals.set_h(i - 1, j - 1, value),
            [i, 0, 0, 0] if i > 0 => {} // an orbital energy: not needed
            [i, j, k, l] if i > 0 && j > 0 && k > 0 && l > 0 => {
                integrals.set_eri(i - 1, j - 1, k - 1, l - 1, value)
            }
            _ => {
                return Err(fail(
                    number,
                    format!(
                        "the index pattern {} {} {} {} is not one of the format's",
                        idx[0], idx[1], idx[2], idx[3]
                    ),
                ));
            }
        }
    }
    Ok(IntegralDump { header, integrals })
}

/// Reads an integral file from disk.
pub fn read_dump(path: &str) -> Result<IntegralDump> {
    let text = std::fs::read_to_string(path)
        .map_err(|e| Error::new(ErrorKind::Io { path: path.into(), why: e.to_string() }))?;
    parse_dump(path, &text)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::numbers::integrals::Integrals;

    #[test]
    fn reads_header_and_symmetric_entries() {
        let text = " &FCI NORB=   2,NELEC=2,MS2=0,\n  ORBSYM=1,1\n  ISYM=1,\n &END\n 0.5 1 2 1 2\n -1.25 1 1 0 0\n 0.7 0 0 0 0\n";
        let dump = parse_dump("t", text).unwrap();
        assert_eq!(dump.header, DumpHeader { norb: 2, nelec: Some(2), ms2: Some(0) });
        assert_eq!(dump.integrals.eri(1, 0, 0, 1), 0.5);
        assert_eq!(dump.integrals.h(0, 0), -1.25);
        assert_eq!(dump.integrals.constant(), 0.7);
    }

    #[test]
    fn names_the_bad_line() {
        let text = "&FCI NORB=2 &END\n 0.5 1 2 1 2\n 0.5 1 3 0 0\n";
        let e = parse_dump("x.dump", text).unwrap_err();
        assert_eq!(
            e.kind,
            ErrorKind::IntegralFile {
                path: "x.dump".into(),
                line: 3,
                why: "orbital 3 is beyond NORB=2".into()
            }
        );
    }
}

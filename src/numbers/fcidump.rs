//! Reads the common integral-dump text format: a namelist header (NORB, NELEC, MS2, ORBSYM)
//! then lines `value i j k l` in chemists' notation, 1-based, unique 8-fold entries only.

use crate::error::{Error, ErrorKind, Result};
use crate::numbers::integrals::{
    Class, IntegralTable, Integrals, TABLE_BUDGET_BYTES, TableFull, eri_classes,
};
use std::io::BufRead;

/// The header facts of an integral file.
#[derive(Clone, Debug, PartialEq)]
pub struct DumpHeader {
    pub norb: usize,
    pub nelec: Option<usize>,
    pub ms2: Option<i64>,
    /// The irreducible representation of each orbital (one label per orbital), when given.
    pub orbsym: Option<Vec<u32>>,
    /// The symmetry of the state the file was made for, when given.
    pub isym: Option<i64>,
}

/// An integral file read into memory.
#[derive(Clone, Debug)]
pub struct IntegralDump {
    pub header: DumpHeader,
    pub integrals: IntegralTable,
    /// What the reader had to assume, in words (a missing constant taken as 0).
    pub warnings: Vec<String>,
}

/// A place in the file: 1-based line and column (in characters).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
struct At {
    line: usize,
    column: usize,
}

fn fail(path: &str, at: At, why: String) -> Error {
    Error::new(ErrorKind::IntegralFile { path: path.into(), line: at.line, column: at.column, why })
}

/// The whitespace-separated fields of a line with their 1-based columns.
fn fields(line: &str) -> Vec<(usize, &str)> {
    let mut out = vec![];
    let mut start: Option<(usize, usize)> = None;
    for (column, (byte, c)) in line.char_indices().enumerate() {
        match (c.is_whitespace(), start) {
            (true, Some((from, at))) => {
                out.push((at, &line[from..byte]));
                start = None;
            }
            (false, None) => start = Some((byte, column + 1)),
            _ => {}
        }
    }
    out.extend(start.map(|(from, at)| (at, &line[from..])));
    out
}

/// True for the line that closes the namelist header.
fn ends_header(line: &str) -> bool {
    let t = line.trim().to_ascii_uppercase();
    t.starts_with("&END") || t == "/" || t.ends_with("&END") || t.ends_with('/')
}

/// One `KEY=value, value, ...` item of the namelist header.
struct Item {
    key: String,
    at: At,
    values: Vec<(At, String)>,
}

/// The items of the namelist header. Words are separated by blanks and commas; `=` follows a
/// key; `&FCI`, `&END` and `/` are markers.
fn namelist(header: &[(usize, String)]) -> (bool, Vec<Item>) {
    let mut words: Vec<(At, String)> = vec![];
    for (line, text) in header {
        let mut current: Option<(At, String)> = None;
        for (column, c) in text.chars().enumerate() {
            let at = At { line: *line, column: column + 1 };
            let single = c == '=' || c == '/';
            if c.is_whitespace() || c == ',' || single || c == '&' {
                words.extend(current.take());
            }
            if single {
                words.push((at, c.to_string()));
            } else if !(c.is_whitespace() || c == ',') {
                current.get_or_insert_with(|| (at, String::new())).1.push(c);
            }
        }
        words.extend(current);
    }
    let opened = words.iter().any(|(_, w)| w.eq_ignore_ascii_case("&FCI"));
    let mut items: Vec<Item> = vec![];
    for (k, (at, word)) in words.iter().enumerate() {
        let is_key = words.get(k + 1).is_some_and(|(_, next)| next == "=");
        if word == "=" || word == "/" || word.starts_with('&') {
            continue;
        }
        if is_key {
            items.push(Item { key: word.to_ascii_uppercase(), at: *at, values: vec![] });
        } else if let Some(item) = items.last_mut() {
            item.values.push((*at, word.clone()));
        }
    }
    (opened, items)
}

/// The header facts, every key at most once, and a warning when ORBSYM cannot be used.
fn header_facts(path: &str, header: &[(usize, String)]) -> Result<(DumpHeader, Option<String>)> {
    let first = At { line: header[0].0, column: 1 };
    let (opened, items) = namelist(header);
    if !opened {
        return Err(fail(
            path,
            first,
            "the file does not start with the namelist header `&FCI NORB=..., NELEC=..., MS2=...`".into(),
        ));
    }
    for (k, item) in items.iter().enumerate() {
        if let Some(earlier) = items[..k].iter().find(|e| e.key == item.key) {
            return Err(fail(
                path,
                item.at,
                format!(
                    "{} is given twice in the header (first at line {}, column {}); give it once",
                    item.key, earlier.at.line, earlier.at.column
                ),
            ));
        }
    }
    fn whole<T: std::str::FromStr>(path: &str, item: &Item) -> Result<T> {
        let (at, text) =
            item.values.first().ok_or_else(|| fail(path, item.at, format!("{} has no value", item.key)))?;
        text.parse().map_err(|_| fail(path, *at, format!("{}={text} is not a whole number", item.key)))
    }
    let find = |key: &str| items.iter().find(|i| i.key == key);
    let norb_item = find("NORB").ok_or_else(|| fail(path, first, "the header has no NORB".into()))?;
    let norb: usize = whole(path, norb_item)?;
    let norb_at = norb_item.values[0].0;
    if norb == 0 {
        return Err(fail(path, norb_at, "NORB=0: the file must have at least one orbital".into()));
    }
    if eri_classes(norb as u64).is_none() {
        return Err(fail(
            path,
            norb_at,
            format!("NORB={norb} is too large: its two-electron integrals cannot be numbered in 64 bits"),
        ));
    }
    let orbsym = find("ORBSYM").map(|item| orbital_symmetries(item, norb)).transpose();
    let (orbsym, unusable) = match orbsym {
        Ok(labels) => (labels, None),
        Err(why) => (None, Some(format!("{path}: {why}, so orbital symmetries are not used"))),
    };
    let header = DumpHeader {
        norb,
        nelec: find("NELEC").map(|i| whole(path, i)).transpose()?,
        ms2: find("MS2").map(|i| whole(path, i)).transpose()?,
        orbsym,
        isym: find("ISYM").map(|i| whole(path, i)).transpose()?,
    };
    Ok((header, unusable))
}

/// ORBSYM: one whole-number label per orbital; otherwise why it cannot be used.
fn orbital_symmetries(item: &Item, norb: usize) -> std::result::Result<Vec<u32>, String> {
    if item.values.len() != norb {
        return Err(format!("ORBSYM has {} labels for NORB={norb}", item.values.len()));
    }
    item.values
        .iter()
        .map(|(_, text)| text.parse().map_err(|_| format!("ORBSYM label `{text}` is not a whole number")))
        .collect()
}

/// One data line: its value, where the value stands, and the class of integral it gives
/// (None for an orbital energy `value i 0 0 0`, which evaluation does not need).
struct Entry {
    value: f64,
    value_at: At,
    class: Option<Class>,
}

/// Reads one data line; None for a blank line.
fn entry(path: &str, line: usize, text: &str, norb: usize) -> Result<Option<Entry>> {
    let at = |column| At { line, column };
    let fields = fields(text);
    if fields.is_empty() {
        return Ok(None);
    }
    if fields.len() != 5 {
        let column = fields.get(5).map_or(text.chars().count() + 1, |&(c, _)| c);
        return Err(fail(
            path,
            at(column),
            format!("expected `value i j k l` (5 fields), found {} field(s)", fields.len()),
        ));
    }
    let (value_column, value_text) = fields[0];
    let value = value_text.replace(['D', 'd'], "E").parse::<f64>().ok().filter(|v| !v.is_nan());
    let value = match value {
        Some(v) if v.is_finite() => v,
        // a literal written with digits that is too large for a double
        Some(_)
            if value_text.starts_with(|c: char| c.is_ascii_digit() || "+-.".contains(c))
                && !value_text.to_ascii_lowercase().contains("inf") =>
        {
            return Err(fail(
                path,
                at(value_column),
                format!("`{value_text}` overflows double precision (magnitudes end near 1.8e308)"),
            ));
        }
        _ => return Err(fail(path, at(value_column), format!("`{value_text}` is not a finite number"))),
    };
    let mut idx = [0usize; 4];
    for (slot, &(column, field)) in idx.iter_mut().zip(&fields[1..]) {
        if field.is_empty() || !field.bytes().all(|b| b.is_ascii_digit()) {
            return Err(fail(path, at(column), format!("`{field}` is not an orbital number")));
        }
        *slot = field
            .parse()
            .ok()
            .filter(|&n| n <= norb)
            .ok_or_else(|| fail(path, at(column), format!("orbital {field} is beyond NORB={norb}")))?;
    }
    let class = match idx {
        [0, 0, 0, 0] => Some(Class::Constant),
        [i, j, 0, 0] if i > 0 && j > 0 => Some(Class::h(i - 1, j - 1)),
        [i, 0, 0, 0] if i > 0 => None,
        [i, j, k, l] if i > 0 && j > 0 && k > 0 && l > 0 => Some(Class::eri(i - 1, j - 1, k - 1, l - 1)),
        _ => {
            return Err(fail(
                path,
                at(fields[1].0),
                format!(
                    "the index pattern {} {} {} {} is not one of the format's",
                    idx[0], idx[1], idx[2], idx[3]
                ),
            ));
        }
    };
    Ok(Some(Entry { value, value_at: at(value_column), class }))
}

/// Two values of one class agree when they differ by no more than rounding in the last
/// digits a program writes.
fn agree(a: f64, b: f64) -> bool {
    (a - b).abs() <= 1e-12 * a.abs().max(b.abs()).max(1.0)
}

/// A memory size in words: GiB when it is whole, else bytes.
fn bytes_text(bytes: u64) -> String {
    if bytes >= 1 << 30 && bytes.is_multiple_of(1 << 30) {
        format!("{} GiB", bytes >> 30)
    } else {
        format!("{bytes} bytes")
    }
}

/// The first data line that gives `class`, found by reading the lines again.
fn first_line_of<I>(
    path: &str,
    open: impl Fn() -> Result<I>,
    header_lines: usize,
    norb: usize,
    class: Class,
) -> Result<Option<(usize, String)>>
where
    I: Iterator<Item = std::io::Result<String>>,
{
    Ok(open()?
        .enumerate()
        .skip(header_lines)
        .map_while(|(k, l)| l.ok().map(|l| (k + 1, l)))
        .find(|(k, l)| entry(path, *k, l, norb).ok().flatten().is_some_and(|e| e.class == Some(class))))
}

/// The error for a class given a second time, at `at` on the line `text`, with another value
/// than on the line `first`.
fn given_twice(path: &str, at: At, class: Class, text: &str, first: Option<(usize, String)>) -> Error {
    let what = match class {
        Class::Constant => "the constant",
        _ => "one integral (under the 8-fold symmetry of real orbitals)",
    };
    let earlier = match first {
        Some((line, first)) => format!("`{}` on line {line}", first.trim()),
        None => "an earlier line".into(),
    };
    fail(
        path,
        at,
        format!("{what} is given twice with different values: `{}` here and {earlier}", text.trim()),
    )
}

/// Reads the lines that `open` yields (it may be called again, to find the first of two
/// lines giving one integral), keeping each table within `budget_bytes`.
fn read_from<I>(path: &str, open: impl Fn() -> Result<I>, budget_bytes: u64) -> Result<IntegralDump>
where
    I: Iterator<Item = std::io::Result<String>>,
{
    let unreadable = |line, e: std::io::Error| {
        fail(path, At { line, column: 1 }, format!("this line cannot be read: {e}"))
    };
    let mut lines = open()?.enumerate().map(|(k, l)| l.map_err(|e| unreadable(k + 1, e)).map(|l| (k + 1, l)));
    let mut header = vec![];
    for line in lines.by_ref() {
        let (number, text) = line?;
        let last = ends_header(&text);
        header.push((number, text));
        if last {
            break;
        }
    }
    if !header.last().is_some_and(|(_, text)| ends_header(text)) {
        return Err(fail(
            path,
            At { line: 1, column: 1 },
            "the namelist header never ends: expected a line `&END` or `/`".into(),
        ));
    }
    let header_lines = header.len();
    let (facts, unusable) = header_facts(path, &header)?;
    let norb = facts.norb;
    let mut integrals = IntegralTable::within(norb, budget_bytes).expect("NORB was checked against 64 bits");
    for line in lines {
        let (number, text) = line?;
        let Some(Entry { value, value_at, class: Some(class) }) = entry(path, number, &text, norb)? else {
            continue;
        };
        match integrals.give(class, value) {
            Ok(None) => {}
            Ok(Some(earlier)) if agree(earlier, value) => {}
            Ok(Some(_)) => {
                let first = first_line_of(path, &open, header_lines, norb, class)?;
                return Err(given_twice(path, value_at, class, &text, first));
            }
            Err(TableFull { classes, budget_bytes }) => {
                return Err(fail(
                    path,
                    At { line: number, column: 1 },
                    format!(
                        "the file gives {} or more distinct integrals of one kind for NORB={norb}: they do not fit the memory budget of {}",
                        classes + 1,
                        bytes_text(budget_bytes)
                    ),
                ));
            }
        }
    }
    let mut warnings: Vec<String> = unusable.into_iter().collect();
    if !integrals.has_constant() {
        warnings.push(format!(
            "{path} has no constant line (`value 0 0 0 0`): the constant is taken as 0, so energies are electronic only"
        ));
    }
    Ok(IntegralDump { header: facts, integrals, warnings })
}

/// Parses the text of an integral file; `path` names it in errors.
pub fn parse_dump(path: &str, text: &str) -> Result<IntegralDump> {
    read_from(path, || Ok(text.lines().map(|l| Ok(l.to_string()))), TABLE_BUDGET_BYTES)
}

/// Reads an integral file from disk, line by line.
pub fn read_dump(path: &str) -> Result<IntegralDump> {
    let open = || {
        std::fs::File::open(path)
            .map(|f| std::io::BufReader::new(f).lines())
            .map_err(|e| Error::new(ErrorKind::Io { path: path.into(), why: e.to_string() }))
    };
    read_from(path, open, TABLE_BUDGET_BYTES)
}

/// Entries smaller in magnitude than this are left out of a written file, as symmetry zeros.
pub const WRITTEN_FLOOR: f64 = 1e-14;

/// An integral file as text: the header (NORB, and NELEC, MS2, ORBSYM, ISYM where `header`
/// has them), then the unique entries under the 8-fold symmetry, (pq|rs) with p ≥ q, r ≥ s
/// and pq ≥ rs, then h_pq with p ≥ q (1-based), then the constant; values of magnitude below
/// `WRITTEN_FLOOR` are left out, and every value has 17 significant digits, so that it reads
/// back exactly.
pub fn write_dump(header: &DumpHeader, ints: &dyn Integrals) -> String {
    let n = header.norb;
    let mut out = format!(" &FCI NORB={n:>4},");
    if let Some(nelec) = header.nelec {
        out.push_str(&format!("NELEC={nelec},"));
    }
    if let Some(ms2) = header.ms2 {
        out.push_str(&format!("MS2={ms2},"));
    }
    out.push('\n');
    if let Some(orbsym) = &header.orbsym {
        let labels: Vec<String> = orbsym.iter().map(|x| x.to_string()).collect();
        out.push_str(&format!("  ORBSYM={},\n", labels.join(",")));
    }
    if let Some(isym) = header.isym {
        out.push_str(&format!("  ISYM={isym},\n"));
    }
    out.push_str(" &END\n");
    let mut line = |value: f64, idx: [usize; 4]| {
        if value.abs() >= WRITTEN_FLOOR {
            out.push_str(&format!(
                "{value:>25.16e} {:>4} {:>4} {:>4} {:>4}\n",
                idx[0], idx[1], idx[2], idx[3]
            ));
        }
    };
    for p in 0..n {
        for q in 0..=p {
            for r in 0..=p {
                let last = if r == p { q } else { r };
                for s in 0..=last {
                    line(ints.eri(p, q, r, s), [p + 1, q + 1, r + 1, s + 1]);
                }
            }
        }
    }
    for p in 0..n {
        for q in 0..=p {
            line(ints.h(p, q), [p + 1, q + 1, 0, 0]);
        }
    }
    // the constant is written even when it is zero: a reader then knows it was not forgotten
    out.push_str(&format!("{:>25.16e} {:>4} {:>4} {:>4} {:>4}\n", ints.constant(), 0, 0, 0, 0));
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A written file reads back to the same integrals, header facts and constant.
    #[test]
    fn a_written_file_reads_back_exactly() {
        let mut table = IntegralTable::random(4, 9);
        table.set_constant(-1.5);
        table.set_eri(0, 1, 2, 3, 1e-16);
        let header = DumpHeader {
            norb: 4,
            nelec: Some(3),
            ms2: Some(1),
            orbsym: Some(vec![1, 2, 1, 3]),
            isym: Some(2),
        };
        let back = parse_dump("written", &write_dump(&header, &table)).unwrap();
        assert_eq!(back.header, header);
        assert_eq!(back.integrals.constant(), -1.5);
        assert_eq!(back.integrals.eri(3, 2, 1, 0), 0.0);
        for p in 0..4 {
            for q in 0..4 {
                assert_eq!(back.integrals.h(p, q), table.h(p, q));
                for r in 0..4 {
                    for s in 0..4 {
                        let written = table.eri(p, q, r, s);
                        let expected = if written.abs() < WRITTEN_FLOOR { 0.0 } else { written };
                        assert_eq!(back.integrals.eri(p, q, r, s), expected);
                    }
                }
            }
        }
        assert!(back.warnings.is_empty());
    }

    #[test]
    fn orbsym_without_one_label_per_orbital_is_not_used() {
        let dump = parse_dump("s", "&FCI NORB=3, ORBSYM=1,2 &END\n 0.0 0 0 0 0\n").unwrap();
        assert_eq!(dump.header.orbsym, None);
        assert_eq!(
            dump.warnings,
            vec!["s: ORBSYM has 2 labels for NORB=3, so orbital symmetries are not used"]
        );
    }

    fn parse_within(text: &str, budget_bytes: u64) -> Result<IntegralDump> {
        read_from("t", || Ok(text.lines().map(|l| Ok(l.to_string()))), budget_bytes)
    }

    #[test]
    fn reads_header_and_symmetric_entries() {
        let text = " &FCI NORB=   2,NELEC=2,MS2=0,\n  ORBSYM=1,1\n  ISYM=1,\n &END\n 0.5 1 2 1 2\n -1.25 1 1 0 0\n 0.7 0 0 0 0\n";
        let dump = parse_dump("t", text).unwrap();
        assert_eq!(
            dump.header,
            DumpHeader { norb: 2, nelec: Some(2), ms2: Some(0), orbsym: Some(vec![1, 1]), isym: Some(1) }
        );
        assert_eq!(dump.integrals.eri(1, 0, 0, 1), 0.5);
        assert_eq!(dump.integrals.h(0, 0), -1.25);
        assert_eq!(dump.integrals.constant(), 0.7);
        assert!(dump.warnings.is_empty());
    }

    #[test]
    fn names_the_bad_line_and_column() {
        let text = "&FCI NORB=2 &END\n 0.5 1 2 1 2\n 0.5 1 3 0 0\n";
        let e = parse_dump("x.dump", text).unwrap_err();
        assert_eq!(
            e.kind,
            ErrorKind::IntegralFile {
                path: "x.dump".into(),
                line: 3,
                column: 8,
                why: "orbital 3 is beyond NORB=2".into()
            }
        );
    }

    #[test]
    fn fields_carry_their_columns() {
        assert_eq!(fields("  0.5\t1  22 x"), vec![(3, "0.5"), (7, "1"), (10, "22"), (13, "x")]);
        assert_eq!(fields("   "), vec![]);
    }

    /// The water fixture with its header claiming 2000 orbitals: too many for a packed
    /// two-electron table, so the entries go to a hash map, and every integral read back
    /// equals the packed reading (a PySCF fixture, read twice).
    #[test]
    fn listed_tables_hold_what_packed_tables_hold() {
        let path = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/fixtures/water_sto3g_rhf.fcidump");
        let text = std::fs::read_to_string(path).unwrap();
        assert!(text.contains("NORB=   7,"));
        let packed = parse_dump("water", &text).unwrap().integrals;
        let listed = parse_dump("water", &text.replace("NORB=   7,", "NORB=2000,")).unwrap().integrals;
        assert!(packed.eri_packed() && !listed.eri_packed());
        assert_eq!(listed.orbital_count(), 2000);
        for p in 0..7 {
            for q in 0..7 {
                assert_eq!(packed.h(p, q), listed.h(p, q));
                for r in 0..7 {
                    for s in 0..7 {
                        assert_eq!(packed.eri(p, q, r, s), listed.eri(p, q, r, s));
                    }
                }
            }
        }
        assert_eq!((listed.h(1999, 0), listed.eri(1999, 1999, 0, 0)), (0.0, 0.0));
        assert_eq!(packed.constant(), listed.constant());
    }

    /// A budget that holds neither a packed table nor the file's own entries is refused.
    #[test]
    fn entries_past_the_budget_are_refused() {
        let text = "&FCI NORB=2 &END\n 0.5 1 1 1 1\n 0.25 2 2 1 1\n 0.125 2 2 2 2\n";
        // h (3 classes, 24 bytes) stays packed; (pq|rs) (6 classes, 48 bytes) is listed, with
        // room for one entry at 40 bytes each
        let e = parse_within(text, 40).unwrap_err();
        let ErrorKind::IntegralFile { line, why, .. } = e.kind else { panic!("{e:?}") };
        assert_eq!(line, 3, "{why}");
        assert!(why.contains("2 or more distinct integrals") && why.contains("40 bytes"), "{why}");
    }
}

//! Mutations of existing inputs: line and token edits with tokens of the language, splices of
//! two inputs, odd numbers, csf options and free coefficients, `roots` lines of many operands,
//! deep nesting and very long lines (text level), and
//! random bytes, control characters, non-UTF-8, a byte-order mark and line-ending changes
//! (byte level).

use rand::seq::IndexedRandom;
use rand::{Rng, RngExt};

/// Tokens of the language and its edges, inserted or substituted at random.
const TOKENS: [&str; 84] = [
    "|",
    "| ",
    "'",
    "^2",
    "^",
    "[",
    "->",
    "]",
    "(",
    ")",
    "sqrt(",
    "sqrt",
    "*",
    "/",
    "+",
    "-",
    "=",
    ",",
    ".",
    ":",
    "#",
    " ",
    "\n",
    "0",
    "1",
    "2",
    "3",
    "1/2",
    "3/2",
    "-1/2",
    "0.5",
    "0.6",
    "12",
    "1.",
    ".5",
    "99999999999999999999999999999",
    "0.000000000000000000000000001",
    "18446744073709551616",
    "4294967297",
    "/0",
    "/0.0",
    "sqrt(0)",
    "sqrt(-1)",
    "sqrt(1/0)",
    "orbitals",
    "space",
    "det",
    "state",
    "csf",
    "csfs",
    "energy",
    "element",
    "overlap",
    "spin",
    "roots",
    "coefficients",
    "coefficients cg cu",
    "cg",
    "cu",
    "cg cu",
    "cu/2",
    "sqrt(cg)",
    "[i -> a]",
    "[i j' -> a b']",
    "[i n -> a d]",
    "density",
    "shells",
    "S=",
    "M=",
    "path=",
    "S=1/2",
    "S=-1",
    "S=100",
    "M=3/2",
    "M=-7/2",
    "path=1/2,1,1/2",
    "path=1/2,0,1/2,1,3/2",
    "path=1/2,3/2",
    "S=1/3",
    "x",
    "a",
    "i",
    "core",
    "ref",
];

/// Odd csf options: spins out of range, negative, non-half-integer, huge, long paths.
const CSF_OPTIONS: [&str; 14] = [
    "S=0",
    "S=1/2",
    "S=1",
    "S=3/2",
    "S=2",
    "S=5/2",
    "S=-1/2",
    "S=7/3",
    "S=1000000000000",
    "M=-1/2",
    "M=1/2",
    "M=5/2",
    "path=1/2,1,3/2,2,5/2,3,7/2,4,9/2,5,11/2,6,13/2,7,15/2,8,17/2",
    "path=1/2,0,1/2,0,1/2,0,1/2,0,1/2,0,1/2,0,1/2,0,1/2,0,1/2,0,1/2,0,1/2,0,1/2,0,1/2",
];

/// Splits text into tokens: names and numbers, blanks, line ends, `->`, `^2` and single
/// characters, so that edits keep most of the text readable.
pub fn tokens(text: &str) -> Vec<String> {
    let mut out: Vec<String> = Vec::new();
    let mut chars = text.chars().peekable();
    while let Some(c) = chars.next() {
        let mut token = c.to_string();
        let word = |x: char| x.is_ascii_alphanumeric() || x == '_' || x == '.';
        if word(c) {
            while let Some(&n) = chars.peek().filter(|&&n| word(n)) {
                token.push(n);
                chars.next();
            }
        } else if c == ' ' || c == '\t' {
            while let Some(&n) = chars.peek().filter(|&&n| n == ' ' || n == '\t') {
                token.push(n);
                chars.next();
            }
        } else if (c == '-' && chars.peek() == Some(&'>')) || (c == '^' && chars.peek() == Some(&'2')) {
            token.push(chars.next().expect("peeked"));
        }
        out.push(token);
    }
    out
}

fn random_token(rng: &mut impl Rng, words: &[String]) -> String {
    if !words.is_empty() && rng.random_bool(0.3) {
        return words.choose(rng).expect("words").clone();
    }
    TOKENS.choose(rng).expect("tokens").to_string()
}

/// A position below `len` (0 when `len` is 0).
fn below(rng: &mut impl Rng, len: usize) -> usize {
    rng.random_range(0..len.max(1))
}

/// One text-level edit of `text`; `other` is a second input to splice from.
fn edit(rng: &mut impl Rng, text: &str, other: &str) -> String {
    let mut lines: Vec<String> = text.lines().map(str::to_string).collect();
    if lines.is_empty() {
        lines.push(String::new());
    }
    let n = lines.len();
    let mut toks = tokens(text);
    let words: Vec<String> =
        toks.iter().filter(|t| t.chars().all(|c| c.is_ascii_alphanumeric() || c == '_')).cloned().collect();
    match rng.random_range(0..17) {
        0 => {
            lines.remove(below(rng, n));
        }
        1 => {
            let k = below(rng, n);
            let line = lines[k].clone();
            lines.insert(k, line);
        }
        2 => {
            let (a, b) = (below(rng, n), below(rng, n));
            lines.swap(a, b);
        }
        3 if !toks.is_empty() => {
            toks.remove(below(rng, toks.len()));
            return toks.concat();
        }
        4 if !toks.is_empty() => {
            let k = below(rng, toks.len());
            let t = toks[k].clone();
            toks.insert(k, t);
            return toks.concat();
        }
        5 if !toks.is_empty() => {
            let (a, b) = (below(rng, toks.len()), below(rng, toks.len()));
            toks.swap(a, b);
            return toks.concat();
        }
        6 | 7 => {
            let k = below(rng, toks.len() + 1);
            let t = random_token(rng, &words);
            toks.insert(k, t);
            return toks.concat();
        }
        8 if !toks.is_empty() => {
            let k = below(rng, toks.len());
            toks[k] = random_token(rng, &words);
            return toks.concat();
        }
        9 => {
            // splice a run of lines of the other input
            let theirs: Vec<&str> = other.lines().collect();
            if !theirs.is_empty() {
                let start = rng.random_range(0..theirs.len());
                let end = rng.random_range(start..theirs.len()) + 1;
                let at = rng.random_range(0..=n);
                for (k, line) in theirs[start..end].iter().enumerate() {
                    lines.insert(at + k, line.to_string());
                }
            }
        }
        10 => {
            // numbers big and small in place of a number
            let numbers: Vec<usize> =
                (0..toks.len()).filter(|&k| toks[k].starts_with(|c: char| c.is_ascii_digit())).collect();
            if let Some(&k) = numbers.choose(rng) {
                toks[k] = [
                    "0",
                    "99999999999999999999999999999999999",
                    "0.0000000000000000000000000001",
                    "1/0",
                    "007",
                ]
                .choose(rng)
                .expect("numbers")
                .to_string();
                return toks.concat();
            }
        }
        11 => {
            // deep nesting: around the right side of a state or the operand of a request,
            // else anywhere
            let depth = *[10, 100, 1000, 20000].choose(rng).expect("depths");
            let open = if rng.random_bool(0.7) { "(" } else { "sqrt(" };
            let nestable: Vec<usize> = (0..n)
                .filter(|&k| {
                    ["state ", "energy ", "spin "].iter().any(|w| lines[k].trim_start().starts_with(w))
                })
                .collect();
            match nestable.choose(rng) {
                Some(&k) => {
                    let at = lines[k]
                        .find('=')
                        .map(|e| e + 1)
                        .unwrap_or_else(|| lines[k].find(' ').unwrap_or(0) + 1);
                    let (head, tail) = lines[k].split_at(at);
                    let tail = tail.split('#').next().unwrap_or("").trim();
                    lines[k] = format!("{head} {}{tail}{}", open.repeat(depth), ")".repeat(depth));
                }
                None => {
                    let k = below(rng, toks.len() + 1);
                    toks.insert(k, format!("{}x{}", open.repeat(depth), ")".repeat(depth)));
                    return toks.concat();
                }
            }
        }
        12 => {
            // a very long line: one token or one line repeated
            let times = *[100, 5000, 50000].choose(rng).expect("lengths");
            let k = below(rng, n);
            let piece =
                if rng.random_bool(0.5) { random_token(rng, &words) + " " } else { lines[k].clone() + " " };
            if piece.len() * times < 400_000 {
                lines[k].push_str(&piece.repeat(times));
            }
        }
        13 => {
            // a name far longer than usual
            let k = below(rng, toks.len() + 1);
            toks.insert(k, "n".repeat(*[300, 70000].choose(rng).expect("lengths")));
            return toks.concat();
        }
        14 => {
            // odd options on a csf line, or one more csf line
            let option = CSF_OPTIONS.choose(rng).expect("options");
            match (0..n).filter(|&k| lines[k].trim_start().starts_with("csf")).collect::<Vec<_>>().choose(rng)
            {
                Some(&k) => lines[k] = format!("{} {option}", lines[k]),
                None => {
                    let operand = ["| x y z |", "ref[i -> a]", "ref[i j -> a b]", "| core^2 |[x -> y]"]
                        .choose(rng)
                        .expect("operands");
                    lines.insert(below(rng, n + 1), format!("csf zz = {operand} {option}"))
                }
            }
        }
        15 => {
            // a request turned into `roots`, its operands repeated: a space of many members
            let requests: Vec<usize> = (0..n)
                .filter(|&k| {
                    ["energy ", "element ", "overlap ", "spin ", "roots "]
                        .iter()
                        .any(|w| lines[k].trim_start().starts_with(w))
                })
                .collect();
            if let Some(&k) = requests.choose(rng) {
                let line = lines[k].split('#').next().unwrap_or("").trim().to_string();
                let operands = line.split_once(' ').map(|(_, rest)| rest).unwrap_or("");
                let times = *[1, 2, 10, 200].choose(rng).expect("counts");
                lines[k] = format!("roots {}", vec![operands; times].join(" "));
            }
        }
        _ => {
            // repeat the excitation brackets of a line, or add one
            let k = below(rng, n);
            match lines[k].find('[') {
                Some(at) => {
                    let end = lines[k][at..].find(']').map(|e| at + e + 1).unwrap_or(lines[k].len());
                    let ex = lines[k][at..end].to_string();
                    lines[k].insert_str(end, &ex.repeat(rng.random_range(1..=6)));
                }
                None => lines[k].push_str("[x -> y]"),
            }
        }
    }
    let mut out = lines.join("\n");
    if text.ends_with('\n') {
        out.push('\n');
    }
    out
}

/// One to four text-level edits.
pub fn text(rng: &mut impl Rng, seed: &str, other: &str) -> String {
    let mut out = seed.to_string();
    for _ in 0..rng.random_range(1..=4) {
        out = edit(rng, &out, other);
    }
    out
}

/// One to three byte-level edits: random bytes (control characters, non-UTF-8 sequences),
/// a byte-order mark, line-ending changes, bit flips, truncation.
pub fn bytes(rng: &mut impl Rng, seed: &str) -> Vec<u8> {
    let mut out = seed.as_bytes().to_vec();
    for _ in 0..rng.random_range(1..=3) {
        let at = rng.random_range(0..=out.len());
        match rng.random_range(0..8) {
            0 => {
                let junk: &[&[u8]] =
                    &[b"\0", b"\r", b"\x0b", b"\x0c", b"\x1b[31m", b"\x7f", b"\t", b"\r\n\r"];
                out.splice(at..at, junk.choose(rng).expect("junk").iter().copied());
            }
            1 => {
                let junk: &[&[u8]] = &[
                    b"\xff",
                    b"\xc3",
                    b"\xe2\x82",
                    b"\xc0\xaf",
                    b"\xed\xa0\x80",
                    b"\xf4\x90\x80\x80",
                    b"\xfe\xff",
                ];
                out.splice(at..at, junk.choose(rng).expect("junk").iter().copied());
            }
            2 => {
                out.splice(0..0, [0xEF, 0xBB, 0xBF]);
            }
            3 => {
                out = String::from_utf8_lossy(&out).replace('\n', "\r\n").into_bytes();
            }
            4 if !out.is_empty() => {
                let k = rng.random_range(0..out.len());
                out[k] ^= 1 << rng.random_range(0..8);
            }
            5 => {
                out.truncate(at);
            }
            6 => {
                // valid UTF-8 that is not ASCII: a Greek letter, a combining mark, a wide character
                let junk = ["α", "e\u{301}", "中", "\u{2028}", "\u{feff}", "𝔞", "−"];
                let s = junk.choose(rng).expect("junk").as_bytes().to_vec();
                out.splice(at..at, s);
            }
            _ => {
                let k = rng.random_range(0..16);
                out.splice(at..at, (0..k).map(|_| rng.random::<u8>()));
            }
        }
    }
    out
}

/// Values, orbital numbers and header entries that an integral file should never have.
const DUMP_VALUES: [&str; 12] =
    ["nan", "inf", "-inf", "1e308", "-1e308", "1e-320", "1.0D+00", "1,0", "0x10", "", "1e309", "-0"];
const DUMP_INDICES: [&str; 8] = ["0", "-1", "99", "4294967297", "18446744073709551616", "a", "1.5", "2"];
const NORBS: [&str; 9] = ["0", "1", "3", "300", "2000", "100000", "-1", "99999999999999999999", "x"];

/// One to three edits of an integral file: header values, entries with odd values or orbital
/// numbers, lines removed, repeated or cut, and the byte-level edits of inputs.
pub fn dump(rng: &mut impl Rng, text: &str) -> Vec<u8> {
    let mut lines: Vec<String> = text.lines().map(str::to_string).collect();
    for _ in 0..rng.random_range(1..=3) {
        // an earlier edit may have emptied the file
        if lines.is_empty() {
            lines.push(String::new());
        }
        let n = lines.len();
        let k = below(rng, n);
        match rng.random_range(0..8) {
            0 => {
                let norb = NORBS.choose(rng).expect("values");
                lines[0] = format!(" &FCI NORB={norb},NELEC=2,MS2=0,");
            }
            1 => {
                let mut fields: Vec<String> = lines[k].split_whitespace().map(str::to_string).collect();
                if !fields.is_empty() {
                    fields[0] = DUMP_VALUES.choose(rng).expect("values").to_string();
                }
                lines[k] = fields.join(" ");
            }
            2 => {
                let mut fields: Vec<String> = lines[k].split_whitespace().map(str::to_string).collect();
                if fields.len() > 1 {
                    let at = rng.random_range(1..fields.len());
                    fields[at] = DUMP_INDICES.choose(rng).expect("indices").to_string();
                }
                lines[k] = fields.join(" ");
            }
            3 => {
                lines.remove(k);
            }
            4 => {
                let line = lines[k].clone();
                lines.insert(k, line);
            }
            5 => {
                lines[k].push_str(" 1");
            }
            6 => {
                lines.retain(|l| !l.contains("&END"));
            }
            _ => {
                lines.truncate(k);
            }
        }
    }
    let out = lines.join("\n") + "\n";
    if rng.random_bool(0.2) { bytes(rng, &out) } else { out.into_bytes() }
}

//! A configuration space built from the public library alone: one `element` request per pair of
//! operands, the column operand's letters renamed apart by hand, each derived, ready for
//! `solve_space`. Shared by the space tests and the roots benchmark.

use spinfold::{Binding, Derivation, Operand, Options, PairElement, Program, derive, parse};

/// A program with one element request per pair of operands (row <= column), their derivations
/// and what `solve_space` needs besides.
pub struct Space {
    pub program: Program,
    pub operands: Vec<Operand>,
    pub pairs: Vec<Pair>,
}

/// One pair of operands, row <= column, with the derivation of their element.
pub struct Pair {
    pub row: usize,
    pub column: usize,
    pub derivation: Derivation,
    /// column operand's index → the index it was renamed to
    pub renamed: Vec<(u32, u32)>,
}

impl Space {
    /// The pair elements, borrowing the derivations.
    pub fn elements(&self) -> Vec<PairElement<'_>> {
        self.pairs
            .iter()
            .map(|p| PairElement {
                row: p.row,
                column: p.column,
                derivation: &p.derivation,
                renamed: p.renamed.clone(),
            })
            .collect()
    }

    /// A binding of every space by name (0-based orbital numbers), no index fixed.
    pub fn binding(&self, spaces: &[(&str, &[usize])]) -> Binding {
        let mut b = Binding {
            orbitals: vec![usize::MAX; self.program.orbitals.len()],
            spaces: vec![vec![]; self.program.spaces.len()],
            indices: vec![None; self.program.indices.len()],
        };
        for (name, members) in spaces {
            let s = self.program.spaces.iter().position(|s| s.name == *name).expect("a declared space");
            b.spaces[s] = members.to_vec();
        }
        b
    }
}

/// The text with every identifier renamed by `map` (identifiers not in it stay).
fn renamed_text(text: &str, map: &[(&str, &str)]) -> String {
    let mut out = String::new();
    let mut word = String::new();
    let flush = |word: &mut String, out: &mut String| {
        out.push_str(map.iter().find(|(from, _)| from == word).map_or(word.as_str(), |(_, to)| to));
        word.clear();
    };
    for c in text.chars() {
        if c.is_ascii_alphanumeric() || c == '_' {
            word.push(c);
        } else {
            flush(&mut word, &mut out);
            out.push(c);
        }
    }
    flush(&mut word, &mut out);
    out
}

/// The space of `operands` (as written in `declarations`' letters), the column operand of each
/// pair renamed through `fresh` (row letter → a letter of the same space not used by rows).
pub fn space(declarations: &str, operands: &[&str], fresh: &[(&str, &str)]) -> Space {
    let mut text = declarations.to_string();
    for (r, row) in operands.iter().enumerate() {
        for column in &operands[r..] {
            text.push_str(&format!("\nelement {row} {}", renamed_text(column, fresh)));
        }
    }
    let program = parse("space.spinfold", &text).expect("the space parses");
    let id = |name: &str| program.indices.iter().position(|i| i.name == name).map(|k| k as u32);
    let indices_of = |operand: &str| {
        let mut out: Vec<u32> = renamed_text(operand, &[])
            .split(|c: char| !(c.is_ascii_alphanumeric() || c == '_'))
            .filter_map(id)
            .collect();
        out.sort();
        out.dedup();
        out
    };
    let list: Vec<Operand> =
        operands.iter().map(|o| Operand { label: o.to_string(), indices: indices_of(o) }).collect();
    let mut pairs = vec![];
    let mut requests = program.requests.iter();
    for (row, _) in list.iter().enumerate() {
        for (column, operand) in list.iter().enumerate().skip(row) {
            let request = requests.next().expect("one request per pair");
            let derivation = derive(&program, request, &Options::default()).expect("the pair derives");
            let renamed = operand
                .indices
                .iter()
                .map(|&k| {
                    let name = program.indices[k as usize].name.as_str();
                    let to = fresh.iter().find(|(from, _)| *from == name).expect("a fresh letter").1;
                    (k, id(to).expect("a declared fresh letter"))
                })
                .collect();
            pairs.push(Pair { row, column, derivation, renamed });
        }
    }
    Space { program, operands: list, pairs }
}

//! Random valid programs from the grammar of the input language: orbitals, spaces with generic
//! indices, free coefficients, determinants, states with exact and free coefficients, csf/csfs of
//! open shells and of excitations, excitations and requests (with `roots`), and consistency
//! claims between requests for the worker to check. Occupations are tracked so that excitations
//! remove occupied and add empty spin orbitals.

use rand::seq::{IndexedRandom, SliceRandom};
use rand::{Rng, RngExt};
use std::collections::BTreeSet;

/// How big a program may get: small ones keep each run well under a second.
#[derive(Clone, Copy)]
pub struct Size {
    pub orbitals: usize,
    pub spaces: usize,
    pub indices: usize,
    pub open_shells: usize,
    pub requests: usize,
}

pub const SMALL: Size = Size { orbitals: 4, spaces: 2, indices: 2, open_shells: 4, requests: 4 };
pub const LARGE: Size = Size { orbitals: 9, spaces: 3, indices: 3, open_shells: 9, requests: 8 };

/// A named orbital or a generic index (by position in the program's lists).
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord)]
enum Orb {
    Named(usize),
    Index(usize),
}

type SpinOrb = (Orb, bool);

/// What is known of the occupation of every determinant of an operand.
#[derive(Clone, Debug, Default)]
struct Occ {
    closed: BTreeSet<usize>,
    /// spin orbitals present (beta = true)
    electrons: BTreeSet<SpinOrb>,
    /// orbitals holding one electron of either spin (open shells of a coupled state)
    open: BTreeSet<Orb>,
    /// spin orbitals of closed spaces taken out by excitations
    holes: BTreeSet<SpinOrb>,
}

impl Occ {
    /// Closed spaces and the net number of explicit electrons: what must agree for two
    /// determinants to have the same number of electrons.
    fn signature(&self) -> (BTreeSet<usize>, usize) {
        (self.closed.clone(), self.electrons.len() + self.open.len() - self.holes.len())
    }
}

struct Gen<'r, R: Rng> {
    rng: &'r mut R,
    size: Size,
    used: BTreeSet<String>,
    orbitals: Vec<String>,
    /// (name, indices)
    spaces: Vec<(String, Vec<usize>)>,
    /// (name, space)
    indices: Vec<(String, usize)>,
    /// named operands with their occupation (one entry per coupled-state member too)
    named: Vec<(String, Vec<Occ>)>,
    /// the names among them that are single determinants
    dets: Vec<(String, Vec<Occ>)>,
    /// the closed spaces and number of explicit electrons most determinants share, so that
    /// most requests compare determinants of one electron count
    closed: BTreeSet<usize>,
    electrons: usize,
    /// the declared free coefficients
    coefficients: Vec<String>,
    /// states with free coefficients, kept apart from `named`: they may not stand in other
    /// states, `spin` or `roots`
    free: Vec<(String, Vec<Occ>)>,
    /// (energy request, roots request) pairs whose values the worker compares
    claims: Vec<(String, String)>,
    out: Vec<String>,
}

/// The comment that states a claim: the lowest root of the `roots` request equals the energy
/// request's value where that is one number, and lies at or below each of its values otherwise.
pub const CLAIM: &str = "# claim: ";

const KEYWORDS: [&str; 15] = [
    "density",
    "shells",
    "orbitals",
    "space",
    "coefficients",
    "det",
    "state",
    "csf",
    "csfs",
    "energy",
    "element",
    "overlap",
    "spin",
    "roots",
    "sqrt",
];

impl<R: Rng> Gen<'_, R> {
    fn name(&mut self, usual: &[&str]) -> String {
        const ODD: [&str; 14] = [
            "o12", "_a", "A_b2", "x_", "S", "M", "path", "sqrtx", "spin_", "energy2", "detx", "Q9", "_",
            "csf1",
        ];
        loop {
            let candidate = if self.rng.random_bool(0.85) {
                usual.choose(self.rng).expect("names to choose from").to_string()
            } else if self.rng.random_bool(0.7) {
                ODD.choose(self.rng).expect("names to choose from").to_string()
            } else {
                let len = self.rng.random_range(1..=12);
                let mut s = String::new();
                for k in 0..len {
                    let pool: &[u8] = if k == 0 {
                        b"abcdefghijklmnopqrstuvwxyzABCDEFGHIJKLMNOPQRSTUVWXYZ_"
                    } else {
                        b"abcdefghijklmnopqrstuvwxyzABCDEFGHIJKLMNOPQRSTUVWXYZ_0123456789"
                    };
                    s.push(*pool.choose(self.rng).expect("letters") as char);
                }
                s
            };
            if !KEYWORDS.contains(&candidate.as_str()) && self.used.insert(candidate.clone()) {
                return candidate;
            }
        }
    }

    fn orb_name(&self, orb: Orb) -> &str {
        match orb {
            Orb::Named(k) => &self.orbitals[k],
            Orb::Index(k) => &self.indices[k].0,
        }
    }

    fn spin_orb_text(&self, (orb, beta): SpinOrb) -> String {
        format!("{}{}", self.orb_name(orb), if beta { "'" } else { "" })
    }

    fn declare(&mut self) {
        let n = self.rng.random_range(1..=self.size.orbitals);
        for _ in 0..n {
            let name = self.name(&["a", "b", "c", "p", "q", "r", "s", "t", "u", "v", "w", "x", "y", "z"]);
            self.orbitals.push(name);
        }
        // sometimes over several lines
        let split = self.rng.random_range(1..=n);
        self.out.push(format!("orbitals {}", self.orbitals[..split].join(" ")));
        if split < n {
            self.out.push(format!("orbitals {}", self.orbitals[split..].join(" ")));
        }
        for _ in 0..self.rng.random_range(0..=self.size.spaces) {
            let name = self.name(&["core", "occ", "vir", "act", "val", "inner", "C", "V"]);
            let mut idx = Vec::new();
            for _ in 0..self.rng.random_range(0..=self.size.indices) {
                let index = self.name(&["i", "j", "k", "l", "m", "n", "e", "f", "g", "h"]);
                idx.push(self.indices.len());
                self.indices.push((index, self.spaces.len()));
            }
            let line = if idx.is_empty() {
                format!("space {name}")
            } else {
                let names: Vec<&str> = idx.iter().map(|&k| self.indices[k].0.as_str()).collect();
                format!("space {name}: {}", names.join(" "))
            };
            self.out.push(line);
            self.spaces.push((name, idx));
        }
        if self.rng.random_bool(0.35) {
            for _ in 0..self.rng.random_range(1..=3) {
                let name = self.name(&["cg", "cu", "ch", "c1", "c2", "w", "t"]);
                self.coefficients.push(name);
            }
            self.out.push(format!("coefficients {}", self.coefficients.join(" ")));
        }
    }

    /// The closed spaces of a new determinant: mostly the program's usual ones.
    fn closed_spaces(&mut self) -> BTreeSet<usize> {
        if self.rng.random_bool(0.9) {
            return self.closed.clone();
        }
        (0..self.spaces.len()).filter(|_| self.rng.random_bool(0.5)).collect()
    }

    /// The number of explicit electrons of a new determinant: mostly the program's usual one.
    fn electron_count(&mut self) -> usize {
        if self.rng.random_bool(0.9) { self.electrons } else { self.rng.random_range(0..=5) }
    }

    /// Orbitals free to hold explicit electrons next to the closed spaces `closed`.
    fn free_orbitals(&self, closed: &BTreeSet<usize>) -> Vec<Orb> {
        let mut orbs: Vec<Orb> = (0..self.orbitals.len()).map(Orb::Named).collect();
        orbs.extend(
            (0..self.indices.len()).filter(|&k| !closed.contains(&self.indices[k].1)).map(Orb::Index),
        );
        orbs
    }

    /// A random determinant: closed spaces and explicit electrons in named orbitals and generic
    /// indices (of spaces not closed in it), in random creation order.
    fn det(&mut self) -> (String, Occ) {
        let mut occ = Occ { closed: self.closed_spaces(), ..Occ::default() };
        let mut candidates: Vec<SpinOrb> =
            self.free_orbitals(&occ.closed).into_iter().flat_map(|o| [(o, false), (o, true)]).collect();
        candidates.shuffle(self.rng);
        candidates.truncate(self.electron_count());
        // electrons of one orbital stay together, written `x^2` most of the time
        let mut written: Vec<Vec<SpinOrb>> = Vec::new();
        for &so in &candidates {
            match written.iter_mut().find(|g| g[0].0 == so.0) {
                Some(group) => group.push(so),
                None => written.push(vec![so]),
            }
        }
        written.shuffle(self.rng);
        let mut parts: Vec<String> = occ.closed.iter().map(|&s| format!("{}^2", self.spaces[s].0)).collect();
        for group in &mut written {
            group.shuffle(self.rng);
            occ.electrons.extend(group.iter().copied());
            if group.len() == 2 && self.rng.random_bool(0.7) {
                parts.push(format!("{}^2", self.orb_name(group[0].0)));
            } else {
                parts.extend(group.iter().map(|&so| self.spin_orb_text(so)));
            }
        }
        // a closed space may stand anywhere in the list
        let closed = occ.closed.len();
        if closed > 0 && parts.len() > closed && self.rng.random_bool(0.3) {
            let moved = parts.remove(0);
            let at = self.rng.random_range(0..=parts.len());
            parts.insert(at, moved);
        }
        (format!("| {} |", parts.join(" ")), occ)
    }

    /// Spin orbitals occupied in every determinant of the operand, and those empty in every one.
    fn occupied_and_empty(&self, dets: &[Occ]) -> (Vec<SpinOrb>, Vec<SpinOrb>) {
        let mut all: Vec<SpinOrb> = Vec::new();
        for k in 0..self.orbitals.len() {
            all.extend([(Orb::Named(k), false), (Orb::Named(k), true)]);
        }
        for k in 0..self.indices.len() {
            all.extend([(Orb::Index(k), false), (Orb::Index(k), true)]);
        }
        let occupied = |d: &Occ, so: SpinOrb| {
            let in_closed = matches!(so.0, Orb::Index(k) if d.closed.contains(&self.indices[k].1));
            (d.electrons.contains(&so) || in_closed) && !d.holes.contains(&so)
        };
        let maybe = |d: &Occ, so: SpinOrb| d.open.contains(&so.0);
        let full =
            all.iter().copied().filter(|&so| dets.iter().all(|d| occupied(d, so) && !maybe(d, so))).collect();
        let empty = all
            .iter()
            .copied()
            .filter(|&so| {
                dets.iter().all(|d| {
                    // an index of a closed space is empty only where its own spin orbital was taken out
                    let in_closed = matches!(so.0, Orb::Index(k) if d.closed.contains(&self.indices[k].1));
                    !occupied(d, so) && !maybe(d, so) && (!in_closed || d.holes.contains(&so))
                })
            })
            .collect();
        (full, empty)
    }

    /// `[x .. -> y ..]` on an operand, with the occupation after it; None when nothing fits.
    fn excitation(&mut self, dets: &[Occ]) -> Option<(String, Vec<Occ>)> {
        let (mut full, mut empty) = self.occupied_and_empty(dets);
        let rank = *[1, 1, 1, 2, 2, 3].choose(self.rng).expect("ranks");
        if full.len() < rank || empty.len() < rank {
            return None;
        }
        full.shuffle(self.rng);
        empty.shuffle(self.rng);
        let (from, to) = (&full[..rank], &empty[..rank]);
        let text = format!(
            "[{} -> {}]",
            from.iter().map(|&so| self.spin_orb_text(so)).collect::<Vec<_>>().join(" "),
            to.iter().map(|&so| self.spin_orb_text(so)).collect::<Vec<_>>().join(" ")
        );
        let after = dets
            .iter()
            .map(|d| {
                let mut d = d.clone();
                for &so in from {
                    if !d.electrons.remove(&so) {
                        d.holes.insert(so);
                    }
                }
                for &so in to {
                    if !d.holes.remove(&so) {
                        d.electrons.insert(so);
                    }
                }
                d
            })
            .collect();
        Some((text, after))
    }

    fn coefficient(&mut self) -> String {
        const FORMS: [&str; 18] = [
            "",
            "",
            "",
            "2",
            "3",
            "1/2",
            "0.6",
            "sqrt(2)",
            "sqrt(3)/2",
            "1/sqrt(2)",
            "sqrt(1/3)",
            "2*sqrt(5)/3",
            "(1/2)",
            "sqrt(6)",
            "0.25",
            "7/11",
            "sqrt(2/3)",
            "sqrt(8)",
        ];
        if self.rng.random_bool(0.01) {
            return "0".into();
        }
        FORMS.choose(self.rng).expect("forms").to_string()
    }

    /// An operand of a state or request: a name, an inline determinant, an excitation of one
    /// of those or of a parenthesised combination.
    fn operand(&mut self, depth: usize) -> (String, Vec<Occ>) {
        let (mut text, mut dets) = match self.rng.random_range(0..10) {
            0..=4 if !self.named.is_empty() => self.named.choose(self.rng).expect("names").clone(),
            5 | 6 if depth < 2 => {
                let (t, d) = self.combination(depth + 1);
                (format!("({t})"), d)
            }
            _ => {
                let (t, d) = self.det();
                (t, vec![d])
            }
        };
        let mut repeats = match self.rng.random_range(0..10) {
            0..=5 => 0,
            6..=8 => 1,
            _ => 2,
        };
        while repeats > 0 {
            repeats -= 1;
            if let Some((e, after)) = self.excitation(&dets) {
                text.push_str(&e);
                dets = after;
            }
        }
        (text, dets)
    }

    /// A linear combination of operands with the same number of electrons (mostly).
    fn combination(&mut self, depth: usize) -> (String, Vec<Occ>) {
        let (first, mut dets) = self.operand(depth);
        let signature = dets[0].signature();
        let mut text = format!("{}{}", if self.rng.random_bool(0.2) { "-" } else { "" }, self.scaled(&first));
        for _ in 0..self.rng.random_range(0..=2) {
            let mut candidate = self.operand(depth);
            for _ in 0..4 {
                if candidate.1.iter().all(|d| d.signature() == signature) || self.rng.random_bool(0.05) {
                    break;
                }
                candidate = self.operand(depth);
            }
            let sign = if self.rng.random_bool(0.5) { " + " } else { " - " };
            text.push_str(sign);
            text.push_str(&self.scaled(&candidate.0));
            dets.extend(candidate.1);
        }
        if self.rng.random_bool(0.2) {
            text = format!(
                "({text})/{}",
                ["sqrt(2)", "2", "sqrt(3)", "sqrt(5/2)"].choose(self.rng).expect("norms")
            );
        }
        (text, dets)
    }

    fn scaled(&mut self, operand: &str) -> String {
        let c = self.coefficient();
        match (c.is_empty(), self.rng.random_bool(0.3)) {
            (true, _) => operand.to_string(),
            (false, true) => format!("{c}*{operand}"),
            (false, false) => format!("{c} {operand}"),
        }
    }

    fn define_det(&mut self) {
        let name = self.name(&["ref", "ab", "ba", "D", "E", "G", "d1", "d2", "X", "Y"]);
        let (text, occ) = if self.dets.is_empty() || self.rng.random_bool(0.6) {
            let (t, o) = self.det();
            (t, vec![o])
        } else {
            // an excitation of a determinant defined before
            let (mut t, mut o) = self.dets.choose(self.rng).expect("determinants").clone();
            if let Some((e, after)) = self.excitation(&o) {
                t.push_str(&e);
                o = after;
            }
            (t, o)
        };
        self.out.push(format!("det {name} = {text}"));
        self.dets.push((name.clone(), occ.clone()));
        self.named.push((name, occ));
    }

    fn define_state(&mut self) {
        let name = self.name(&["S", "T", "psi", "phi", "S1", "S2", "T1", "mix", "W"]);
        let (text, dets) = self.combination(0);
        self.out.push(format!("state {name} = {text}"));
        self.named.push((name, dets));
    }

    /// A csf or csfs: open shells written without marks, a path of intermediate spins that
    /// starts at 1/2, moves by 1/2 and never goes below zero.
    fn define_csf(&mut self) {
        let occ_closed = self.closed_spaces();
        let mut occ = Occ { closed: occ_closed, ..Occ::default() };
        let mut orbs = self.free_orbitals(&occ.closed);
        orbs.shuffle(self.rng);
        // as many electrons as the other determinants: open shells plus doubly occupied orbitals
        let electrons = self.electron_count().max(1);
        let doubles = self.rng.random_range(0..=(electrons - 1) / 2);
        let n_open = (electrons - 2 * doubles).min(self.size.open_shells).min(orbs.len());
        if n_open == 0 {
            return;
        }
        let mut parts: Vec<String> = occ.closed.iter().map(|&s| format!("{}^2", self.spaces[s].0)).collect();
        for (k, &orb) in orbs.iter().enumerate() {
            if k < n_open {
                occ.open.insert(orb);
                parts.push(self.orb_name(orb).to_string());
            } else if k < n_open + doubles {
                occ.electrons.extend([(orb, false), (orb, true)]);
                parts.push(format!("{}^2", self.orb_name(orb)));
            }
        }
        parts.shuffle(self.rng);
        // twice the intermediate spins
        let mut path = vec![1i64];
        for _ in 1..n_open {
            let last = *path.last().expect("a start");
            path.push(if last == 0 || self.rng.random_bool(0.5) { last + 1 } else { last - 1 });
        }
        let s2 = *path.last().expect("a path");
        let paths = count_paths(n_open, s2);
        let spin = |t: i64| if t % 2 == 0 { (t / 2).to_string() } else { format!("{t}/2") };
        let mut options = vec![format!("S={}", spin(s2))];
        if self.rng.random_bool(0.4) {
            let m = s2 - 2 * self.rng.random_range(0..=s2);
            options.push(format!("M={}", spin(m)));
        }
        let family = self.rng.random_bool(0.3);
        if !family && (paths > 1 || self.rng.random_bool(0.3)) && self.rng.random_bool(0.93) {
            options.push(format!("path={}", path.iter().map(|&t| spin(t)).collect::<Vec<_>>().join(",")));
        }
        options.shuffle(self.rng);
        let name = self.name(&["D1", "D2", "Q", "singlet", "triplet", "doublet", "C", "P"]);
        let keyword = if family { "csfs" } else { "csf" };
        self.out.push(format!("{keyword} {name} = | {} | {}", parts.join(" "), options.join(" ")));
        if family {
            for k in 1..=paths.min(4) {
                self.named.push((format!("{name}.{k}"), vec![occ.clone()]));
            }
        } else {
            self.named.push((name, vec![occ]));
        }
    }

    /// An operand with the electron signature `signature` where one is found in a few tries.
    fn operand_like(&mut self, signature: &(BTreeSet<usize>, usize)) -> (String, Vec<Occ>) {
        let mut candidate = self.operand(1);
        for _ in 0..4 {
            if candidate.1.iter().all(|d| &d.signature() == signature) || self.rng.random_bool(0.05) {
                break;
            }
            candidate = self.operand(1);
        }
        candidate
    }

    /// A state linear in free coefficients: `cg X + sqrt(2) cu Y - ch/2 Z`, sometimes with a
    /// fixed part, now and then with a coefficient misused (a product of two, a divisor, under a
    /// root, alone). Where each part has a coefficient of its own and there is no fixed part, the
    /// energy's stationary value is the lowest root over the parts: a claim for the worker.
    fn define_free_state(&mut self) {
        if self.coefficients.is_empty() {
            return self.define_state();
        }
        let name = self.name(&["P", "Q", "pair", "F", "mixed", "Phi"]);
        let mut pieces: Vec<String> = Vec::new();
        let mut parts: Vec<String> = Vec::new();
        let mut dets: Vec<Occ> = Vec::new();
        let mut unused = self.coefficients.clone();
        unused.shuffle(self.rng);
        let mut exact = true;
        if self.rng.random_bool(0.25) {
            exact = false;
            let (t, d) = self.operand(1);
            pieces.push(self.scaled(&t));
            dets.extend(d);
        }
        for _ in 0..self.rng.random_range(1..=3) {
            let (op, d) = match dets.first().map(Occ::signature) {
                Some(signature) => self.operand_like(&signature),
                None => self.operand(1),
            };
            let c = match unused.pop() {
                Some(c) => c,
                None => {
                    exact = false;
                    self.coefficients.choose(self.rng).expect("coefficients").clone()
                }
            };
            let other = self.coefficients.choose(self.rng).expect("coefficients").clone();
            let piece = if self.rng.random_bool(0.04) {
                exact = false;
                match self.rng.random_range(0..6) {
                    0 => format!("{c} {other} {op}"),
                    1 => format!("{c}*{other}*{op}"),
                    2 => format!("{op}/{c}"),
                    3 => format!("sqrt({c}) {op}"),
                    4 => format!("{c} + {op}"),
                    _ => c.clone(),
                }
            } else {
                match self.rng.random_range(0..8) {
                    0..=2 => format!("{c} {op}"),
                    3 => format!("{c}*{op}"),
                    4 => {
                        let number = ["2", "sqrt(2)", "1/2", "0.6", "sqrt(3)/2", "3"]
                            .choose(self.rng)
                            .expect("numbers");
                        format!("{number} {c} {op}")
                    }
                    5 => format!("{c}/{} {op}", ["2", "3", "sqrt(2)"].choose(self.rng).expect("divisors")),
                    6 => format!("({c}/2) {op}"),
                    _ => format!("{op} {c}"),
                }
            };
            pieces.push(piece);
            parts.push(op);
            dets.extend(d);
        }
        let mut text = String::new();
        for (k, piece) in pieces.iter().enumerate() {
            let minus = self.rng.random_bool(0.3);
            text.push_str(match (k, minus) {
                (0, false) => "",
                (0, true) => "-",
                (_, false) => " + ",
                (_, true) => " - ",
            });
            text.push_str(piece);
        }
        self.out.push(format!("state {name} = {text}"));
        if exact && self.rng.random_bool(0.6) {
            self.claims.push((format!("energy {name}"), format!("roots {}", parts.join(" "))));
        }
        self.free.push((name, dets));
    }

    /// A csf of an excitation of a closed-shell determinant: `ref[i -> a] S=0`, `S=1 M=...`, or
    /// a double with four open shells (a csfs family, or a path); holes come from doubly
    /// occupied orbitals and closed spaces, particles from empty orbitals and open spaces.
    fn define_csf_excitation(&mut self) {
        let closed_shell = |o: &Occ| {
            o.open.is_empty()
                && o.holes.is_empty()
                && o.electrons.iter().all(|&(orb, beta)| o.electrons.contains(&(orb, !beta)))
        };
        let known: Vec<(String, Occ)> = self
            .dets
            .iter()
            .filter(|(_, o)| closed_shell(&o[0]))
            .map(|(n, o)| (n.clone(), o[0].clone()))
            .collect();
        let (reference, occ) = match known.choose(self.rng) {
            Some(found) if self.rng.random_bool(0.7) => found.clone(),
            _ => {
                let mut occ = Occ { closed: self.closed_spaces(), ..Occ::default() };
                let mut parts: Vec<String> =
                    occ.closed.iter().map(|&s| format!("{}^2", self.spaces[s].0)).collect();
                let mut free = self.free_orbitals(&occ.closed);
                free.shuffle(self.rng);
                for orb in free.into_iter().take(self.rng.random_range(0..=2)) {
                    occ.electrons.extend([(orb, false), (orb, true)]);
                    parts.push(format!("{}^2", self.orb_name(orb)));
                }
                let det = format!("| {} |", parts.join(" "));
                if self.rng.random_bool(0.5) {
                    (det, occ)
                } else {
                    let name = self.name(&["ref", "R0", "closed", "G"]);
                    self.out.push(format!("det {name} = {det}"));
                    self.dets.push((name.clone(), vec![occ.clone()]));
                    self.named.push((name.clone(), vec![occ.clone()]));
                    (name, occ)
                }
            }
        };
        let mut holes: Vec<Orb> = occ.electrons.iter().map(|&(orb, _)| orb).collect();
        holes.dedup();
        holes.extend(
            (0..self.indices.len()).filter(|&k| occ.closed.contains(&self.indices[k].1)).map(Orb::Index),
        );
        let mut particles: Vec<Orb> = self
            .free_orbitals(&occ.closed)
            .into_iter()
            .filter(|&orb| !occ.electrons.contains(&(orb, false)))
            .collect();
        holes.shuffle(self.rng);
        particles.shuffle(self.rng);
        let rank = if self.rng.random_bool(0.7) { 1 } else { 2 };
        if holes.len() < rank || particles.len() < rank {
            return;
        }
        let (from, to) = (&holes[..rank], &particles[..rank]);
        let prime = if self.rng.random_bool(0.02) { "'" } else { "" };
        let names = |orbs: &[Orb]| orbs.iter().map(|&o| self.orb_name(o)).collect::<Vec<_>>().join(" ");
        let operand = format!("{reference}[{}{prime} -> {}]", names(from), names(to));
        let mut after = occ.clone();
        for &orb in from {
            if !after.electrons.remove(&(orb, false)) {
                after.holes.extend([(orb, false), (orb, true)]);
            }
            after.electrons.remove(&(orb, true));
            after.open.insert(orb);
        }
        after.open.extend(to.iter().copied());
        let shells = 2 * rank;
        let s2 = if self.rng.random_bool(0.03) { 1 } else { 2 * self.rng.random_range(0..=rank as i64) };
        let spin = |t: i64| if t % 2 == 0 { (t / 2).to_string() } else { format!("{t}/2") };
        let mut options = vec![format!("S={}", spin(s2))];
        if s2 > 0 && self.rng.random_bool(0.5) {
            let m = s2 - 2 * self.rng.random_range(0..=s2);
            options.push(format!("M={}", spin(m)));
        }
        let paths = count_paths(shells, s2);
        let family = rank == 2 && self.rng.random_bool(0.5);
        if !family && paths > 1 {
            // a random path of twice-spins ending at s2: walk up or down while the end stays reachable
            let mut path = vec![1i64];
            for k in 1..shells {
                let last = *path.last().expect("a start");
                let left = (shells - k - 1) as i64;
                let up_ok = (last + 1 - s2).abs() <= left;
                let down_ok = last > 0 && (last - 1 - s2).abs() <= left;
                path.push(if up_ok && (!down_ok || self.rng.random_bool(0.5)) { last + 1 } else { last - 1 });
            }
            options.push(format!("path={}", path.iter().map(|&t| spin(t)).collect::<Vec<_>>().join(",")));
        }
        options.shuffle(self.rng);
        let name = self.name(&["S1", "T1", "Sx", "Tx", "D1", "Q2", "single", "double"]);
        let keyword = if family { "csfs" } else { "csf" };
        self.out.push(format!("{keyword} {name} = {operand} {}", options.join(" ")));
        if family {
            for k in 1..=paths.min(3) {
                self.named.push((format!("{name}.{k}"), vec![after.clone()]));
            }
        } else {
            self.named.push((name, vec![after]));
        }
    }

    fn request(&mut self) {
        // `shells` of a random state is mostly outside its form: mutations bring it in (the
        // keyword is in KEYWORDS and the mutation tokens)
        let kinds = ["energy", "energy", "element", "overlap", "spin", "roots", "roots", "density"];
        let kind = *kinds.choose(self.rng).expect("kinds");
        // a state with free coefficients in energy, element and overlap, and now and then in
        // `spin` or `roots`, which refuse it
        let free = match self.free.choose(self.rng) {
            Some(f)
                if self.rng.random_bool(if matches!(kind, "spin" | "roots" | "density") {
                    0.03
                } else {
                    0.4
                }) =>
            {
                Some(f.clone())
            }
            _ => None,
        };
        let (bra, bra_dets) = free.unwrap_or_else(|| self.operand(1));
        let signature = bra_dets[0].signature();
        let line = match kind {
            "energy" | "spin" => format!("{kind} {bra}"),
            "density" if self.rng.random_bool(0.5) => format!("density {bra}"),
            "roots" => {
                let mut line = format!("roots {bra}");
                for _ in 0..self.rng.random_range(0..=3) {
                    let (other, _) = self.operand_like(&signature);
                    line.push(' ');
                    line.push_str(&other);
                }
                line
            }
            _ => {
                let ket = match self.free.choose(self.rng) {
                    Some(f) if self.rng.random_bool(0.3) => f.0.clone(),
                    _ => self.operand_like(&signature).0,
                };
                format!("{kind} {bra} {ket}")
            }
        };
        self.out.push(line);
    }

    /// `energy X` and `roots X` of a fixed operand: equal where X is one function.
    fn fixed_claim(&mut self) {
        let (x, _) = self.operand(1);
        self.claims.push((format!("energy {x}"), format!("roots {x}")));
    }
}

/// The number of coupling paths of `n` open shells to twice-spin `s2`.
fn count_paths(n: usize, s2: i64) -> u64 {
    let mut ways = vec![0u64; n + 2];
    ways[1] = 1;
    for _ in 1..n {
        let mut next = vec![0u64; n + 2];
        for (t, &w) in ways.iter().enumerate() {
            if w > 0 {
                next[t + 1] += w;
                if t > 0 {
                    next[t - 1] += w;
                }
            }
        }
        ways = next;
    }
    ways.get(s2 as usize).copied().unwrap_or(0)
}

/// A random valid program of at most `size`, laid out with the odd comment and blank line.
pub fn program(rng: &mut impl Rng, size: Size) -> String {
    let mut g = Gen {
        rng,
        size,
        used: BTreeSet::new(),
        orbitals: Vec::new(),
        spaces: Vec::new(),
        indices: Vec::new(),
        named: Vec::new(),
        dets: Vec::new(),
        closed: BTreeSet::new(),
        electrons: 0,
        coefficients: Vec::new(),
        free: Vec::new(),
        claims: Vec::new(),
        out: Vec::new(),
    };
    g.declare();
    g.closed = (0..g.spaces.len()).filter(|_| g.rng.random_bool(0.5)).collect();
    g.electrons = g.rng.random_range(0..=g.size.open_shells + 1);
    for _ in 0..g.rng.random_range(0..=3) {
        match g.rng.random_range(0..7) {
            0 | 1 => g.define_det(),
            2 => g.define_state(),
            3 => g.define_csf(),
            4 => g.define_csf_excitation(),
            _ => g.define_free_state(),
        }
    }
    for _ in 0..g.rng.random_range(1..=g.size.requests) {
        g.request();
    }
    if g.rng.random_bool(0.15) {
        g.fixed_claim();
    }
    let claims = std::mem::take(&mut g.claims);
    for (energy, roots) in &claims {
        g.out.extend([energy.clone(), roots.clone()]);
    }
    let mut text = String::new();
    for line in &g.out {
        if g.rng.random_bool(0.05) {
            text.push_str("# a comment line\n");
        }
        if g.rng.random_bool(0.05) {
            text.push('\n');
        }
        text.push_str(line);
        if g.rng.random_bool(0.1) {
            text.push_str("    # trailing comment");
        }
        text.push('\n');
    }
    for (energy, roots) in &claims {
        text.push_str(&format!("{CLAIM}{energy} == {roots}\n"));
    }
    text
}

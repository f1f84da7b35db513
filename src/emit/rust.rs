//! Rust source for derived expressions: a std-only module with an integral-access trait, one
//! documented function per request with loops for the sums, and a self-checking test.

use super::{DensityTestVector, Group, Identifiers, Namer, TEST_SEED, groups, test_vectors};
use crate::check::verify::Checked;
use crate::engine::block_derivation::BlockDerivation;
use crate::engine::derive::Derivation;
use crate::engine::exact::Exact;
use crate::engine::expression::{Expr, Factor, IntegralKind, Term};
use crate::error::Result;
use crate::language::orbital::{Orb, SpaceId, SpaceSet};
use crate::language::program::{Program, Request, RequestKind};
use std::fmt::Write;

const KEYWORDS: &[&str] = &[
    "as", "async", "await", "break", "const", "continue", "crate", "dyn", "else", "enum", "extern", "false",
    "fn", "for", "gen", "if", "impl", "in", "let", "loop", "match", "mod", "move", "mut", "pub", "ref",
    "return", "self", "static", "struct", "super", "trait", "true", "type", "unsafe", "use", "where",
    "while", "abstract", "become", "box", "do", "final", "macro", "override", "priv", "try", "typeof",
    "unsized", "virtual", "yield", "union", "Self",
];

/// Names every generated function must leave alone.
const RESERVED: &[&str] = &[
    "Integrals",
    "ints",
    "value",
    "fock",
    "reference_energy",
    "space",
    "other",
    "close",
    "Hashed",
    "Densities",
    "density",
    "n_orbitals",
    "generalized_fock_and_gradient",
];

/// What a function takes: the free orbitals and the spaces its expression sums over.
struct Signature {
    name: String,
    orbitals: Vec<(Orb, String)>,
    spaces: Vec<(SpaceId, String)>,
}

impl Signature {
    /// The signature of a function computing these expressions; `coefficients` are taken first
    /// (by name, as `f64`), reserving their names.
    fn new(program: &Program, expressions: &[&Expr], name: String, local: &mut Identifiers) -> Signature {
        let mut orbs: Vec<Orb> = expressions.iter().flat_map(|e| e.free_orbs()).collect();
        orbs.sort();
        orbs.dedup();
        let orbitals = orbs.into_iter().map(|o| (o, local.fresh(&program.orb_name(o)))).collect();
        let mut spaces: Vec<SpaceId> = expressions
            .iter()
            .flat_map(|e| &e.terms)
            .flat_map(|t| {
                let closed = match t.factor {
                    Factor::Fock(_, _, c) | Factor::RefEnergy(c) => c.members(),
                    _ => vec![],
                };
                t.sums.iter().copied().chain(closed)
            })
            .collect();
        spaces.sort();
        spaces.dedup();
        let spaces = spaces.into_iter().map(|s| (s, local.fresh(&program.spaces[s as usize].name))).collect();
        Signature { name, orbitals, spaces }
    }

    /// The arguments of a call to `callee` from a function with this signature.
    fn arguments_for(&self, callee: &Signature) -> Vec<String> {
        let orbitals = callee.orbitals.iter().map(|(o, _)| self.orbital(*o).to_string());
        let spaces = callee.spaces.iter().map(|(s, _)| self.space(*s).to_string());
        std::iter::once("ints".to_string()).chain(orbitals).chain(spaces).collect()
    }

    /// Arguments from a test vector's binding: `&Hashed`, then orbital numbers and spaces.
    fn test_arguments(&self, binding: &crate::numbers::evaluate::Binding) -> Vec<String> {
        let mut arguments = vec!["&Hashed".to_string()];
        arguments.extend(self.orbitals.iter().map(|(o, _)| {
            match *o {
                Orb::Named(x) => binding.orbitals[x as usize],
                Orb::Index(x) => binding.indices[x as usize].unwrap_or(0),
                Orb::Summed(_) => 0,
            }
            .to_string()
        }));
        arguments.extend(self.spaces.iter().map(|(s, _)| {
            format!(
                "&[{}]",
                binding.spaces[*s as usize].iter().map(|m| m.to_string()).collect::<Vec<_>>().join(", ")
            )
        }));
        arguments
    }

    fn orbital(&self, o: Orb) -> &str {
        &self.orbitals.iter().find(|(x, _)| *x == o).expect("every free orbital is a parameter").1
    }

    fn space(&self, s: SpaceId) -> &str {
        &self.spaces.iter().find(|(x, _)| *x == s).expect("every summed space is a parameter").1
    }

    fn parameters(&self, uses_integrals: bool) -> Vec<String> {
        let mut out = vec![if uses_integrals { "ints: &I" } else { "_ints: &I" }.to_string()];
        out.extend(self.orbitals.iter().map(|(_, n)| format!("{n}: usize")));
        out.extend(self.spaces.iter().map(|(_, n)| format!("{n}: &[usize]")));
        out
    }
}

/// An f64 literal for an exact coefficient's magnitude, correctly rounded.
fn literal(c: &Exact) -> String {
    float(c.abs().to_f64_rounded())
}

/// An f64 literal that reads back to `v`, by its name where the standard library has one
/// (clippy refuses the digits of those).
fn float(v: f64) -> String {
    if v < 0.0 {
        return format!("-{}", float(-v));
    }
    // the standard library's constants are the same correctly rounded values
    if v == std::f64::consts::SQRT_2 {
        return "std::f64::consts::SQRT_2".into();
    }
    if v == std::f64::consts::FRAC_1_SQRT_2 {
        return "std::f64::consts::FRAC_1_SQRT_2".into();
    }
    let text = format!("{v:?}");
    if text.contains('.') || text.contains('e') { text } else { format!("{text}.0") }
}

/// `fn name<I: ...>(params) -> f64 {` in the layout rustfmt gives it; a density function
/// (`density`) takes no integrals and returns `Densities`.
fn header(name: &str, parameters: &[String], density: bool) -> String {
    let (generics, returns) = if density { ("", "Densities") } else { ("<I: Integrals + ?Sized>", "f64") };
    let one_line = format!("pub fn {name}{generics}({}) -> {returns} {{", parameters.join(", "));
    if one_line.len() <= 100 {
        return one_line + "\n";
    }
    let mut out = format!("pub fn {name}{generics}(\n");
    for p in parameters {
        out.push_str(&format!("    {p},\n"));
    }
    out + ") -> " + returns + " {\n"
}

/// A call `f(a, b, ...)` at `indent`, vertical when rustfmt would make it so.
fn call(f: &str, arguments: &[String], indent: usize) -> String {
    let one_line = format!("{f}({})", arguments.join(", "));
    if arguments.join(", ").len() <= 60 {
        return one_line;
    }
    let pad = " ".repeat(indent + 4);
    let mut out = format!("{f}(\n");
    for a in arguments {
        out.push_str(&format!("{pad}{a},\n"));
    }
    out + &" ".repeat(indent) + ")"
}

fn closed_argument(sig: &Signature, closed: SpaceSet) -> String {
    format!("&[{}]", closed.members().iter().map(|&s| sig.space(s)).collect::<Vec<_>>().join(", "))
}

/// The integral of a term as a Rust expression.
fn integral(factor: &Factor, sig: &Signature, summed: &[String]) -> String {
    let o = |x: Orb| match x {
        Orb::Summed(d) => summed[d as usize].clone(),
        other => sig.orbital(other).to_string(),
    };
    match *factor {
        Factor::One => "1.0".into(),
        Factor::H(p, q) => format!("ints.h({}, {})", o(p), o(q)),
        Factor::Eri(p, q, r, s) => format!("ints.eri({}, {}, {}, {})", o(p), o(q), o(r), o(s)),
        Factor::Fock(p, q, c) => format!("fock(ints, {}, {}, {})", o(p), o(q), closed_argument(sig, c)),
        Factor::RefEnergy(c) => format!("reference_energy(ints, {})", closed_argument(sig, c)),
        Factor::Gamma1(..) | Factor::Gamma2(..) => {
            unreachable!("density elements are written by `density_statement`, not read as numbers")
        }
    }
}

/// The statement of one term of an expression: `value += c * integral;`.
fn value_statement(term: &Term, sig: &Signature, summed: &[String]) -> String {
    let op = if term.coeff.is_negative() { "-=" } else { "+=" };
    let body = integral(&term.factor, sig, summed);
    let value = if term.coeff.abs() == Exact::one() {
        body
    } else if body == "1.0" {
        literal(&term.coeff)
    } else {
        format!("{} * {body}", literal(&term.coeff))
    };
    format!("value {op} {value};")
}

/// The statement of one term of a density: its coefficient added to its element.
fn density_statement(term: &Term, sig: &Signature, summed: &[String]) -> String {
    let o = |x: Orb| match x {
        Orb::Summed(d) => summed[d as usize].clone(),
        other => sig.orbital(other).to_string(),
    };
    let sign = if term.coeff.is_negative() { "-" } else { "" };
    let value = format!("{sign}{}", literal(&term.coeff));
    match term.factor {
        Factor::Gamma1(p, q) => format!("density.add_one({}, {}, {value});", o(p), o(q)),
        Factor::Gamma2(p, q, r, s) => {
            format!("density.add_two({}, {}, {}, {}, {value});", o(p), o(q), o(r), o(s))
        }
        other => unreachable!("a density holds only density elements, not {other:?}"),
    }
}

type Statement = fn(&Term, &Signature, &[String]) -> String;

fn group_code(group: &Group, namer: &Namer, sig: &Signature, statement: Statement, out: &mut String) {
    let mut local = Identifiers::new(KEYWORDS, RESERVED);
    for n in sig.orbitals.iter().map(|(_, n)| n).chain(sig.spaces.iter().map(|(_, n)| n)) {
        local.fresh(n);
    }
    let summed: Vec<String> = namer.summed_names(group.sums).iter().map(|n| local.fresh(n)).collect();
    let mut depth = 1;
    let pad = |d: usize| "    ".repeat(d);
    if !group.deltas.is_empty() {
        let conditions: Vec<String> =
            group.deltas.iter().map(|&(a, b)| format!("{} == {}", sig.orbital(a), sig.orbital(b))).collect();
        writeln!(out, "{}if {} {{", pad(depth), conditions.join(" && ")).ok();
        depth += 1;
    }
    for (d, &space) in group.sums.iter().enumerate() {
        writeln!(out, "{}for &{} in {} {{", pad(depth), summed[d], sig.space(space)).ok();
        depth += 1;
    }
    for term in &group.terms {
        writeln!(out, "{}{}", pad(depth), statement(term, sig, &summed)).ok();
    }
    while depth > 1 {
        depth -= 1;
        writeln!(out, "{}}}", pad(depth)).ok();
    }
}

const PREAMBLE: &str = r#"/// Integral access for the functions of this module: 0-based orbital numbers, real orbitals.
pub trait Integrals {
    /// The one-electron integral h_pq.
    fn h(&self, p: usize, q: usize) -> f64;
    /// The two-electron integral (pq|rs) in chemists' notation.
    fn eri(&self, p: usize, q: usize, r: usize, s: usize) -> f64;
}
"#;

const FOCK: &str = r#"
/// The Fock matrix of the closed spaces: f_pq = h_pq + sum over k in them of 2 (pq|kk) - (pk|kq).
pub fn fock<I: Integrals + ?Sized>(ints: &I, p: usize, q: usize, closed: &[&[usize]]) -> f64 {
    let mut value = ints.h(p, q);
    for space in closed {
        for &k in space.iter() {
            value += 2.0 * ints.eri(p, q, k, k) - ints.eri(p, k, k, q);
        }
    }
    value
}
"#;

/// What a module with density requests holds: the densities' type and the generalized Fock
/// matrix with the orbital gradient.
const DENSITIES: &str = r#"
/// Spin-summed density matrices over `n` orbitals, row-major: the one-particle density
/// g_pq = sum_s <a+_ps a_qs> at `one[p * n + q]` and the two-particle density
/// G_pqrs = sum_st <a+_ps a+_rt a_st a_qs> at `two[((p * n + q) * n + r) * n + s]`, so that
/// E = sum_pq g_pq h_pq + 1/2 sum_pqrs G_pqrs (pq|rs).
#[derive(Clone, Debug, PartialEq)]
pub struct Densities {
    pub n: usize,
    pub one: Vec<f64>,
    pub two: Vec<f64>,
}

impl Densities {
    /// Zero densities over `n` orbitals.
    pub fn zeros(n: usize) -> Densities {
        Densities {
            n,
            one: vec![0.0; n * n],
            two: vec![0.0; n * n * n * n],
        }
    }

    /// g_pq.
    pub fn one_at(&self, p: usize, q: usize) -> f64 {
        self.one[p * self.n + q]
    }

    /// G_pqrs.
    pub fn two_at(&self, p: usize, q: usize, r: usize, s: usize) -> f64 {
        self.two[((p * self.n + q) * self.n + r) * self.n + s]
    }

    /// Adds `value` to g_pq.
    pub fn add_one(&mut self, p: usize, q: usize, value: f64) {
        self.one[p * self.n + q] += value;
    }

    /// Adds `value` to G_pqrs.
    pub fn add_two(&mut self, p: usize, q: usize, r: usize, s: usize, value: f64) {
        self.two[((p * self.n + q) * self.n + r) * self.n + s] += value;
    }

    /// sum_pq g_pq h_pq + 1/2 sum_pqrs G_pqrs (pq|rs): the energy the densities give (for
    /// transition densities <S|H|T>), electronic part, with integrals over the same orbitals.
    pub fn energy<I: Integrals + ?Sized>(&self, ints: &I) -> f64 {
        let n = self.n;
        let mut value = 0.0;
        for p in 0..n {
            for q in 0..n {
                value += self.one_at(p, q) * ints.h(p, q);
                for r in 0..n {
                    for s in 0..n {
                        let g = self.two_at(p, q, r, s);
                        if g != 0.0 {
                            value += 0.5 * g * ints.eri(p, q, r, s);
                        }
                    }
                }
            }
        }
        value
    }

    /// F_pq = sum_r g_pr h_qr + sum_rst G_prst (qr|st), row-major; with `transposed`, of the
    /// densities g_qp and G_qpsr instead.
    fn fock<I: Integrals + ?Sized>(&self, ints: &I, transposed: bool) -> Vec<f64> {
        let n = self.n;
        let mut fock = vec![0.0; n * n];
        for p in 0..n {
            for r in 0..n {
                let g = if transposed {
                    self.one_at(r, p)
                } else {
                    self.one_at(p, r)
                };
                if g != 0.0 {
                    for q in 0..n {
                        fock[p * n + q] += g * ints.h(q, r);
                    }
                }
                for s in 0..n {
                    for t in 0..n {
                        let g = if transposed {
                            self.two_at(r, p, t, s)
                        } else {
                            self.two_at(p, r, s, t)
                        };
                        if g != 0.0 {
                            for q in 0..n {
                                fock[p * n + q] += g * ints.eri(q, r, s, t);
                            }
                        }
                    }
                }
            }
        }
        fock
    }
}

/// The generalized Fock matrix F_pq = sum_r g_pr h_qr + sum_rst G_prst (qr|st) and the orbital
/// gradient dE/dkappa_pq of E = sum g_pq h_pq + 1/2 sum G_pqrs (pq|rs), both n x n row-major,
/// for the rotation phi'_p = sum_q phi_q U_qp with U = exp(kappa), kappa antisymmetric:
/// dE/dkappa_pq = 2 (F_qp - F_pq) for the densities of one state (which are symmetric). For
/// transition densities it is F_qp + F'_qp - F_pq - F'_pq, F' from g_qp and G_qpsr: the
/// derivative of <S|H|T> with the orbitals of both states rotated. The integrals are over the
/// densities' n orbitals.
pub fn generalized_fock_and_gradient<I: Integrals + ?Sized>(
    ints: &I,
    densities: &Densities,
) -> (Vec<f64>, Vec<f64>) {
    let n = densities.n;
    let fock = densities.fock(ints, false);
    let transposed = densities.fock(ints, true);
    let mut gradient = vec![0.0; n * n];
    for p in 0..n {
        for q in 0..n {
            gradient[p * n + q] =
                fock[q * n + p] + transposed[q * n + p] - fock[p * n + q] - transposed[p * n + q];
        }
    }
    (fock, gradient)
}
"#;

/// The test helpers of density functions: test integrals as arrays that can be rotated, the
/// comparison of densities, and the gradient against central finite differences.
const DENSITY_TESTS: &str = r#"
    /// The test integrals over n orbitals as arrays, to rotate.
    struct Table {
        n: usize,
        h: Vec<f64>,
        eri: Vec<f64>,
    }

    impl Integrals for Table {
        fn h(&self, p: usize, q: usize) -> f64 {
            self.h[p * self.n + q]
        }
        fn eri(&self, p: usize, q: usize, r: usize, s: usize) -> f64 {
            self.eri[((p * self.n + q) * self.n + r) * self.n + s]
        }
    }

    impl Table {
        fn hashed(n: usize) -> Table {
            let h = (0..n * n).map(|k| Hashed.h(k / n, k % n)).collect();
            let eri = (0..n * n * n * n)
                .map(|k| Hashed.eri(k / (n * n * n), k / (n * n) % n, k / n % n, k % n))
                .collect();
            Table { n, h, eri }
        }

        /// The integrals of the orbitals phi'_p = sum_q phi_q U_qp with U = exp(kappa), kappa_pq
        /// = t and kappa_qp = -t (a rotation by t in the (p, q) plane), index by index.
        fn rotated(&self, p: usize, q: usize, t: f64) -> Table {
            let n = self.n;
            let mut u: Vec<f64> = (0..n * n)
                .map(|k| if k / n == k % n { 1.0 } else { 0.0 })
                .collect();
            u[p * n + p] = t.cos();
            u[q * n + q] = t.cos();
            u[p * n + q] = t.sin();
            u[q * n + p] = -t.sin();
            let transform = |x: &[f64], rank: u32| {
                let mut x = x.to_vec();
                for axis in 0..rank {
                    let stride = n.pow(rank - 1 - axis);
                    let y: Vec<f64> = (0..x.len())
                        .map(|k| {
                            let (a, base) = (k / stride % n, k - k / stride % n * stride);
                            (0..n).map(|b| u[b * n + a] * x[base + b * stride]).sum()
                        })
                        .collect();
                    x = y;
                }
                x
            };
            Table {
                n,
                h: transform(&self.h, 2),
                eri: transform(&self.eri, 4),
            }
        }
    }

    /// Densities equal to the listed nonzero elements, every other element zero.
    fn check_densities(
        d: &Densities,
        one: &[(usize, usize, f64)],
        two: &[(usize, usize, usize, usize, f64)],
    ) {
        let mut expected = Densities::zeros(d.n);
        for &(p, q, value) in one {
            expected.add_one(p, q, value);
        }
        for &(p, q, r, s, value) in two {
            expected.add_two(p, q, r, s, value);
        }
        for (k, (&got, &want)) in d.one.iter().zip(&expected.one).enumerate() {
            assert!(
                close(got, want),
                "one-particle element {k}: {got} vs {want}"
            );
        }
        for (k, (&got, &want)) in d.two.iter().zip(&expected.two).enumerate() {
            assert!(
                close(got, want),
                "two-particle element {k}: {got} vs {want}"
            );
        }
    }

    /// The gradient of generalized_fock_and_gradient equals central differences of the energy of
    /// the densities under rotations by +-1e-4 in every plane (p, q), within 1e-6 relative.
    fn check_gradient(d: &Densities) {
        let table = Table::hashed(d.n);
        let (_, gradient) = generalized_fock_and_gradient(&table, d);
        let step = 1e-4;
        for p in 0..d.n {
            for q in 0..p {
                let plus = d.energy(&table.rotated(p, q, step));
                let minus = d.energy(&table.rotated(p, q, -step));
                let difference = (plus - minus) / (2.0 * step);
                let g = gradient[p * d.n + q];
                assert!(
                    (g - difference).abs() <= 1e-6 * g.abs().max(1.0),
                    "dE/dkappa_{p}{q}: {g} vs {difference}"
                );
            }
        }
    }
"#;

const REFERENCE: &str = r#"
/// The energy of the closed spaces alone: sum of 2 h_kk + sum over k, l of 2 J_kl - K_kl.
pub fn reference_energy<I: Integrals + ?Sized>(ints: &I, closed: &[&[usize]]) -> f64 {
    let mut value = 0.0;
    for space in closed {
        for &k in space.iter() {
            value += 2.0 * ints.h(k, k);
            for other in closed {
                for &l in other.iter() {
                    value += 2.0 * ints.eri(k, k, l, l) - ints.eri(k, l, l, k);
                }
            }
        }
    }
    value
}
"#;

const TEST_PREAMBLE: &str = r#"
#[cfg(test)]
mod tests {
    use super::*;

    /// The integrals the expected values were computed on: each canonical integral's key
    /// (h_pq: 2 pair(p, q); (pq|rs): 2 pair(pair(p, q), pair(r, s)) + 1) through splitmix64.
    struct Hashed;

    fn pair(x: usize, y: usize) -> u64 {
        let (hi, lo) = (x.max(y) as u64, x.min(y) as u64);
        hi * (hi + 1) / 2 + lo
    }

    fn hashed(key: u64) -> f64 {
        let mut z = (key ^ SEED).wrapping_add(0x9e37_79b9_7f4a_7c15);
        z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
        z ^= z >> 31;
        (z >> 11) as f64 / (1u64 << 53) as f64 - 0.5
    }

    impl Integrals for Hashed {
        fn h(&self, p: usize, q: usize) -> f64 {
            hashed(2 * pair(p, q))
        }
        fn eri(&self, p: usize, q: usize, r: usize, s: usize) -> f64 {
            hashed(2 * pair(pair(p, q) as usize, pair(r, s) as usize) + 1)
        }
    }

    fn close(derived: f64, expected: f64) -> bool {
        (derived - expected).abs() <= 1e-10 * expected.abs().max(1.0)
    }
"#;

/// A function name for a request: its keyword and operand names, or its number when an
/// operand is written out.
fn function_name(kind: RequestKind, operands: &[&str], number: usize) -> String {
    let simple =
        operands.iter().all(|o| o.chars().all(|c| c.is_ascii_alphanumeric() || c == '_' || c == '.'));
    if simple {
        format!("{}_{}", kind.keyword(), operands.join("_"))
    } else {
        format!("{}_{number}", kind.keyword())
    }
}

pub fn render(program: &Program, derivations: &[Checked]) -> Result<String> {
    let mut out = format!(
        "//! Closed formulas derived by spinfold from `{}`, verified against brute-force\n//! determinant algebra. Regenerate rather than edit.\n\n",
        program.source.name.replace(['\n', '\r'], " ")
    );
    out.push_str(PREAMBLE);
    let uses = |kind: IntegralKind| {
        derivations
            .iter()
            .flat_map(|(d, _)| super::expressions(d))
            .flat_map(|e| &e.terms)
            .any(|t| t.kind() == kind)
    };
    if uses(IntegralKind::Fock) {
        out.push_str(FOCK);
    }
    if uses(IntegralKind::RefEnergy) {
        out.push_str(REFERENCE);
    }
    if derivations.iter().any(|(d, _)| d.density_symmetry().is_some()) {
        out.push_str(DENSITIES);
    }
    let mut names = Identifiers::new(KEYWORDS, RESERVED);
    let mut tests = Tests::default();
    for (n, (request, (d, _))) in program.requests.iter().zip(derivations).enumerate() {
        let operands: Vec<&str> = if matches!(
            d.kind,
            RequestKind::Energy | RequestKind::Spin | RequestKind::Density | RequestKind::Shells
        ) {
            vec![&d.bra]
        } else {
            vec![&d.bra, &d.ket]
        };
        let base = function_name(d.kind, &operands, n + 1);
        let Some(block) = &d.block else {
            let name = names.fresh(&base);
            function(program, request, d, name, &mut out, &mut tests)?;
            continue;
        };
        let mut callees = vec![];
        for (pair, pd) in block.block.pairs.iter().zip(&block.pairs) {
            let which = super::pair_label(program, d.kind, &block.block, pair, "_");
            let h = (pd.kind == RequestKind::Element)
                .then(|| {
                    function(
                        program,
                        &pair.request,
                        pd,
                        names.fresh(&format!("{base}_h_{which}")),
                        &mut out,
                        &mut tests,
                    )
                })
                .transpose()?;
            let (overlap_request, overlap) = super::overlap_of(&pair.request, pd);
            let s = function(
                program,
                &overlap_request,
                &overlap,
                names.fresh(&format!("{base}_s_{which}")),
                &mut out,
                &mut tests,
            )?;
            callees.push((h, s));
        }
        if d.kind != RequestKind::Roots {
            assembled(program, request, d, block, &callees, names.fresh(&base), &mut out, &mut tests)?;
        }
    }
    out.push_str(TEST_PREAMBLE.replace("SEED", &format!("0x{TEST_SEED:x}")).as_str());
    if tests.densities {
        out.push_str(DENSITY_TESTS);
    }
    out.push_str(&tests.code);
    out.push_str("}\n");
    Ok(out)
}

/// The tests of a module, and whether any checks densities (and needs their helpers).
#[derive(Default)]
struct Tests {
    code: String,
    densities: bool,
}

/// One function for one derivation, with its tests; returns its signature. The function
/// computes the value, or for a density request fills the densities over `n_orbitals` orbitals.
fn function(
    program: &Program,
    request: &Request,
    d: &Derivation,
    name: String,
    out: &mut String,
    tests: &mut Tests,
) -> Result<Signature> {
    let sig = Signature::new(program, &[&d.value], name, &mut Identifiers::new(KEYWORDS, RESERVED));
    let namer = Namer::new(program, &[&d.value]);
    let density = d.density_symmetry().is_some();
    out.push('\n');
    writeln!(out, "/// `{}`: {}.", d.text.replace('`', "'"), meaning(d.kind)).ok();
    out.push_str("///\n/// ```text\n");
    let formula = super::text::render(program, std::slice::from_ref(&(d.clone(), None)), true);
    for line in formula.lines().skip(1).filter(|l| !l.contains("not verified")) {
        writeln!(out, "/// {}", line.trim_end()).ok();
    }
    out.push_str("/// ```\n");
    let parameters = if density {
        let mut p = vec!["n_orbitals: usize".to_string()];
        p.extend(sig.parameters(false).into_iter().skip(1));
        p
    } else {
        sig.parameters(d.value.terms.iter().any(|t| t.factor != Factor::One))
    };
    if parameters.len() > 7 {
        out.push_str("#[allow(clippy::too_many_arguments)]\n");
    }
    out.push_str(&header(&sig.name, &parameters, density));
    let (zero, local, statement): (&str, &str, Statement) = if density {
        ("Densities::zeros(n_orbitals)", "density", density_statement)
    } else {
        ("0.0", "value", value_statement)
    };
    if d.value.is_zero() {
        writeln!(out, "    {zero}\n}}").ok();
    } else {
        writeln!(out, "    let mut {local} = {zero};").ok();
        for group in groups(&d.value) {
            group_code(&group, &namer, &sig, statement, out);
        }
        writeln!(out, "    {local}\n}}").ok();
    }
    if density {
        for (k, v) in super::density_test_vectors(program, request, d).iter().enumerate() {
            density_test(tests, &sig, k + 1, v);
        }
    } else {
        for (k, v) in test_vectors(program, request, d)?.iter().enumerate() {
            test(tests, &sig.name, k + 1, v.source, &sig.test_arguments(&v.binding), v.expected);
        }
    }
    Ok(sig)
}

/// A test of a density function: its densities against the listed non-zero elements, the energy
/// they give at the test integrals, and the orbital gradient against finite differences.
fn density_test(tests: &mut Tests, sig: &Signature, number: usize, v: &DensityTestVector) {
    tests.densities = true;
    let mut arguments = sig.test_arguments(&v.vector.binding);
    arguments[0] = v.vector.orbitals.to_string();
    let out = &mut tests.code;
    write!(out, "\n    #[test]\n    fn check_{}_{number}() {{\n", sig.name).ok();
    writeln!(out, "        // expected densities and energy: {}", v.vector.source).ok();
    writeln!(out, "        let d = {};", call(&sig.name, &arguments, 8)).ok();
    let n = v.densities.n;
    let list = |values: &[f64]| -> Vec<String> {
        DensityTestVector::nonzero(values, n)
            .into_iter()
            .map(|(orbitals, x)| {
                let orbitals: Vec<String> = orbitals.iter().map(|o| o.to_string()).collect();
                format!("({}, {})", orbitals.join(", "), float(x))
            })
            .collect()
    };
    let arrays = [list(&v.densities.one), list(&v.densities.two)];
    let one_line = format!("check_densities(&d, &[{}], &[{}]);", arrays[0].join(", "), arrays[1].join(", "));
    if one_line.len() - "check_densities();".len() <= 60 {
        writeln!(out, "        {one_line}").ok();
    } else {
        writeln!(out, "        check_densities(\n            &d,").ok();
        for items in &arrays {
            let inline = format!("&[{}],", items.join(", "));
            if inline.len() <= 62 {
                writeln!(out, "            {inline}").ok();
            } else {
                writeln!(out, "            &[").ok();
                for item in items {
                    writeln!(out, "                {item},").ok();
                }
                writeln!(out, "            ],").ok();
            }
        }
        writeln!(out, "        );").ok();
    }
    writeln!(out, "        let energy = d.energy(&Hashed);").ok();
    writeln!(out, "        assert!(close(energy, {}), \"{{energy}}\");", float(v.vector.expected)).ok();
    writeln!(out, "        check_gradient(&d);").ok();
    out.push_str("    }\n");
}

fn test(tests: &mut Tests, name: &str, number: usize, source: &str, arguments: &[String], expected: f64) {
    let tests = &mut tests.code;
    write!(tests, "\n    #[test]\n    fn check_{name}_{number}() {{\n").ok();
    writeln!(tests, "        // expected value: {source}").ok();
    writeln!(tests, "        let derived = {};", call(name, arguments, 8)).ok();
    writeln!(tests, "        assert!(close(derived, {expected:?}), \"{{derived}}\");").ok();
    tests.push_str("    }\n");
}

/// For free coefficients: the function of the coefficients that assembles the request from the
/// pair functions (`callees`: each pair's <f|H|g> function, if it has one, and its <f|g>), tested at
/// one set of coefficient values against brute force on the state they make.
#[allow(clippy::too_many_arguments)]
fn assembled(
    program: &Program,
    request: &Request,
    d: &Derivation,
    block: &BlockDerivation,
    callees: &[(Option<Signature>, Signature)],
    name: String,
    out: &mut String,
    tests: &mut Tests,
) -> Result<()> {
    let used = block.block.coefficients();
    let mut local = Identifiers::new(KEYWORDS, RESERVED);
    let coefficients: Vec<String> =
        used.iter().map(|&c| local.fresh(&program.coefficients[c as usize].name)).collect();
    let expressions: Vec<&Expr> = block.pairs.iter().flat_map(|p| [&p.value, &p.overlap]).collect();
    let sig = Signature::new(program, &expressions, name, &mut local);
    let coefficient =
        |c: Option<u32>| c.map(|c| coefficients[used.iter().position(|&u| u == c).expect("used")].clone());
    out.push('\n');
    let what = match d.kind {
        RequestKind::Energy => {
            format!("<{0}|H|{0}> / <{0}|{0}>, electronic part (add the constant energy)", d.bra)
        }
        RequestKind::Overlap => format!("<{}|{}>", d.bra, d.ket),
        _ => format!("<{0}|H|{1}>, electronic part (add the constant times <{0}|{1}>)", d.bra, d.ket),
    };
    writeln!(
        out,
        "/// `{}` at values of its free coefficients: {}.",
        d.text.replace('`', "'"),
        what.replace('`', "'")
    )
    .ok();
    writeln!(out, "///\n/// Assembled from the functions of its pairs above.").ok();
    let mut parameters = vec!["ints: &I".to_string()];
    parameters.extend(coefficients.iter().map(|c| format!("{c}: f64")));
    parameters.extend(sig.parameters(true).into_iter().skip(1));
    if parameters.len() > 7 {
        out.push_str("#[allow(clippy::too_many_arguments)]\n");
    }
    out.push_str(&header(&sig.name, &parameters, false));
    let mut sums = [String::new(), String::new()];
    for ((pair, (h, s)), k) in block.block.pairs.iter().zip(callees).zip(1..) {
        let product: Vec<String> =
            [block.block.rows[pair.row].coefficient, block.block.columns[pair.column].coefficient]
                .into_iter()
                .filter_map(coefficient)
                .collect();
        let weight = if block.block.symmetric && pair.row != pair.column { "2.0 * " } else { "" };
        let factor = format!("{weight}{}", product.iter().map(|c| format!("{c} * ")).collect::<String>());
        // an element needs no overlap: the constant times <X|Y> is the caller's
        let s = Some(s).filter(|_| d.kind != RequestKind::Element);
        for (sum, callee, local) in [(0, h.as_ref(), "h"), (1, s, "s")] {
            let Some(callee) = callee else { continue };
            writeln!(out, "    let {local}_{k} = {};", call(&callee.name, &sig.arguments_for(callee), 4))
                .ok();
            sums[sum].push_str(&format!("    {} += {factor}{local}_{k};\n", ["value", "overlap"][sum]));
        }
    }
    for (k, name) in ["value", "overlap"].into_iter().enumerate().filter(|(k, _)| !sums[*k].is_empty()) {
        writeln!(out, "    let mut {name} = 0.0;").ok();
        out.push_str(&sums[k]);
    }
    out.push_str(match d.kind {
        RequestKind::Energy => "    value / overlap\n}\n",
        RequestKind::Overlap => "    overlap\n}\n",
        _ => "    value\n}\n",
    });
    if let Some((values, at_request, at)) = super::assembled_test(request, d, block) {
        for (k, v) in test_vectors(program, &at_request, &at)?
            .iter()
            .enumerate()
            .filter(|(_, v)| v.source == "brute force")
        {
            let mut arguments = sig.test_arguments(&v.binding);
            let numbers = used.iter().map(|c| format!("{:?}", values[c].to_f64_rounded()));
            arguments.splice(1..1, numbers);
            test(tests, &sig.name, k + 1, v.source, &arguments, v.expected);
        }
    }
    Ok(())
}

fn meaning(kind: RequestKind) -> &'static str {
    match kind {
        RequestKind::Energy => "the energy <X|H|X>/<X|X>, electronic part (add the constant energy)",
        RequestKind::Element | RequestKind::Roots => {
            "the matrix element <X|H|Y>, electronic part (add the constant times <X|Y>)"
        }
        RequestKind::Overlap => "the overlap <X|Y>",
        RequestKind::Spin => "the expectation value <S^2>",
        RequestKind::Density => {
            "the densities <X| ... |X>/<X|X> over `n_orbitals` orbitals (see `Densities`)"
        }
        RequestKind::TransitionDensity => {
            "the transition densities <X| ... |Y> over `n_orbitals` orbitals (see `Densities`)"
        }
        RequestKind::Shells => {
            "the energy <X|H|X>/<X|X> in open shells, electronic part (add the constant energy)"
        }
    }
}

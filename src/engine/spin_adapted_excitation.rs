//! Spin-adapted excitations: the open shells an excitation of a closed-shell determinant makes
//! (holes, then particles), when they are the same in every coincidence case, and the signed
//! determinants of each of their spin functions.

use crate::engine::coincidence::{self, Case};
use crate::engine::coupling::expand;
use crate::engine::derive::used_indices;
use crate::engine::determinant::{CaseDet, Vanishing};
use crate::engine::exact::Exact;
use crate::error::ErrorKind;
use crate::language::orbital::{Orb, Spin, SpinOrbital};
use crate::language::program::{Coupling, DetSpec, Excitation, Occupant, Program, State};

/// The open shells of an excitation of a closed-shell determinant, and the determinant that
/// leaves every one of them alpha: the coupling's reference.
pub struct ExcitedShells {
    /// The holes in the order the excitation lists them, then the particles.
    pub open: Vec<Orb>,
    /// `base[h1' .. hn' -> p1 .. pn]`.
    pub reference: DetSpec,
}

fn spin(alpha: bool) -> Spin {
    if alpha { Spin::Alpha } else { Spin::Beta }
}

fn excited(base: &DetSpec, excitation: Excitation) -> DetSpec {
    DetSpec { occupants: base.occupants.clone(), excitations: vec![excitation] }
}

/// The case of a determinant's generic indices in which all of them differ.
fn all_different(program: &Program, det: &DetSpec) -> Case {
    let state = State::new(vec![(Exact::one(), det.clone())]);
    let (used, closed, _) = used_indices(program, &[&state]);
    coincidence::cases(&used, &closed, true).swap_remove(0)
}

/// Checks `base[excitation]` as the operand of a csf and finds its open shells: `base` must be
/// closed-shell, the excitation must carry no spin marks, move electrons out of doubly
/// occupied orbitals into empty ones, and (unless `distinct`) leave the same open shells in
/// every coincidence case of its generic indices. `det` names the determinant and `operand`
/// the whole operand in messages.
pub fn excited_shells(
    program: &Program,
    base: &DetSpec,
    excitation: &Excitation,
    (det, operand): (&str, &str),
    distinct: bool,
) -> Result<ExcitedShells, ErrorKind> {
    for so in excitation.from.iter().chain(&excitation.to) {
        if so.spin == Spin::Beta {
            return Err(ErrorKind::Coupling {
                why: format!(
                    "`{}` carries a spin mark; in a csf the coupling sets the spins: write `{}`",
                    program.spin_orbital_name(*so),
                    program.orb_name(so.orb)
                ),
            });
        }
    }
    if let Some(orbital) = single_electron(base) {
        return Err(ErrorKind::ClosedShellNeeded { det: det.into(), orbital: program.orb_name(orbital) });
    }
    let holes: Vec<Orb> = excitation.from.iter().map(|x| x.orb).collect();
    let particles: Vec<Orb> = excitation.to.iter().map(|x| x.orb).collect();
    let reference = excited(
        base,
        Excitation {
            from: holes.iter().map(|&h| SpinOrbital::new(h, Spin::Beta)).collect(),
            to: particles.iter().map(|&p| SpinOrbital::new(p, Spin::Alpha)).collect(),
        },
    );
    // occupations where every index differs, with the excitation's indices written out
    let case = all_different(program, &reference);
    let electrons = match CaseDet::build(base, &case) {
        Ok((_, d)) => d.electrons,
        Err(Vanishing::Pauli(so)) => {
            return Err(ErrorKind::Pauli { spin_orbital: program.spin_orbital_name(so) });
        }
        Err(Vanishing::Empty(_)) => unreachable!("a determinant without excitations removes nothing"),
    };
    let occupation = |orb: Orb| electrons.iter().filter(|e| e.orb == case.orb(orb)).count();
    for (orbs, hole, wanted) in [(&holes, true, 2), (&particles, false, 0)] {
        if let Some(&orb) = orbs.iter().find(|&&o| occupation(o) != wanted) {
            return Err(ErrorKind::ExcitedShell { orbital: program.orb_name(orb), det: det.into(), hole });
        }
    }
    let open: Vec<Orb> = holes.iter().chain(&particles).copied().collect();
    if !distinct {
        let cases = coinciding(program, &open);
        if !cases.is_empty() {
            return Err(ErrorKind::OpenShellsDepend { operand: operand.into(), cases: cases.join("; ") });
        }
    }
    Ok(ExcitedShells { open, reference })
}

/// The first orbital holding one electron in a determinant's explicit electrons.
fn single_electron(det: &DetSpec) -> Option<Orb> {
    let electrons: Vec<SpinOrbital> = det
        .occupants
        .iter()
        .filter_map(|o| match o {
            Occupant::Electron(so) => Some(*so),
            Occupant::Closed(_) => None,
        })
        .collect();
    electrons.iter().map(|e| e.orb).find(|&orb| electrons.iter().filter(|e| e.orb == orb).count() != 2)
}

/// For every two open shells that are generic indices of one space (two holes or two
/// particles: a hole is occupied and a particle empty, so they never share a space), the open
/// shells left when they are equal, in words; empty when no two can coincide. Every coarser
/// case equates one such pair, so these name every case whose open shells differ.
fn coinciding(program: &Program, open: &[Orb]) -> Vec<String> {
    let name = |orb: Orb| program.orb_name(orb);
    let mut out = vec![];
    for (k, &x) in open.iter().enumerate() {
        for &y in &open[k + 1..] {
            if program.space_of(x).is_none() || program.space_of(x) != program.space_of(y) {
                continue;
            }
            // with y = x, an orbital is open when one hole or one particle lands on it
            let merged: Vec<Orb> = open.iter().map(|&o| if o == y { x } else { o }).collect();
            let left: Vec<String> = open
                .iter()
                .filter(|&&o| o != y && merged.iter().filter(|&&m| m == o).count() == 1)
                .map(|&o| name(o))
                .collect();
            let shells = if left.is_empty() {
                "there are none".to_string()
            } else {
                format!("the open shells are {} only", left.join(", "))
            };
            out.push(format!("when {} = {} {shells}", name(x), name(y)));
        }
    }
    out
}

/// The closed-shell determinant with its closed spaces first and every doubly occupied orbital
/// as `o^2` (alpha then beta), in the order the orbitals first appear.
fn paired(base: &DetSpec) -> DetSpec {
    let mut occupants: Vec<Occupant> =
        base.occupants.iter().filter(|o| matches!(o, Occupant::Closed(_))).copied().collect();
    for occupant in &base.occupants {
        if let Occupant::Electron(so) = occupant
            && !occupants.contains(&Occupant::Electron(SpinOrbital::new(so.orb, Spin::Alpha)))
        {
            occupants.push(Occupant::Electron(SpinOrbital::new(so.orb, Spin::Alpha)));
            occupants.push(Occupant::Electron(SpinOrbital::new(so.orb, Spin::Beta)));
        }
    }
    DetSpec { occupants, excitations: vec![] }
}

/// The determinants of a coupled excitation (`Shells::Excited`) with their coefficients. Each
/// spin function of the open shells is the excitation of the closed-shell determinant that
/// leaves those spins; its sign makes it equal the determinant with the closed part first and
/// the open shells in order, | C h1 .. hn p1 .. pn |, which the engine builds too (as the
/// excitation of the closed part written `o^2` that empties every hole and then creates the
/// open shells in order): the coupled function is that of | C h1 .. pn |, as `csf` couples an
/// explicit determinant.
pub fn determinants(program: &Program, coupling: &Coupling) -> Vec<(Exact, DetSpec)> {
    let excitation = coupling.reference.excitations.last().expect("an excited coupling has its excitation");
    let base = DetSpec { occupants: coupling.reference.occupants.clone(), excitations: vec![] };
    let holes: Vec<Orb> = excitation.from.iter().map(|x| x.orb).collect();
    let particles: Vec<Orb> = excitation.to.iter().map(|x| x.orb).collect();
    let closed_first = paired(&base);
    let case = all_different(program, &coupling.reference);
    expand(&coupling.path, coupling.m)
        .into_iter()
        .map(|(spins, coefficient)| {
            let (hole_spins, particle_spins) = spins.split_at(holes.len());
            let particles_with_spins =
                particles.iter().zip(particle_spins).map(|(&p, &a)| SpinOrbital::new(p, spin(a)));
            // a hole keeping an alpha electron lost its beta one
            let det = excited(
                &base,
                Excitation {
                    from: holes
                        .iter()
                        .zip(hole_spins)
                        .map(|(&h, &a)| SpinOrbital::new(h, spin(!a)))
                        .collect(),
                    to: particles_with_spins.clone().collect(),
                },
            );
            let in_order = excited(
                &closed_first,
                Excitation {
                    from: holes
                        .iter()
                        .flat_map(|&h| [true, false].map(|a| SpinOrbital::new(h, spin(a))))
                        .collect(),
                    to: holes
                        .iter()
                        .zip(hole_spins)
                        .map(|(&h, &a)| SpinOrbital::new(h, spin(a)))
                        .chain(particles_with_spins)
                        .collect(),
                },
            );
            let build =
                |d: &DetSpec| CaseDet::build(d, &case).expect("the excitation was checked at its csf");
            let ((sign, built), (sign_in_order, built_in_order)) = (build(&det), build(&in_order));
            debug_assert_eq!(built, built_in_order, "both are the same determinant");
            (if sign == sign_in_order { coefficient } else { -coefficient }, det)
        })
        .collect()
}

#!/usr/bin/env python3
"""Reference energies for orbital optimization (`spinfold optimize`), made with PySCF.

Run from the repository root:

    pip install pyscf numpy scipy
    python3 tests/pyscf/make_optimize_fixtures.py

Writes, under tests/fixtures/:
  * one integral-dump file per case, in orbitals that are deliberately NOT optimal for the
    state of the case: the closed-shell RHF orbitals of a related species (an anion, or the
    closed-shell singlet of the same nuclei), or converged orbitals under a seeded random
    rotation.  Where the molecule's point group is used, ORBSYM holds each orbital's irrep in
    the dump format's numbering (1-based, as pyscf.tools.fcidump.ORBSYM_MAP gives it); the
    rotations then stay inside each irrep.  Without symmetry, ORBSYM is all 1 and the
    rotation mixes every pair of orbitals;
  * optimize_reference.json: per case, the molecule, basis, geometry, point group, dump name,
    NORB, NELEC, the spinfold input (tests/inputs/optimize_*.spinfold), the request, the
    `--bind` options (1-based orbital numbers of the dump), the energy of the state in the
    dump's own orbitals (`start_energy`), and the PySCF reference energy of the optimized
    state with its `source`, a `cross_check` made a second way, and the test tolerance.

The states and their references:
  * high-spin doublet and triplet (`det D = | core^2 a |`, `det T = | core^2 a b |`):
    PySCF ROHF;
  * closed shell (`det C = | core^2 |`): PySCF RHF;
  * pair function (`state P = cg | core^2 g^2 | + cu | core^2 u^2 |`, g and u of different
    irreps): PySCF CASSCF(2,2) with symmetry, CI restricted to the totally symmetric irrep,
    so that only g^2 and u^2 enter;
  * open-shell singlet of two orbitals of different irreps (`csf O = | core^2 a b | S=0`):
    PySCF state-specific CASSCF(2,2) of that wavefunction symmetry, spin fixed to singlet.

Every reference is made twice (a second PySCF run from a different start, and the energy
rebuilt from integrals in the converged orbitals with the closed form of the state), and the
start energy twice (closed form from the dump read back with pyscf.tools.fcidump.read, and
PySCF's own energy functional or CASCI on the same orbitals).  The script stops with an
assertion error, writing nothing, if any pair disagrees.  Output is deterministic
(single-threaded, seeded rotations).
"""

import os
import shutil
import sys
import tempfile

# Single-threaded linear algebra keeps the output bit-for-bit reproducible.
for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ[_var] = "1"

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))

import json  # noqa: E402
import math  # noqa: E402

import numpy  # noqa: E402
import pyscf  # noqa: E402
import scipy.linalg  # noqa: E402
from pyscf import ao2mo, gto, mcscf, scf, symm  # noqa: E402
from pyscf.tools import fcidump  # noqa: E402

from make_fixtures import FIXTURES, check_close, geometry_record  # noqa: E402

REFERENCE_JSON = os.path.join(FIXTURES, "optimize_reference.json")
FLOAT_FORMAT = " %.17g"  # round-trips every double exactly
DUMP_TOL = 1e-14  # only numerical noise from symmetry-zero integrals is left out

SCF_CONV_TOL = 1e-13
SCF_CONV_TOL_GRAD = 1e-10
CASSCF_CONV_TOL = 1e-12
CASSCF_CONV_TOL_GRAD = 1e-6  # PySCF stalls near 1e-7 here; the energy error is ~ gradient^2
CROSS_TOL = 1e-9  # the same energy made two ways in the same orbitals
SECOND_RUN_TOL = 1e-8  # the minimum reached by a second PySCF run from another start
MIN_START_GAP = 1e-3  # the start must be this far above the minimum (hartree)
SCF_TOLERANCE = 1e-8  # the tests' tolerance for ROHF and RHF energies
CASSCF_TOLERANCE = 1e-7  # the tests' tolerance for CASSCF energies
COEFFICIENT_TOLERANCE = 1e-5  # the tests' tolerance for |cg|, |cu| (normalized)

ROHF_SOURCE = ("pyscf.scf.ROHF(mol) with the point group on (symmetry={group}), "
               "conv_tol=1e-13, conv_tol_grad=1e-10; mf.e_tot (total energy, hartree)")
RHF_SOURCE = ("pyscf.scf.RHF(mol) (symmetry={group}), conv_tol=1e-13, conv_tol_grad=1e-10; "
              "mf.e_tot (total energy, hartree)")
SCF_CROSS = ("(1) pyscf.scf.{method} without symmetry, started from the density of the dump's "
             "orbitals, reaches the same energy to {second:g}, and its internal stability "
             "analysis (mf.stability()) finds no lower solution; (2) the closed form of the "
             "state from integrals in the converged orbitals equals mf.e_tot to {cross:g}")


# ----------------------------------------------------------------------------
# molecules (scenarios of our own)
# ----------------------------------------------------------------------------

def bent_atoms(heavy, r_angstrom, angle_degrees):
    """A bent XH2 in the yz plane, X at the origin, the C2 axis along z."""
    half = math.radians(angle_degrees) / 2
    y, z = round(r_angstrom * math.sin(half), 6), round(r_angstrom * math.cos(half), 6)
    return [(heavy, (0.0, 0.0, 0.0)), ("H", (0.0, y, z)), ("H", (0.0, -y, z))]


def diatomic(a, b, r):
    return [(a, (0.0, 0.0, 0.0)), (b, (0.0, 0.0, r))]


def build(atoms, basis, unit, group, spin=0, charge=0):
    """A molecule with the point group `group` (a D2h/C2v subgroup name) or none (False)."""
    kwargs = dict(atom=atoms, basis=basis, unit=unit, spin=spin, charge=charge, verbose=0)
    if group:
        kwargs.update(symmetry=True, symmetry_subgroup=group)
    else:
        kwargs.update(symmetry=False)
    mol = gto.M(**kwargs)
    if group:
        assert mol.groupname == group, (mol.groupname, group)
    return mol


def irreps(mol, c):
    """PySCF's irrep ids of the columns of c (all 0 without symmetry)."""
    if not mol.symmetry:
        return [0] * c.shape[1]
    return [int(x) for x in symm.label_orb_symm(mol, mol.irrep_id, mol.symm_orb, c)]


def irrep_names(mol, ids):
    if not mol.symmetry:
        return ["A"] * len(ids)
    return [symm.irrep_id2name(mol.groupname, i) for i in ids]


def dump_orbsym(mol, ids):
    """ORBSYM of the dump format (1-based irreps in its own order), or all 1 without symmetry.

    PySCF numbers the irreps of D2h and its subgroups differently from the dump format; its
    fcidump.ORBSYM_MAP gives the dump number of each PySCF irrep id.
    """
    if not mol.symmetry:
        return [1] * len(ids)
    return [fcidump.ORBSYM_MAP[mol.groupname][i] for i in ids]


def run_scf(mf):
    mf.conv_tol = SCF_CONV_TOL
    mf.conv_tol_grad = SCF_CONV_TOL_GRAD
    mf.max_cycle = 500
    mf.verbose = 0
    return mf


def converged_scf(mf, dm0=None):
    run_scf(mf)
    mf.kernel(dm0=dm0)
    assert mf.converged, "SCF did not converge"
    return mf


def rotation(ids, scale, seed):
    """exp(kappa), kappa antisymmetric with normal entries of width `scale`, only between
    orbitals of the same irrep (all pairs when every id is equal)."""
    n = len(ids)
    rng = numpy.random.default_rng(seed)
    k = rng.normal(0.0, scale, (n, n))
    same = numpy.equal.outer(ids, ids)
    k = numpy.where(same, k, 0.0)
    k = numpy.triu(k, 1)
    k = k - k.T
    u = scipy.linalg.expm(k)
    assert numpy.allclose(u.T @ u, numpy.eye(n), atol=1e-13)
    return u


# ----------------------------------------------------------------------------
# integrals and the closed forms of the states
# ----------------------------------------------------------------------------

class Ints:
    """h_pq, (pq|rs) as a full array, and E_nuc; orbitals 0-based."""

    def __init__(self, h1, eri, e_nuc):
        self.h1 = numpy.asarray(h1)
        self.norb = self.h1.shape[0]
        self.eri = ao2mo.restore(1, eri, self.norb)
        self.e_nuc = float(e_nuc)

    @classmethod
    def of_orbitals(cls, mol, c):
        h1 = c.T @ scf.hf.get_hcore(mol) @ c
        return cls(h1, ao2mo.kernel(mol, c), mol.energy_nuc())

    @classmethod
    def of_dump(cls, path):
        d = fcidump.read(path, verbose=False)
        return cls(d["H1"], d["H2"], d["ECORE"]), d

    def fock(self, core):
        """F^c_pq = h_pq + sum_{k in core} (2 (pq|kk) - (pk|kq))."""
        k = list(core)
        e = self.eri
        return (self.h1 + 2.0 * numpy.einsum("pqkk->pq", e[:, :, k, :][:, :, :, k])
                - numpy.einsum("pkkq->pq", e[:, k, :, :][:, :, k, :]))

    def core_energy(self, core):
        """Energy of the closed core alone, E_nuc included."""
        f = self.fock(core)
        return float(sum(self.h1[p, p] + f[p, p] for p in core) + self.e_nuc)

    def j(self, p, q):
        return float(self.eri[p, p, q, q])

    def k(self, p, q):
        return float(self.eri[p, q, q, p])

    def high_spin(self, core, opens):
        """core^2 with every open shell alpha: E_c + sum F^c_oo + sum_{o<o'} (J - K)."""
        f = self.fock(core)
        e = self.core_energy(core) + sum(f[o, o] for o in opens)
        for x, p in enumerate(opens):
            for q in opens[x + 1:]:
                e += self.j(p, q) - self.k(p, q)
        return float(e)

    def open_singlet(self, core, a, b):
        """The open-shell singlet of a, b over core^2: E_c + F^c_aa + F^c_bb + J_ab + K_ab."""
        f = self.fock(core)
        return float(self.core_energy(core) + f[a, a] + f[b, b] + self.j(a, b) + self.k(a, b))

    def pair_matrix(self, core, g, u):
        """H over |core^2 g^2| and |core^2 u^2| (total energies); they couple by K_gu."""
        f = self.fock(core)
        e_c = self.core_energy(core)
        return numpy.array([
            [e_c + 2 * f[g, g] + self.eri[g, g, g, g], self.k(g, u)],
            [self.k(g, u), e_c + 2 * f[u, u] + self.eri[u, u, u, u]],
        ])

    def pair(self, core, g, u):
        """Lowest root of the pair matrix and its normalized vector (cg, cu), cg > 0."""
        w, v = numpy.linalg.eigh(self.pair_matrix(core, g, u))
        vec = v[:, 0] * math.copysign(1.0, v[0, 0])
        return float(w[0]), vec


# ----------------------------------------------------------------------------
# dumps
# ----------------------------------------------------------------------------

def write_dump(directory, fname, mol, c, nelec_ab, orbsym):
    """Write the dump of orbitals c; read it back; return its integrals."""
    path = os.path.join(directory, fname)
    norb = c.shape[1]
    h1 = c.T @ scf.hf.get_hcore(mol) @ c
    eri8 = ao2mo.restore(8, ao2mo.kernel(mol, c), norb)
    na, nb = nelec_ab
    fcidump.from_integrals(path, h1, eri8, norb, (na, nb), nuc=mol.energy_nuc(), ms=na - nb,
                           orbsym=orbsym, tol=DUMP_TOL, float_format=FLOAT_FORMAT)
    ints, header = Ints.of_dump(path)
    assert header["NORB"] == norb and header["NELEC"] == na + nb and header["MS2"] == na - nb
    assert [int(x) for x in header["ORBSYM"]] == list(orbsym), (header["ORBSYM"], orbsym)
    check_close(f"{fname}: E_nuc read back", ints.e_nuc, mol.energy_nuc(), 1e-13)
    return ints


def span(first, last):
    """A --bind value for the 1-based orbitals first..last (`none` when empty)."""
    if last < first:
        return "none"
    return f"{first}-{last}" if last > first else str(first)


def positions_of(occ):
    """0-based doubly and singly occupied orbitals of an occupation vector."""
    return ([int(p) for p in numpy.where(occ == 2)[0]],
            [int(p) for p in numpy.where(occ == 1)[0]])


def by_occupation(mf):
    """mf's orbitals reordered doubly, singly, empty (each in PySCF's order), and occupations."""
    occ = numpy.asarray(mf.mo_occ)
    order = numpy.concatenate([numpy.where(occ == x)[0] for x in (2, 1, 0)])
    return mf.mo_coeff[:, order], occ[order]


def symmetry_record(mol, c):
    ids = irreps(mol, c)
    return {
        "point_group": mol.groupname if mol.symmetry else "none",
        "irreps": irrep_names(mol, ids),
        "orbsym": dump_orbsym(mol, ids),
    }, ids


def common_record(spec, mol, ints, nelec_ab, orb_record):
    return {
        "molecule": spec["molecule"],
        "basis": spec["basis"],
        "geometry": geometry_record(mol, spec["atoms"], spec["unit"]),
        "geometry_note": spec["geometry_note"],
        "charge": spec.get("charge", 0),
        "spin_2S": nelec_ab[0] - nelec_ab[1],
        "dump_file": spec["dump_file"],
        "NORB": ints.norb,
        "NELEC": int(sum(nelec_ab)),
        "e_nuc": ints.e_nuc,
        "input": spec["input"],
        "request": spec["request"],
        **orb_record,
    }


# ----------------------------------------------------------------------------
# high-spin ROHF and closed-shell RHF
# ----------------------------------------------------------------------------

def scf_case(spec, directory):
    """High spin (ROHF) or closed shell (RHF): reference, start orbitals, dump, checks."""
    group = spec["group"]
    spin = spec["spin"]
    mol = build(spec["atoms"], spec["basis"], spec["unit"], group, spin=spin)
    method = "ROHF" if spin else "RHF"
    mf = converged_scf(scf.ROHF(mol) if spin else scf.RHF(mol))
    e_ref = float(mf.e_tot)
    c_ref, occ = by_occupation(mf)
    core, opens = positions_of(occ)
    assert core == list(range(len(core))) and len(opens) == spin
    na, nb = mol.nelec
    assert (na, nb) == (len(core) + spin, len(core))
    ref_ids = irreps(mol, c_ref)

    # cross-check (2): the closed form in the converged orbitals
    ints_ref = Ints.of_orbitals(mol, c_ref)
    check_close(f"{spec['key']}: closed form in the {method} orbitals",
                ints_ref.high_spin(core, opens), e_ref, CROSS_TOL)

    # the start orbitals
    start = spec["start"]
    if start["kind"] == "related":
        rel = build(spec["atoms"], spec["basis"], spec["unit"], group,
                    spin=0, charge=start["charge"])
        rmf = converged_scf(scf.RHF(rel))
        c_start = rmf.mo_coeff
        start_text = start["text"].format(e=float(rmf.e_tot))
    else:
        u = rotation(ref_ids if group else [0] * len(ref_ids), start["scale"], start["seed"])
        c_start = c_ref @ u
        start_text = start["text"]
    sym, start_ids = symmetry_record(mol, c_start)
    # symmetry decides which state the optimizer can reach: the start must put the same
    # irreps in the core and the same irrep in each open shell as the reference
    assert sorted(start_ids[p] for p in core) == sorted(ref_ids[p] for p in core), spec["key"]
    assert [start_ids[p] for p in opens] == [ref_ids[p] for p in opens], spec["key"]

    ints = write_dump(directory, spec["dump_file"], mol, c_start, (na, nb), sym["orbsym"])
    start_energy = ints.high_spin(core, opens)
    # the same start energy from PySCF's own energy functional of the start orbitals
    dm_start = mf.make_rdm1(c_start, occ)
    check_close(f"{spec['key']}: start energy vs PySCF energy_tot",
                start_energy, float(mf.energy_tot(dm_start)), CROSS_TOL)
    assert start_energy - e_ref > MIN_START_GAP, (spec["key"], start_energy, e_ref)

    # cross-check (1): without symmetry, from the start orbitals' density, plus stability
    free = build(spec["atoms"], spec["basis"], spec["unit"], False, spin=spin)
    mf2 = converged_scf(scf.ROHF(free) if spin else scf.RHF(free), dm0=dm_start)
    check_close(f"{spec['key']}: second {method} run", float(mf2.e_tot), e_ref, SECOND_RUN_TOL)
    mo_stable = mf2.stability()
    mo_stable = mo_stable[0] if isinstance(mo_stable, tuple) else mo_stable
    mf3 = converged_scf(scf.ROHF(free) if spin else scf.RHF(free),
                        dm0=mf2.make_rdm1(mo_stable, mf2.mo_occ))
    assert float(mf3.e_tot) > e_ref - SECOND_RUN_TOL, (spec["key"], mf3.e_tot, e_ref)

    names = spec["names"]
    bind = [f"core={span(1, len(core))}"] + [f"{n}={p + 1}" for n, p in zip(names, opens)]
    orb = {
        **sym,
        "core": [p + 1 for p in core],
        "open": [p + 1 for p in opens],
        "bind": bind,
        "start": start_text,
    }
    record = common_record(spec, mol, ints, (na, nb), orb)
    record.update({
        "start_energy": {
            "value": start_energy,
            "source": "closed form of the state from the dump's integrals (read back with "
                      "pyscf.tools.fcidump.read)",
            "cross_check": f"mf.energy_tot of the density of the dump's orbitals with the "
                           f"same occupations, to {CROSS_TOL:g}",
        },
        "reference": {
            "value": e_ref,
            "method": method,
            "source": (ROHF_SOURCE if spin else RHF_SOURCE).format(group=group or "off"),
            "cross_check": SCF_CROSS.format(method=method, second=SECOND_RUN_TOL,
                                            cross=CROSS_TOL),
            "tolerance": SCF_TOLERANCE,
        },
    })
    return record


# ----------------------------------------------------------------------------
# CASSCF(2,2): the pair function and the open-shell singlet
# ----------------------------------------------------------------------------

def casscf(mf, ncore, c, g_or_a, u_or_b, wfnsym, singlet_fixed):
    """CASSCF(2,2) from orbitals c with the two active orbitals g_or_a, u_or_b (0-based)."""
    mc = mcscf.CASSCF(mf, 2, 2)
    mc.verbose = 0
    assert mc.ncore == ncore
    mc.conv_tol = CASSCF_CONV_TOL
    mc.conv_tol_grad = CASSCF_CONV_TOL_GRAD
    mc.max_cycle_macro = 200
    mc.fcisolver.wfnsym = wfnsym
    mc.fcisolver.conv_tol = 1e-14
    if singlet_fixed:
        mc.fix_spin_(ss=0)
    mo = mc.sort_mo([g_or_a + 1, u_or_b + 1], mo_coeff=c)
    mc.kernel(mo)
    assert mc.converged, "CASSCF did not converge"
    ss, _ = mc.fcisolver.spin_square(mc.ci, 2, mc.nelecas)
    assert abs(ss) < 1e-8, ss
    return mc


def casci_energy(mf, ncore, c, x, y, wfnsym, singlet_fixed):
    """CASCI(2,2) on orbitals c with x, y active: the start energy made by PySCF."""
    mc = mcscf.CASCI(mf, 2, 2)
    mc.verbose = 0
    assert mc.ncore == ncore
    mc.fcisolver.wfnsym = wfnsym
    mc.fcisolver.conv_tol = 1e-14
    if singlet_fixed:
        mc.fix_spin_(ss=0)
    mc.kernel(mc.sort_mo([x + 1, y + 1], mo_coeff=c))
    return float(mc.e_tot)


def active_by_irrep(mol, mc, want):
    """0-based positions in mc.mo_coeff of the active orbitals of irreps want[0], want[1]."""
    act = list(range(mc.ncore, mc.ncore + 2))
    ids = irreps(mol, mc.mo_coeff[:, act])
    assert sorted(ids) == sorted(want), (ids, want)
    return [act[ids.index(w)] for w in want]


def cas_case(spec, directory):
    group = spec["group"]
    assert group, "these states are kept apart from the others by symmetry"
    mol = build(spec["atoms"], spec["basis"], spec["unit"], group)
    mf = converged_scf(scf.RHF(mol))
    c_rhf = mf.mo_coeff
    ids = irreps(mol, c_rhf)
    nocc = mol.nelectron // 2
    x, y = spec["active"](mol, ids, nocc)  # 0-based, in the RHF order
    assert ids[x] != ids[y]
    ncore = nocc - 1
    assert x < nocc <= y, (x, y, nocc)
    # the core: the doubly occupied orbitals other than x
    core_rhf = [p for p in range(nocc) if p != x]
    pair = spec["kind"] == "pair"
    wfnsym = "Ag" if pair else symm.irrep_id2name(mol.groupname, ids[x] ^ ids[y])
    assert wfnsym == spec["wfnsym"], (wfnsym, spec["wfnsym"])

    mc = casscf(mf, ncore, c_rhf, x, y, wfnsym, not pair)
    e_ref = float(mc.e_tot)
    gx, gy = active_by_irrep(mol, mc, [ids[x], ids[y]])
    core_cas = list(range(mc.ncore))

    # cross-check (a): the closed form in the CASSCF orbitals
    ints_cas = Ints.of_orbitals(mol, mc.mo_coeff)
    if pair:
        e_form, vec = ints_cas.pair(core_cas, gx, gy)
    else:
        e_form = ints_cas.open_singlet(core_cas, gx, gy)
    check_close(f"{spec['key']}: closed form in the CASSCF orbitals", e_form, e_ref, CROSS_TOL)

    # cross-check (b): a second CASSCF from rotated RHF orbitals (rotations within irreps)
    u = rotation(ids, spec["second_scale"], spec["second_seed"])
    mc2 = casscf(mf, ncore, c_rhf @ u, x, y, wfnsym, not pair)
    check_close(f"{spec['key']}: second CASSCF", float(mc2.e_tot), e_ref, SECOND_RUN_TOL)

    # the start: the RHF orbitals themselves
    sym, start_ids = symmetry_record(mol, c_rhf)
    ints = write_dump(directory, spec["dump_file"], mol, c_rhf, mol.nelec, sym["orbsym"])
    if pair:
        start_energy, _ = ints.pair(core_rhf, x, y)
    else:
        start_energy = ints.open_singlet(core_rhf, x, y)
    check_close(f"{spec['key']}: start energy vs CASCI",
                start_energy, casci_energy(mf, ncore, c_rhf, x, y, wfnsym, not pair), CROSS_TOL)
    assert start_energy - e_ref > MIN_START_GAP, (spec["key"], start_energy, e_ref)

    names = spec["names"]
    # the core of the dump: the doubly occupied RHF orbitals other than the active one; it is
    # a range 1..ncore because the active occupied orbital is the HOMO
    assert core_rhf == list(range(ncore))
    bind = [f"core={span(1, ncore)}", f"{names[0]}={x + 1}", f"{names[1]}={y + 1}"]
    orb = {
        **sym,
        "core": [p + 1 for p in core_rhf],
        "active": [x + 1, y + 1],
        "active_irreps": [sym["irreps"][x], sym["irreps"][y]],
        "bind": bind,
        "start": "canonical RHF orbitals of the same molecule "
                 f"(E_RHF = {float(mf.e_tot):.12f})",
    }
    record = common_record(spec, mol, ints, mol.nelec, orb)
    wf = ("cg |core^2 g^2| + cu |core^2 u^2|" if pair
          else "the open-shell singlet of a, b over core^2")
    record.update({
        "start_energy": {
            "value": start_energy,
            "source": f"closed form of {wf} from the dump's integrals (read back with "
                      "pyscf.tools.fcidump.read)" + (", lowest root of its 2x2 matrix"
                                                     if pair else ""),
            "cross_check": f"pyscf.mcscf.CASCI(mf, 2, 2) on the same orbitals with "
                           f"wfnsym={wfnsym}, to {CROSS_TOL:g}",
        },
        "reference": {
            "value": e_ref,
            "method": f"CASSCF(2,2), wfnsym {wfnsym}",
            "source": f"pyscf.mcscf.CASSCF(mf, 2, 2) with the point group on ({group}), "
                      f"fcisolver.wfnsym='{wfnsym}'"
                      + ("" if pair else ", fix_spin_(ss=0)")
                      + f", active = orbitals {x + 1} and {y + 1} of the RHF start (sort_mo), "
                      "conv_tol=1e-12, conv_tol_grad=1e-6; mc.e_tot (total energy, hartree); "
                      "<S^2> of the CI vector is 0",
            "cross_check": f"(1) the closed form of {wf} from integrals in the CASSCF orbitals "
                           f"equals mc.e_tot to {CROSS_TOL:g}; (2) a second CASSCF from the RHF "
                           f"orbitals under a seeded random rotation within each irrep reaches "
                           f"it to {SECOND_RUN_TOL:g}",
            "tolerance": CASSCF_TOLERANCE,
        },
    })
    if pair:
        # the CI vector over the determinant strings of the two active orbitals, in the
        # order of mc.mo_coeff: the g^2 and u^2 coefficients on its diagonal.  mc.ci belongs
        # to the orbitals of the last macro iteration but one; solve it again, from no guess
        # (so by exact diagonalization of the small space), in the final ones
        final = mcscf.CASCI(mf, 2, 2)
        final.verbose = 0
        final.fcisolver.wfnsym = wfnsym
        e_final, _, ci, _, _ = final.kernel(mc.mo_coeff)
        check_close(f"{spec['key']}: CASCI in the final orbitals", float(e_final), e_ref,
                    CROSS_TOL)
        ci = numpy.asarray(ci)
        cg, cu = ci[gx - mc.ncore, gx - mc.ncore], ci[gy - mc.ncore, gy - mc.ncore]
        norm = math.hypot(cg, cu)
        check_close("|ci| restricted to g^2, u^2", norm, 1.0, 1e-10)
        cg, cu = cg / norm * math.copysign(1.0, cg), cu / norm * math.copysign(1.0, cg)
        # the CI solver converges the energy to 1e-14, so its vector to about 1e-7
        check_close(f"{spec['key']}: cg vs 2x2 vector", cg, float(vec[0]), 1e-6)
        check_close(f"{spec['key']}: cu vs 2x2 vector", cu, float(vec[1]), 1e-6)
        record["coefficients"] = {
            "cg": cg,
            "cu": cu,
            "tolerance": COEFFICIENT_TOLERANCE,
            "source": "the CI vector of the CASSCF (a fresh pyscf.mcscf.CASCI in the final CASSCF orbitals): the coefficients of the determinants "
                      "|g alpha g beta| and |u alpha u beta| (the diagonal of the 2x2 CI "
                      "array), normalized, with the sign making cg positive",
            "cross_check": "the lowest eigenvector of the 2x2 pair matrix from integrals in "
                           "the CASSCF orbitals (numpy.linalg.eigh), to 1e-6",
        }
    return record


# ----------------------------------------------------------------------------
# the cases
# ----------------------------------------------------------------------------

def homo_lumo(mol, ids, nocc):
    return nocc - 1, nocc


def sigma_pair(mol, ids, nocc):
    """g = the HOMO (Ag), u = the lowest empty B1u orbital."""
    b1u = symm.irrep_name2id(mol.groupname, "B1u")
    ag = symm.irrep_name2id(mol.groupname, "Ag")
    assert ids[nocc - 1] == ag
    u = next(p for p in range(nocc, len(ids)) if ids[p] == b1u)
    return nocc - 1, u


CH2_ATOMS = bent_atoms("C", 1.085, 135.0)
CH2_NOTE = "R(CH) = 1.085 angstrom, angle HCH = 135 degrees (coordinates rounded to 6 decimals)"
H2O_ATOMS = bent_atoms("O", 0.9575, 104.5)
H2O_NOTE = "R(OH) = 0.9575 angstrom, angle HOH = 104.5 degrees (coordinates rounded to 6 decimals)"

SCF_CASES = [
    {
        "key": "nh2_doublet",
        "molecule": "NH2 (2B1)",
        "basis": "6-31g",
        "unit": "angstrom",
        "atoms": bent_atoms("N", 1.024, 103.4),
        "geometry_note": "R(NH) = 1.024 angstrom, angle HNH = 103.4 degrees (coordinates "
                         "rounded to 6 decimals)",
        "group": "C2v",
        "spin": 1,
        "names": ["a"],
        "start": {"kind": "related", "charge": -1,
                  "text": "canonical RHF orbitals of the closed-shell anion NH2- at the same "
                          "geometry (E_RHF = {e:.12f}); a = its HOMO 1b1"},
        "dump_file": "nh2_631g_anion_orbitals.fcidump",
        "input": "optimize_doublet.spinfold",
        "request": "energy D",
    },
    {
        "key": "oh_doublet",
        "molecule": "OH (2Pi)",
        "basis": "6-31g",
        "unit": "angstrom",
        "atoms": diatomic("O", "H", 0.97),
        "geometry_note": "R(OH) = 0.97 angstrom, along z",
        "group": False,
        "spin": 1,
        "names": ["a"],
        "start": {"kind": "rotated", "scale": 0.05, "seed": 20240610,
                  "text": "ROHF orbitals (no symmetry) under exp(kappa), kappa antisymmetric "
                          "with normal entries of width 0.05 between every pair of orbitals "
                          "(numpy default_rng seed 20240610)"},
        "dump_file": "oh_631g_rotated.fcidump",
        "input": "optimize_doublet.spinfold",
        "request": "energy D",
    },
    {
        "key": "ch2_triplet",
        "molecule": "CH2 (3B1)",
        "basis": "6-31g",
        "unit": "angstrom",
        "atoms": CH2_ATOMS,
        "geometry_note": CH2_NOTE,
        "group": "C2v",
        "spin": 2,
        "names": ["a", "b"],
        "start": {"kind": "related", "charge": 0,
                  "text": "canonical RHF orbitals of the closed-shell singlet CH2 (3a1^2) at "
                          "the same geometry (E_RHF = {e:.12f}); a = 3a1 (its HOMO), "
                          "b = 1b1 (its LUMO)"},
        "dump_file": "ch2_631g_singlet_orbitals.fcidump",
        "input": "optimize_triplet.spinfold",
        "request": "energy T",
    },
    {
        "key": "nh_triplet",
        "molecule": "NH (3Sigma-)",
        "basis": "6-31g",
        "unit": "angstrom",
        "atoms": diatomic("N", "H", 1.036),
        "geometry_note": "R(NH) = 1.036 angstrom, along z",
        "group": False,
        "spin": 2,
        "names": ["a", "b"],
        "start": {"kind": "rotated", "scale": 0.05, "seed": 31415,
                  "text": "ROHF orbitals (no symmetry) under exp(kappa), kappa antisymmetric "
                          "with normal entries of width 0.05 between every pair of orbitals "
                          "(numpy default_rng seed 31415)"},
        "dump_file": "nh_631g_rotated.fcidump",
        "input": "optimize_triplet.spinfold",
        "request": "energy T",
    },
    {
        "key": "h2o_closed",
        "molecule": "H2O",
        "basis": "6-31g",
        "unit": "angstrom",
        "atoms": H2O_ATOMS,
        "geometry_note": H2O_NOTE,
        "group": "C2v",
        "spin": 0,
        "names": [],
        "start": {"kind": "rotated", "scale": 0.1, "seed": 2718,
                  "text": "RHF orbitals (C2v) under exp(kappa), kappa antisymmetric with "
                          "normal entries of width 0.1 between orbitals of the same irrep "
                          "(numpy default_rng seed 2718)"},
        "dump_file": "h2o_631g_rotated.fcidump",
        "input": "optimize_closed_shell.spinfold",
        "request": "energy C",
    },
    {
        "key": "hf_closed",
        "molecule": "HF",
        "basis": "6-31g",
        "unit": "angstrom",
        "atoms": diatomic("F", "H", 0.917),
        "geometry_note": "R(FH) = 0.917 angstrom, along z",
        "group": False,
        "spin": 0,
        "names": [],
        "start": {"kind": "rotated", "scale": 0.05, "seed": 1618,
                  "text": "RHF orbitals (no symmetry) under exp(kappa), kappa antisymmetric "
                          "with normal entries of width 0.05 between every pair of orbitals "
                          "(numpy default_rng seed 1618)"},
        "dump_file": "hf_631g_rotated.fcidump",
        "input": "optimize_closed_shell.spinfold",
        "request": "energy C",
    },
]

CAS_CASES = [
    {
        "key": "h2_pair",
        "kind": "pair",
        "molecule": "H2, stretched",
        "basis": "cc-pvdz",
        "unit": "bohr",
        "atoms": diatomic("H", "H", 2.8),
        "geometry_note": "R(HH) = 2.8 bohr, along z; D2h subgroup; no core",
        "group": "D2h",
        "active": sigma_pair,
        "wfnsym": "Ag",
        "names": ["g", "u"],
        "second_seed": 577,
        "second_scale": 0.2,
        "dump_file": "h2_ccpvdz_stretched_rhf.fcidump",
        "input": "optimize_pair.spinfold",
        "request": "energy P",
    },
    {
        "key": "li2_pair",
        "kind": "pair",
        "molecule": "Li2",
        "basis": "6-31g",
        "unit": "bohr",
        "atoms": diatomic("Li", "Li", 5.2),
        "geometry_note": "R(LiLi) = 5.2 bohr, along z; D2h subgroup",
        "group": "D2h",
        "active": sigma_pair,
        "wfnsym": "Ag",
        "names": ["g", "u"],
        "second_seed": 1729,
        "second_scale": 0.2,
        "dump_file": "li2_631g_rhf.fcidump",
        "input": "optimize_pair.spinfold",
        "request": "energy P",
    },
    {
        "key": "h2o_open_singlet",
        "kind": "open_singlet",
        "molecule": "H2O (1B1, 1b1 -> 4a1)",
        "basis": "6-31g",
        "unit": "angstrom",
        "atoms": H2O_ATOMS,
        "geometry_note": H2O_NOTE,
        "group": "C2v",
        "active": homo_lumo,
        "wfnsym": "B1",
        "names": ["a", "b"],
        "second_seed": 4242,
        "second_scale": 0.15,
        "dump_file": "h2o_631g_rhf_c2v.fcidump",
        "input": "optimize_open_shell_singlet.spinfold",
        "request": "energy O",
    },
    {
        "key": "ch2_open_singlet",
        "kind": "open_singlet",
        "molecule": "CH2 (1B1, 3a1 -> 1b1)",
        "basis": "6-31g",
        "unit": "angstrom",
        "atoms": CH2_ATOMS,
        "geometry_note": CH2_NOTE,
        "group": "C2v",
        "active": homo_lumo,
        "wfnsym": "B1",
        "names": ["a", "b"],
        "second_seed": 9001,
        "second_scale": 0.15,
        "dump_file": "ch2_631g_rhf_c2v.fcidump",
        "input": "optimize_open_shell_singlet.spinfold",
        "request": "energy O",
    },
]


def main():
    cases = {}
    with tempfile.TemporaryDirectory() as directory:
        for spec in SCF_CASES:
            cases[spec["key"]] = scf_case(spec, directory)
            print(f"{spec['key']}: checked", flush=True)
        for spec in CAS_CASES:
            cases[spec["key"]] = cas_case(spec, directory)
            print(f"{spec['key']}: checked", flush=True)
        # every check passed: only now are the fixtures written
        for record in cases.values():
            shutil.copyfile(os.path.join(directory, record["dump_file"]),
                            os.path.join(FIXTURES, record["dump_file"]))
    out = {
        "description": "References for orbital optimization: per case, a dump in orbitals "
                       "that are not optimal for the state, the spinfold input and bindings, "
                       "the state's energy in the dump's orbitals, and PySCF's energy of the "
                       "optimized state (ROHF, RHF, CASSCF(2,2)); total energies in hartree; "
                       "orbitals 1-based as in the dump files; regenerate with "
                       "python3 tests/pyscf/make_optimize_fixtures.py",
        "generator": "tests/pyscf/make_optimize_fixtures.py",
        "pyscf_version": pyscf.__version__,
        "numpy_version": numpy.__version__,
        "cases": cases,
    }
    with open(REFERENCE_JSON, "w") as fh:
        json.dump(out, fh, indent=1)
        fh.write("\n")
    print(f"wrote {REFERENCE_JSON}")


if __name__ == "__main__":
    main()

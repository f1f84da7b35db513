#!/usr/bin/env python3
"""Reference values for configuration spaces, their roots, and free coefficients.

Run from the repository root:

    pip install pyscf numpy
    python3 tests/pyscf/make_variational_fixtures.py

Writes, under tests/fixtures/:
  * one integral-dump file per molecule, in canonical RHF orbitals (same format as
    make_fixtures.py's dumps: symmetry off, ORBSYM all 1, `%.17g` values);
  * variational_reference.json: per molecule, the orbital counts, NELEC, the nuclear
    repulsion, the RHF energy, and
      - CASCI(2,2) over a closed core with HOMO and LUMO active: the three singlet roots;
      - TDA (CIS) singlet and triplet excitation energies, the lowest five of each, with the
        dominant occupied -> virtual pair of each;
      - for some molecules, the closed-shell CISD total energy and the size of the
        determinant CISD space;
      - for one molecule, a pair function cg |core^2 g^2| + cu |core^2 u^2|: the 2x2 H and
        S, the lowest root and its vector, and the Rayleigh quotient at a few (cg, cu).

Every value names its source.  Each PySCF value is reproduced here a second way, from the
dump file's own numbers (read back with pyscf.tools.fcidump.read) or in PySCF's determinant
space, and the script stops with an assertion error if the two disagree; so regenerating
cannot silently drift.  The output is deterministic (single-threaded).
"""

import os
import sys

# Single-threaded linear algebra keeps the output bit-for-bit reproducible.
for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ[_var] = "1"

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))

import json  # noqa: E402
import math  # noqa: E402
from itertools import combinations  # noqa: E402

import numpy  # noqa: E402
import pyscf  # noqa: E402
from pyscf import ao2mo, ci, mcscf, scf, tdscf  # noqa: E402
from pyscf.fci import cistring, direct_spin1, spin_op  # noqa: E402
from pyscf.tools import fcidump  # noqa: E402

from make_fixtures import FIXTURES, build_mol, check_close, geometry_record, write_dump  # noqa: E402

REFERENCE_JSON = os.path.join(FIXTURES, "variational_reference.json")

# Tighter than make_fixtures.py: the occupied-virtual Fock block (Brillouin) and the
# off-diagonal Fock elements of the canonical orbitals stay near 1e-10, far below the
# tolerances of the tests (1e-8 for total energies, 1e-7 for excitation energies).
SCF_CONV_TOL = 1e-13
SCF_CONV_TOL_GRAD = 1e-10
CROSS_TOL = 1e-9  # a PySCF value against the same value computed a second way
TDA_STATES = 5
RAYLEIGH_POINTS = [(0.98, -0.2), (0.6, 0.8), (1.0, 0.0), (-0.3, 0.95), (2.0, -1.0)]


# ----------------------------------------------------------------------------
# molecules (scenarios of our own)
# ----------------------------------------------------------------------------

def nh3_atoms(r_angstrom, angle_degrees):
    """NH3 with the nitrogen at the origin and the C3 axis along z."""
    # cos(HNH) = 1.5 cos^2(beta) - 0.5, beta the angle of each N-H bond to the axis
    cb = math.sqrt((math.cos(math.radians(angle_degrees)) + 0.5) / 1.5)
    sb = math.sqrt(1.0 - cb * cb)
    hs = [("H", (r_angstrom * sb * math.cos(2 * math.pi * k / 3),
                 r_angstrom * sb * math.sin(2 * math.pi * k / 3),
                 -r_angstrom * cb)) for k in range(3)]
    return [("N", (0.0, 0.0, 0.0))] + hs


def water_atoms(r_angstrom, angle_degrees):
    """H2O in the yz plane, oxygen at the origin, the C2 axis along z."""
    half = math.radians(angle_degrees) / 2
    y, z = round(r_angstrom * math.sin(half), 6), round(r_angstrom * math.cos(half), 6)
    return [("O", (0.0, 0.0, 0.0)), ("H", (0.0, y, z)), ("H", (0.0, -y, z))]


MOLECULES = [
    {
        "key": "h2o_631g",
        "molecule": "H2O",
        "basis": "6-31g",
        "unit": "angstrom",
        "atoms": water_atoms(0.9575, 104.5),
        "geometry_note": "R(OH) = 0.9575 angstrom, angle HOH = 104.5 degrees (coordinates rounded to 6 decimals)",
        "dump_file": "h2o_631g_rhf.fcidump",
        "cisd": False,
        "pair_function": True,
    },
    {
        "key": "nh3_sto3g",
        "molecule": "NH3",
        "basis": "sto-3g",
        "unit": "angstrom",
        "atoms": nh3_atoms(1.012, 106.7),
        "geometry_note": "R(NH) = 1.012 angstrom, angle HNH = 106.7 degrees, C3v (coordinates unrounded, so the e orbitals stay degenerate)",
        "dump_file": "nh3_sto3g_rhf.fcidump",
        "cisd": True,
        "pair_function": False,
    },
    {
        "key": "lih_631g",
        "molecule": "LiH",
        "basis": "6-31g",
        "unit": "bohr",
        "atoms": [("Li", (0.0, 0.0, 0.0)), ("H", (0.0, 0.0, 3.1))],
        "geometry_note": "R(LiH) = 3.1 bohr, along z",
        "dump_file": "lih_631g_rhf.fcidump",
        "cisd": True,
        "pair_function": False,
    },
]


# ----------------------------------------------------------------------------
# integrals from the dump file
# ----------------------------------------------------------------------------

class Dump:
    """The dump file's own numbers: h, (pq|rs) as a full array, E_nuc."""

    def __init__(self, fname):
        d = fcidump.read(os.path.join(FIXTURES, fname), verbose=False)
        self.norb = d["NORB"]
        self.nelec = d["NELEC"]
        self.h1 = d["H1"]
        self.eri = ao2mo.restore(1, d["H2"], self.norb)
        self.e_nuc = float(d["ECORE"])

    def fock(self, closed):
        """F_pq = h_pq + sum_{k in closed} (2 (pq|kk) - (pk|kq))."""
        k = list(closed)
        return (self.h1 + 2.0 * numpy.einsum("pqkk->pq", self.eri[:, :, k, :][:, :, :, k])
                - numpy.einsum("pkkq->pq", self.eri[:, k, :, :][:, :, k, :]))

    def closed_energy(self, closed):
        """Total energy of the closed-shell determinant of `closed`."""
        k = list(closed)
        f = self.fock(closed)
        return float(sum(self.h1[p, p] + f[p, p] for p in k) + self.e_nuc)


def one_based(orbs):
    return [int(p) + 1 for p in orbs]


def span(first, last):
    """A --bind value for the 1-based orbitals first..last."""
    return f"{first}-{last}" if last > first else str(first)


def eigh_sorted(m):
    w, v = numpy.linalg.eigh(m)
    return w, v


# ----------------------------------------------------------------------------
# CASCI(2,2)
# ----------------------------------------------------------------------------

def singlet_matrix_2x2(dump, core, g, u):
    """H among |core^2 g^2|, |core^2 u^2| and the open-shell singlet, total energies.

    With F^c the Fock matrix of the core alone and E_c the core energy (nuclear repulsion
    included), in the spatial two-electron functions g(1)g(2), u(1)u(2) and
    (g(1)u(2) + u(1)g(2))/sqrt(2), all with the singlet spin function:
      H_gg,gg = E_c + 2 F^c_gg + (gg|gg)        H_uu,uu = E_c + 2 F^c_uu + (uu|uu)
      H_S,S   = E_c + F^c_gg + F^c_uu + (gg|uu) + (gu|gu)
      H_gg,uu = (gu|gu)
      H_gg,S  = sqrt(2) (F^c_gu + (gg|gu))      H_uu,S  = sqrt(2) (F^c_gu + (uu|ug))
    """
    e = dump.eri
    f = dump.fock(core)
    e_c = dump.closed_energy(core)
    r2 = math.sqrt(2.0)
    m = numpy.array([
        [e_c + 2 * f[g, g] + e[g, g, g, g], e[g, u, g, u], r2 * (f[g, u] + e[g, g, g, u])],
        [e[g, u, g, u], e_c + 2 * f[u, u] + e[u, u, u, u], r2 * (f[g, u] + e[u, u, u, g])],
        [r2 * (f[g, u] + e[g, g, g, u]), r2 * (f[g, u] + e[u, u, u, g]),
         e_c + f[g, g] + f[u, u] + e[g, g, u, u] + e[g, u, g, u]],
    ])
    return m


def casci(mf, dump, core, g, u):
    mc = mcscf.CASCI(mf, 2, 2)
    mc.verbose = 0
    assert mc.ncore == len(core)
    mc.fcisolver.nroots = 4  # the whole determinant space of 2 electrons in 2 orbitals
    mc.fcisolver.conv_tol = 1e-14
    mc.kernel()
    energies = [float(x) for x in mc.e_tot]
    spins = [float(mc.fcisolver.spin_square(c, 2, (1, 1))[0]) for c in mc.ci]
    singlets = [e for e, s in zip(energies, spins) if abs(s) < 1e-8]
    triplets = [e for e, s in zip(energies, spins) if abs(s - 2.0) < 1e-8]
    assert len(singlets) == 3 and len(triplets) == 1, (energies, spins)

    # cross-check: the 3x3 singlet matrix from the dump's integrals
    m = singlet_matrix_2x2(dump, core, g, u)
    w, _ = eigh_sorted(m)
    for a, b in zip(singlets, w):
        check_close("CASCI(2,2) singlet root vs numpy 3x3", a, float(b), CROSS_TOL)
    # the triplet: E_c + F^c_gg + F^c_uu + (gg|uu) - (gu|gu)
    f = dump.fock(core)
    e_t = dump.closed_energy(core) + f[g, g] + f[u, u] + dump.eri[g, g, u, u] - dump.eri[g, u, g, u]
    check_close("CASCI(2,2) triplet vs closed form", triplets[0], float(e_t), CROSS_TOL)
    return {
        "core": one_based(core),
        "active": one_based([g, u]),
        "homo": g + 1,
        "lumo": u + 1,
        "bind": [f"core={span(1, len(core))}" if core else "core=none", f"g={g + 1}", f"u={u + 1}"],
        "singlet_roots": singlets,
        "triplet_root": triplets[0],
        "singlet_matrix": m.tolist(),
        "source": "pyscf.mcscf.CASCI(mf, 2, 2) on the canonical RHF orbitals (ncore = the doubly "
                  "occupied orbitals below the HOMO; active = HOMO, LUMO), fcisolver.nroots = 4 "
                  "(the whole 2-electron 2-orbital determinant space), roots kept whose "
                  "fcisolver.spin_square is 0; mc.e_tot (total energies, hartree, ascending)",
        "cross_check": "numpy.linalg.eigh of the 3x3 singlet matrix over |core^2 g^2|, "
                       "|core^2 u^2| and the open-shell singlet built from the dump's integrals "
                       f"(`singlet_matrix`, total energies), agreeing to {CROSS_TOL:g}; the "
                       "triplet root equals E_c + F^c_gg + F^c_uu + J_gu - K_gu",
    }


# ----------------------------------------------------------------------------
# TDA (CIS)
# ----------------------------------------------------------------------------

def cis_matrix(dump, nocc, singlet):
    """CIS matrix among the reference and the spin-adapted singles, minus E_ref.

    Singlet (ref[i->a] + ref[i'->a'])/sqrt(2), triplet (ref[i->a] - ref[i'->a'])/sqrt(2):
      <ia|H - E_ref|jb> = F_ab d_ij - F_ij d_ab + 2 (ia|jb) [singlet only] - (ij|ab),
      <ref|H|ia> = sqrt(2) F_ia (singlet), 0 (triplet),
    with the full Fock matrix of the occupied orbitals (off-diagonal elements kept).
    """
    n = dump.norb
    occ, vir = range(nocc), range(nocc, n)
    f = dump.fock(occ)
    e = dump.eri
    pairs = [(i, a) for i in occ for a in vir]
    m = numpy.zeros((len(pairs) + 1, len(pairs) + 1))
    for x, (i, a) in enumerate(pairs):
        if singlet:
            m[0, x + 1] = m[x + 1, 0] = math.sqrt(2.0) * f[i, a]
        for y, (j, b) in enumerate(pairs):
            v = (f[a, b] if i == j else 0.0) - (f[i, j] if a == b else 0.0) - e[i, j, a, b]
            if singlet:
                v += 2.0 * e[i, a, j, b]
            m[x + 1, y + 1] = v
    return m


def tda(mf, dump, nocc):
    nvir = dump.norb - nocc
    out = {}
    for singlet in (True, False):
        td = tdscf.TDA(mf)
        td.verbose = 0
        td.singlet = singlet
        # every state of the small singles space: Davidson then converges every root, and a
        # degenerate pair at the edge of the lowest five cannot be missed
        td.nstates = nocc * nvir
        td.conv_tol = 1e-12
        td.max_cycle = 300
        td.kernel()
        assert all(td.converged), "TDA did not converge"
        order = numpy.argsort(td.e)[:TDA_STATES]
        energies = [float(td.e[k]) for k in order]
        dominant = []
        for k in order:
            x = td.xy[k][0]
            i, a = numpy.unravel_index(numpy.argmax(numpy.abs(x)), x.shape)
            dominant.append({"i": int(i) + 1, "a": int(a) + nocc + 1,
                             "weight": float(x[i, a] ** 2 / (x ** 2).sum())})

        # cross-check: the CIS matrix with the reference, from the dump; its roots minus the
        # reference root (the lowest: the reference is stable) are the excitation energies
        w, v = eigh_sorted(cis_matrix(dump, nocc, singlet))
        assert abs(v[0, 0]) > 0.999999, "the lowest root of the CIS space is the reference"
        check_close("CIS reference root vs RHF", float(w[0]), 0.0, CROSS_TOL)
        for a, b in zip(energies, w[1:TDA_STATES + 1] - w[0]):
            check_close("TDA vs numpy CIS", a, float(b), CROSS_TOL)
        out["singlet" if singlet else "triplet"] = {
            "excitation_energies": energies,
            "dominant": dominant,
            "source": f"pyscf.tdscf.TDA(mf) with singlet={singlet}, nstates={td.nstates} (every "
                      "single), conv_tol=1e-12; the lowest five of td.e (hartree); dominant: the largest "
                      "|X_ia| of td.xy (1-based orbitals; weight = X_ia^2 / sum X^2; within a "
                      "degenerate pair the choice is arbitrary)",
            "cross_check": "numpy.linalg.eigh of the CIS matrix over the reference and the "
                           f"{'singlet' if singlet else 'triplet'} singles built from the dump's "
                           "integrals (full occupied Fock matrix, Brillouin coupling kept): "
                           "roots minus the lowest (the reference) agree to "
                           f"{CROSS_TOL:g}",
        }
    return out


# ----------------------------------------------------------------------------
# CISD
# ----------------------------------------------------------------------------

def cisd(mf, dump, nocc):
    n, nvir = dump.norb, dump.norb - nocc
    c2 = math.comb
    n_det = 1 + 2 * nocc * nvir + (nocc * nvir) ** 2 + 2 * c2(nocc, 2) * c2(nvir, 2)

    mci = ci.CISD(mf)
    mci.verbose = 0
    mci.conv_tol = 1e-13
    mci.kernel()
    assert mci.converged, "CISD did not converge"
    e_cisd = float(mci.e_tot)

    # cross-check: H in the determinant CISD space of PySCF's FCI vectors (every determinant
    # with at most two electrons outside the occupied orbitals), diagonalized with numpy
    nelec = (nocc, nocc)
    strings = cistring.make_strings(range(n), nocc)
    vir_mask = sum(1 << p for p in range(nocc, n))
    level = [bin(int(s) & vir_mask).count("1") for s in strings]
    chosen = [(x, y) for x in range(len(strings)) for y in range(len(strings))
              if level[x] + level[y] <= 2]
    assert len(chosen) == n_det, (len(chosen), n_det)
    h2e = direct_spin1.absorb_h1e(dump.h1, dump.eri, n, nelec, 0.5)
    rows = numpy.array([x * len(strings) + y for x, y in chosen])
    h = numpy.zeros((n_det, n_det))
    for col, (x, y) in enumerate(chosen):
        vec = numpy.zeros((len(strings), len(strings)))
        vec[x, y] = 1.0
        h[:, col] = direct_spin1.contract_2e(h2e, vec, n, nelec).ravel()[rows]
    w, v = eigh_sorted(h)
    check_close("CISD vs numpy determinant CISD", e_cisd, float(w[0]) + dump.e_nuc, CROSS_TOL)
    ground = v[:, 0].reshape(-1)
    full = numpy.zeros((len(strings), len(strings)))
    full.ravel()[rows] = ground
    check_close("determinant CISD ground state is a singlet",
                float(spin_op.spin_square(full, n, nelec)[0]), 0.0, 1e-8)

    # the members of the issue's roots line before dependence is removed: the reference, the
    # alpha and beta singles, the alpha-beta doubles, and the same-spin doubles with i != j and
    # a != b (each determinant reached four times: i j swapped, a b swapped)
    members = 1 + 2 * nocc * nvir + (nocc * nvir) ** 2 + 2 * nocc * (nocc - 1) * nvir * (nvir - 1)
    return {
        "value": e_cisd,
        "determinants": n_det,
        "nonvanishing_members": members,
        "bind": [f"occ={span(1, nocc)}", f"vir={span(nocc + 1, n)}"],
        "source": "pyscf.ci.CISD(mf) (closed-shell, all electrons correlated, conv_tol=1e-13) "
                  "on the RHF; mycisd.e_tot (total energy, hartree)",
        "cross_check": "lowest root of numpy.linalg.eigh of H over the determinants of PySCF's "
                       "FCI space with at most two electrons in virtual orbitals "
                       "(pyscf.fci.direct_spin1.contract_2e on unit vectors, the dump's "
                       f"integrals) plus E_nuc, agreeing to {CROSS_TOL:g}; its vector has "
                       "<S^2> = 0; `determinants` = 1 + 2ov + (ov)^2 + 2 C(o,2) C(v,2), counted "
                       "by enumeration too",
    }


# ----------------------------------------------------------------------------
# pair function cg |core^2 g^2| + cu |core^2 u^2|
# ----------------------------------------------------------------------------

def pair_function(mf, dump, core, g, u, casci_record):
    f = dump.fock(core)
    e_c = dump.closed_energy(core)
    e = dump.eri
    h = numpy.array([
        [e_c + 2 * f[g, g] + e[g, g, g, g], e[g, u, g, u]],
        [e[g, u, g, u], e_c + 2 * f[u, u] + e[u, u, u, u]],
    ])
    s = numpy.eye(2)

    # cross-check: the same matrix from PySCF's CASCI effective Hamiltonian over the active
    # orbitals g, u, with determinant vectors |g ; g> and |u ; u> in its FCI space
    mc = mcscf.CASCI(mf, 2, 2)
    mc.verbose = 0
    h1eff, ecore = mc.get_h1eff()
    h2eff = ao2mo.restore(1, mc.get_h2eff(), 2)
    h2e = direct_spin1.absorb_h1e(h1eff, h2eff, 2, (1, 1), 0.5)
    vecs = []
    for p in (0, 1):
        x = numpy.zeros((2, 2))
        x[p, p] = 1.0
        vecs.append(x)
    for r in range(2):
        for c in range(2):
            hv = direct_spin1.contract_2e(h2e, vecs[c], 2, (1, 1))
            check_close("pair-function H vs PySCF CASCI effective Hamiltonian", float(h[r, c]),
                        float((vecs[r] * hv).sum() + ecore * (vecs[r] * vecs[c]).sum()), CROSS_TOL)

    w, v = eigh_sorted(h)
    vec = v[:, 0]
    vec = vec if vec[numpy.argmax(numpy.abs(vec))] > 0 else -vec
    # the open-shell singlet does not couple to g^2 or u^2 here (g and u of different
    # symmetry), so the lowest root of the 2x2 is the CASCI(2,2) ground state
    m3 = numpy.array(casci_record["singlet_matrix"])
    assert abs(m3[0, 2]) < 1e-10 and abs(m3[1, 2]) < 1e-10, m3
    check_close("2x2 lowest root vs CASCI(2,2) ground root", float(w[0]),
                casci_record["singlet_roots"][0], CROSS_TOL)

    points = []
    for cg, cu in RAYLEIGH_POINTS:
        c = numpy.array([cg, cu])
        num, den = float(c @ h @ c), float(c @ s @ c)
        points.append({"cg": cg, "cu": cu, "numerator": num, "denominator": den,
                       "quotient": num / den})
    return {
        "core": one_based(core),
        "g": g + 1,
        "u": u + 1,
        "bind": [f"core={span(1, len(core))}", f"g={g + 1}", f"u={u + 1}"],
        "basis": ["| core^2 g^2 |", "| core^2 u^2 |"],
        "H": h.tolist(),
        "S": s.tolist(),
        "lowest_root": float(w[0]),
        "eigenvector": {"cg": float(vec[0]), "cu": float(vec[1])},
        "eigenvector_note": "normalized, largest-magnitude component positive",
        "fixed_g_weight": {"cu": float(vec[1] / vec[0]),
                           "note": "the lowest root's vector scaled so that |core^2 g^2| has "
                                   "weight 1: cu = v_u / v_g"},
        "rayleigh": points,
        "rayleigh_note": "numerator = c^T H c (<P|H|P>, total energies, so E_nuc c^T S c is in "
                         "it), denominator = c^T S c (<P|P>), quotient = their ratio, at "
                         "c = (cg, cu)",
        "source": "numpy: H_11 = E_c + 2 F^c_gg + (gg|gg), H_22 = E_c + 2 F^c_uu + (uu|uu), "
                  "H_12 = (gu|gu) = K_gu from the dump's integrals (F^c the core Fock matrix, "
                  "E_c the core energy with E_nuc); S = 1 (orthonormal determinants); "
                  "numpy.linalg.eigh for the lowest root and its vector; the quadratic forms by "
                  "numpy matrix products",
        "cross_check": "H equals <x|H|y> of the determinant vectors |g;g>, |u;u> under PySCF's "
                       "CASCI effective Hamiltonian (mcscf.CASCI.get_h1eff, get_h2eff, "
                       "direct_spin1.contract_2e) to "
                       f"{CROSS_TOL:g}; the open-shell singlet's couplings to g^2 and u^2 vanish "
                       "by symmetry (< 1e-10), so the lowest root equals the CASCI(2,2) ground "
                       "root",
    }


# ----------------------------------------------------------------------------
# driver
# ----------------------------------------------------------------------------

def run_molecule(spec):
    mol = build_mol(spec["atoms"], spec["basis"], spec["unit"])
    mf = scf.RHF(mol)
    mf.conv_tol = SCF_CONV_TOL
    mf.conv_tol_grad = SCF_CONV_TOL_GRAD
    mf.max_cycle = 500
    mf.kernel()
    assert mf.converged, f"{spec['key']}: SCF did not converge"
    nocc = mol.nelectron // 2
    norb = mf.mo_coeff.shape[1]
    write_dump(mf, spec["dump_file"], (nocc, nocc))
    dump = Dump(spec["dump_file"])
    assert (dump.norb, dump.nelec) == (norb, mol.nelectron)
    check_close(f"{spec['key']} E_nuc", dump.e_nuc, mol.energy_nuc(), 1e-12)
    check_close(f"{spec['key']} RHF from dump", dump.closed_energy(range(nocc)), mf.e_tot, CROSS_TOL)
    # canonical orbitals: the Fock matrix from the dump is diagonal
    f = dump.fock(range(nocc))
    off = float(numpy.abs(f - numpy.diag(numpy.diag(f))).max())
    assert off < 1e-8, f"{spec['key']}: off-diagonal Fock {off}"
    # HOMO and LUMO are not degenerate, so the active space is well defined
    eps = mf.mo_energy
    assert eps[nocc - 1] - eps[nocc - 2] > 1e-3 and eps[nocc + 1] - eps[nocc] > 1e-3, eps

    core, g, u = list(range(nocc - 1)), nocc - 1, nocc
    record = {
        "molecule": spec["molecule"],
        "basis": spec["basis"],
        "geometry": geometry_record(mol, spec["atoms"], spec["unit"]),
        "geometry_note": spec["geometry_note"],
        "method": "RHF",
        "dump_file": spec["dump_file"],
        "NORB": norb,
        "NELEC": mol.nelectron,
        "occupied": nocc,
        "virtual": norb - nocc,
        "e_nuc": float(mol.energy_nuc()),
        "rhf": {"value": float(mf.e_tot),
                "source": f"pyscf.scf.RHF(mol), conv_tol={SCF_CONV_TOL:g}, "
                          f"conv_tol_grad={SCF_CONV_TOL_GRAD:g}; mf.e_tot",
                "cross_check": "2 sum_i h_ii + sum_ij (2 J_ij - K_ij) + E_nuc from the dump"},
        "mo_energy": [float(x) for x in mf.mo_energy],
        "max_abs_offdiagonal_fock": off,
    }
    record["casci_2_2"] = casci(mf, dump, core, g, u)
    record["tda"] = tda(mf, dump, nocc)
    record["tda"]["bind"] = [f"occ={span(1, nocc)}", f"vir={span(nocc + 1, norb)}"]
    record["tda"]["dimension"] = 1 + nocc * (norb - nocc)
    if spec["cisd"]:
        record["cisd"] = cisd(mf, dump, nocc)
    if spec["pair_function"]:
        record["pair_function"] = pair_function(mf, dump, core, g, u, record["casci_2_2"])
    return record


def main():
    molecules = {}
    for spec in MOLECULES:
        molecules[spec["key"]] = run_molecule(spec)
        print(f"{spec['key']}: {spec['dump_file']} written, references cross-checked")
    assert sum("cisd" in m for m in molecules.values()) >= 2
    out = {
        "description": "References for configuration spaces and their roots (CASCI(2,2), "
                       "TDA singles, determinant CISD) and for a pair function with free "
                       "coefficients; total energies and excitation energies in hartree; "
                       "orbitals 1-based as in the dump files; regenerate with "
                       "python3 tests/pyscf/make_variational_fixtures.py",
        "generator": "tests/pyscf/make_variational_fixtures.py",
        "pyscf_version": pyscf.__version__,
        "numpy_version": numpy.__version__,
        "molecules": molecules,
    }
    with open(REFERENCE_JSON, "w") as fh:
        json.dump(out, fh, indent=1)
        fh.write("\n")
    print(f"wrote {REFERENCE_JSON}")


if __name__ == "__main__":
    main()

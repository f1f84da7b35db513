#!/usr/bin/env python3
"""Generate the PySCF reference fixtures for spinfold's tests.

Run from the repository root:

    pip install pyscf numpy
    python3 tests/pyscf/make_fixtures.py

Writes, under tests/fixtures/:
  * one integral-dump file per case (namelist header, then `value i j k l`
    lines in chemists' notation, 1-based, unique 8-fold-symmetric entries,
    `value i j 0 0` for h_ij and `value 0 0 0 0` for the nuclear repulsion);
  * pyscf_reference.json with the molecule, basis, geometry, orbital
    occupations and reference energies (hartree) of every case.

PySCF serves only as a numeric reference.  Every recorded energy is checked
inside this script against the same quantity recomputed from the dump file's
own numbers (read back with pyscf.tools.fcidump.read), so fixtures and
reference values are mutually consistent.

Conventions used throughout:
  * symmetry off: ORBSYM is all 1 and orbitals are numbered in the order
    PySCF returns them (ascending orbital energy);
  * orbital numbers in the JSON are 1-based, like the dump file;
  * J_pq = (pp|qq), K_pq = (pq|qp) in chemists' notation;
  * CI vectors live in PySCF's FCI determinant space: a determinant is an
    alpha string times a beta string, all alpha creators standing to the left
    of all beta creators, each string in ascending orbital order.
"""

import os

# Single-threaded linear algebra keeps the output bit-for-bit reproducible.
for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ[_var] = "1"

import json  # noqa: E402
import math  # noqa: E402

import numpy  # noqa: E402
import pyscf  # noqa: E402
from pyscf import ao2mo, fci, gto, scf  # noqa: E402
from pyscf.fci import cistring, direct_spin1, spin_op  # noqa: E402
from pyscf.tools import fcidump  # noqa: E402

HERE = os.path.dirname(os.path.abspath(__file__))
FIXTURES = os.path.normpath(os.path.join(HERE, "..", "fixtures"))

FLOAT_FORMAT = " %.17g"  # round-trips every double exactly
DUMP_TOL = 1e-14  # only numerical noise from symmetry-zero integrals is dropped
SCF_CONV_TOL = 1e-12
SCF_CONV_TOL_GRAD = 1e-9
CONSISTENCY_TOL = 1e-10  # recorded energy vs. same energy from the dump's numbers


# ----------------------------------------------------------------------------
# helpers
# ----------------------------------------------------------------------------

def build_mol(atoms, basis, unit, spin=0, charge=0):
    mol = gto.M(
        atom=atoms,
        basis=basis,
        unit=unit,
        spin=spin,
        charge=charge,
        symmetry=False,
        verbose=0,
    )
    return mol


def run_scf(mf):
    mf.conv_tol = SCF_CONV_TOL
    mf.conv_tol_grad = SCF_CONV_TOL_GRAD
    mf.max_cycle = 500
    mf.kernel()
    assert mf.converged, "SCF did not converge"
    return mf


def mo_integrals(mf):
    """h_pq and (pq|rs) (full 4-index array) in the MO basis of mf."""
    c = mf.mo_coeff
    h1 = c.T @ mf.get_hcore() @ c
    norb = c.shape[1]
    eri = ao2mo.restore(1, ao2mo.kernel(mf.mol, c), norb)
    return h1, eri


def write_dump(mf, filename, nelec_ab):
    """Write the integral dump of mf's orbitals; return its path."""
    path = os.path.join(FIXTURES, filename)
    h1, _ = mo_integrals(mf)
    c = mf.mo_coeff
    norb = c.shape[1]
    eri8 = ao2mo.restore(8, ao2mo.kernel(mf.mol, c), norb)
    fcidump.from_integrals(
        path,
        h1,
        eri8,
        norb,
        (int(nelec_ab[0]), int(nelec_ab[1])),
        nuc=mf.mol.energy_nuc(),
        ms=int(nelec_ab[0] - nelec_ab[1]),
        orbsym=[1] * norb,
        tol=DUMP_TOL,
        float_format=FLOAT_FORMAT,
    )
    return path


def read_dump(path):
    """Read a dump back; return (h1, full eri, e_nuc, header dict)."""
    d = fcidump.read(path, verbose=False)
    norb = d["NORB"]
    eri = ao2mo.restore(1, d["H2"], norb)
    return d["H1"], eri, d["ECORE"], d


def jk(eri):
    """J_pq = (pp|qq), K_pq = (pq|qp)."""
    n = eri.shape[0]
    idx = numpy.arange(n)
    j = eri[idx[:, None], idx[:, None], idx[None, :], idx[None, :]]
    k = eri[idx[:, None], idx[None, :], idx[None, :], idx[:, None]]
    return j, k


def det_vector(norb, nelec_ab, alpha_orbs, beta_orbs):
    """CI vector (na_strings x nb_strings) of one determinant.

    alpha_orbs / beta_orbs are 0-based orbital indices.  The determinant is
    |alpha string> x |beta string> in PySCF's ordering convention, coefficient +1.
    """
    na, nb = nelec_ab
    assert len(alpha_orbs) == na and len(beta_orbs) == nb
    dim_a = cistring.num_strings(norb, na)
    dim_b = cistring.num_strings(norb, nb)
    ia = cistring.str2addr(norb, na, sum(1 << p for p in alpha_orbs))
    ib = cistring.str2addr(norb, nb, sum(1 << p for p in beta_orbs))
    v = numpy.zeros((dim_a, dim_b))
    v[ia, ib] = 1.0
    return v


def ci_energy(h1, eri, vec, norb, nelec_ab, e_nuc):
    """<vec|H|vec> / <vec|vec> + e_nuc, full Hamiltonian in the given orbitals."""
    e = direct_spin1.energy(h1, eri, vec, norb, nelec_ab)
    return float(e / numpy.dot(vec.ravel(), vec.ravel()) + e_nuc)


def ci_matrix_element(h1, eri, bra, ket, norb, nelec_ab):
    h2e = direct_spin1.absorb_h1e(h1, eri, norb, nelec_ab, 0.5)
    hket = direct_spin1.contract_2e(h2e, ket, norb, nelec_ab)
    return float(numpy.dot(bra.ravel(), hket.ravel()))


def s2(vec, norb, nelec_ab):
    ss, _mult = spin_op.spin_square(vec, norb, nelec_ab)
    return float(ss)


def core_pieces(h1, eri, core):
    """Closed-core energy and core Fock diagonal F^c_pp = h_pp + sum_c (2J_cp - K_cp)."""
    j, k = jk(eri)
    c = numpy.asarray(core, dtype=int)
    e_core = 2.0 * h1[c, c].sum() + (2.0 * j[numpy.ix_(c, c)] - k[numpy.ix_(c, c)]).sum()
    fc = numpy.diag(h1) + (2.0 * j[c, :] - k[c, :]).sum(axis=0)
    return float(e_core), fc, j, k


def high_spin_energy(h1, eri, core, opens, e_nuc):
    """Closed-form energy of core^2 (open shells all alpha)."""
    e_core, fc, j, k = core_pieces(h1, eri, core)
    e = e_core + sum(fc[o] for o in opens)
    for x in range(len(opens)):
        for y in range(x + 1, len(opens)):
            p, q = opens[x], opens[y]
            e += j[p, q] - k[p, q]
    return float(e + e_nuc)


def check_close(label, a, b, tol=CONSISTENCY_TOL):
    diff = abs(a - b)
    assert diff < tol, f"{label}: {a!r} vs {b!r} (diff {diff:.3e})"
    return diff


def one_based(orbs):
    return [int(p) + 1 for p in orbs]


def geometry_record(mol, atoms, unit):
    return {
        "unit": unit,
        "atoms": [
            {"symbol": sym, "xyz": [float(x) for x in xyz]} for sym, xyz in atoms
        ],
    }


def header_record(hdr):
    return {"NORB": hdr["NORB"], "NELEC": hdr["NELEC"], "MS2": hdr["MS2"]}


# ----------------------------------------------------------------------------
# case 1: water, STO-3G, RHF; open-shell singlet / triplets on RHF orbitals
# ----------------------------------------------------------------------------

def case_water():
    unit = "bohr"
    # Our own scenario: R(OH) = 1.80 bohr, angle HOH = 104.0 degrees, in the yz plane.
    atoms = [
        ("O", (0.0, 0.0, 0.0)),
        ("H", (0.0, 1.4184, 1.1082)),
        ("H", (0.0, -1.4184, 1.1082)),
    ]
    mol = build_mol(atoms, "sto-3g", unit)
    mf = run_scf(scf.RHF(mol))
    norb = mf.mo_coeff.shape[1]
    nocc = mol.nelectron // 2
    assert norb == 7 and nocc == 5
    e_nuc = mol.energy_nuc()
    h1, eri = mo_integrals(mf)

    core = [0, 1, 2, 3]
    a, b = 4, 5  # HOMO, LUMO (0-based)
    n55 = (5, 5)
    n64 = (6, 4)

    # closed-shell determinant core^2 a^2
    v_closed = det_vector(norb, n55, core + [a], core + [a])
    e_closed = ci_energy(h1, eri, v_closed, norb, n55, e_nuc)
    check_close("closed-shell determinant vs mf.e_tot", e_closed, mf.e_tot, 1e-9)
    s2_closed = s2(v_closed, norb, n55)

    # the two M=0 open-shell determinants
    d1 = det_vector(norb, n55, core + [a], core + [b])  # a alpha, b beta
    d2 = det_vector(norb, n55, core + [b], core + [a])  # b alpha, a beta

    def combo(sign):
        return (d1 + sign * d2) / math.sqrt(2.0)

    s2_plus = s2(combo(+1.0), norb, n55)
    s2_minus = s2(combo(-1.0), norb, n55)
    # choose the relative sign by <S^2>, not by any assumed ordering convention
    if abs(s2_plus) < 1e-8:
        sign_singlet, sign_triplet = +1.0, -1.0
    else:
        sign_singlet, sign_triplet = -1.0, +1.0
    v_singlet = combo(sign_singlet)
    v_trip0 = combo(sign_triplet)
    s2_singlet = s2(v_singlet, norb, n55)
    s2_trip0 = s2(v_trip0, norb, n55)
    assert abs(s2_singlet - 0.0) < 1e-10, s2_singlet
    assert abs(s2_trip0 - 2.0) < 1e-10, s2_trip0
    assert {round(s2_plus), round(s2_minus)} == {0, 2}

    v_trip1 = det_vector(norb, n64, core + [a, b], core)
    s2_trip1 = s2(v_trip1, norb, n64)
    assert abs(s2_trip1 - 2.0) < 1e-10, s2_trip1

    e_singlet = ci_energy(h1, eri, v_singlet, norb, n55, e_nuc)
    e_trip0 = ci_energy(h1, eri, v_trip0, norb, n55, e_nuc)
    e_trip1 = ci_energy(h1, eri, v_trip1, norb, n64, e_nuc)
    check_close("triplet M=0 vs M=1 (spin-free H)", e_trip0, e_trip1)

    # canonical orbital energies and the occupied-virtual Fock block
    fock_mo = mf.mo_coeff.T @ mf.get_fock() @ mf.mo_coeff
    occ = numpy.where(mf.mo_occ > 0)[0]
    vir = numpy.where(mf.mo_occ == 0)[0]
    max_fock_ov = float(numpy.abs(fock_mo[numpy.ix_(occ, vir)]).max())
    assert max_fock_ov < 1e-7, max_fock_ov
    assert numpy.abs(numpy.diag(fock_mo) - mf.mo_energy).max() < 1e-8

    # ---- dump and self-consistency ----
    fname = "water_sto3g_rhf.fcidump"
    path = write_dump(mf, fname, n55)
    dh1, deri, denuc, hdr = read_dump(path)
    assert hdr["NORB"] == norb and hdr["NELEC"] == 10 and hdr["MS2"] == 0
    assert hdr["ORBSYM"] == [1] * norb
    diffs = []
    diffs.append(check_close("e_nuc", denuc, e_nuc, 1e-13))
    # RHF from closed-form 2 sum h_ii + sum_ij (2J_ij - K_ij) + e_nuc
    e_rhf_formula = high_spin_energy(dh1, deri, core + [a], [], denuc)
    diffs.append(check_close("RHF energy from dump", e_rhf_formula, mf.e_tot))
    diffs.append(check_close("closed det from dump",
                             ci_energy(dh1, deri, v_closed, norb, n55, denuc), e_closed))
    diffs.append(check_close("singlet from dump",
                             ci_energy(dh1, deri, v_singlet, norb, n55, denuc), e_singlet))
    diffs.append(check_close("triplet M=0 from dump",
                             ci_energy(dh1, deri, v_trip0, norb, n55, denuc), e_trip0))
    diffs.append(check_close("triplet M=1 from dump",
                             ci_energy(dh1, deri, v_trip1, norb, n64, denuc), e_trip1))
    # spin-adapted closed forms from the dump's own numbers
    e_c, fc, j, k = core_pieces(dh1, deri, core)
    e_s_formula = e_c + fc[a] + fc[b] + j[a, b] + k[a, b] + denuc
    e_t_formula = e_c + fc[a] + fc[b] + j[a, b] - k[a, b] + denuc
    diffs.append(check_close("singlet closed form", e_s_formula, e_singlet))
    diffs.append(check_close("triplet closed form", e_t_formula, e_trip1))
    diffs.append(check_close("triplet high-spin helper",
                             high_spin_energy(dh1, deri, core, [a, b], denuc), e_trip1))
    # orbital energies from the dump: eps_p = h_pp + sum_occ (2J - K)
    _, fc_occ, _, _ = core_pieces(dh1, deri, list(occ))
    assert numpy.abs(fc_occ - mf.mo_energy).max() < 1e-7

    sign_word = {1.0: "+", -1.0: "-"}
    return {
        "molecule": "H2O",
        "basis": "sto-3g",
        "geometry": geometry_record(mol, atoms, unit),
        "geometry_note": "R(OH) = 1.80 bohr, angle HOH = 104.0 degrees (coordinates rounded to 4 decimals)",
        "charge": 0,
        "method": "RHF",
        "dump_file": fname,
        "header": header_record(hdr),
        "NORB": norb,
        "NELEC": 10,
        "orbitals_1based": {
            "core": one_based(core),
            "a": a + 1,
            "b": b + 1,
            "homo": a + 1,
            "lumo": b + 1,
        },
        "energies": {
            "rhf": {
                "value": float(mf.e_tot),
                "occupation": {"core": one_based(core + [a]), "open": []},
                "source": "pyscf.scf.RHF(mol).kernel(); mf.e_tot",
            },
            "closed_shell_determinant": {
                "value": e_closed,
                "s2": s2_closed,
                "occupation": {"core": one_based(core + [a]), "open": []},
                "source": "pyscf.fci.direct_spin1.energy with RHF-MO h1e/eri (ao2mo) + mol.energy_nuc(); CI vector = determinant core^2 a^2",
            },
            "open_shell_singlet": {
                "value": e_singlet,
                "s2": s2_singlet,
                "nelec_alpha_beta": list(n55),
                "occupation": {"core": one_based(core), "open": [a + 1, b + 1]},
                "relative_sign": sign_word[sign_singlet],
                "ci_vector": "(|core a ; core b> %s |core b ; core a>)/sqrt(2), |alpha string ; beta string>" % sign_word[sign_singlet],
                "source": "pyscf.fci.direct_spin1.energy with RHF-MO h1e/eri + mol.energy_nuc(); s2 from pyscf.fci.spin_op.spin_square",
            },
            "triplet_m0": {
                "value": e_trip0,
                "s2": s2_trip0,
                "nelec_alpha_beta": list(n55),
                "occupation": {"core": one_based(core), "open": [a + 1, b + 1]},
                "relative_sign": sign_word[sign_triplet],
                "ci_vector": "(|core a ; core b> %s |core b ; core a>)/sqrt(2), |alpha string ; beta string>" % sign_word[sign_triplet],
                "source": "pyscf.fci.direct_spin1.energy with RHF-MO h1e/eri + mol.energy_nuc(); s2 from pyscf.fci.spin_op.spin_square",
            },
            "triplet_m1": {
                "value": e_trip1,
                "s2": s2_trip1,
                "nelec_alpha_beta": list(n64),
                "occupation": {"core": one_based(core), "open": [a + 1, b + 1]},
                "ci_vector": "|core a b ; core>",
                "source": "pyscf.fci.direct_spin1.energy with RHF-MO h1e/eri + mol.energy_nuc(); s2 from pyscf.fci.spin_op.spin_square",
            },
        },
        "mo_energy": {
            "value": [float(x) for x in mf.mo_energy],
            "source": "mf.mo_energy (canonical RHF orbital energies, ascending)",
        },
        "max_abs_fock_occ_vir": {
            "value": max_fock_ov,
            "source": "max |(C^T mf.get_fock() C)_ia|, i occupied, a virtual",
        },
        "e_nuc": float(e_nuc),
        "max_abs_diff_recorded_vs_dump": float(max(diffs)),
    }


# ----------------------------------------------------------------------------
# high-spin ROHF cases (triplet CH2, quartet N)
# ----------------------------------------------------------------------------

def rohf_case(name, molecule, atoms, unit, basis, spin, fname, note):
    mol = build_mol(atoms, basis, unit, spin=spin)
    mf = run_scf(scf.ROHF(mol))
    norb = mf.mo_coeff.shape[1]
    e_nuc = mol.energy_nuc()
    occ = mf.mo_occ
    core = [int(p) for p in numpy.where(occ == 2)[0]]
    opens = [int(p) for p in numpy.where(occ == 1)[0]]
    assert len(opens) == spin
    assert core == list(range(len(core))), f"{name}: core not lowest orbitals: {occ}"
    assert opens == list(range(len(core), len(core) + spin)), f"{name}: {occ}"
    na, nb = mol.nelec
    assert (na, nb) == (len(core) + len(opens), len(core))

    h1, eri = mo_integrals(mf)
    v = det_vector(norb, (na, nb), core + opens, core)
    e_det = ci_energy(h1, eri, v, norb, (na, nb), e_nuc)
    s2_det = s2(v, norb, (na, nb))
    smax = spin / 2.0
    assert abs(s2_det - smax * (smax + 1)) < 1e-10
    check_close(f"{name}: high-spin determinant vs mf.e_tot", e_det, mf.e_tot, 1e-9)

    path = write_dump(mf, fname, (na, nb))
    dh1, deri, denuc, hdr = read_dump(path)
    assert hdr["NORB"] == norb and hdr["NELEC"] == na + nb and hdr["MS2"] == spin
    diffs = [check_close("e_nuc", denuc, e_nuc, 1e-13)]
    diffs.append(check_close(f"{name}: ROHF closed form from dump",
                             high_spin_energy(dh1, deri, core, opens, denuc), mf.e_tot))
    diffs.append(check_close(f"{name}: determinant from dump",
                             ci_energy(dh1, deri, v, norb, (na, nb), denuc), mf.e_tot))

    return {
        "molecule": molecule,
        "basis": basis,
        "geometry": geometry_record(mol, atoms, unit),
        "geometry_note": note,
        "charge": 0,
        "spin_2S": spin,
        "method": "ROHF (high spin, open shells all alpha)",
        "dump_file": fname,
        "header": header_record(hdr),
        "NORB": norb,
        "NELEC": na + nb,
        "nelec_alpha_beta": [na, nb],
        "orbitals_1based": {"core": one_based(core), "open": one_based(opens)},
        "energies": {
            "rohf": {
                "value": float(mf.e_tot),
                "s2": s2_det,
                "occupation": {"core": one_based(core), "open": one_based(opens)},
                "source": "pyscf.scf.ROHF(mol).kernel(); mf.e_tot (s2 of the determinant from pyscf.fci.spin_op.spin_square)",
            },
        },
        "mo_occ": [float(x) for x in occ],
        "e_nuc": float(e_nuc),
        "max_abs_diff_recorded_vs_dump": float(max(diffs)),
    }


def case_ch2():
    # Our own scenario: R(CH) = 1.078 angstrom, angle HCH = 133.9 degrees.
    atoms = [
        ("C", (0.0, 0.0, 0.0)),
        ("H", (0.0, 0.9919, 0.4221)),
        ("H", (0.0, -0.9919, 0.4221)),
    ]
    return rohf_case("ch2", "CH2 (triplet)", atoms, "angstrom", "6-31g", 2,
                     "ch2_triplet_631g_rohf.fcidump",
                     "R(CH) = 1.078 angstrom, angle HCH = 133.9 degrees (coordinates rounded to 4 decimals)")


def case_n_atom():
    atoms = [("N", (0.0, 0.0, 0.0))]
    return rohf_case("n", "N atom (quartet)", atoms, "bohr", "6-31g", 3,
                     "n_quartet_631g_rohf.fcidump", "single atom at the origin")


# ----------------------------------------------------------------------------
# case 4: H2 at R = 1.4 bohr, STO-3G
# ----------------------------------------------------------------------------

TEXTBOOK_H2 = {
    "h11": -1.2528, "h22": -0.4756, "J11": 0.6746, "J12": 0.6636,
    "J22": 0.6975, "K12": 0.1813, "correlation": -0.0206,
}


def case_h2():
    unit = "bohr"
    atoms = [("H", (0.0, 0.0, 0.0)), ("H", (0.0, 0.0, 1.4))]
    mol = build_mol(atoms, "sto-3g", unit)
    mf = run_scf(scf.RHF(mol))
    norb = 2
    n11 = (1, 1)
    e_nuc = mol.energy_nuc()
    h1, eri = mo_integrals(mf)
    j, k = jk(eri)
    ints = {
        "h11": float(h1[0, 0]), "h22": float(h1[1, 1]),
        "J11": float(j[0, 0]), "J12": float(j[0, 1]), "J22": float(j[1, 1]),
        "K12": float(k[0, 1]),
    }

    g = det_vector(norb, n11, [0], [0])
    dd = det_vector(norb, n11, [1], [1])
    hmat = numpy.array([
        [ci_matrix_element(h1, eri, g, g, norb, n11), ci_matrix_element(h1, eri, g, dd, norb, n11)],
        [ci_matrix_element(h1, eri, dd, g, norb, n11), ci_matrix_element(h1, eri, dd, dd, norb, n11)],
    ])
    assert abs(hmat[0, 1] - hmat[1, 0]) < 1e-12
    e_ci2 = float(numpy.linalg.eigvalsh(hmat)[0] + e_nuc)
    e_corr = float(e_ci2 - mf.e_tot)
    check_close("H2 ground determinant vs RHF", hmat[0, 0] + e_nuc, mf.e_tot, 1e-9)
    e_fci = float(fci.FCI(mf).kernel()[0])
    check_close("H2 2x2 CI vs full CI", e_ci2, e_fci, 1e-9)

    fname = "h2_sto3g_rhf.fcidump"
    path = write_dump(mf, fname, n11)
    dh1, deri, denuc, hdr = read_dump(path)
    assert hdr["NORB"] == 2 and hdr["NELEC"] == 2 and hdr["MS2"] == 0
    dj, dk = jk(deri)
    diffs = [check_close("e_nuc", denuc, e_nuc, 1e-13)]
    for key, val in {"h11": dh1[0, 0], "h22": dh1[1, 1], "J11": dj[0, 0], "J12": dj[0, 1],
                     "J22": dj[1, 1], "K12": dk[0, 1]}.items():
        diffs.append(check_close(f"H2 {key} from dump", float(val), ints[key], 1e-13))
    e_rhf_formula = 2 * dh1[0, 0] + dj[0, 0] + denuc
    diffs.append(check_close("H2 RHF from dump", float(e_rhf_formula), mf.e_tot))
    # 2x2 CI from closed forms: H11 = 2h11+J11, H22 = 2h22+J22, H12 = K12
    m = numpy.array([[2 * dh1[0, 0] + dj[0, 0], dk[0, 1]],
                     [dk[0, 1], 2 * dh1[1, 1] + dj[1, 1]]])
    diffs.append(check_close("H2 2x2 CI from dump", float(numpy.linalg.eigvalsh(m)[0] + denuc), e_ci2))

    print("H2 / STO-3G / R = 1.4 bohr, MO integrals vs textbook (4 decimals):")
    for key in ("h11", "h22", "J11", "J12", "J22", "K12"):
        print(f"  {key:12s} pyscf {ints[key]: .6f}   textbook {TEXTBOOK_H2[key]: .4f}   diff {ints[key] - TEXTBOOK_H2[key]: .1e}")
    print(f"  {'correlation':12s} pyscf {e_corr: .6f}   textbook {TEXTBOOK_H2['correlation']: .4f}   diff {e_corr - TEXTBOOK_H2['correlation']: .1e}")
    for key, ref in TEXTBOOK_H2.items():
        val = e_corr if key == "correlation" else ints[key]
        assert abs(val - ref) < 2e-4, (key, val, ref)

    src_int = "RHF MO basis: C^T mf.get_hcore() C and ao2mo.kernel(mol, C)"
    return {
        "molecule": "H2",
        "basis": "sto-3g",
        "geometry": geometry_record(mol, atoms, unit),
        "geometry_note": "R = 1.4 bohr",
        "charge": 0,
        "method": "RHF, plus 2x2 CI of 1^2 and 2^2",
        "dump_file": fname,
        "header": header_record(hdr),
        "NORB": 2,
        "NELEC": 2,
        "orbitals_1based": {"core": [1], "open": [], "double_excitation_target": 2},
        "mo_integrals": {
            "h11": {"value": ints["h11"], "source": src_int},
            "h22": {"value": ints["h22"], "source": src_int},
            "J11": {"value": ints["J11"], "definition": "(11|11)", "source": src_int},
            "J12": {"value": ints["J12"], "definition": "(11|22)", "source": src_int},
            "J22": {"value": ints["J22"], "definition": "(22|22)", "source": src_int},
            "K12": {"value": ints["K12"], "definition": "(12|21)", "source": src_int},
        },
        "energies": {
            "rhf": {
                "value": float(mf.e_tot),
                "occupation": {"core": [1], "open": []},
                "source": "pyscf.scf.RHF(mol).kernel(); mf.e_tot",
            },
            "ci_2x2_lowest": {
                "value": e_ci2,
                "source": "lowest eigenvalue of the 2x2 matrix <D_i|H|D_j>, D = 1^2, 2^2, via pyscf.fci.direct_spin1.contract_2e on RHF-MO integrals, + mol.energy_nuc()",
            },
            "correlation": {
                "value": e_corr,
                "source": "ci_2x2_lowest - rhf",
            },
            "fci": {
                "value": e_fci,
                "source": "pyscf.fci.FCI(mf).kernel() (equals the 2x2 CI: singles do not couple)",
            },
        },
        "e_nuc": float(e_nuc),
        "max_abs_diff_recorded_vs_dump": float(max(diffs)),
    }


# ----------------------------------------------------------------------------

def main():
    os.makedirs(FIXTURES, exist_ok=True)
    cases = {
        "water_sto3g_rhf": case_water(),
        "ch2_triplet_631g_rohf": case_ch2(),
        "n_quartet_631g_rohf": case_n_atom(),
        "h2_sto3g_rhf": case_h2(),
    }
    out = {
        "description": "PySCF reference energies (hartree) for spinfold's tests; regenerate with python3 tests/pyscf/make_fixtures.py",
        "generator": "tests/pyscf/make_fixtures.py",
        "pyscf_version": pyscf.__version__,
        "conventions": {
            "orbital_numbers": "1-based, as in the dump files; symmetry off, ascending orbital energy",
            "two_electron": "chemists' notation (ij|kl); J_pq = (pp|qq), K_pq = (pq|qp)",
            "ci_vectors": "determinant = alpha string x beta string, alpha creators left of beta creators, strings in ascending orbital order",
            "energies": "total energies including nuclear repulsion, hartree",
        },
        "cases": cases,
    }
    path = os.path.join(FIXTURES, "pyscf_reference.json")
    with open(path, "w") as f:
        json.dump(out, f, indent=2)
        f.write("\n")
    print(f"wrote {path}")
    for name, c in cases.items():
        print(f"  {name}: {c['dump_file']}, max |recorded - dump| = {c['max_abs_diff_recorded_vs_dump']:.2e}")


if __name__ == "__main__":
    main()

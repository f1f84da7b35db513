#!/usr/bin/env python3
"""Diagonal CI-singles (Tamm-Dancoff) matrix elements of water, for spinfold's spin-adapted
excitations.

Run from the repository root:

    pip install pyscf numpy
    python3 tests/pyscf/make_cis_fixtures.py

Reads tests/fixtures/water_sto3g_rhf.fcidump (canonical RHF orbitals, 7 orbitals,
10 electrons: occupied 1-5, virtual 6-7) and writes tests/fixtures/cis_water_reference.json:
for every occupied i and virtual a (1-based), the total energies (nuclear repulsion
included) of the singlet and the triplet single excitation i -> a,

    singlet: E_ref + f_aa - f_ii + 2 (ia|ia) - (ii|aa)
    triplet: E_ref + f_aa - f_ii - (ii|aa)

the diagonal elements of the spin-adapted CIS (TDA) matrices, with
f_pq = h_pq + sum_k [2 (pq|kk) - (pk|kq)] and E_ref = sum_k (h_kk + f_kk) + E_nuc over the
occupied k, computed with numpy from the dump's own integrals (common practice).

Checks from outside the formula:
  * each energy again as the expectation value <c|H|c> of the state's CI vector in PySCF's
    determinant space (pyscf.fci.direct_spin1), the vector built from the two determinants
    with the relative sign chosen by <S^2> (pyscf.fci.spin_op.spin_square), to 1e-10;
  * E_ref against the RHF energy recorded in tests/fixtures/pyscf_reference.json, to 1e-9;
  * each singlet against the diagonal of PySCF's own TDA matrix, RHF energy plus
    A[i,a,i,a] from pyscf.tdscf.rhf.get_ab, for an RHF calculation run again on the
    recorded geometry, to 1e-8 (the orbitals of two SCF runs agree to about that).
The output is deterministic.
"""

import os
import sys

# Single-threaded linear algebra keeps the output bit-for-bit reproducible.
for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ[_var] = "1"

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))

import json  # noqa: E402
import math  # noqa: E402

import numpy  # noqa: E402
import pyscf  # noqa: E402

from pyscf import scf  # noqa: E402
from pyscf.tdscf import rhf as tdscf_rhf  # noqa: E402

from make_fixtures import (  # noqa: E402
    FIXTURES, build_mol, check_close, ci_energy, det_vector, read_dump, run_scf, s2,
)

DUMP_FILE = "water_sto3g_rhf.fcidump"
REFERENCE_JSON = os.path.join(FIXTURES, "cis_water_reference.json")
NOCC = 5
TOL = 1e-10

FORMULA_SOURCE = (
    "numpy from the integrals of tests/fixtures/water_sto3g_rhf.fcidump (read with "
    "pyscf.tools.fcidump.read): E_ref + f_aa - f_ii + 2 (ia|ia) - (ii|aa) for the singlet, "
    "without 2 (ia|ia) for the triplet, f_pq = h_pq + sum_k [2 (pq|kk) - (pk|kq)], "
    "E_ref = sum_k (h_kk + f_kk) + E_nuc; the diagonal CIS (TDA) elements, common practice; "
    "cross-checked to 1e-10 against <c|H|c> of the CI vector with pyscf.fci.direct_spin1"
)


def pyscf_tda_singlets(water):
    """RHF energy + A[i,a,i,a] of PySCF's singlet TDA matrix, RHF run again on the recorded
    geometry (the diagonal does not depend on the orbitals' signs)."""
    geometry = water["geometry"]
    atoms = [(atom["symbol"], tuple(atom["xyz"])) for atom in geometry["atoms"]]
    mf = run_scf(scf.RHF(build_mol(atoms, water["basis"], geometry["unit"])))
    a, _b = tdscf_rhf.get_ab(mf)
    nocc, nvir = a.shape[:2]
    return numpy.array([[mf.e_tot + a[i, x, i, x] for x in range(nvir)] for i in range(nocc)])


def main():
    h1, eri, e_nuc, header = read_dump(os.path.join(FIXTURES, DUMP_FILE))
    norb = header["NORB"]
    assert (norb, header["NELEC"]) == (7, 10)
    occ = list(range(NOCC))
    vir = list(range(NOCC, norb))

    fock = h1 + 2.0 * numpy.einsum("pqkk->pq", eri[:, :, occ][:, :, :, occ]) \
        - numpy.einsum("pkkq->pq", eri[:, occ][:, :, occ])
    e_ref = float(sum(h1[k, k] + fock[k, k] for k in occ) + e_nuc)
    with open(os.path.join(FIXTURES, "pyscf_reference.json")) as f:
        water = json.load(f)["cases"]["water_sto3g_rhf"]
    check_close("E_ref vs the recorded RHF energy", e_ref, water["energies"]["rhf"]["value"], 1e-9)
    tda = pyscf_tda_singlets(water)

    n55 = (NOCC, NOCC)
    excitations = []
    for i in occ:
        for a in vir:
            base = fock[a, a] - fock[i, i] - eri[i, i, a, a]
            singlet = float(e_ref + base + 2.0 * eri[i, a, i, a])
            triplet = float(e_ref + base)
            # the same states as CI vectors: i alpha -> a alpha and i beta -> a beta
            rest = [k for k in occ if k != i]
            d_alpha = det_vector(norb, n55, rest + [a], occ)
            d_beta = det_vector(norb, n55, occ, rest + [a])
            by_spin = {}
            for sign in (+1.0, -1.0):
                vec = (d_alpha + sign * d_beta) / math.sqrt(2.0)
                by_spin[round(s2(vec, norb, n55))] = ci_energy(h1, eri, vec, norb, n55, e_nuc)
            check_close(f"singlet {i + 1}->{a + 1}", singlet, by_spin[0], TOL)
            check_close(f"triplet {i + 1}->{a + 1}", triplet, by_spin[2], TOL)
            check_close(f"PySCF TDA singlet {i + 1}->{a + 1}", singlet, tda[i, a - NOCC], 1e-8)
            excitations.append({"i": i + 1, "a": a + 1, "singlet": singlet, "triplet": triplet})

    record = {
        "description": (
            "Diagonal spin-adapted CIS (TDA) matrix elements of water on canonical RHF orbitals: "
            "total energies in hartree (nuclear repulsion included) of the singlet and triplet "
            "single excitations i -> a, orbitals 1-based; regenerate with "
            "python3 tests/pyscf/make_cis_fixtures.py"
        ),
        "generator": "tests/pyscf/make_cis_fixtures.py",
        "pyscf_version": pyscf.__version__,
        "dump_file": DUMP_FILE,
        "occupied_1based": [k + 1 for k in occ],
        "virtual_1based": [a + 1 for a in vir],
        "homo": NOCC,
        "lumo": NOCC + 1,
        "e_ref": {
            "value": e_ref,
            "source": "sum_k (h_kk + f_kk) + E_nuc; equals the RHF energy of pyscf_reference.json to 1e-9",
        },
        "source": FORMULA_SOURCE,
        "excitations": excitations,
    }
    with open(REFERENCE_JSON, "w") as f:
        json.dump(record, f, indent=1)
        f.write("\n")
    print(f"wrote {REFERENCE_JSON}")


if __name__ == "__main__":
    main()

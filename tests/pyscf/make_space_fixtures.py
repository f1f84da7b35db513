#!/usr/bin/env python3
"""Reference roots of determinant spaces for tests/variational_space.rs.

Run from the repository root:

    pip install pyscf numpy
    python3 tests/pyscf/make_space_fixtures.py

For each committed integral file named below, the script reads the integrals back with
pyscf.tools.fcidump.read, builds the full-CI Hamiltonian column by column with
pyscf.fci.direct_spin1.contract_2e (one unit vector per determinant), keeps the rows and columns
of the determinants at most two spin orbitals away from the closed-shell reference (the
determinant CISD space: reference, alpha and beta singles, alpha-beta, alpha-alpha and
beta-beta doubles), and diagonalizes that block with numpy.linalg.eigvalsh. It writes the lowest
roots (total energies, the file's constant included) and the number of determinants to
tests/fixtures/space_reference.json. Nothing here uses spinfold's own formulas.
"""

import os

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ[_var] = "1"

import json  # noqa: E402

import numpy  # noqa: E402
from pyscf import fci  # noqa: E402
from pyscf.fci import cistring  # noqa: E402
from pyscf.tools import fcidump  # noqa: E402

FIXTURES = os.path.join(os.path.dirname(__file__), "..", "fixtures")
ROOTS = 12


def cisd_roots(name):
    data = fcidump.read(os.path.join(FIXTURES, name))
    norb, nelec, ecore = data["NORB"], data["NELEC"], data["ECORE"]
    nocc = nelec // 2
    strings = cistring.make_strings(range(norb), nocc)
    reference = (1 << nocc) - 1
    # excitation level of a string: occupied orbitals outside the reference
    level = [bin(int(s) & ~reference).count("1") for s in strings]
    n = len(strings)
    h2 = fci.direct_spin1.absorb_h1e(data["H1"], data["H2"], norb, (nocc, nocc), 0.5)
    hamiltonian = numpy.zeros((n * n, n * n))
    for k in range(n * n):
        unit = numpy.zeros(n * n)
        unit[k] = 1.0
        hamiltonian[:, k] = fci.direct_spin1.contract_2e(h2, unit.reshape(n, n), norb, (nocc, nocc)).ravel()
    keep = [a * n + b for a in range(n) for b in range(n) if level[a] + level[b] <= 2]
    block = hamiltonian[numpy.ix_(keep, keep)]
    assert numpy.allclose(block, block.T, atol=1e-12)
    values = numpy.linalg.eigvalsh(block) + ecore
    return {
        "dump_file": name,
        "occupied": list(range(1, nocc + 1)),
        "virtual": list(range(nocc + 1, norb + 1)),
        "determinants": len(keep),
        "roots": [float(v) for v in values[:ROOTS]],
        "source": "numpy.linalg.eigvalsh of the full-CI Hamiltonian of pyscf.fci.direct_spin1.contract_2e "
        "restricted to the determinants at most doubly excited from the closed-shell reference; plus ECORE",
    }


def main():
    cases = {name.split(".")[0]: cisd_roots(name) for name in ["h2_sto3g_rhf.fcidump", "water_sto3g_rhf.fcidump"]}
    out = {
        "description": "Roots of the determinant CISD space (total energies, hartree); "
        "regenerate with python3 tests/pyscf/make_space_fixtures.py",
        "generator": "tests/pyscf/make_space_fixtures.py",
        "cases": cases,
    }
    with open(os.path.join(FIXTURES, "space_reference.json"), "w") as f:
        json.dump(out, f, indent=1)
        f.write("\n")


if __name__ == "__main__":
    main()

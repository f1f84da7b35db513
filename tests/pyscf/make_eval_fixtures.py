#!/usr/bin/env python3
"""Reference values for every number `spinfold eval` prints, from PySCF CI vectors.

Run from the repository root:

    pip install pyscf numpy
    python3 tests/pyscf/make_eval_fixtures.py

Writes, under tests/fixtures/:
  * lih_sto3g_rhf.fcidump: LiH at R = 3.0 bohr, STO-3G, canonical RHF orbitals
    (6 orbitals, 4 electrons), in the same format as make_fixtures.py's dumps;
  * eval_reference.json: for each run (an input file, an integral file, the
    --bind options, with or without --distinct) and each request of the input,
    the value `spinfold eval` must print: one number, or one per row of a table
    over the request's unbound generic indices, with the number of rows that
    must be left out (a state of the request does not exist there, or
    --distinct excludes the assignment).

The states of each input are written a second time here, by hand, as lists of
determinants in spinfold's creation order; nothing is taken from spinfold.
Each determinant becomes a vector in PySCF's determinant space (as in
make_csf_fixtures.py: alpha creators left of beta creators, each string
ascending, times the parity of that reordering), and with the dump file's own
integrals (read back with pyscf.tools.fcidump.read):

    overlap X Y = x . y
    element X Y = x . H y + E_nuc x . y
    energy X    = x . H x / x . x + E_nuc

with H y from pyscf.fci.direct_spin1.contract_2e.  A state whose vector is zero
(every determinant violates the Pauli principle, or they cancel) does not
exist for that assignment.  The script is deterministic.
"""

import os
import sys

# Single-threaded linear algebra keeps the output bit-for-bit reproducible.
for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ[_var] = "1"

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))

import json  # noqa: E402
import math  # noqa: E402
from itertools import product  # noqa: E402

import numpy  # noqa: E402
import pyscf  # noqa: E402
from pyscf import ao2mo, scf  # noqa: E402
from pyscf.fci import cistring, direct_spin1  # noqa: E402
from pyscf.tools import fcidump  # noqa: E402

from make_csf_fixtures import permutation_sign  # noqa: E402
from make_fixtures import (  # noqa: E402
    FIXTURES, build_mol, check_close, geometry_record, high_spin_energy, run_scf, write_dump,
)

ROOT = os.path.normpath(os.path.join(FIXTURES, "..", ".."))
REFERENCE_JSON = os.path.join(FIXTURES, "eval_reference.json")
ZERO_TOL = 1e-12  # a CI vector this small is the zero vector (a state that does not exist)

SOURCE = ("CI vectors in PySCF's determinant space from the determinants written by hand in "
          "tests/pyscf/make_eval_fixtures.py; overlap = x.y, element = x.Hy + E_nuc x.y, "
          "energy = x.Hx/x.x + E_nuc, Hy from pyscf.fci.direct_spin1.contract_2e with H1, H2, "
          "ECORE from pyscf.tools.fcidump.read of the run's dump file")


# ----------------------------------------------------------------------------
# molecules
# ----------------------------------------------------------------------------

def make_lih():
    """LiH, STO-3G, RHF: writes the dump and returns a record of the molecule."""
    unit = "bohr"
    # Our own scenario: R(LiH) = 3.0 bohr, along z.
    atoms = [("Li", (0.0, 0.0, 0.0)), ("H", (0.0, 0.0, 3.0))]
    mol = build_mol(atoms, "sto-3g", unit)
    mf = run_scf(scf.RHF(mol))
    assert mf.mo_coeff.shape[1] == 6 and mol.nelectron == 4
    fname = "lih_sto3g_rhf.fcidump"
    write_dump(mf, fname, (2, 2))
    h1, eri, e_nuc, norb, nelec = read(fname)
    assert (norb, nelec) == (6, 4)
    check_close("LiH e_nuc", e_nuc, mol.energy_nuc(), 1e-13)
    check_close("LiH RHF from dump", high_spin_energy(h1, eri, [0, 1], [], e_nuc), mf.e_tot)
    return {
        "molecule": "LiH",
        "basis": "sto-3g",
        "geometry": geometry_record(mol, atoms, unit),
        "geometry_note": "R(LiH) = 3.0 bohr",
        "method": "RHF",
        "dump_file": fname,
        "NORB": 6,
        "NELEC": 4,
        "orbitals_1based": {"core": [1], "homo": 2, "lumo": 3},
        "rhf": {"value": float(mf.e_tot), "source": "pyscf.scf.RHF(mol).kernel(); mf.e_tot"},
        "e_nuc": float(e_nuc),
    }


def read(fname):
    d = fcidump.read(os.path.join(FIXTURES, fname), verbose=False)
    norb = d["NORB"]
    return d["H1"], ao2mo.restore(1, d["H2"], norb), float(d["ECORE"]), norb, d["NELEC"]


class Molecule:
    def __init__(self, fname):
        self.dump = fname
        self.h1, self.eri, self.e_nuc, self.norb, self.nelec = read(fname)

    def h_times(self, vec, nelec):
        h2e = direct_spin1.absorb_h1e(self.h1, self.eri, self.norb, nelec, 0.5)
        return direct_spin1.contract_2e(h2e, vec, self.norb, nelec)


# ----------------------------------------------------------------------------
# determinants and states, written as in spinfold's input
# ----------------------------------------------------------------------------

def det(text, env):
    """Creators (orbital, spin) of `| text |`: `x^2` is x alpha then x beta (every member of
    a space), `x'` beta, `x` alpha; env maps names to 0-based orbitals or lists of them."""
    out = []
    for tok in text.split():
        if tok.endswith("^2"):
            value = env[tok[:-2]]
            for k in value if isinstance(value, list) else [value]:
                out += [(k, 0), (k, 1)]
        elif tok.endswith("'"):
            out.append((env[tok[:-1]], 1))
        else:
            out.append((env[tok], 0))
    return out


def excite(creators, frm, to):
    """a+(to) a(frm) |D>: `frm` replaced by `to` in place; None when that leaves nothing."""
    if creators is None or frm not in creators or (to != frm and to in creators):
        return None
    out = list(creators)
    out[out.index(frm)] = to
    return out


def vector(terms, norb):
    """(vector, (n_alpha, n_beta)) of sum c |creators|, or None when it is zero."""
    vec, nelec = None, None
    for c, creators in terms:
        if creators is None or len(set(creators)) != len(creators):
            continue  # a determinant that violates the Pauli principle is zero
        sign = permutation_sign([(s, p) for p, s in creators])
        alpha = [p for p, s in creators if s == 0]
        beta = [p for p, s in creators if s == 1]
        ne = (len(alpha), len(beta))
        if vec is None:
            nelec = ne
            vec = numpy.zeros((cistring.num_strings(norb, ne[0]), cistring.num_strings(norb, ne[1])))
        assert ne == nelec, "determinants with different (n_alpha, n_beta) in one state"
        ia = cistring.str2addr(norb, ne[0], sum(1 << p for p in alpha))
        ib = cistring.str2addr(norb, ne[1], sum(1 << p for p in beta))
        vec[ia, ib] += sign * c
    if vec is None or numpy.abs(vec).max() < ZERO_TOL:
        return None
    return vec, nelec


def value(mol, kind, bra, ket):
    (x, nx), (y, ny) = bra, ket
    if kind == "energy":
        return float(x.ravel() @ mol.h_times(x, nx).ravel() / (x.ravel() @ x.ravel()) + mol.e_nuc)
    if nx != ny:
        return 0.0
    overlap = float(x.ravel() @ y.ravel())
    if kind == "overlap":
        return overlap
    return float(x.ravel() @ mol.h_times(y, ny).ravel() + mol.e_nuc * overlap)


R2 = 1 / math.sqrt(2)

# tests/inputs/eval_overlaps.spinfold
OVERLAP_STATES = {
    "A": lambda e: [(1, det("core^2 a^2", e))],
    "B": lambda e: [(1, det("core^2 b^2", e))],
    "ab": lambda e: [(1, det("core^2 a b'", e))],
    "ba": lambda e: [(1, det("core^2 a' b", e))],
    "X": lambda e: [(0.6, det("core^2 a^2", e)), (0.8, det("core^2 b^2", e))],
    "Y": lambda e: [(R2, det("core^2 a^2", e)), (R2, det("core^2 a b'", e))],
    "S": lambda e: [(R2, det("core^2 a b'", e)), (-R2, det("core^2 a' b", e))],
    "W": lambda e: [(2, det("core^2 a^2", e)), (-1, det("core^2 a b'", e))],
}
OVERLAP_REQUESTS = [
    "overlap A A", "overlap A X", "overlap A Y", "overlap X Y", "overlap W W", "overlap S ab",
    "overlap A B", "element A A", "element A X", "element X Y", "element W W", "element S ab",
    "element A B", "energy X", "energy W",
]

# tests/inputs/eval_vanishing.spinfold
VANISHING_STATES = {
    "tu": lambda e: [(1, det("core^2 t u'", e))],
    "ut": lambda e: [(1, det("core^2 t' u", e))],
    "hs": lambda e: [(1, det("core^2 t u", e))],
    "pair": lambda e: [(R2, det("core^2 t u'", e)), (-R2, det("core^2 t' u", e))],
    "trip": lambda e: [(R2, det("core^2 t u'", e)), (R2, det("core^2 t' u", e))],
}
VANISHING_REQUESTS = [
    "energy hs", "overlap hs hs", "element hs hs", "energy trip", "overlap trip tu",
    "element trip tu", "energy pair", "element pair tu",
]


# examples/single_excitations.spinfold
def single(i, a, spin, e):
    """ref[i -> a] (spin 0) or ref[i' -> a'] (spin 1)."""
    return excite(det("occ^2", e), (e[i], spin), (e[a], spin))


SINGLES_STATES = {
    "ref": lambda e: [(1, det("occ^2", e))],
    "ia": lambda e: [(1, single("i", "a", 0, e))],
    "S1": lambda e: [(R2, single("i", "a", 0, e)), (R2, single("i", "a", 1, e))],
    "S2": lambda e: [(R2, single("j", "b", 0, e)), (R2, single("j", "b", 1, e))],
    "T1": lambda e: [(R2, single("i", "a", 0, e)), (-R2, single("i", "a", 1, e))],
    "T2": lambda e: [(R2, single("j", "b", 0, e)), (-R2, single("j", "b", 1, e))],
}
SINGLES_REQUESTS = [
    "energy ref", "energy ia", "element ref S1", "element S1 S2", "element T1 T2", "overlap S1 S2",
]

# tests/inputs/eval_ion.spinfold
ION_STATES = {
    "cation": lambda e: [(1, det("core^2 a", e))],
    "neutral": lambda e: [(1, det("core^2 a^2", e))],
}
ION_REQUESTS = ["energy cation", "energy neutral", "overlap cation cation"]

# tests/inputs/eval_empty_core.spinfold
CORE_STATES = {"g": lambda e: [(1, det("core^2 a^2", e))]}
CORE_REQUESTS = ["energy g", "element g g", "overlap g g"]

# the space of every generic index, in declaration order of the inputs
INDEX_SPACE = {"t": "act", "u": "act", "i": "occ", "j": "occ", "a": "vir", "b": "vir"}
INDEX_ORDER = ["t", "u", "i", "j", "a", "b"]
INDICES_OF = {  # the generic indices each state mentions
    "tu": "tu", "ut": "tu", "hs": "tu", "pair": "tu", "trip": "tu",
    "ia": "ia", "S1": "ia", "T1": "ia", "S2": "jb", "T2": "jb",
}


def spec(value):
    """A --bind value: `5`, `1-4`, `1,3` or `none`."""
    if not isinstance(value, list):
        return str(value)
    if not value:
        return "none"
    if value == list(range(value[0], value[-1] + 1)):
        return f"{value[0]}-{value[-1]}" if len(value) > 1 else str(value[0])
    return ",".join(map(str, value))


def run(name, input_path, mol, bind, states, requests, distinct=False):
    """Every request's reference value or table for one run; `bind` is 1-based."""
    env0 = {k: ([x - 1 for x in v] if isinstance(v, list) else v - 1) for k, v in bind.items()}
    out = []
    mismatch = []
    for text in requests:
        kind, *operands = text.split()
        bra, ket = (operands * 2)[:2]
        letters = set(INDICES_OF.get(bra, "") + INDICES_OF.get(ket, ""))
        columns = [i for i in INDEX_ORDER if i in letters and i not in bind]
        rows, omitted = [], 0
        for values in product(*[env0[INDEX_SPACE[i]] for i in columns]):
            env = dict(env0, **dict(zip(columns, values)))
            taken = [(INDEX_SPACE[i], env[i]) for i in INDEX_ORDER if i in letters]
            x = vector(states[bra](env), mol.norb)
            y = vector(states[ket](env), mol.norb)
            if (distinct and len(set(taken)) < len(taken)) or x is None or y is None:
                omitted += 1
                continue
            rows.append({"indices": {i: env[i] + 1 for i in columns}, "value": value(mol, kind, x, y)})
        first = dict(env0, **{i: env0[INDEX_SPACE[i]][0] for i in columns})
        electrons = len(next(c for _, c in states[bra](first) if c is not None))
        if kind != "overlap" and electrons != mol.nelec:
            mismatch.append(text)
        if columns:
            out.append({"request": text, "columns": columns, "rows": rows, "omitted": omitted})
        else:
            assert omitted == 0 and len(rows) == 1, text
            out.append({"request": text, "value": rows[0]["value"]})
    return {
        "name": name,
        "input": input_path,
        "dump_file": mol.dump,
        "bind": [f"{k}={spec(v)}" for k, v in bind.items()],
        "distinct": distinct,
        "nelec_mismatch": mismatch,
        "requests": out,
    }


def main():
    lih_record = make_lih()
    water = Molecule("water_sto3g_rhf.fcidump")
    lih = Molecule("lih_sto3g_rhf.fcidump")
    h2 = Molecule("h2_sto3g_rhf.fcidump")
    overlaps, vanishing, singles, ion, core = (
        "tests/inputs/eval_overlaps.spinfold", "tests/inputs/eval_vanishing.spinfold",
        "examples/single_excitations.spinfold", "tests/inputs/eval_ion.spinfold",
        "tests/inputs/eval_empty_core.spinfold",
    )
    water_ab = {"core": [1, 2, 3, 4], "a": 5, "b": 6}
    lih_ab = {"core": [1], "a": 2, "b": 3}
    runs = [
        run("overlaps_water", overlaps, water, water_ab, OVERLAP_STATES, OVERLAP_REQUESTS),
        run("overlaps_lih", overlaps, lih, lih_ab, OVERLAP_STATES, OVERLAP_REQUESTS),
        run("vanishing_water", vanishing, water, {"core": [1, 2, 3, 4], "act": [5, 6, 7]},
            VANISHING_STATES, VANISHING_REQUESTS),
        run("vanishing_lih", vanishing, lih, {"core": [1], "act": [2, 3, 4]},
            VANISHING_STATES, VANISHING_REQUESTS),
        run("vanishing_water_t5", vanishing, water, {"core": [1, 2, 3, 4], "act": [5, 6, 7], "t": 5},
            VANISHING_STATES, VANISHING_REQUESTS),
        run("singles_water", singles, water, {"occ": [1, 2, 3, 4, 5], "vir": [6, 7]},
            SINGLES_STATES, SINGLES_REQUESTS),
        run("singles_water_distinct", singles, water, {"occ": [1, 2, 3, 4, 5], "vir": [6, 7]},
            SINGLES_STATES, SINGLES_REQUESTS, distinct=True),
        run("singles_lih", singles, lih, {"occ": [1, 2], "vir": [3, 4, 5, 6]},
            SINGLES_STATES, SINGLES_REQUESTS),
        run("singles_lih_distinct", singles, lih, {"occ": [1, 2], "vir": [3, 4, 5, 6]},
            SINGLES_STATES, SINGLES_REQUESTS, distinct=True),
        run("ion_water", ion, water, {"core": [1, 2, 3, 4], "a": 5}, ION_STATES, ION_REQUESTS),
        run("ion_lih", ion, lih, {"core": [1], "a": 2}, ION_STATES, ION_REQUESTS),
        run("empty_core_h2", core, h2, {"core": [], "a": 1}, CORE_STATES, CORE_REQUESTS),
        run("core_lih", core, lih, {"core": [1], "a": 2}, CORE_STATES, CORE_REQUESTS),
        run("empty_core_lih", core, lih, {"core": [], "a": 1}, CORE_STATES, CORE_REQUESTS),
    ]
    for r in runs:
        path = os.path.join(ROOT, r["input"])
        assert os.path.isfile(path), path
    # the closed-shell determinants are the RHF determinants
    by_name = {r["name"]: {q["request"]: q for q in r["requests"]} for r in runs}
    check_close("LiH core^2 a^2 vs RHF", by_name["core_lih"]["energy g"]["value"], lih_record["rhf"]["value"])
    with open(os.path.join(FIXTURES, "pyscf_reference.json")) as f:
        h2_rhf = json.load(f)["cases"]["h2_sto3g_rhf"]["energies"]["rhf"]["value"]
    check_close("H2 a^2 (no core) vs RHF", by_name["empty_core_h2"]["energy g"]["value"], h2_rhf)

    out = {
        "description": "Reference values for spinfold eval (hartree; energies and elements include the "
                       "dump's constant, elements times <bra|ket>); regenerate with "
                       "python3 tests/pyscf/make_eval_fixtures.py",
        "generator": "tests/pyscf/make_eval_fixtures.py",
        "pyscf_version": pyscf.__version__,
        "source": SOURCE,
        "conventions": {
            "rows": "a tabulated request lists the rows spinfold eval must print (indices 1-based); "
                    "`omitted` counts the assignments left out: a state of the request is zero there, "
                    "or, with --distinct, two indices of one space are equal",
            "nelec_mismatch": "energies and elements whose states hold a number of electrons other "
                              "than the dump's NELEC",
        },
        "molecules": {"lih_sto3g_rhf": lih_record},
        "runs": runs,
    }
    with open(REFERENCE_JSON, "w") as f:
        json.dump(out, f, indent=1)
        f.write("\n")
    print(f"wrote {REFERENCE_JSON}")
    for r in runs:
        tables = [q for q in r["requests"] if "rows" in q]
        print(f"  {r['name']}: {len(r['requests'])} requests, "
              f"{sum(len(q['rows']) for q in tables)} rows, {sum(q['omitted'] for q in tables)} omitted")


if __name__ == "__main__":
    main()

#!/usr/bin/env python3
"""PySCF reference values for the spin-coupled states of tests/inputs/csf_water.spinfold.

Run from the repository root, after `cargo build --release`:

    pip install pyscf numpy
    python3 tests/pyscf/make_csf_fixtures.py [path/to/spinfold]

The binary defaults to target/release/spinfold.  The script

  1. runs `spinfold states tests/inputs/csf_water.spinfold --json` and saves the output,
     unchanged, as tests/fixtures/csf_water_states.json (if the binary is missing,
     the saved file is read instead);
  2. turns every state's determinant expansion into a PySCF FCI vector over the
     seven RHF orbitals of tests/fixtures/water_sto3g_rhf.fcidump, with the space
     core = orbitals 1-3 and p q r s = orbitals 4 5 6 7 (the states over p q r
     have nine electrons: the cation, with orbital 7 empty);
  3. records, in tests/fixtures/csf_water_reference.json, <S^2> and the total
     energy <c|H|c>/<c|c> + E_nuc of each state, and the two off-diagonal
     elements c1^T H c2 (electronic part only; the states are orthogonal);
  4. checks that every state is a pure spin state with the S its name says
     (this checks the spin coupling from outside the tool);
  5. compares with `spinfold eval` when the binary is there, and exits with a
     nonzero status if any value differs by more than COMPARE_TOL.

Determinant conventions.  spinfold lists a determinant's occupants in creation
order: a+(x1) a+(x2) ... a+(xN)|vac>, a closed space standing for k-alpha then
k-beta for each member k (an even block, so its place changes no sign).  A PySCF
FCI vector is indexed by (alpha string, beta string), all alpha creators to the
left of all beta creators.  Here each string is taken with its creators in
ascending orbital order; the permutation that reorders spinfold's creators into
that order contributes its parity to the coefficient.  (Whether PySCF's own
strings run ascending or descending changes every determinant of a given electron
count by the same factor (-1)^(n(n-1)/2), so it cannot change an expectation
value or an element between two vectors with the same alpha and beta counts.)
"""

import os

# Single-threaded linear algebra keeps the output bit-for-bit reproducible.
for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ[_var] = "1"

import json  # noqa: E402
import math  # noqa: E402
import subprocess  # noqa: E402
import sys  # noqa: E402
from fractions import Fraction  # noqa: E402

import numpy  # noqa: E402
import pyscf  # noqa: E402
from pyscf import ao2mo  # noqa: E402
from pyscf.fci import cistring, direct_spin1, spin_op  # noqa: E402
from pyscf.tools import fcidump  # noqa: E402

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.normpath(os.path.join(HERE, "..", ".."))
FIXTURES = os.path.join(ROOT, "tests", "fixtures")
INPUT = os.path.join(ROOT, "tests", "inputs", "csf_water.spinfold")
DUMP = os.path.join(FIXTURES, "water_sto3g_rhf.fcidump")
STATES_JSON = os.path.join(FIXTURES, "csf_water_states.json")
REFERENCE_JSON = os.path.join(FIXTURES, "csf_water_reference.json")
DEFAULT_BINARY = os.path.join(ROOT, "target", "release", "spinfold")

# 1-based orbital numbers of the dump that the input's names stand for.
BINDINGS = {"core": [1, 2, 3], "p": 4, "q": 5, "r": 6, "s": 7}
ELEMENTS = [("singlet.1", "singlet.2"), ("doublet.1", "doublet.2")]
# Total spin S each family of states must have, by the part of the name before the dot.
EXPECTED_S = {
    "singlet": Fraction(0),
    "doublet": Fraction(1, 2),
    "triplet": Fraction(1),
    "quartet": Fraction(3, 2),
    "quintet": Fraction(2),
}
S2_TOL = 1e-10
NORM_TOL = 1e-12
COMPARE_TOL = 1e-9  # spinfold eval vs this script (both ~1e-13 apart in practice)


# ----------------------------------------------------------------------------
# spinfold
# ----------------------------------------------------------------------------

def spinfold_states(binary):
    """Text of `spinfold states INPUT --json`; None if the binary is missing."""
    if not (os.path.isfile(binary) and os.access(binary, os.X_OK)):
        return None
    out = subprocess.run([binary, "states", INPUT, "--json"], check=True,
                         capture_output=True, text=True)
    return out.stdout


def bind_args():
    args = []
    for name, value in BINDINGS.items():
        spec = f"{value[0]}-{value[-1]}" if isinstance(value, list) else str(value)
        args += ["--bind", f"{name}={spec}"]
    return args


def spinfold_eval(binary):
    """{request: value} from `spinfold eval ... --json`."""
    cmd = [binary, "eval", INPUT, "--integrals", DUMP, *bind_args(), "--json"]
    out = subprocess.run(cmd, check=True, capture_output=True, text=True)
    return {r["request"]: float(r["value"]) for r in json.loads(out.stdout)["results"]}, cmd


def exact_coefficient(coef):
    """Sum of rational * sqrt(radicand) over the coefficient's parts, as a float."""
    total = 0.0
    for part in coef["parts"]:
        total += float(Fraction(part["rational"])) * math.sqrt(int(part["radicand"]))
    return total


# ----------------------------------------------------------------------------
# determinants in PySCF's addressing
# ----------------------------------------------------------------------------

def spin_orbitals(occupants):
    """Creators in order as (spin, 0-based orbital), spin 0 = alpha, 1 = beta."""
    out = []
    for occ in occupants:
        if "space" in occ:
            for k in BINDINGS[occ["space"]]:
                out += [(0, k - 1), (1, k - 1)]
        else:
            spin = {"alpha": 0, "beta": 1}[occ["spin"]]
            out.append((spin, BINDINGS[occ["orbital"]] - 1))
    if len(set(out)) != len(out):
        raise ValueError(f"repeated spin orbital in {occupants}")
    return out


def permutation_sign(seq):
    """Parity of the permutation that sorts seq (distinct items): +1 or -1."""
    inversions = sum(1 for i in range(len(seq)) for j in range(i + 1, len(seq)) if seq[i] > seq[j])
    return -1 if inversions % 2 else 1


def ci_vector(state, norb):
    """(vector, (n_alpha, n_beta)) of a spinfold state in PySCF's FCI space."""
    vec = None
    nelec = None
    for det in state["determinants"]:
        if det["excitations"]:
            raise ValueError(f"{state['name']}: excitations are not handled here")
        coef = det["coefficient"]
        c = float(coef["value"])
        assert abs(c - exact_coefficient(coef)) < 1e-15, (state["name"], coef)
        creators = spin_orbitals(det["occupants"])
        sign = permutation_sign(creators)  # (spin, orbital): alpha block, then beta, ascending
        alpha = [p for s, p in creators if s == 0]
        beta = [p for s, p in creators if s == 1]
        ne = (len(alpha), len(beta))
        if vec is None:
            nelec = ne
            vec = numpy.zeros((cistring.num_strings(norb, ne[0]), cistring.num_strings(norb, ne[1])))
        assert ne == nelec, f"{state['name']}: determinants with different (n_alpha, n_beta)"
        ia = cistring.str2addr(norb, ne[0], sum(1 << p for p in alpha))
        ib = cistring.str2addr(norb, ne[1], sum(1 << p for p in beta))
        vec[ia, ib] += sign * c
    return vec, nelec


# ----------------------------------------------------------------------------
# PySCF numbers
# ----------------------------------------------------------------------------

def read_dump():
    d = fcidump.read(DUMP, verbose=False)
    norb = d["NORB"]
    return d["H1"], ao2mo.restore(1, d["H2"], norb), float(d["ECORE"]), norb


def h_times(h1, eri, vec, norb, nelec):
    h2e = direct_spin1.absorb_h1e(h1, eri, norb, nelec, 0.5)
    return direct_spin1.contract_2e(h2e, vec, norb, nelec)


def main():
    binary = os.path.abspath(sys.argv[1]) if len(sys.argv) > 1 else DEFAULT_BINARY
    text = spinfold_states(binary)
    if text is None:
        print(f"no spinfold binary at {binary}; reading the saved {os.path.relpath(STATES_JSON, ROOT)}")
        with open(STATES_JSON) as f:
            text = f.read()
    else:
        with open(STATES_JSON, "w") as f:
            f.write(text)
        print(f"wrote {STATES_JSON}")
    states = json.loads(text)["states"]

    h1, eri, e_nuc, norb = read_dump()
    assert norb == 7
    vectors = {}
    records = {}
    failures = []
    for state in states:
        name = state["name"]
        vec, nelec = ci_vector(state, norb)
        vectors[name] = (vec, nelec)
        norm2 = float(numpy.dot(vec.ravel(), vec.ravel()))
        assert abs(norm2 - 1.0) < NORM_TOL, f"{name}: <c|c> = {norm2}"
        e_elec_direct = float(direct_spin1.energy(h1, eri, vec, norb, nelec)) / norm2
        e_elec = float(numpy.dot(vec.ravel(), h_times(h1, eri, vec, norb, nelec).ravel())) / norm2
        assert abs(e_elec - e_elec_direct) < 1e-12, (name, e_elec, e_elec_direct)
        ss, mult = spin_op.spin_square(vec, norb, nelec)
        ss = float(ss)
        s_expected = EXPECTED_S[name.split(".")[0]]
        ss_expected = float(s_expected * (s_expected + 1))
        if abs(ss - ss_expected) > S2_TOL:
            failures.append(f"{name}: <S^2> = {ss!r}, expected {ss_expected} for S = {s_expected}")
        m_s = Fraction(nelec[0] - nelec[1], 2)
        records[name] = {
            "nelec_alpha_beta": list(nelec),
            "M_S": str(m_s),
            "determinants": len(state["determinants"]),
            "expected_S": str(s_expected),
            "norm_squared": norm2,
            "energy": {
                "value": e_elec + e_nuc,
                "source": "<c|H|c>/<c|c> + ECORE: numpy.dot(c, pyscf.fci.direct_spin1.contract_2e("
                          "absorb_h1e(H1, H2), c)) with H1, H2, ECORE from pyscf.tools.fcidump.read "
                          "(agrees with direct_spin1.energy to 1e-12)",
            },
            "s2": {
                "value": ss,
                "source": "pyscf.fci.spin_op.spin_square(c, norb, (n_alpha, n_beta))[0]",
            },
        }

    elements = {}
    for bra, ket in ELEMENTS:
        (vb, nb), (vk, nk) = vectors[bra], vectors[ket]
        assert nb == nk, (bra, ket)
        overlap = float(numpy.dot(vb.ravel(), vk.ravel()))
        assert abs(overlap) < NORM_TOL, f"<{bra}|{ket}> = {overlap}"
        h_bk = float(numpy.dot(vb.ravel(), h_times(h1, eri, vk, norb, nk).ravel()))
        h_kb = float(numpy.dot(vk.ravel(), h_times(h1, eri, vb, norb, nb).ravel()))
        assert abs(h_bk - h_kb) < 1e-12, (bra, ket, h_bk, h_kb)
        elements[f"element {bra} {ket}"] = {
            "bra": bra,
            "ket": ket,
            "overlap": overlap,
            "value": h_bk,
            "source": "c1^T H c2, electronic part only (<c1|c2> = 0): numpy.dot(c1, "
                      "pyscf.fci.direct_spin1.contract_2e(absorb_h1e(H1, H2), c2)) with H1, H2 "
                      "from pyscf.tools.fcidump.read",
        }

    out = {
        "description": "PySCF reference values for the spin-coupled states of tests/inputs/csf_water.spinfold "
                       "(total energies in hartree including nuclear repulsion; elements electronic only); "
                       "regenerate with python3 tests/pyscf/make_csf_fixtures.py",
        "generator": "tests/pyscf/make_csf_fixtures.py",
        "pyscf_version": pyscf.__version__,
        "input": "tests/inputs/csf_water.spinfold",
        "states_file": "tests/fixtures/csf_water_states.json",
        "dump_file": "water_sto3g_rhf.fcidump",
        "NORB": norb,
        "bindings_1based": BINDINGS,
        "e_nuc": {"value": e_nuc, "source": "ECORE from pyscf.tools.fcidump.read"},
        "conventions": {
            "determinants": "spinfold occupants in creation order, closed space k-alpha k-beta per member; "
                            "converted to |alpha string ; beta string>, alpha creators left of beta creators, "
                            "each string ascending, times the parity of that reordering",
            "cation": "states over p q r have 9 electrons (orbital 7 empty); over p q r s, 10",
        },
        "states": records,
        "elements": elements,
    }
    with open(REFERENCE_JSON, "w") as f:
        json.dump(out, f, indent=2)
        f.write("\n")
    print(f"wrote {REFERENCE_JSON}")

    print(f"\n{'request':32s} {'pyscf':>20s}")
    for name, r in records.items():
        print(f"{'energy ' + name:32s} {r['energy']['value']:20.12f}")
    for key, r in elements.items():
        print(f"{key:32s} {r['value']:20.12f}")
    for name, r in records.items():
        print(f"{'spin ' + name:32s} {r['s2']['value']:20.12f}   (S = {r['expected_S']}, M_S = {r['M_S']})")

    if failures:
        print("\nspin check FAILED:\n  " + "\n  ".join(failures))

    mismatches = []
    if os.path.isfile(binary) and os.access(binary, os.X_OK):
        got, cmd = spinfold_eval(binary)
        want = {f"energy {n}": r["energy"]["value"] for n, r in records.items()}
        want.update({k: r["value"] for k, r in elements.items()})
        want.update({f"spin {n}": r["s2"]["value"] for n, r in records.items()})
        print("\ncomparison with: " + " ".join(os.path.relpath(c, ROOT) if os.path.isabs(c) else c for c in cmd))
        print(f"{'request':32s} {'pyscf':>20s} {'spinfold eval':>20s} {'diff':>10s}")
        for key, ref in want.items():
            if key not in got:
                mismatches.append(f"{key}: missing from spinfold eval")
                print(f"{key:32s} {ref:20.12f} {'(missing)':>20s}")
                continue
            diff = got[key] - ref
            flag = "" if abs(diff) <= COMPARE_TOL else "   <-- DIFFERS"
            if flag:
                mismatches.append(f"{key}: pyscf {ref!r}, spinfold {got[key]!r}, diff {diff:.3e}")
            print(f"{key:32s} {ref:20.12f} {got[key]:20.12f} {diff:10.1e}{flag}")
        extra = sorted(set(got) - set(want))
        if extra:
            print("requests without a reference here: " + ", ".join(extra))
        if mismatches:
            print("\nspinfold and PySCF DISAGREE:\n  " + "\n  ".join(mismatches))
        else:
            worst = max(abs(got[k] - v) for k, v in want.items())
            print(f"\nall {len(want)} values agree; largest |diff| = {worst:.1e}")
    else:
        print(f"\nno spinfold binary at {binary}: comparison with spinfold eval skipped")

    if failures or mismatches:
        sys.exit(1)


if __name__ == "__main__":
    main()

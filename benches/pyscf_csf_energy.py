#!/usr/bin/env python3
"""Timing: the numeric energy of one S = 0 spin-coupled state of n open shells.

For each n (default 8 10 12 14) the script

  1. writes a spinfold input with a closed space `core`, open shells o1 ... on and
         csf X = | core^2 o1 ... on | S=0 path=1/2,1,...,n/4,...,1/2,0
     (the path climbs to n/4 and comes back down, so X spans all C(n, n/2)
     determinants with n/2 alpha and n/2 beta open-shell electrons);
  2. gets its determinant expansion from `spinfold states --json`;
  3. builds the CI vector in PySCF's FCI space of norb = n + 1 orbitals (orbital 1,
     1-based, is the core; o_k is orbital k + 1), with random real integrals that
     have the 8-fold symmetry (seeded numpy, expanded with pyscf.ao2mo.restore);
  4. times <c|H|c> with pyscf.fci.direct_spin1.energy (absorb_h1e, contract_2e and
     a dot product), best of a few repeats while a repeat is cheap;
  5. times `spinfold derive` (release binary, verification on) on the same input,
     and, unless --no-eval-check, checks that `spinfold eval` gives the same number
     as PySCF with the same random integrals (written to a temporary dump).

Run from the repository root after `cargo build --release`:

    python3 benches/pyscf_csf_energy.py                 # n = 8 10 12 14
    python3 benches/pyscf_csf_energy.py --n 8 10 12     # choose n (even)

PySCF works in the full determinant space of the n + 1 orbitals, so its cost
grows like C(n+1, n/2+1)^2; the CSF expansion itself has C(n, n/2) determinants.
"""

import argparse
import json
import math
import os
import subprocess
import sys
import tempfile
import time
from fractions import Fraction

import numpy
import pyscf
from pyscf import ao2mo, lib
from pyscf.fci import cistring, direct_spin1
from pyscf.tools import fcidump

ROOT = os.path.normpath(os.path.join(os.path.dirname(os.path.abspath(__file__)), ".."))
DEFAULT_BINARY = os.path.join(ROOT, "target", "release", "spinfold")
AGREE_TOL = 1e-8  # |spinfold eval - pyscf| on random O(1) integrals


def half(t):
    """t/2 written as spinfold writes spins: 0, 1/2, 1, 3/2, ..."""
    return str(t // 2) if t % 2 == 0 else f"{t}/2"


def bench_input(n):
    names = [f"o{k}" for k in range(1, n + 1)]
    path = [half(t) for t in list(range(1, n // 2 + 1)) + list(range(n // 2 - 1, -1, -1))]
    return (
        "space core\n"
        f"orbitals {' '.join(names)}\n"
        f"csf X = | core^2 {' '.join(names)} | S=0 path={','.join(path)}\n"
        "energy X\n"
    )


def run(cmd):
    return subprocess.run(cmd, check=True, capture_output=True, text=True).stdout


def ci_vector(state, n):
    """The state as an FCI vector over norb = n + 1: core = orbital 0, o_k = orbital k (0-based).

    Creators are reordered into alpha block then beta block, each ascending; the
    parity of that reordering multiplies the coefficient.  A closed space stands
    for k-alpha k-beta per member.
    """
    norb = n + 1
    bind = {f"o{k}": k for k in range(1, n + 1)}
    nelec = (n // 2 + 1, n // 2 + 1)
    vec = numpy.zeros((cistring.num_strings(norb, nelec[0]), cistring.num_strings(norb, nelec[1])))
    for det in state["determinants"]:
        assert not det["excitations"]
        creators = []
        for occ in det["occupants"]:
            if "space" in occ:
                assert occ["space"] == "core"
                creators += [(0, 0), (1, 0)]
            else:
                creators.append(({"alpha": 0, "beta": 1}[occ["spin"]], bind[occ["orbital"]]))
        assert len(set(creators)) == len(creators)
        inversions = sum(1 for i in range(len(creators)) for j in range(i + 1, len(creators))
                         if creators[i] > creators[j])
        alpha = [p for s, p in creators if s == 0]
        beta = [p for s, p in creators if s == 1]
        assert (len(alpha), len(beta)) == nelec
        ia = cistring.str2addr(norb, nelec[0], sum(1 << p for p in alpha))
        ib = cistring.str2addr(norb, nelec[1], sum(1 << p for p in beta))
        vec[ia, ib] += (-1) ** inversions * float(det["coefficient"]["value"])
    return vec, nelec


def random_integrals(norb, seed):
    """Random real h (symmetric) and (pq|rs) with the 8-fold symmetry, full 4-index array."""
    rng = numpy.random.default_rng(seed)
    h1 = rng.uniform(-1.0, 1.0, (norb, norb))
    h1 = 0.5 * (h1 + h1.T)
    npair = norb * (norb + 1) // 2
    eri8 = rng.uniform(-1.0, 1.0, npair * (npair + 1) // 2)
    return h1, eri8, ao2mo.restore(1, eri8, norb)


def best_time(fn, repeats, budget):
    """(best seconds, result, runs): repeat while runs < repeats and the total stays under budget."""
    best, result, total, runs = math.inf, None, 0.0, 0
    while runs < repeats:
        t0 = time.perf_counter()
        result = fn()
        dt = time.perf_counter() - t0
        best, total, runs = min(best, dt), total + dt, runs + 1
        if total + dt > budget:
            break
    return best, result, runs


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--n", type=int, nargs="+", default=[8, 10, 12, 14],
                    help="numbers of open shells (even, >= 2); default 8 10 12 14")
    ap.add_argument("--binary", default=DEFAULT_BINARY, help="spinfold binary (default target/release/spinfold)")
    ap.add_argument("--repeats", type=int, default=3, help="most timed runs per measurement (default 3)")
    ap.add_argument("--budget", type=float, default=10.0,
                    help="stop repeating a measurement once its runs would pass this many seconds (default 10)")
    ap.add_argument("--seed", type=int, default=20261201, help="seed of the random integrals")
    ap.add_argument("--threads", type=int, default=None, help="OpenMP threads for PySCF (default: its own choice)")
    ap.add_argument("--no-eval-check", action="store_true",
                    help="skip the check that spinfold eval gives PySCF's number")
    args = ap.parse_args()
    for n in args.n:
        if n < 2 or n % 2:
            ap.error(f"n = {n}: need an even number of open shells, at least 2")
    if not os.access(args.binary, os.X_OK):
        sys.exit(f"no spinfold binary at {args.binary}; run cargo build --release first")
    if args.threads:
        lib.num_threads(args.threads)

    print(f"pyscf {pyscf.__version__}, numpy {numpy.__version__}, {lib.num_threads()} PySCF thread(s); "
          f"spinfold {os.path.relpath(args.binary, ROOT)}")
    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        for n in args.n:
            norb = n + 1
            src = os.path.join(tmp, f"csf_{n}.spinfold")
            with open(src, "w") as f:
                f.write(bench_input(n))
            states = json.loads(run([args.binary, "states", src, "--json"]))["states"]
            assert [s["name"] for s in states] == ["X"]
            ndet = len(states[0]["determinants"])
            assert ndet == math.comb(n, n // 2), (n, ndet)
            vec, nelec = ci_vector(states[0], n)
            norm2 = float(numpy.dot(vec.ravel(), vec.ravel()))
            assert abs(norm2 - 1.0) < 1e-12, norm2
            h1, eri8, eri = random_integrals(norb, args.seed + n)

            t_pyscf, e_pyscf, runs_pyscf = best_time(
                lambda: float(direct_spin1.energy(h1, eri, vec, norb, nelec)), args.repeats, args.budget)

            t_derive, _, runs_derive = best_time(
                lambda: run([args.binary, "derive", src, "-o", os.path.join(tmp, f"derived_{n}.txt")]),
                args.repeats, args.budget)

            diff = None
            if not args.no_eval_check:
                dump = os.path.join(tmp, f"random_{n}.fcidump")
                fcidump.from_integrals(dump, h1, eri8, norb, nelec, nuc=0.0, ms=0,
                                       orbsym=[1] * norb, tol=0.0, float_format=" %.17g")
                binds = ["--bind", "core=1"]
                for k in range(1, n + 1):
                    binds += ["--bind", f"o{k}={k + 1}"]
                out = json.loads(run([args.binary, "eval", src, "--integrals", dump, *binds, "--json"]))
                (result,) = out["results"]
                assert result["request"] == "energy X"
                diff = float(result["value"]) - e_pyscf
                if abs(diff) > AGREE_TOL:
                    print(f"n = {n}: spinfold eval {result['value']!r} vs pyscf {e_pyscf!r} DISAGREE")

            dim = vec.shape[0] * vec.shape[1]
            rows.append((n, ndet, dim, t_pyscf, runs_pyscf, t_derive, runs_derive, e_pyscf, diff))
            print(f"  n = {n:2d}: {ndet} determinants, FCI space {vec.shape[0]} x {vec.shape[1]}, "
                  f"pyscf {t_pyscf:.4f} s, spinfold derive {t_derive:.3f} s", flush=True)

    print()
    print(f"{'n':>3} {'determinants':>12} {'FCI dim':>10} {'pyscf s':>10} {'(runs)':>6} "
          f"{'derive s':>10} {'(runs)':>6} {'E (random ints)':>18} {'eval - pyscf':>12}")
    for n, ndet, dim, tp, rp, td, rd, e, diff in rows:
        d = "skipped" if diff is None else f"{diff:.1e}"
        print(f"{n:3d} {ndet:12d} {dim:10d} {tp:10.4f} {rp:6d} {td:10.3f} {rd:6d} {e:18.10f} {d:>12}")
    print("\npyscf s: best time of pyscf.fci.direct_spin1.energy(h1, eri, c, norb, nelec), "
          "c the state's vector in the FCI space of n + 1 orbitals")
    print("derive s: best wall time of `spinfold derive FILE` (a process run, verification on)")
    bad = [r for r in rows if r[-1] is not None and abs(r[-1]) > AGREE_TOL]
    if bad:
        sys.exit(1)


if __name__ == "__main__":
    main()

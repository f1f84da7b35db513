"""Reference values for spinfold's tests of free coefficients and roots, computed with numpy from
an integral-dump file alone by textbook formulas: no spinfold code is involved.

    python3 tests/numpy/reference.py DUMP cis NOCC
        RHF energy of the first NOCC orbitals doubly occupied, and the CIS (Tamm-Dancoff)
        excitation energies of the singlet and the triplet singles, ascending:
        A[ia,jb] = d_ij f_ab - d_ab f_ij + 2 (ia|jb) - (ij|ab)   (singlet)
        A[ia,jb] = d_ij f_ab - d_ab f_ij - (ij|ab)                (triplet)
        with f the Fock matrix of the closed shells, f_pq = h_pq + sum_k 2 (pq|kk) - (pk|kq).

    python3 tests/numpy/reference.py DUMP pair NCORE G U CG CU
        The two-configuration pair function cg |core^2 g^2| + cu |core^2 u^2| (orbitals 1-based):
        its 2x2 Hamiltonian (total energies on the diagonal: E_core + 2 f_gg + J_gg), the
        lowest root with its eigenvector (normalized, largest component positive), and the
        energy at the coefficients CG, CU.

Prints one JSON object.
"""

import json
import sys

import numpy as np


def read_dump(path):
    """h, eri (chemists' notation, all eight orderings filled) and the constant."""
    with open(path) as f:
        text = f.read()
    header, body = text.split("&END") if "&END" in text else text.split("/", 1)
    norb = int(header.split("NORB")[1].split("=")[1].split(",")[0])
    h = np.zeros((norb, norb))
    eri = np.zeros((norb, norb, norb, norb))
    constant = 0.0
    for line in body.splitlines():
        fields = line.split()
        if len(fields) != 5:
            continue
        value = float(fields[0].replace("D", "E").replace("d", "E"))
        i, j, k, l = (int(x) for x in fields[1:])
        if i == j == k == l == 0:
            constant = value
        elif k == l == 0 and i > 0 and j > 0:
            h[i - 1, j - 1] = h[j - 1, i - 1] = value
        elif i > 0 and j > 0 and k > 0 and l > 0:
            p, q, r, s = i - 1, j - 1, k - 1, l - 1
            for a, b, c, d in [(p, q, r, s), (q, p, r, s), (p, q, s, r), (q, p, s, r)]:
                eri[a, b, c, d] = eri[c, d, a, b] = value
    return h, eri, constant


def closed(h, eri, constant, core):
    """Energy of the closed shells `core` and their Fock matrix."""
    energy = constant + 2 * sum(h[k, k] for k in core)
    energy += sum(2 * eri[k, k, l, l] - eri[k, l, l, k] for k in core for l in core)
    fock = h + sum(2 * eri[:, :, k, k] - eri[:, k, k, :] for k in core) if core else h.copy()
    return energy, fock


def cis(h, eri, constant, nocc):
    occ = list(range(nocc))
    vir = list(range(nocc, h.shape[0]))
    energy, f = closed(h, eri, constant, occ)
    pairs = [(i, a) for i in occ for a in vir]
    singlet = np.zeros((len(pairs), len(pairs)))
    triplet = np.zeros((len(pairs), len(pairs)))
    for x, (i, a) in enumerate(pairs):
        for y, (j, b) in enumerate(pairs):
            one = (i == j) * f[a, b] - (a == b) * f[i, j]
            singlet[x, y] = one + 2 * eri[i, a, j, b] - eri[i, j, a, b]
            triplet[x, y] = one - eri[i, j, a, b]
    return {
        "rhf": energy,
        "singlet": sorted(np.linalg.eigvalsh(singlet).tolist()),
        "triplet": sorted(np.linalg.eigvalsh(triplet).tolist()),
    }


def pair(h, eri, constant, ncore, g, u, cg, cu):
    core = list(range(ncore))
    energy, f = closed(h, eri, constant, core)
    g, u = g - 1, u - 1
    H = np.array(
        [
            [energy + 2 * f[g, g] + eri[g, g, g, g], eri[g, u, g, u]],
            [eri[g, u, g, u], energy + 2 * f[u, u] + eri[u, u, u, u]],
        ]
    )
    values, vectors = np.linalg.eigh(H)
    v = vectors[:, 0]
    v = v if v[np.argmax(abs(v))] > 0 else -v
    c = np.array([cg, cu])
    return {
        "H": H.tolist(),
        "lowest": values[0],
        "vector": v.tolist(),
        "at": float(c @ H @ c / (c @ c)),
    }


def main():
    path, query, *args = sys.argv[1:]
    h, eri, constant = read_dump(path)
    if query == "cis":
        out = cis(h, eri, constant, int(args[0]))
    else:
        ncore, g, u = (int(x) for x in args[:3])
        out = pair(h, eri, constant, ncore, g, u, float(args[3]), float(args[4]))
    print(json.dumps(out))


if __name__ == "__main__":
    main()

"""NumPy einsum timings of the two energies benches/generated_code.rs times, on the same
integral arrays (N = 100), for the ratio reported in README.md.

Run: python3 benches/generated_code.py   (needs numpy)
"""
import timeit

import numpy as np

n = 100
p = np.arange(n)
value = 1.0 / (1.0 + (p[:, None] + p[None, :])) + 0.01 * ((p[:, None] * p[None, :]) % 7)
pair = value + value.T
h = -pair
eri = 0.25 * pair[:, :, None, None] * pair[None, None, :, :]

occ = np.arange(n // 2)
a, b = n // 2 - 1, n // 2
core = np.arange(n // 2 - 1)


J = np.einsum("iijj->ij", eri)  # views: (pp|qq)
K = np.einsum("ijij->ij", eri)  # (pq|pq)


def closed():
    o = np.ix_(occ, occ)
    return 2.0 * h[occ, occ].sum() + 2.0 * J[o].sum() - K[o].sum()


def singlet():
    c = np.ix_(core, core)
    e = h[a, a] + h[b, b] + J[a, b] + K[a, b] + 2.0 * h[core, core].sum()
    e += 2.0 * (J[a, core].sum() + J[b, core].sum()) - K[a, core].sum() - K[b, core].sum()
    return e + 2.0 * J[c].sum() - K[c].sum()


for name, f in [("closed shell, 50 doubly occupied", closed), ("open-shell singlet over 49 core", singlet)]:
    runs = timeit.repeat(f, number=20, repeat=15)
    print(f"| {name} | numpy einsum {min(runs) / 20 * 1e6:.1f} µs | value {f():.12f} |")

"""Numbers from a Python module spinfold generated for density requests, at the orbitals of an
integral-dump file, beside finite differences computed here with numpy alone.

    python3 tests/numpy/density_gradient.py MODULE DUMP NAME=VALUE ... -- DENSITY:ENERGY ...

MODULE is the generated file, DUMP the integral file; NAME=VALUE binds the module's orbitals
and spaces (0-based; a space as comma-separated numbers). Each DENSITY:ENERGY names a density
function of the module and the energy (or element) function of the same states. For each pair
this prints, in one JSON object keyed by the density function:

- "from_densities": sum g h + 1/2 sum G (pq|rs) of the densities (density_energy), and
  "from_energy": the energy function, both electronic (without the dump's constant, which is
  printed as "constant");
- "gradient": generalized_fock_and_gradient's dE/dkappa_pq for every pair p > q, and
  "finite_difference": the central difference of the energy function under U = exp(kappa)
  with kappa_pq = +-1e-4, kappa_qp = -kappa_pq, in the same order;
- "direction": the gradient contracted with a seeded random antisymmetric kappa of unit norm, and
  "direction_difference": the central difference of the energy function along it.

U = exp(kappa) is summed here as a Taylor series (|kappa| is 1e-4), the rotated integrals are
h' = U^T h U and (pq|rs)' = sum U_ap U_bq U_cr U_ds (ab|cd): phi'_p = sum_q phi_q U_qp.
"""

import importlib.util
import json
import os
import sys

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from reference import read_dump  # noqa: E402

STEP = 1e-4


def expm(kappa):
    """exp(kappa) by its Taylor series, exact to rounding for |kappa| << 1."""
    total = np.eye(kappa.shape[0])
    term = np.eye(kappa.shape[0])
    for k in range(1, 12):
        term = term @ kappa / k
        total = total + term
    return total


def rotated(h, eri, kappa):
    u = expm(kappa)
    return u.T @ h @ u, np.einsum("abcd,ap,bq,cr,ds->pqrs", eri, u, u, u, u, optimize=True)


def main():
    module_path, dump = sys.argv[1], sys.argv[2]
    split = sys.argv.index("--")
    binding = {}
    for item in sys.argv[3:split]:
        name, value = item.split("=")
        binding[name] = [int(x) for x in value.split(",")] if "," in value else int(value)
    spec = importlib.util.spec_from_file_location("generated", module_path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    h, eri, constant = read_dump(dump)
    n = h.shape[0]
    pairs = [(p, q) for p in range(n) for q in range(p)]
    rng = np.random.default_rng(7)
    direction = rng.uniform(-1.0, 1.0, (n, n))
    direction = direction - direction.T
    direction /= np.linalg.norm(direction)
    out = {"constant": constant}
    for item in sys.argv[split + 1:]:
        density_name, energy_name = item.split(":")
        density = getattr(module, density_name)
        energy = getattr(module, energy_name)

        def bound(function):
            names = function.__code__.co_varnames[: function.__code__.co_argcount]
            return {k: v for k, v in binding.items() if k in names}

        dm1, dm2 = density(n_orbitals=n, **bound(density))

        def value(h, eri, energy=energy):
            return energy(h, eri, **bound(energy))

        _, gradient = module.generalized_fock_and_gradient(h, eri, dm1, dm2)
        differences = []
        for p, q in pairs:
            kappa = np.zeros((n, n))
            kappa[p, q], kappa[q, p] = STEP, -STEP
            plus = value(*rotated(h, eri, kappa))
            minus = value(*rotated(h, eri, -kappa))
            differences.append((plus - minus) / (2 * STEP))
        along = value(*rotated(h, eri, STEP * direction)) - value(*rotated(h, eri, -STEP * direction))
        out[density_name] = {
            "from_densities": module.density_energy(h, eri, dm1, dm2),
            "from_energy": value(h, eri),
            "gradient": [float(gradient[p, q]) for p, q in pairs],
            "finite_difference": differences,
            "direction": float(sum(gradient[p, q] * direction[p, q] for p, q in pairs)),
            "direction_difference": along / (2 * STEP),
        }
    print(json.dumps(out))


if __name__ == "__main__":
    main()

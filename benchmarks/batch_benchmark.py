"""Time the batched drift-diffusion solver against solving one device at a time.

Usage: python benchmarks/batch_benchmark.py [N] [BATCH]

N devices (default 200) made from the four examples, each row's dopings,
lifetimes and thicknesses scaled by random factors (fixed seed; dopings given
as resistivity are scaled through it), derived together by the closed forms
and turned into solver Structures. Each device gets 40 forward biases 0..0.9 V,
20 reverse biases to -10 V and 20 capacitance biases -5..0.3 V in one
continuation (mesh and equilibrium included in the time), solved

- one at a time with ``solve``, and
- with ``solve_many`` on BATCH devices per call (default all N; it keeps dd.STACK of them
  in one stacked system at a time).

Runs on one core (BLAS threads set to 1 before numpy loads). Prints seconds per
device both ways, the speed-up, the extrapolation to 10,000 rows, and whether
the batched answers equal the single ones byte for byte.
"""

import os

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ[_var] = "1"

import dataclasses  # noqa: E402
import pathlib  # noqa: E402
import sys  # noqa: E402
import time  # noqa: E402

import numpy as np  # noqa: E402

ROOT = pathlib.Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from modelgen import description, extraction  # noqa: E402
from modelgen.device import concatenate  # noqa: E402
from modelgen.physics import driftdiffusion as dd  # noqa: E402


def varied_devices(n, seed=1):
    """n rows cycling through the examples, with dopings, lifetimes and thicknesses varied."""
    examples = sorted((ROOT / "examples").glob("*.toml"))
    base = concatenate([description.load(p) for p in examples])
    dev = base.take(np.arange(n) % len(examples))
    rng = np.random.default_rng(seed)

    def vary(side):
        f_dop = 10.0 ** rng.uniform(-0.2, 0.2, n)
        return dataclasses.replace(side, doping=side.doping * f_dop, resistivity=side.resistivity / f_dop,
                                   lifetime=side.lifetime * 10.0 ** rng.uniform(-0.3, 0.3, n),
                                   thickness=side.thickness * rng.uniform(0.9, 1.1, n))

    return dataclasses.replace(dev, p=vary(dev.p), n=vary(dev.n))


def same(a, b):
    keys = ("current", "capacitance", "psi", "n", "p", "iterations", "peak_field", "stored_charge")
    return all(np.array_equal(getattr(a, k), getattr(b, k), equal_nan=True) for k in keys) and all(
        np.array_equal(a.components[k], b.components[k]) for k in a.components)


def main():
    n = int(sys.argv[1]) if len(sys.argv) > 1 else 200
    batch = int(sys.argv[2]) if len(sys.argv) > 2 else n  # devices per solve_many call (each stacks dd.STACK at most)
    result = extraction.derive(varied_devices(n))
    structures = [dd.structure_from_result(result, i) for i in range(n)]
    iv = np.concatenate([np.linspace(0.0, 0.9, 40), np.linspace(-0.5, -10.0, 20)])
    cv = np.linspace(-5.0, 0.3, 20)
    biases = np.concatenate([iv, cv])
    want_c = np.concatenate([np.zeros(len(iv), bool), np.ones(len(cv), bool)])

    t0 = time.perf_counter()
    alone = [dd.solve(s, biases, capacitance=want_c) for s in structures]
    t_alone = time.perf_counter() - t0

    t0 = time.perf_counter()
    many = []
    for k in range(0, n, batch):
        many += dd.solve_many(structures[k:k + batch], biases, capacitance=want_c)
    t_many = time.perf_counter() - t0

    nodes = np.array([len(s.mesh.x) for s in alone])
    print(f"{n} devices from the four examples (varied), meshes {nodes.min()}-{nodes.max()} nodes, "
          f"{len(iv)} I-V + {len(cv)} C-V points each, one core")
    print(f"Newton iterations: {int(sum(s.iterations.sum() for s in alone))} in all")
    print(f"one at a time: {t_alone:.2f} s, {t_alone / n * 1e3:.1f} ms per device, "
          f"10,000 rows ~ {t_alone / n * 1e4 / 60:.1f} min")
    print(f"batched ({batch} per call, {dd.STACK} per stack): {t_many:.2f} s, {t_many / n * 1e3:.1f} ms per device, "
          f"10,000 rows ~ {t_many / n * 1e4 / 60:.1f} min; speed-up {t_alone / t_many:.2f}x")
    print(f"batched answers byte-identical to single ones: {all(same(a, b) for a, b in zip(alone, many))}")


if __name__ == "__main__":
    main()

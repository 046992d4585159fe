"""Time the drift-diffusion solver on one device: 60 I-V points and 20 capacitance points.

Usage: python benchmarks/solver_benchmark.py [DEVICE.toml] [REPEATS]

One device (default examples/switching_diode.toml) through the closed forms to a
solver Structure; then 40 forward biases 0..0.9 V, 20 reverse biases to -10 V and
20 capacitance biases -5..0.3 V, solved in one continuation (mesh and equilibrium
included in the time). Runs on one core (BLAS threads set to 1 before numpy loads).
Prints the best and median wall time of REPEATS runs, the mesh size and the
Newton iterations.
"""

import os

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ[_var] = "1"

import pathlib  # noqa: E402
import sys  # noqa: E402
import time  # noqa: E402

import numpy as np  # noqa: E402

ROOT = pathlib.Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from modelgen import description, extraction  # noqa: E402
from modelgen.physics import driftdiffusion as dd  # noqa: E402


def main():
    path = pathlib.Path(sys.argv[1]) if len(sys.argv) > 1 else ROOT / "examples" / "switching_diode.toml"
    repeats = int(sys.argv[2]) if len(sys.argv) > 2 else 5
    result = extraction.derive(description.load(path))
    structure = dd.structure_from_result(result, 0)
    iv = np.concatenate([np.linspace(0.0, 0.9, 40), np.linspace(-0.5, -10.0, 20)])
    cv = np.linspace(-5.0, 0.3, 20)
    biases = np.concatenate([iv, cv])
    want_c = np.concatenate([np.zeros(len(iv), bool), np.ones(len(cv), bool)])
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        sol = dd.solve(structure, biases, capacitance=want_c)
        times.append(time.perf_counter() - t0)
    print(f"device: {path.name}, mesh {len(sol.mesh.x)} nodes, {len(iv)} I-V + {len(cv)} C-V points")
    print(f"Newton iterations: {int(sol.iterations.sum())} in all")
    print(f"time: best {min(times):.3f} s, median {np.median(times):.3f} s over {repeats} runs (one core)")
    print(f"I(0.9 V) = {sol.current[39]:.4g} A, I(-10 V) = {sol.current[59]:.4g} A, "
          f"C(-5 V) = {sol.capacitance[60]:.4g} F, closed-form IS = {result.params['IS'][0]:.4g} A")


if __name__ == "__main__":
    main()

"""Time the fit of cards to the drift-diffusion solver (modelgen.numeric), one device at a time.

Usage: python benchmarks/fit_benchmark.py [DEVICE.toml ...] [--dialects ngspice,spice3,gnucap] [--repeats N]

For each device (default: every example) the sweep (forward I-V over the default
window, reverse I-V, C-V; mesh and equilibrium included) and the fit for each
dialect are timed; the best of N runs is printed with the number of forward points
and the worst errors per region, fitted and closed-form. Runs on one core (BLAS
threads set to 1 before numpy loads).
"""

import os

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ[_var] = "1"

import argparse  # noqa: E402
import pathlib  # noqa: E402
import sys  # noqa: E402
import time  # noqa: E402

ROOT = pathlib.Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from modelgen import description, extraction, numeric  # noqa: E402


def best_time(fn, repeats):
    times, out = [], None
    for _ in range(repeats):
        t0 = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t0)
    return min(times), out


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("devices", nargs="*", type=pathlib.Path)
    ap.add_argument("--dialects", default="ngspice,spice3")
    ap.add_argument("--repeats", type=int, default=3)
    args = ap.parse_args()
    paths = args.devices or sorted((ROOT / "examples").glob("*.toml"))
    for path in paths:
        result = extraction.derive(description.load(path))
        t_sweep, sw = best_time(lambda r=result: numeric.sweep(r, 0), args.repeats)
        print(f"{path.name}: sweep {t_sweep:.2f} s ({int(sw.in_window.sum())} forward points in the window, "
              f"stopped by {sw.stopped})")
        for dialect in args.dialects.split(","):
            t_fit, f = best_time(lambda r=result, s=sw, d=dialect: numeric.fit(r, 0, s, d), args.repeats)
            table = ", ".join(f"{k} {100 * v:.3g}/{100 * f.closed_errors[k]:.3g} %" for k, v in f.errors.items())
            print(f"  {dialect}: fit {t_fit:.2f} s; worst error fitted/closed: {table}")


if __name__ == "__main__":
    main()

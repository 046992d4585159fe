"""Time a process-spread run on the closed-form path: samples per second.

Usage: python benchmarks/spread_benchmark.py [N ...]   (default 100000 1000000)

The switching-diode example with an invented [spread] table (dopings and
lifetimes lognormal, global and local, contact resistance uniform) is run
through :func:`modelgen.spread.run` with the figures VF@1mA, IR@-5V, C@-1V,
BV and TT, for each N. Prints the seconds of each stage (sample, derive,
figures, statistics), the total and the samples per second. Runs on one core
(BLAS threads set to 1 before numpy loads).
"""

import os

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ[_var] = "1"

import pathlib  # noqa: E402
import sys  # noqa: E402
import time  # noqa: E402

ROOT = pathlib.Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from modelgen import description, extraction, spread  # noqa: E402

#: An invented scenario: what a process engineer might state for this diode.
TOLERANCES = {
    "n.doping": [{"sigma": "8 %", "distribution": "lognormal", "shared": "global"},
                 {"sigma": "1 %", "distribution": "lognormal", "shared": "local"}],
    "p.doping": {"sigma": "10 %", "distribution": "lognormal", "shared": "global"},
    "n.lifetime": [{"sigma": "25 %", "distribution": "lognormal", "shared": "global"},
                   {"sigma": "5 %", "distribution": "lognormal", "shared": "local"}],
    "n.thickness": {"sigma": "0.2 um", "distribution": "normal", "shared": "global"},
    "contact_resistance": {"sigma": "0.3 ohm", "distribution": "uniform", "shared": "global"},
}
FIGURES = ("VF@1mA", "IR@-5V", "C@-1V", "BV", "TT")


def main():
    sizes = [int(float(x)) for x in sys.argv[1:]] or [100_000, 1_000_000]
    device = description.load(ROOT / "examples" / "switching_diode.toml")
    tol = spread.parse(TOLERANCES, device, file="benchmark")
    figures = [spread.parse_figure(f) for f in FIGURES]
    extraction.derive(spread.sample(device, tol, 1000, seed=0))  # warm the breakdown tables and imports
    for n in sizes:
        t0 = time.perf_counter()
        rows = spread.sample(device, tol, n, seed=1)
        t1 = time.perf_counter()
        result = extraction.derive(rows)
        t2 = time.perf_counter()
        values = {f.text: spread.figure_values(result, f) for f in figures}
        t3 = time.perf_counter()
        spread.Spread(result, values, {f.text: f.unit for f in figures}, 1, "both").statistics()
        t4 = time.perf_counter()
        total = t4 - t0
        print(f"{n:>9,d} samples: sample {t1 - t0:6.2f} s, derive {t2 - t1:6.2f} s, figures {t3 - t2:6.2f} s, "
              f"statistics {t4 - t3:5.2f} s; total {total:6.2f} s = {n / total:,.0f} samples/s")


if __name__ == "__main__":
    main()

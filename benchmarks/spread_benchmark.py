"""Time a process-spread run on the closed-form path: samples per second.

Usage: python benchmarks/spread_benchmark.py [N ...]   (default 100000 1000000)

The switching-diode example with its own [spread] table (an invented
scenario: dopings and lifetimes lognormal, global and local, correlated;
epi thickness and junction depth normal; contact resistance uniform) is run
through :func:`modelgen.spread.run` with the figures VF@1mA, IR@-5V, C@-1V,
BV and TT, then :meth:`modelgen.spread.Spread.statistics`, for each N: once
in one process and once with a forked second process for half the chunks
(what ``modelgen spread`` does from 100,000 samples). Prints the seconds of
the sampling, of each run and the samples per second. BLAS threads are set
to 1 before numpy loads.
"""

import os

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ[_var] = "1"

import pathlib  # noqa: E402
import sys  # noqa: E402
import time  # noqa: E402

ROOT = pathlib.Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from modelgen import extraction, spread  # noqa: E402

FIGURES = ("VF@1mA", "IR@-5V", "C@-1V", "BV", "TT")


def main():
    sizes = [int(float(x)) for x in sys.argv[1:]] or [100_000, 1_000_000]
    device, tol, _ = spread.load(ROOT / "examples" / "switching_diode.toml")
    extraction.derive(spread.sample(device, tol, 1000, seed=0))  # warm the breakdown tables and imports
    print(f"{os.cpu_count()} cores; chunks of {spread.CHUNK} samples")
    for n in sizes:
        t0 = time.perf_counter()
        spread.sample(device, tol, n, seed=1)
        t1 = time.perf_counter()
        line = [f"{n:>9,d} samples: sampling alone {t1 - t0:5.2f} s"]
        for fork in (False, True):
            t0 = time.perf_counter()
            spread.run(device, tol, n, seed=1, figures=FIGURES, fork=fork).statistics()
            total = time.perf_counter() - t0
            line.append(f"{'two processes' if fork else 'one process'} {total:6.2f} s = {n / total:>9,.0f} samples/s")
        print("; ".join(line))


if __name__ == "__main__":
    main()

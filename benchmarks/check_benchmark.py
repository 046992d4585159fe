"""Benchmark: `modelgen check` on a library of N cards (default 2,000), in each simulator.

Makes an invented lot table (the same generator as lots_benchmark.py), turns it into a
spice3-dialect library with `modelgen lots` (spice3 cards are meant for both ngspice and
gnucap), then times `modelgen check LIBRARY --simulator S` end to end in a fresh process for
ngspice and for gnucap, at N and N/2 cards (the ratio shows whether time is linear), and once
with --sample 100. Prints seconds, cards per second and the exit status of each run.

Run:  .venv/bin/python benchmarks/check_benchmark.py [N]
"""

from __future__ import annotations

import os
import subprocess
import sys
import tempfile
import time

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(HERE)
sys.path.insert(0, HERE)

from lots_benchmark import synthetic_table  # noqa: E402


def modelgen(*args):
    env = dict(os.environ, PYTHONPATH=ROOT)
    t = time.perf_counter()
    proc = subprocess.run([sys.executable, "-m", "modelgen.cli", *args], env=env, capture_output=True, text=True)
    return time.perf_counter() - t, proc


def library(folder, n):
    table = os.path.join(folder, f"lot{n}.csv")
    lib = os.path.join(folder, f"lot{n}.lib")
    synthetic_table(table, n)
    _, proc = modelgen("lots", table, "-o", lib, "--dialect", "spice3")
    if proc.returncode != 0:
        raise SystemExit(proc.stderr)
    return lib


def main():
    n = int(sys.argv[1]) if len(sys.argv) > 1 else 2000
    with tempfile.TemporaryDirectory(prefix="modelgen-check-bench-") as folder:
        libs = {m: library(folder, m) for m in (n // 2, n)}
        print(f"modelgen check, spice3 library from `modelgen lots` (invented rows); fresh process each run")
        print(f"{'simulator':<10} {'cards':>6} {'seconds':>8} {'cards/s':>8} {'exit':>5}")
        times = {}
        for sim in ("ngspice", "gnucap"):
            for m in (n // 2, n):
                dt, proc = modelgen("check", libs[m], "--simulator", sim)
                times[sim, m] = dt
                print(f"{sim:<10} {m:>6} {dt:>8.2f} {m / dt:>8.0f} {proc.returncode:>5}")
                if proc.returncode != 0:
                    print("   " + (proc.stderr.strip().splitlines() or ["(no stderr)"])[-1])
            dt, proc = modelgen("check", libs[n], "--simulator", sim, "--sample", "100")
            print(f"{sim:<10} {'s100':>6} {dt:>8.2f} {100 / dt:>8.0f} {proc.returncode:>5}   (--sample 100 of {n})")
        for sim in ("ngspice", "gnucap"):
            print(f"{sim}: time({n}) / time({n // 2}) = {times[sim, n] / times[sim, n // 2]:.2f} (2.00 is linear)")


if __name__ == "__main__":
    main()

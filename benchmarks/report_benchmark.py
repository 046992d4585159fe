"""Benchmark: `modelgen report` end to end, in a fresh process each time.

Prints the wall time and the page size of
  - the device report of examples/switching_diode.toml (with ngspice's run where it is installed, and without),
  - the lot report of a synthetic lot's summary JSON and CSV (N rows, default 100,000), written first by
    `modelgen lots` (not timed; the table is lots_benchmark.py's invented switching-diode lot),
  - the corners report of the switching diode and the calibration report of examples/measured.

Run:  .venv/bin/python benchmarks/report_benchmark.py [N] [--repeat R]
"""

from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import tempfile
import time

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(HERE)
sys.path.insert(0, HERE)

from lots_benchmark import synthetic_table  # noqa: E402


def modelgen(*args):
    env = {**os.environ, "PYTHONPATH": ROOT}
    t = time.perf_counter()
    out = subprocess.run([sys.executable, "-m", "modelgen.cli", *map(str, args)], env=env, capture_output=True,
                         text=True)
    dt = time.perf_counter() - t
    if out.returncode not in (0, 4):
        raise SystemExit(f"modelgen {' '.join(map(str, args))} failed:\n{out.stderr}")
    return dt


def timed(label, repeat, output, *args):
    times = [modelgen("report", *args, "-o", output) for _ in range(repeat)]
    print(f"{label:<48} {statistics.median(times):6.2f} s (median of {repeat}; all: {', '.join(f'{t:.2f}' for t in times)})  "
          f"{os.path.getsize(output) / 1024:8.1f} KiB")


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("rows", nargs="?", type=int, default=100_000)
    ap.add_argument("--repeat", type=int, default=3)
    a = ap.parse_args()
    ex = os.path.join(ROOT, "examples")
    with tempfile.TemporaryDirectory(prefix="modelgen-report-bench-") as d:
        table = os.path.join(d, "lot.csv")
        synthetic_table(table, a.rows)
        modelgen("lots", table, "-o", os.path.join(d, "lot.lib"), "--dialect", "ngspice", "-q")
        out = os.path.join(d, "r.html")
        print(f"modelgen report, fresh process each run, on {os.cpu_count()} cores")
        timed("device (switching_diode, with ngspice if any)", a.repeat, out,
              os.path.join(ex, "switching_diode.toml"))
        timed("device (switching_diode, --no-simulator)", a.repeat, out, os.path.join(ex, "switching_diode.toml"),
              "--no-simulator")
        timed(f"lot summary JSON, {a.rows:,} rows", a.repeat, out, os.path.join(d, "lot.summary.json"))
        timed(f"lot summary CSV, {a.rows:,} rows", a.repeat, out, os.path.join(d, "lot.summary.csv"))
        timed("corners (switching_diode, -40..125 degC)", a.repeat, out, os.path.join(ex, "switching_diode.toml"),
              "--corners=-40,27,85,125")
        m = os.path.join(ex, "measured")
        timed("calibration (testchip I-V and C-V)", a.repeat, out, os.path.join(m, "testchip.toml"), "--iv",
              os.path.join(m, "testchip_iv.csv"), "--cv", os.path.join(m, "testchip_cv.csv"))


if __name__ == "__main__":
    main()

"""Benchmark: a synthetic lot table to a model library.

Prints, for N rows (default 100,000) and N/10:
  - rows/s of the physics alone (modelgen.extraction.derive on the table's arrays),
  - rows/s end to end (`modelgen lots` in a fresh process: CSV in, library and summaries out),
  - peak memory of that process,
  - the floor: the same N cards formatted by a bare Python loop (no physics; checked
    byte for byte against the library's cards), and a cheaper repr-only loop for reference,
  - the ratios the targets speak of.

The lots are invented for the benchmark (a demo scenario, random within plausible ranges).
Run:  .venv/bin/python benchmarks/lots_benchmark.py [N]
"""

from __future__ import annotations

import os
import resource
import subprocess
import sys
import tempfile
import time

import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, os.path.dirname(HERE))

from modelgen import extraction, lots  # noqa: E402

HEADER = ("name,area [um^2],perimeter [um],junction_depth [um],p.doping [cm^-3],p.thickness [um],"
          "p.lifetime [ns],n.doping [cm^-3],n.thickness [um],n.lifetime [us],contact_resistance [ohm]")


def synthetic_table(path, n, seed=1):
    """Write n invented devices: lot-to-lot spread around a switching-diode process."""
    rng = np.random.default_rng(seed)
    cols = [
        np.array([f"DL{i:07d}" for i in range(n)]),
        rng.uniform(2000, 3000, n), rng.uniform(180, 220, n), rng.uniform(0.7, 0.9, n),
        10 ** rng.normal(19.7, 0.1, n), rng.uniform(0.7, 0.9, n), rng.lognormal(np.log(2.0), 0.2, n),
        10 ** rng.normal(16.3, 0.08, n), rng.uniform(3.5, 4.5, n), rng.lognormal(np.log(0.02), 0.2, n),
        rng.uniform(1.2, 1.8, n),
    ]
    with open(path, "w") as fh:
        fh.write(HEADER + "\n")
        text = [c if c.dtype.kind == "U" else np.char.mod("%.6g", c) for c in cols]
        fh.write("\n".join(",".join(row) for row in zip(*[t.tolist() for t in text])) + "\n")


def physics_alone(path):
    table = lots.read_csv(path)
    from modelgen import description
    device = description.assemble(table.columns, sources=(path,) * len(table.lines), rows=table.lines)
    extraction.derive(device.take(slice(0, 10)))  # build the breakdown table outside the timing
    t = time.perf_counter()
    result = extraction.derive(device)
    return time.perf_counter() - t, result


def end_to_end(path, out):
    t = time.perf_counter()
    env = dict(os.environ, MODELGEN_TIMING="1")
    proc = subprocess.run([sys.executable, "-m", "modelgen.cli", "lots", path, "-o", out, "-q"],
                          capture_output=True, text=True, cwd=os.path.dirname(HERE), env=env)
    elapsed = time.perf_counter() - t
    if proc.returncode != 0:
        raise SystemExit(proc.stderr)
    stages = "; ".join(ln.split("timing: ", 1)[1] for ln in proc.stderr.splitlines() if "timing: " in ln)
    return elapsed, resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024, stages  # MiB (Linux: KiB)


def formatting_floor(result):
    """The same cards by a bare loop, two ways.

    - ``same``: a plain loop that writes exactly the library's cards (their header
      lines, warnings, parameters in the same exponent text via
      ``cards.format_number`` one value at a time); checked byte for byte against
      ``cards.table_cards``. This is the floor the target speaks of.
    - ``minimal``: '.model NAME D (' and '+ K=repr(v)' lines only: cheaper text,
      not the same cards; shown as the lower bound of any formatting.
    """
    from modelgen import cards

    columns, _ = cards.card_columns(result, "spice3")
    names = [k for k, _ in columns]
    cols = [v.tolist() for _, v in columns]
    warnings = cards._row_warnings(result)
    dev = result.device
    src = os.path.basename(dev.source[0])
    t = time.perf_counter()
    parts = []
    for i, name in enumerate(dev.name):
        parts.append(f"* {name}: {src} line {dev.line[i]}")
        if warnings[i]:
            for w in warnings[i].split("\n"):
                parts.append("* " + w)
        parts.append(f".model {name} D (")
        for k, c in zip(names, cols):
            v = c[i]
            if v == v:  # NaN: not on this card
                parts.append(f"+ {k}={cards.format_number(v)}")
        parts.append("+ )")
    same = "\n".join(parts) + "\n"
    t_same = time.perf_counter() - t
    if same != cards.table_cards(result, "spice3")[0]:
        raise SystemExit("the bare loop did not make the same cards")
    keys = ("IS", "N", "RS", "CJO", "VJ", "M", "FC", "TT", "BV", "IBV", "EG", "XTI")
    pcols = [result.params[k].tolist() for k in keys]
    t = time.perf_counter()
    parts = []
    for i, name in enumerate(dev.name):
        parts.append(f".model {name} D (")
        for k, c in zip(keys, pcols):
            parts.append(f"+ {k}={c[i]!r}")
        parts.append("+ )")
    "\n".join(parts)
    return t_same, time.perf_counter() - t


def main():
    n = int(sys.argv[1]) if len(sys.argv) > 1 else 100_000
    print(f"modelgen lots benchmark, {os.cpu_count()} cores")
    rows = {}
    with tempfile.TemporaryDirectory() as tmp:
        for size in (n // 10, n):
            csv_path = os.path.join(tmp, f"lots{size}.csv")
            synthetic_table(csv_path, size)
            t_phys, result = physics_alone(csv_path)
            t_e2e, peak, stages = end_to_end(csv_path, os.path.join(tmp, f"lib{size}.lib"))
            t_floor, t_minimal = formatting_floor(result)
            rows[size] = (t_phys, t_e2e, peak, t_floor, t_minimal)
            print(f"N = {size:>8,d}: physics {t_phys:7.3f} s ({size / t_phys:>10,.0f} rows/s)  "
                  f"end to end {t_e2e:6.2f} s ({size / t_e2e:>9,.0f} rows/s)  peak memory {peak:6.0f} MiB  "
                  f"bare loop, same cards {t_floor:6.3f} s (minimal repr-only loop {t_minimal:6.3f} s)")
            print(f"    end-to-end stages: {stages} (the rest: starting Python and importing)")
    t_phys, t_e2e, peak, t_floor, t_minimal = rows[n]
    print(f"targets at N = {n:,d}:")
    print(f"  end to end {t_e2e:.2f} s (target < 5 s)")
    print(f"  end to end / bare loop making the same cards = {t_e2e / t_floor:.1f}x (target <= 4x)")
    print(f"  end to end / minimal repr-only loop (not the same cards) = {t_e2e / t_minimal:.1f}x")
    print(f"  end to end / physics alone = {t_e2e / t_phys:.1f}x (target >= 10x)")
    print(f"  peak memory {peak:.0f} MiB (target < 1024 MiB)")
    small = rows[n // 10]
    print(f"  time for 10x rows: {t_e2e / small[1]:.1f}x end to end, {t_phys / small[0]:.1f}x physics "
          f"(target <= 11x)")


if __name__ == "__main__":
    main()

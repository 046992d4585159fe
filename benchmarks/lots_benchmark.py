"""Benchmark: a synthetic lot table to a model library, this tree side by side with an older commit.

Prints, for N rows (default 100,000) and N/10:
  - rows/s of the physics alone (modelgen.extraction.derive on the table's arrays),
  - the floor: the same N cards formatted by a bare Python loop (no physics; checked
    byte for byte against the library's cards), and a cheaper repr-only loop for reference,
  - `modelgen lots` end to end in a fresh process (CSV in, library and summaries out) for this
    tree and for an older commit (default 5686aff, the code before the output module), run
    alternately in one session, several times each, with their stage times; the outputs of
    the two are compared byte for byte,
  - peak memory (the largest process's maximum resident set) of `modelgen lots` on M rows
    (default 1,000,000), and with --old-memory the older commit's too (slow: minutes, ~5 GB).

The older commit is unpacked with `git archive` into a temporary folder (the repository is not
touched) and run with PYTHONPATH pointing at it. The lots are invented for the benchmark (a demo
scenario, random within plausible ranges).

Run:  .venv/bin/python benchmarks/lots_benchmark.py [N] [--old COMMIT | --no-old] [--repeat R]
                                                    [--memory-rows M | --no-memory] [--old-memory]
"""

from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import tempfile
import time

import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(HERE)
sys.path.insert(0, ROOT)

from modelgen import extraction, lots  # noqa: E402

HEADER = ("name,area [um^2],perimeter [um],junction_depth [um],p.doping [cm^-3],p.thickness [um],"
          "p.lifetime [ns],n.doping [cm^-3],n.thickness [um],n.lifetime [us],contact_resistance [ohm]")
OLD = "5686aff"


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
        for lo in range(0, n, 100_000):  # in blocks: a million rows' text at once costs gigabytes
            text = [c[lo:lo + 100_000] if c.dtype.kind == "U" else np.char.mod("%.6g", c[lo:lo + 100_000])
                    for c in cols]
            fh.write("\n".join(",".join(row) for row in zip(*[t.tolist() for t in text])) + "\n")


def physics_alone(path):
    table = lots.read_csv(path)
    from modelgen import description
    device = description.assemble(table.columns, sources=(path,) * len(table.lines), rows=table.lines)
    extraction.derive(device.take(slice(0, 10)))  # build the breakdown table outside the timing
    t = time.perf_counter()
    result = extraction.derive(device)
    return time.perf_counter() - t, result


#: Runs a command and reports its peak memory. A process's maximum resident set is inherited from
#: whatever forked it and kept across exec on Linux, so the measured run is started from this small
#: process, never from the benchmark itself (which holds a whole lot in memory).
LAUNCH = ("import os, subprocess, sys\n"
          "p = subprocess.Popen(sys.argv[1:])\n"
          "_, status, usage = os.wait4(p.pid, 0)\n"
          "sys.stderr.write(f'\\nbenchmark: maxrss {usage.ru_maxrss}\\n')\n"
          "sys.exit(os.waitstatus_to_exitcode(status))\n")


def end_to_end(code, path, out):
    """`modelgen lots` from the tree at ``code`` in a fresh process: (seconds, peak MiB, stage text).

    The peak is the largest resident set of that process and of the processes it forked (Linux
    ru_maxrss of the waited-for child, KiB).
    """
    env = dict(os.environ, MODELGEN_TIMING="1", PYTHONPATH=code)
    t = time.perf_counter()
    proc = subprocess.run([sys.executable, "-c", LAUNCH, sys.executable, "-m", "modelgen.cli", "lots", path,
                           "-o", out, "-q"], cwd=code, env=env, capture_output=True, text=True)
    elapsed = time.perf_counter() - t
    if proc.returncode != 0:
        raise SystemExit(f"{code}: exit {proc.returncode}\n{proc.stderr}")
    lines = proc.stderr.splitlines()
    stages = "; ".join(ln.split("timing: ", 1)[1] for ln in lines if "timing: " in ln)
    peak = [int(ln.split()[-1]) for ln in lines if ln.startswith("benchmark: maxrss")][-1] / 1024
    return elapsed, peak, stages


def formatting_floor(result):
    """The same cards by a bare loop, two ways.

    - ``same``: a plain loop that writes exactly the library's cards (their own
      lines: name and origin, findings, the values the dialect cannot carry;
      parameters in the same exponent text via ``cards.format_number`` one value
      at a time); checked byte for byte against ``cards.table_cards``. This is
      the floor the target speaks of.
    - ``minimal``: '.model NAME D (' and '+ K=repr(v)' lines only: cheaper text,
      not the same cards; shown as the lower bound of any formatting.
    """
    from modelgen import cards

    columns, params = cards.card_columns(result, "spice3")
    names = [k for k, _ in columns]
    cols = [v.tolist() for _, v in columns]
    left = cards.left_out_names("spice3")
    left_cols = [params[k].tolist() for k in left]
    dev = result.device
    src = os.path.basename(dev.source[0])
    t = time.perf_counter()
    parts = []
    for i, name in enumerate(dev.name):
        parts.append(f"* {name}: from {src} line {dev.line[i]}")
        for m in result.findings_for(i):
            if m.severity != "caution":  # a caution is said once, in the file header
                parts.append("* " + ("note: " if m.severity == "note" else "") + m.text)
        carried = " ".join(f"{k}={cards.format_number(c[i])}" for k, c in zip(left, left_cols) if c[i] == c[i])
        if carried:
            parts.append(f"* not carried by the spice3 dialect: {carried}")
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


def unpack(commit, into):
    """The tree of ``commit`` in folder ``into`` (git archive: the repository is left alone)."""
    archive = subprocess.run(["git", "-C", ROOT, "archive", commit], capture_output=True, check=True).stdout
    subprocess.run(["tar", "-x", "-C", into], input=archive, check=True)
    return into


def same_outputs(a, b):
    """The library and the two summary files of two runs (named by their stem) are byte for byte equal."""
    for suffix in (".lib", ".summary.csv", ".summary.json"):
        with open(a + suffix, "rb") as fa, open(b + suffix, "rb") as fb:
            if fa.read() != fb.read():
                return False
    return True


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("n", nargs="?", type=int, default=100_000)
    ap.add_argument("--old", default=OLD, help=f"older commit to run side by side (default {OLD})")
    ap.add_argument("--no-old", action="store_true")
    ap.add_argument("--repeat", type=int, default=3, help="end-to-end runs of each tree, alternating")
    ap.add_argument("--memory-rows", type=int, default=1_000_000)
    ap.add_argument("--no-memory", action="store_true")
    ap.add_argument("--old-memory", action="store_true", help="also the older commit's peak at --memory-rows")
    args = ap.parse_args()
    n = args.n
    print(f"modelgen lots benchmark, {os.cpu_count()} cores, load average {os.getloadavg()[0]:.1f}")
    with tempfile.TemporaryDirectory() as tmp:
        old = None
        if not args.no_old:
            os.mkdir(os.path.join(tmp, "old"))
            old = unpack(args.old, os.path.join(tmp, "old"))
        rows = {}
        for size in (n // 10, n):
            csv_path = os.path.join(tmp, f"lots{size}.csv")
            synthetic_table(csv_path, size)
            t_phys, result = physics_alone(csv_path)
            t_floor, t_minimal = formatting_floor(result)
            del result
            runs = {"new": [], "old": []}
            for r in range(args.repeat if size == n else 1):
                for label, code in (("new", ROOT), ("old", old)):
                    if code is None or (label == "old" and size != n):
                        continue
                    runs[label].append(end_to_end(code, csv_path, os.path.join(tmp, f"{label}{size}.lib")))
            if old is not None and size == n and not same_outputs(os.path.join(tmp, f"new{size}"),
                                                                  os.path.join(tmp, f"old{size}")):
                print("    NOTE: this tree's outputs differ from the older commit's")
            rows[size] = (t_phys, runs, t_floor, t_minimal)
            t_new = statistics.median(r[0] for r in runs["new"])
            print(f"N = {size:>8,d}: physics {t_phys:7.3f} s ({size / t_phys:>10,.0f} rows/s)  "
                  f"bare loop, same cards {t_floor:6.3f} s (minimal repr-only loop {t_minimal:6.3f} s)")
            for label in ("new", "old"):
                for t, peak, stages in runs[label]:
                    print(f"    {label}: end to end {t:6.2f} s ({size / t:>9,.0f} rows/s), peak {peak:5.0f} MiB;"
                          f" stages: {stages}")
        t_phys, runs, t_floor, t_minimal = rows[n]
        t_new = statistics.median(r[0] for r in runs["new"])
        small = statistics.median(r[0] for r in rows[n // 10][1]["new"])
        print(f"targets at N = {n:,d} (medians over {len(runs['new'])} runs):")
        print(f"  end to end {t_new:.2f} s (target < 5 s)")
        if runs["old"]:
            t_old = statistics.median(r[0] for r in runs["old"])
            pairs = [a[0] / b[0] for a, b in zip(runs["new"], runs["old"])]
            print(f"  this tree / {args.old} = {t_new / t_old:.2f}x (old {t_old:.2f} s; run by run "
                  + ", ".join(f"{p:.2f}" for p in pairs) + ") (target <= 1.3x)")
        print(f"  end to end / bare loop making the same cards = {t_new / t_floor:.1f}x")
        print(f"  end to end / minimal repr-only loop (not the same cards) = {t_new / t_minimal:.1f}x")
        print(f"  end to end / physics alone = {t_new / t_phys:.1f}x")
        print(f"  time for 10x rows: {t_new / small:.1f}x end to end")
        if not args.no_memory:
            m = args.memory_rows
            csv_path = os.path.join(tmp, f"lots{m}.csv")
            synthetic_table(csv_path, m)
            for label, code in (("new", ROOT), ("old", old if args.old_memory else None)):
                if code is None:
                    continue
                t, peak, stages = end_to_end(code, csv_path, os.path.join(tmp, f"mem{label}.lib"))
                print(f"  {label}: {m:,d} rows end to end {t:.1f} s, peak memory {peak:.0f} MiB "
                      f"(target < 1536 MiB); stages: {stages}")
                for suffix in (".lib", ".summary.csv", ".summary.json"):
                    os.unlink(os.path.join(tmp, f"mem{label}") + suffix)


if __name__ == "__main__":
    main()

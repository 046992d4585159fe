"""Writing outputs: all or none, under faults, signals, concurrency and bad paths; chunked = one pass.

The expectations are POSIX file-system semantics (rename(2) replaces a file
atomically within one folder, link(2), flock(2); common practice for atomic
file replacement) and the command line's contract in the README (exit
status 2 and one line naming the user's path).
"""

import errno
import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

from modelgen import lots, output

from support import ROOT, run
LOT = ROOT / "examples" / "lot_table.csv"
HEADER = ("name,area [um^2],p.doping [cm^-3],p.thickness [um],p.lifetime [ns],n.doping [cm^-3],"
          "n.thickness [um],n.lifetime [us]")


def ours(folder):
    """Temporary files of ours left in ``folder``."""
    return sorted(p.name for p in Path(folder).iterdir() if output.MARK in p.name)


def snapshot(folder):
    return {p.name: p.read_bytes() for p in Path(folder).iterdir() if p.is_file()}


def random_rows(n, seed=5, prefix="DP"):
    rng = np.random.default_rng(seed)
    return [[f"{prefix}{i:06d}", f"{rng.uniform(1e3, 1e4):.5g}", f"{10 ** rng.uniform(18, 20):.4g}",
             f"{rng.uniform(0.5, 2):.3g}", f"{rng.uniform(1, 20):.3g}", f"{10 ** rng.uniform(15, 16.5):.4g}",
             f"{rng.uniform(5, 50):.3g}", f"{rng.uniform(0.01, 5):.3g}"] for i in range(n)]


def write_table(path, rows, header=HEADER):
    path.write_text(header + "\n" + "\n".join(",".join(str(x) for x in r) for r in rows) + "\n")
    return path


def one_line_error(r, path):
    lines = r.stderr.strip().splitlines()
    assert r.exit_code == 2, r.output
    assert len(lines) == 1 and lines[0].startswith("modelgen: "), r.stderr
    assert str(path) in lines[0] and output.MARK not in lines[0] and "Traceback" not in r.output
    return lines[0]


# --- defect 8: a lot whose files cannot all be written replaces none of them -------------------------

@pytest.fixture
def earlier(tmp_path):
    """An earlier good run's outputs in tmp_path/out, to be left untouched."""
    out = tmp_path / "out"
    out.mkdir()
    assert run("lots", LOT, "-o", out / "lot.lib", "-q").exit_code == 0
    return out, snapshot(out)


def test_summary_path_a_folder_replaces_nothing(earlier):
    out, before = earlier
    (out / "s.csv").mkdir()
    r = run("lots", LOT, "-o", out / "lot.lib", "--summary", out / "s", "--dialect", "ngspice")
    one_line_error(r, out / "s.csv")
    assert snapshot(out) == before and not ours(out)


def test_summary_in_a_missing_folder_replaces_nothing(earlier):
    out, before = earlier
    r = run("lots", LOT, "-o", out / "lot.lib", "--summary", out / "nowhere" / "s", "--dialect", "ngspice")
    one_line_error(r, out / "nowhere" / "s.csv")
    assert snapshot(out) == before and not ours(out)


def test_summary_in_a_read_only_folder_replaces_nothing(earlier, tmp_path, monkeypatch):
    out, before = earlier
    ro = tmp_path / "ro"
    ro.mkdir()
    real_open = os.open

    def read_only(path, flags, *a, **k):  # a read-only mount: creating a file there fails with EROFS
        if os.path.dirname(os.path.abspath(path)) == str(ro) and flags & os.O_CREAT:
            raise OSError(errno.EROFS, os.strerror(errno.EROFS), path)
        return real_open(path, flags, *a, **k)

    monkeypatch.setattr(os, "open", read_only)
    r = run("lots", LOT, "-o", out / "lot.lib", "--summary", ro / "s", "--dialect", "ngspice")
    assert "Read-only file system" in one_line_error(r, ro / "s.csv")
    assert snapshot(out) == before and not ours(out) and not ours(ro)


@pytest.mark.skipif(hasattr(os, "geteuid") and os.geteuid() == 0, reason="root writes into read-only folders")
def test_summary_in_a_folder_without_write_permission(earlier, tmp_path):
    out, before = earlier
    ro = tmp_path / "ro"
    ro.mkdir()
    ro.chmod(0o555)
    try:
        r = run("lots", LOT, "-o", out / "lot.lib", "--summary", ro / "s")
        one_line_error(r, ro / "s.csv")
    finally:
        ro.chmod(0o755)
    assert snapshot(out) == before and not ours(out)


def test_library_path_a_folder_is_one_line(tmp_path):
    (tmp_path / "lib").mkdir()
    one_line_error(run("lots", LOT, "-o", tmp_path / "lib"), tmp_path / "lib")
    one_line_error(run("card", ROOT / "examples" / "photodiode.toml", "-o", tmp_path / "lib"), tmp_path / "lib")
    one_line_error(run("corners", ROOT / "examples" / "photodiode.toml", "-o", tmp_path / "lib"), tmp_path / "lib")
    one_line_error(run("card", ROOT / "examples" / "photodiode.toml", "-o", tmp_path / "no" / "x.lib"),
                   tmp_path / "no" / "x.lib")


def test_an_output_that_is_a_device_or_a_pipe_is_refused_and_left_alone(tmp_path):
    fifo = tmp_path / "pipe"
    os.mkfifo(fifo)
    one_line_error(run("lots", LOT, "-o", fifo), fifo)
    one_line_error(run("card", ROOT / "examples" / "photodiode.toml", "-o", fifo), fifo)
    assert fifo.is_fifo() and sorted(p.name for p in tmp_path.iterdir()) == ["pipe"]


# --- defect 18: two outputs that are one file, an output that is the input ----------------------------

def test_outputs_that_are_one_file_or_the_input_are_refused(tmp_path):
    table = tmp_path / "t.csv"
    table.write_bytes(LOT.read_bytes())
    one_line_error(run("lots", table, "-o", tmp_path / "x.csv", "--summary", tmp_path / "x"), tmp_path / "x.csv")
    one_line_error(run("lots", table, "-o", table), table)
    one_line_error(run("lots", table, "-o", tmp_path / "lib.lib", "--summary", tmp_path / "t"), table)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["t.csv"]
    assert table.read_bytes() == LOT.read_bytes()
    dev = tmp_path / "d.toml"
    dev.write_bytes((ROOT / "examples" / "photodiode.toml").read_bytes())
    one_line_error(run("card", dev, "-o", dev), dev)
    assert dev.read_bytes() == (ROOT / "examples" / "photodiode.toml").read_bytes()


# --- defect 19: a failing rename part-way through the commit rolls back -----------------------------

def test_failing_rename_rolls_back_to_the_old_files(earlier, monkeypatch):
    out, before = earlier
    real_replace = os.replace

    def failing(src, dst, *a, **k):  # EIO on the summary JSON's rename, after the library and CSV moved
        if str(dst).endswith(".summary.json") and output.MARK in str(src) and str(src).endswith(".tmp"):
            raise OSError(errno.EIO, os.strerror(errno.EIO), src)
        return real_replace(src, dst, *a, **k)

    monkeypatch.setattr(os, "replace", failing)
    r = run("lots", LOT, "-o", out / "lot.lib", "--dialect", "ngspice")  # different bytes from the earlier run
    assert "Input/output error" in one_line_error(r, out / "lot.summary.json")
    assert snapshot(out) == before and not ours(out)


def test_failing_rename_removes_files_that_did_not_exist(tmp_path, monkeypatch):
    real_replace = os.replace

    def failing(src, dst, *a, **k):
        if str(dst).endswith(".summary.json"):
            raise OSError(errno.EIO, os.strerror(errno.EIO), src)
        return real_replace(src, dst, *a, **k)

    monkeypatch.setattr(os, "replace", failing)
    one_line_error(run("lots", LOT, "-o", tmp_path / "lot.lib"), tmp_path / "lot.summary.json")
    assert list(tmp_path.iterdir()) == []


# --- defect 19: stale temporaries, signals, kill -9 ----------------------------------------------

def dead_pid():
    p = subprocess.Popen([sys.executable, "-c", "pass"])
    p.wait()
    return p.pid


def test_stale_temporaries_of_dead_runs_are_removed_and_nothing_else(tmp_path):
    target = tmp_path / "lot.lib"
    stale = Path(output.temporary_name(target).replace(f"-{os.getpid()}-", f"-{dead_pid()}-"))
    live = Path(output.temporary_name(target).replace(f"-{os.getpid()}-", "-1-"))  # pid 1 is alive
    other_host = Path(str(stale).replace(output._HOST, "0" * 8 if output._HOST != "0" * 8 else "1" * 8))
    other_target = Path(output.temporary_name(tmp_path / "other.lib").replace(f"-{os.getpid()}-",
                                                                               f"-{dead_pid()}-"))
    user = tmp_path / ".lot.lib.modelgen-notes.txt"
    for p in (stale, live, other_host, other_target, user):
        p.write_text("x")
    assert run("lots", LOT, "-o", target, "-q").exit_code == 0
    left = {p.name for p in tmp_path.iterdir()}
    assert stale.name not in left
    assert {live.name, other_host.name, other_target.name, user.name} <= left


def big_table(tmp_path, n=60000):
    return write_table(tmp_path / "big.csv", random_rows(n, seed=9))


def start_lots(table, out, extra=()):
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    return subprocess.Popen([sys.executable, "-m", "modelgen.cli", "lots", str(table), "-o", str(out), "-q",
                             *extra], env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE)


def wait_for_temporaries(proc, folder, kind=".tmp", timeout=120):
    t = time.monotonic()
    while not [n for n in ours(folder) if n.endswith(kind)]:
        assert proc.poll() is None, proc.stderr.read()
        assert time.monotonic() - t < timeout
        time.sleep(0.01)


@pytest.mark.parametrize("moment", ["reading", "writing"])
@pytest.mark.parametrize("sig", [signal.SIGTERM, signal.SIGINT])
def test_a_signal_mid_run_leaves_no_temporary_and_no_output(tmp_path, sig, moment):
    table = big_table(tmp_path)
    out = tmp_path / "out"
    out.mkdir()
    proc = start_lots(table, out / "big.lib")
    if moment == "reading":
        wait_for_temporaries(proc, out)
    else:  # the first chunk's summary is being made by the second process
        wait_for_temporaries(proc, out, ".part")
    proc.send_signal(sig)
    _, err = proc.communicate(timeout=60)
    assert proc.returncode != 0 and b"Traceback" not in err
    time.sleep(0.2)  # a second process killed with its parent is gone too
    assert list(out.iterdir()) == []


def test_kill_9_leftovers_are_removed_by_the_next_run(tmp_path):
    table = big_table(tmp_path)
    out = tmp_path / "out"
    out.mkdir()
    proc = start_lots(table, out / "big.lib")
    wait_for_temporaries(proc, out)
    proc.kill()
    proc.wait()
    assert ours(out)  # kill -9 cannot clean up
    small = tmp_path / "small.csv"
    small.write_bytes(LOT.read_bytes())
    assert run("lots", small, "-o", out / "big.lib", "-q").exit_code == 0
    assert not ours(out)
    assert sorted(p.name for p in out.iterdir()) == ["big.lib", "big.summary.csv", "big.summary.json"]


def test_the_commit_waits_for_the_lock_on_the_output_folder(tmp_path):
    import fcntl

    out = tmp_path / "out"
    out.mkdir()
    fd = os.open(out, os.O_RDONLY)
    fcntl.flock(fd, fcntl.LOCK_EX)  # another run committing into this folder
    try:
        proc = start_lots(LOT, out / "lot.lib")
        t = time.monotonic()
        while time.monotonic() - t < 5 and proc.poll() is None:
            time.sleep(0.05)
        assert proc.poll() is None  # it waits for the lock ...
        assert not (out / "lot.lib").exists()  # ... with nothing renamed into place
    finally:
        os.close(fd)
    assert proc.wait(timeout=60) == 0
    assert sorted(p.name for p in out.iterdir()) == ["lot.lib", "lot.summary.csv", "lot.summary.json"]


def test_concurrent_runs_leave_one_run_s_whole_set(tmp_path):
    a = write_table(tmp_path / "a.csv", random_rows(3000, seed=1, prefix="DA"))
    b = write_table(tmp_path / "b.csv", random_rows(3000, seed=2, prefix="DB"))
    out = tmp_path / "out"
    out.mkdir()
    procs = [start_lots(t, out / "lot.lib") for t in (a, b, a, b)]
    assert [p.wait(timeout=120) for p in procs] == [0] * 4
    texts = [(out / f).read_text() for f in ("lot.lib", "lot.summary.csv", "lot.summary.json")]
    which = {"DA" if "DA000000" in t else "DB" for t in texts}
    assert len(which) == 1 and not ours(out)


# --- chunks, the second process, one pass: the same bytes ---------------------------------------

def outputs_of(folder):
    return {p.name: p.read_bytes() for p in sorted(Path(folder).iterdir())}


def test_chunked_forked_and_one_pass_outputs_are_the_same_bytes(tmp_path, monkeypatch):
    rows = random_rows(400, seed=11)
    rows[17][3] = "-1"        # a bad row (negative thickness), skipped with --keep-going
    rows[250][0] = rows[3][0]  # a name used by an earlier row, in another chunk
    rows[120][0] = '"DQ,1"'    # a quoted cell (refused as a name)
    table = write_table(tmp_path / "t.csv", rows)
    args = ("--dialect", "ngspice", "--corners", "5,50,95", "--keep-going", "-q")
    results = {}
    for label, chunk, fork_min in (("one pass", 100000, 10 ** 9), ("chunks of 7", 7, 10 ** 9),
                                   ("chunks of 64, forked", 64, 0)):
        monkeypatch.setattr(lots, "CHUNK", chunk)
        monkeypatch.setattr(lots, "FORK_MIN", fork_min)
        d = tmp_path / label.replace(" ", "_").replace(",", "")
        d.mkdir()
        r = run("lots", table, "-o", d / "t.lib", *args)
        assert r.exit_code == 4, r.output
        results[label] = (outputs_of(d), r.stderr)
        monkeypatch.undo()
    first = results["one pass"]
    for label, got in results.items():
        assert got == first, label
    j = json.loads(first[0]["t.summary.json"])
    assert [s["row"] for s in j["skipped"]] == [19, 122, 252]


def test_library_call_never_forks_by_default_and_forked_is_the_same(tmp_path, monkeypatch):
    table = lots.read_csv(str(write_table(tmp_path / "p.csv", random_rows(900))))
    result, good = lots.derive(table)
    outs = {}
    for label, kw in (("default", {}), ("chunked", {"chunk": 100})):
        d = tmp_path / label
        d.mkdir()
        paths = {"library": d / "x.lib", "csv": d / "x.csv", "json": d / "x.json"}
        monkeypatch.setattr(os, "fork", lambda: pytest.fail("a library call forked"))
        lots.write_outputs(result, paths, dialect="spice3", title="t", extra=[], section=None, corner_cards=(),
                           skipped=[], **kw)
        monkeypatch.undo()
        outs[label] = outputs_of(d)
    assert outs["default"] == outs["chunked"]
    assert outs["default"]["x.lib"].count(b".model ") == 900


def test_forked_writer_same_bytes_above_the_threshold(tmp_path):
    table = lots.read_csv(str(write_table(tmp_path / "p.csv", random_rows(600))))
    result, good = lots.derive(table)
    outs = {}
    for fork in (False, True):
        d = tmp_path / str(fork)
        d.mkdir()
        paths = {"library": d / "x.lib", "csv": d / "x.csv", "json": d / "x.json"}
        with lots.LotWriter(paths, dialect="ngspice", fork=fork, fork_min=0) as w:
            for lo in range(0, 600, 250):
                w.add(lots._rows(result, lo, min(lo + 250, 600)))
            w.finish(title="t", skipped=[])
        outs[fork] = outputs_of(d)
        assert not ours(d)
    assert outs[True] == outs[False]


def read_summary(tables):
    lines, names, errors, cols = [], [], [], {}
    for t in tables:
        lines += [int(x) for x in t.lines]
        names += [str(x) for x in t.columns["name"]]
        errors += [(e.row, e.key, e.message) for e in t.problems.errors()]
        for k, v in t.columns.items():
            cols.setdefault(k, []).extend(np.asarray(v).tolist())
    return lines, names, errors, {k: [x if x == x else None for x in v] for k, v in cols.items()}


def test_reading_in_pieces_gives_the_whole_table(tmp_path):
    # pieces are cut at line ends; the reader sees each piece behind the header, and the line numbers,
    # pattern names and repeated names come out as in one pass
    rows = [",".join(r) for r in random_rows(40, seed=3)]
    rows[6] = rows[6].replace("DP000006", '"DP000006"', 1)
    rows[20] = rows[20].replace("DP000020", "DP000002", 1)      # a name used by an earlier row
    rows[30] = rows[30][:-1] + "x"                               # not a number
    table = tmp_path / "t.csv"
    table.write_bytes((HEADER + "\r\n" + "\r\n".join(rows[:10]) + "\r\n\r\n" + "\r\n".join(rows[10:])
                       + "\r\n").encode("utf-8"))
    plain = tmp_path / "p.csv"
    plain.write_text(HEADER.replace("name,", "") + "\n" + "\n".join(r.split(",", 1)[1] for r in rows) + "\n")
    for path, kw in ((table, {}), (plain, {"name_pattern": "DLOT{row:04d}_{index}"})):
        whole = read_summary([lots.read(str(path), **kw)])
        assert len(whole[0]) == 40 and len(whole[2]) >= 1
        for rows_per_piece in (1, 3, 7):
            assert read_summary(lots.read_chunks(str(path), rows=rows_per_piece, **kw)) == whole, rows_per_piece


def test_reading_in_pieces_never_cuts_a_quoted_cell(tmp_path):
    # RFC 4180: a quoted cell may hold a line break; a piece never ends inside it
    rows = [",".join(r) for r in random_rows(12, seed=4)]
    rows[4] = rows[4].replace("DP000004", '"DP\n000004"', 1)
    rows[9] = rows[9].replace("DP000009", '"DP00\n\n0009"', 1)
    table = tmp_path / "q.csv"
    table.write_text(HEADER + "\n" + "\n".join(rows) + "\n")
    whole = read_summary([lots.read(str(table))])
    assert len(whole[1]) == 12
    for rows_per_piece in (1, 2, 5):
        assert read_summary(lots.read_chunks(str(table), rows=rows_per_piece)) == whole, rows_per_piece

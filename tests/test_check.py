"""`modelgen check`: which simulators, what reaches them, hostile files, processes.

Outside references:
- ngspice runs a comment line that starts with ``*#`` as a control command
  (ngspice manual, chapter "Interactive interpreter"/control section, and
  ``src/frontend/inpcom.c``, which rewrites ``*#`` to ``* #`` in PSPICE models
  because it would otherwise be a command line); gnucap reads a line that
  starts with ``*>`` as a command (``ANTI_COMMENT "*>"`` in gnucap's
  ``include/io_.h``/``md.h``: "skip mark so spice ignores but gnucap reads",
  ``apps/lang_spice.cc``). Every form below was tried against the installed
  ngspice and gnucap through the old ``check`` and ran its command there.
- Linux ``prctl(2)``: PR_SET_PDEATHSIG delivers a signal to a child when its
  parent dies; ``setsid(2)``: a new session and process group.
- Exit statuses and the one-line error format: modelgen's README (Commands).
"""

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner
from hypothesis import given, settings, strategies as st

from modelgen.cards import reader
from modelgen.targets import TARGETS as DIALECTS
from modelgen.cli import main
from modelgen.spice import check

from support import need  # skips without the simulator, fails instead with CI=true

from support import ROOT
CARD = ".model DX D (IS=1e-15 RS=1 CJO=1e-12 TT=1n)\n"


def run_check(*args):
    return CliRunner().invoke(main, ["check", *map(str, args)])


def one_error_line(r):
    """The result is exit 2 with exactly one `modelgen: error:` line and no traceback."""
    assert r.exit_code == 2, (r.exit_code, r.output)
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("modelgen: error: "), r.stderr
    assert "Traceback" not in r.output
    assert r.exception is None or isinstance(r.exception, SystemExit)
    return lines[0]


# --- 1. which simulators -------------------------------------------------------

def _card_file(tmp_path, dialect, name="c.lib"):
    out = tmp_path / name
    r = CliRunner().invoke(main, ["card", str(ROOT / "examples" / "switching_diode.toml"), "--dialect", dialect,
                                  "-q", "-o", str(out)])
    assert r.exit_code == 0, r.output
    return out


def test_headers_name_the_dialect_and_its_simulators(tmp_path):
    # the dialect table says which simulators each dialect's cards are for
    text = (_card_file(tmp_path, "ngspice").read_text()
            + "* hand-written below: no header\n.model DHAND D (IS=1e-15)\n")
    cards = check.diode_cards(text)
    assert check.meant_for(cards, text) == [DIALECTS["ngspice"].simulators, DIALECTS["ngspice"].simulators]
    # a card before any header, and one in a file with none, go to every known simulator
    assert check.meant_for(check.diode_cards(CARD), CARD) == [tuple(check.PACKAGES)]


def test_own_ngspice_card_passes_and_is_not_run_in_gnucap(tmp_path):
    need("ngspice")
    need("gnucap")  # the old check also ran it in gnucap, which cannot read ISR: exit 1
    r = run_check(_card_file(tmp_path, "ngspice"))
    assert r.exit_code == 0, r.output
    assert "gnucap" not in r.stdout
    # --simulator overrides the header: gnucap then warns about ISR and the check fails
    r = run_check(_card_file(tmp_path, "ngspice"), "--simulator", "gnucap")
    assert r.exit_code == 1 and "ISR" in r.stdout


def test_spice3_card_runs_in_both_and_gnucap_card_in_gnucap(tmp_path):
    need("ngspice")
    need("gnucap")
    r = run_check(_card_file(tmp_path, "spice3"))
    assert r.exit_code == 0, r.output
    assert "ngspice" in r.stdout and "gnucap" in r.stdout
    r = run_check(_card_file(tmp_path, "gnucap"))
    assert r.exit_code == 0, r.output
    assert " gnucap " in r.stdout and " ngspice " not in r.stdout


def test_a_simulator_not_installed_is_named_and_the_rest_still_run(tmp_path, monkeypatch):
    need("ngspice")
    f = _card_file(tmp_path, "spice3")  # meant for ngspice and gnucap
    monkeypatch.setattr(check, "installed", lambda s: s == "ngspice")
    r = run_check(f)
    assert r.exit_code == 0, r.output
    assert "gnucap is not installed (Debian package: gnucap); 1 card not checked with it" in r.stderr
    assert "1 of 1 checks passed: ngspice" in r.stdout


def _written_by_modelgen(tmp_path, dialect):
    """Every kind of file modelgen writes in ``dialect``: cards, corners, per-corner and lot libraries."""
    examples = sorted(str(p) for p in (ROOT / "examples").glob("*.toml"))
    runs = {f"card_{Path(e).stem}": ["card", e] for e in examples}
    runs["library"] = ["card", *examples]
    runs["corners"] = ["corners", str(ROOT / "examples" / "photodiode.toml")]
    runs["per_corner"] = ["corners", str(ROOT / "examples" / "switching_diode.toml"), "--per-corner"]
    runs["lot"] = ["lots", str(ROOT / "examples" / "lot_table.csv")]
    if DIALECTS[dialect].sections:
        runs["lot_corners"] = ["lots", str(ROOT / "examples" / "lot_table.csv"), "--corners", "5,50,95"]
        runs["spread_corners"] = ["spread", str(ROOT / "examples" / "switching_diode.toml"), "--samples", "2000",
                                  "--corner", "VF@1mA:low", "--corner", "IR@-5V:high"]
    files = []
    for name, args in runs.items():
        out = tmp_path / f"{name}.lib"
        quiet = ["-q"] if args[0] in ("card", "corners") else []
        r = CliRunner().invoke(main, [*args, "--dialect", dialect, "-o", str(out), *quiet])
        assert r.exit_code == 0, (name, r.output)
        files.append(out)
    return files


@pytest.mark.parametrize("dialect", sorted(DIALECTS))
def test_every_file_modelgen_writes_passes_check_with_no_options(tmp_path, dialect):
    for simulator in {s for d in DIALECTS.values() for s in d.simulators}:
        need(simulator)
    for f in _written_by_modelgen(tmp_path, dialect):
        r = run_check(f)
        assert r.exit_code == 0, (f.name, r.output)
        used = {ln.split()[2] for ln in r.stdout.splitlines()[1:] if ln.split()[2:3] and ln.split()[-1] == "ok"}
        assert used == set(DIALECTS[dialect].simulators), (f.name, r.stdout)


def _fake_simulator(tmp_path, monkeypatch, body):
    """An `ngspice` on PATH that runs the shell `body` (real processes, no simulator needed)."""
    bin_dir = tmp_path / "bin"
    bin_dir.mkdir(exist_ok=True)
    exe = bin_dir / "ngspice"
    exe.write_text("#!/bin/sh\n" + body + "\n")
    exe.chmod(0o755)
    monkeypatch.setenv("PATH", f"{bin_dir}{os.pathsep}{os.environ.get('PATH', '')}")
    return exe


def _alive(pid):
    """True while process ``pid`` exists and is not a zombie (Linux /proc)."""
    try:
        state = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()[0]
    except (FileNotFoundError, ProcessLookupError):
        return False
    return state not in ("Z", "X")


def _wait_for(predicate, seconds=10.0):
    end = time.monotonic() + seconds
    while time.monotonic() < end:
        if predicate():
            return True
        time.sleep(0.02)
    return predicate()


def test_a_simulator_that_times_out_is_exit_1_in_one_line_and_is_killed(tmp_path, monkeypatch):
    pid_file = tmp_path / "pid"
    _fake_simulator(tmp_path, monkeypatch, f"echo $$ > {pid_file}\nfor i in 1 2 3; do echo noise; done\nexec sleep 60")
    f = tmp_path / "x.lib"
    f.write_text(CARD)
    r = run_check(f, "--simulator", "ngspice", "--timeout", "1.5")
    assert r.exit_code == 1, r.output
    assert r.stderr.strip().splitlines() == [f"modelgen: error: {f}: ngspice did not finish within 1.5 s"]
    assert "noise" not in r.output  # the simulator's output is not dumped
    assert not _alive(int(pid_file.read_text()))


def test_a_simulator_that_crashes_is_exit_1_in_one_line(tmp_path, monkeypatch):
    _fake_simulator(tmp_path, monkeypatch, "echo lots of output\nkill -SEGV $$")
    f = tmp_path / "x.lib"
    f.write_text(CARD)
    r = run_check(f, "--simulator", "ngspice")
    assert r.exit_code == 1, r.output
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and "ngspice failed (killed by signal 11)" in lines[0], r.stderr
    assert "lots of output" not in r.output


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="/proc and PR_SET_PDEATHSIG are Linux")
@pytest.mark.parametrize("how, status", [(signal.SIGINT, 130), (signal.SIGTERM, 143), (signal.SIGKILL, None)])
def test_a_stopped_check_takes_its_simulator_down(tmp_path, monkeypatch, how, status):
    pid_file = tmp_path / "pid"
    _fake_simulator(tmp_path, monkeypatch, f"echo $$ > {pid_file}\nexec sleep 120")
    f = tmp_path / "x.lib"
    f.write_text(CARD)
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    proc = subprocess.Popen([sys.executable, "-m", "modelgen.cli", "check", str(f), "--simulator", "ngspice"],
                            cwd=tmp_path, env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    try:
        assert _wait_for(lambda: pid_file.exists() and pid_file.read_text().strip()), "simulator never started"
        sim = int(pid_file.read_text())
        assert _alive(sim)
        proc.send_signal(how)
        out, err = proc.communicate(timeout=30)
        if status is not None:
            assert proc.returncode == status, err
            assert err.decode().strip().splitlines() == ["modelgen: check interrupted; its simulator runs were stopped"]
        # the simulator (in a session of its own, so no terminal signal reaches it) is gone too
        assert _wait_for(lambda: not _alive(sim)), "the simulator outlived check"
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait()


# --- 2. scale -------------------------------------------------------------------

def _library(n):
    return "".join(f".model D{k:03d} D (IS={1 + k % 7}e-15 RS={1 + k % 3} CJO=1p TT=1n)\n" for k in range(n))


def test_cards_are_run_in_chunks_and_each_gets_its_own_result(monkeypatch):
    need("ngspice")
    calls = []
    real = check.runner

    def counting(sim):
        module = real(sim)

        class Spy:
            available = staticmethod(module.available)

            @staticmethod
            def simulate(text, names, *a, **k):
                calls.append(len(names))
                return module.simulate(text, names, *a, **k)
        return Spy

    monkeypatch.setattr(check, "runner", counting)
    monkeypatch.setitem(check.CHUNK, "ngspice", 3)
    outcomes = check.check_text(_library(8), ["ngspice"])
    assert calls == [3, 3, 2]
    # every card's result is its own: the names come back in file order and all agree
    assert [o.model for o in outcomes] == [f"D{k:03d}" for k in range(8)]
    assert all(o.ok for o in outcomes), outcomes


def test_sample_is_deterministic_and_said(tmp_path):
    need("ngspice")
    f = tmp_path / "big.lib"
    f.write_text(_library(10))
    # every (10/3)-th card from the first: indices 0, 3, 6 (integer steps k*n//size)
    assert check.sample(10, 3) == [0, 3, 6]
    r = run_check(f, "--simulator", "ngspice", "--sample", "3")
    assert r.exit_code == 0, r.output
    assert [ln.split()[0] for ln in r.stdout.splitlines()[1:4]] == ["D000", "D003", "D006"]
    assert "sample: 3 of 10 cards checked" in r.stdout


def test_progress_is_reported_per_chunk(monkeypatch):
    need("ngspice")
    monkeypatch.setitem(check.CHUNK, "ngspice", 4)
    seen = []
    check.check_text(_library(10), ["ngspice"], progress=lambda done, total: seen.append((done, total)))
    assert seen == [(4, 10), (8, 10), (10, 10)]


# --- 3. what is checked, and at which temperature ---------------------------------

def test_help_says_what_is_compared_and_what_is_not():
    r = CliRunner().invoke(main, ["check", "--help"])
    text = " ".join(r.output.split())
    assert "modelgen's evaluator" in text and "simulator's own equations" in text
    assert "does not say the card matches a real device" in text


@pytest.mark.parametrize("simulator", ["ngspice", "gnucap"])
def test_temperature_moves_simulator_and_evaluator_together(tmp_path, simulator):
    need(simulator)
    f = _card_file(tmp_path, "spice3")
    r = run_check(f, "--simulator", simulator, "--temperature", "85")
    assert r.exit_code == 0, r.output
    assert " 85 " in r.stdout.splitlines()[1] and "at 85 degC" in r.stdout


def test_temperature_out_of_range_is_bad_input(tmp_path):
    f = tmp_path / "x.lib"
    f.write_text(CARD)
    assert "--temperature" in one_error_line(run_check(f, "--temperature", "1e9"))
    assert "--temperature" in one_error_line(run_check(f, "--temperature", "nan"))


# --- 14. nothing of the file reaches a simulator ----------------------------------

# Each form ran `touch MARKER` through the old check (see the module docstring).
HOSTILE = [
    "*# shell touch {m}\n" + CARD,                          # ngspice control line
    "   *# shell touch {m}\n" + CARD,                       # indented
    "\t*#shell touch {m}\n" + CARD,                         # tab, no blank after *#
    "*#SHELL touch {m}\n" + CARD,                           # any case
    ".lib s\n*# shell touch {m}\n" + CARD + ".endl s\n",    # inside a .lib section
    "* header\u2028*# shell touch {m}\n" + CARD,            # after a line separator in a comment
    "* header\u2029*# shell touch {m}\n" + CARD,            # paragraph separator
    "* header\v*# shell touch {m}\n" + CARD,                # vertical tab
    "* header\f*# shell touch {m}\n" + CARD,                # form feed
    "* header\x1c*# shell touch {m}\n" + CARD,              # file separator
    "* header\r*# shell touch {m}\n" + CARD,                # a bare CR
    "*>.system touch {m}\n" + CARD,                         # gnucap command line
    "*>  .system touch {m}\n" + CARD,
    "  *>.system touch {m}\n" + CARD,
    "* x\u2028*>.system touch {m}\n" + CARD,
    ".model D2 D (IS=1e-15) ; \n*# shell touch {m}\n",      # after an end-of-line comment
    CARD.replace("DX", "*#") + ".model D3 D (IS=1e-15)\n",  # a model name that looks like a comment
]


@pytest.mark.parametrize("form", range(len(HOSTILE)))
def test_no_comment_form_runs_a_command(tmp_path, monkeypatch, form):
    need("ngspice")
    need("gnucap")
    monkeypatch.chdir(tmp_path)
    marker = tmp_path / "marker"
    f = tmp_path / "hostile.lib"
    f.write_text(HOSTILE[form].format(m=marker))
    r = run_check(f, "--simulator", "all")
    assert r.exit_code in (0, 1), r.output  # it ran (gnucap may not know a parameter): what matters is the marker
    assert not marker.exists()


def test_the_deck_is_rebuilt_from_numbers_only():
    text = "*# shell x\n*>.system y\n.model weird$name d (is=1e-15 rs=1mil cjo=1p bv=40)\n"
    deck, labels = check.deck_cards(check.diode_cards(text))
    assert labels == ["DMG0"]
    assert deck.splitlines() == [".model DMG0 D (", "+ IS=1e-15", "+ RS=2.54e-05", "+ CJO=1e-12", "+ BV=40", "+ )"]


# --- 15. hostile files: one line, exit 2 ------------------------------------------

@pytest.mark.filterwarnings("error")
@pytest.mark.parametrize("body, key", [
    (".model DX D (IS=1e-15)\n.model dx D (IS=2e-15)\n", "defined twice"),
    (".lib a\n.model DX D (IS=1e-15)\n.endl a\n.lib a\n.model DX D (IS=1e-15)\n.endl a\n", "defined twice"),
    (".model DX D (IS=1e-15 RS=-1)\n", "RS"),
    (".model DX D (IS=1e-15 FC=1)\n", "FC"),
    (".model DX D (IS=0)\n", "IS"),
    (".model DX D (IS=1e300)\n", "IS"),
    (".model DX D (IS=1e-15 N=0)\n", "N"),
    (".model DX D (IS=1e-15 CJO=1p VJ=-0.7)\n", "VJ"),
    (".model DX D (IS=1e-15 M=1.5)\n", "M"),
    (".model DX D (IS=1e-15 TNOM=1e6)\n", "TNOM"),
    (".model D" + "X" * 1_000_000 + " D (IS=1e-15)\n", "line of"),
    (".model DX D (IS=1e-15 " + "Q" * 40 + "=1)\n", "parameter name"),
    ("* comment\n", "no diode"),
])
def test_bad_cards_give_one_line_and_exit_2(tmp_path, body, key):
    f = tmp_path / "bad.lib"
    f.write_text(body)
    line = one_error_line(run_check(f))
    assert str(f) in line and key in line


def test_a_byte_order_mark_is_simply_read(tmp_path):
    need("ngspice")
    f = tmp_path / "bom.lib"
    f.write_bytes(b"\xef\xbb\xbf" + CARD.encode())
    r = run_check(f, "--simulator", "ngspice")
    assert r.exit_code == 0, r.output


def test_files_that_are_not_card_files(tmp_path, monkeypatch):
    (tmp_path / "zero.lib").symlink_to("/dev/zero")
    assert "not a regular file" in one_error_line(run_check(tmp_path / "zero.lib"))
    assert "is a directory" in one_error_line(run_check(tmp_path))
    os.mkfifo(tmp_path / "pipe.lib")
    assert "not a regular file" in one_error_line(run_check(tmp_path / "pipe.lib"))  # and no hang
    assert "no such file" in one_error_line(run_check(tmp_path / "missing.lib"))
    big = tmp_path / "big.lib"
    big.write_text(CARD * 100)
    monkeypatch.setattr(reader, "MAX_FILE_BYTES", 1000)
    assert "larger than" in one_error_line(run_check(big))


# --- 16. linear-time reading of values --------------------------------------------

@pytest.mark.parametrize("n", [16_000, 100_000, 1_000_000])
def test_a_long_bad_number_fails_at_once(tmp_path, n):
    # n digits then a bad character: quadratic backtracking took 7 s at 16,000 and hung at 100,000
    with pytest.raises(reader.CardSyntaxError, match="at most"):
        reader.parse_number("1" * n + "!")
    f = tmp_path / "long.lib"
    f.write_text(".model DX D (IS=" + "1" * n + "!)\n")
    assert "line 1" in one_error_line(run_check(f))


def test_the_number_pattern_itself_fails_in_linear_time():
    # without the length limit: the pattern alone must not backtrack over a long digit run
    assert reader._NUMBER.fullmatch("1" * 200_000 + "!") is None
    assert reader._NUMBER.fullmatch("1" * 200_000 + "." + "2" * 200_000 + "e") is not None


def test_a_long_name_or_line_is_refused(tmp_path):
    with pytest.raises(reader.CardSyntaxError, match="model name of 200 characters"):
        reader.read_cards(".model D" + "N" * 199 + " D (IS=1e-15)\n")
    with pytest.raises(reader.CardSyntaxError, match="control or format character"):
        reader.read_cards(".model D\u202eX D (IS=1e-15)\n")


@pytest.mark.filterwarnings("error")
@settings(max_examples=150, deadline=None)
@given(st.data())
def test_any_plausible_card_gives_finite_references_or_one_error(data):
    # the plausible ranges are the contract: inside them the evaluator must not raise or warn,
    # at the card's TNOM and at both ends of the temperature range a check accepts
    parts = {}
    for key in data.draw(st.lists(st.sampled_from(sorted(check.PLAUSIBLE)), min_size=1, unique=True)):
        lo, lo_in, hi, hi_in, _, _ = check.PLAUSIBLE[key]
        parts[key] = data.draw(st.floats(lo, hi, exclude_min=not lo_in, exclude_max=not hi_in))
    text = ".model DX D (" + " ".join(f"{k}={v!r}" for k, v in parts.items()) + ")\n"
    card = check.diode_cards(text)[0]
    simulator = data.draw(st.sampled_from(sorted(check.PACKAGES)))
    for t in (card.params.get("TNOM", 27.0), *check.TEMPERATURE_RANGE):
        try:
            i_ref, c_ref, _ = check._reference(card, simulator, t, "x.lib")
        except reader.CardSyntaxError as e:
            assert "non-finite" in str(e) and "x.lib" in str(e)
        else:
            assert np.all(np.isfinite(i_ref)) and np.all(np.isfinite(c_ref))


@pytest.mark.parametrize("form", range(len(HOSTILE)))
def test_the_runners_drop_comment_lines_too(form):
    # defence in depth for callers of the runners that pass text of their own
    from modelgen.spice import gnucap, ngspice
    text = HOSTILE[form].format(m="/nonexistent/marker")
    deck = ngspice._deck(text, [], check.DC_VOLTS, [], 27.0, 1e-12, "dc", "ac")
    netlist, _, _ = gnucap._netlist(text, [], check.DC_VOLTS, check.CAP_VOLTS, 27.0, None)
    for out in (deck, netlist):
        assert "touch" not in out and "*#" not in out.replace(".model *#", "") and "*>" not in out


def test_cancel_kills_runs_in_other_threads_and_refuses_new_ones(tmp_path):
    # check waits for a simulator in a worker thread while it evaluates; an interrupt in the
    # main thread must end that run too, and a run the worker was about to start
    import threading
    from modelgen.spice import process
    pid_file = tmp_path / "pid"
    outcome = {}

    def worker():
        try:
            outcome["result"] = process.run(["sh", "-c", f"echo $$ > {pid_file}; exec sleep 60"],
                                            cwd=tmp_path, timeout=120, what="sleeper")
        except process.SimulatorError as e:
            outcome["error"] = e

    thread = threading.Thread(target=worker)
    thread.start()
    try:
        assert _wait_for(lambda: pid_file.exists() and pid_file.read_text().strip())
        pid = int(pid_file.read_text())
        process.cancel()
        thread.join(timeout=30)
        assert not thread.is_alive() and not _alive(pid)
        assert outcome["result"][0] == -signal.SIGKILL
        with pytest.raises(process.SimulatorError, match="cancelled"):
            process.run(["true"], cwd=tmp_path, timeout=10, what="true")
    finally:
        process.allow()
    assert process.run(["true"], cwd=tmp_path, timeout=10, what="true") == (0, "")

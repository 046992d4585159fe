"""The command line: cards, JSON, bad input (one line, exit 2, nothing written)."""

import json
import math
import os

import pytest

from support import EXAMPLES, run

GOOD = """
name = "DOK"
area = "1e-4 cm^2"
[p]
doping = "1e18 cm^-3"
thickness = "1 um"
lifetime = "100 ns"
[n]
doping = "1e16 cm^-3"
thickness = "50 um"
lifetime = "1 us"
"""


def write(tmp_path, text, name="dev.toml"):
    p = tmp_path / name
    p.write_text(text)
    return str(p)


@pytest.mark.parametrize("example", EXAMPLES, ids=lambda p: p.name)
def test_every_example_gives_a_card_and_json(example):
    r = run("card", str(example), "-q")
    assert r.exit_code == 0, r.output
    lines = r.stdout.splitlines()
    model = [ln for ln in lines if ln and not ln.startswith("*")]
    assert model[0].startswith(".model ") and model[0].endswith(" D (")
    assert all(ln.startswith("+ ") for ln in model[1:])
    assert any("CAUTION" in ln for ln in lines)
    j = json.loads(run("card", str(example), "--format", "json", "-q").stdout)
    for k in ("IS", "N", "CJO", "VJ", "M", "FC", "TT", "IBV", "EG", "XTI", "ISR", "NR", "IKF"):
        assert j["params"][k] > 0 and math.isfinite(j["params"][k]), k
    # a card fitted to the solver writes RS = 0 where its drop in the window is below 1e-3 Vt
    assert j["params"]["RS"] >= 0 and math.isfinite(j["params"]["RS"])
    for side in ("p", "n"):
        for k in ("doping", "minority_mobility", "majority_mobility", "diffusivity", "lifetime",
                  "diffusion_length", "neutral_width", "w_over_l", "finite_width_factor",
                  "saturation_current_density"):
            assert j["derived"][side][k] > 0, (side, k)
        assert j["derived"][side]["regime"] in ("short", "medium", "long")


def test_card_numbers_round_trip_json(tmp_path):
    f = write(tmp_path, GOOD)
    card = run("card", f, "-q").stdout
    j = json.loads(run("card", f, "--format", "json", "-q").stdout)
    values = dict(ln[2:].split("=", 1) for ln in card.splitlines() if ln.startswith("+ ") and "=" in ln)
    for k in ("IS", "RS", "CJO", "VJ", "TT", "BV"):
        assert float(values[k]) == j["params"][k]  # exact: enough digits to round-trip


def test_output_is_deterministic_and_atomic(tmp_path):
    f = write(tmp_path, GOOD)
    out = tmp_path / "card.lib"
    assert run("card", f, "-o", str(out), "-q").exit_code == 0
    first = out.read_bytes()
    assert run("card", f, "-o", str(out), "-q").exit_code == 0
    assert out.read_bytes() == first
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".modelgen-")]


BAD = [
    ("bare number", GOOD.replace('area = "1e-4 cm^2"', "area = 1e-4"), "area", "bare number"),
    ("no unit", GOOD.replace('"1e-4 cm^2"', '"1e-4"'), "area", "no unit"),
    ("wrong dimension", GOOD.replace('thickness = "1 um"', 'thickness = "1 V"'), "p.thickness", "not a unit of length"),
    ("negative size", GOOD.replace('thickness = "1 um"', 'thickness = "-1 um"'), "p.thickness", "positive"),
    ("zero area", GOOD.replace('"1e-4 cm^2"', '"0 cm^2"'), "area", "positive"),
    ("unknown key", GOOD.replace("[n]", "[n]\ndopping = \"1e16 cm^-3\""), "n.dopping", "unknown key"),
    ("unknown top key", "colour = \"red\"\n" + GOOD, "colour", "unknown key"),
    ("missing area", GOOD.replace('area = "1e-4 cm^2"', ""), "area", "required"),
    ("missing doping", GOOD.replace('doping = "1e16 cm^-3"', ""), "n.doping", "required"),
    ("both widths", GOOD.replace('thickness = "50 um"', 'thickness = "50 um"\nneutral_width = "40 um"'),
     "n.thickness", "not both"),
    ("non-finite", GOOD.replace('"100 ns"', '"1e999 ns"'), "p.lifetime", "finite"),
    ("nan", GOOD.replace('"100 ns"', '"nan ns"'), "p.lifetime", "not a number"),
    ("unknown material", 'material = "unobtainium"\n' + GOOD, "material", "known: silicon"),
    ("bad name", GOOD.replace('"DOK"', '"1bad name"'), "name", "valid model name"),
    ("depleted through", GOOD.replace('thickness = "50 um"', 'thickness = "0.05 um"'), "n.thickness",
     "depleted through"),
    ("toml syntax", GOOD + "\n[p\n", None, "not valid TOML"),
    ("bad unit", GOOD.replace('"100 ns"', '"100 fortnights"') .replace("fortnights", "blorps"), "p.lifetime",
     "unknown unit"),
    ("fc range", GOOD + "[card]\nfc = 1.5\n", "card.fc", "above"),
    ("linear without grading", 'profile = "linear"\n' + GOOD, "grading", "needs grading"),
    ("perimeter alone", 'perimeter = "1 mm"\n' + GOOD, "perimeter", "go together"),
]


@pytest.mark.parametrize("case,text,key,words", BAD, ids=[b[0] for b in BAD])
def test_bad_input_is_one_line_exit_2_and_no_output(tmp_path, case, text, key, words):
    f = write(tmp_path, text)
    out = tmp_path / "existing.lib"
    out.write_text("previous contents\n")
    before = os.stat(out).st_mtime_ns
    r = run("card", f, "-o", str(out))
    assert r.exit_code == 2
    err = r.stderr.strip().splitlines()
    assert len(err) == 1, err
    assert "Traceback" not in r.output and "Traceback" not in r.stderr
    assert f in err[0]
    if key:
        assert f": {key}: " in err[0]
    assert words in err[0]
    assert out.read_text() == "previous contents\n" and os.stat(out).st_mtime_ns == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["dev.toml", "existing.lib"]


def test_missing_file_is_exit_2():
    r = run("card", "/nonexistent/dev.toml")
    assert r.exit_code == 2 and "no such file" in r.stderr


def test_help_explains_the_command():
    r = run("card", "--help")
    assert r.exit_code == 0
    for word in ("DEVICE.toml", "--output", "--format", "json", "atomically"):
        assert word in r.stdout


def test_written_files_get_ordinary_permissions(tmp_path):
    # an atomic write goes through a temporary file; the output must not keep mkstemp's 0600
    f = write(tmp_path, GOOD)
    out = tmp_path / "card.lib"
    assert run("card", f, "-o", str(out), "-q").exit_code == 0
    mask = os.umask(0)
    os.umask(mask)
    assert (os.stat(out).st_mode & 0o777) == (0o666 & ~mask)


def test_a_directory_as_the_input_is_one_line(tmp_path):
    for args in (["card", str(tmp_path)], ["corners", str(tmp_path)]):
        r = run(*args)
        assert r.exit_code == 2
        assert r.stderr.count("\n") == 1 and "is a directory" in r.stderr and "Usage" not in r.stderr


def test_text_slips_are_gone(tmp_path):
    # "expected a area", "1 cards", "5 th percentile": each message reads as plain English
    bad = write(tmp_path, GOOD.replace('area = "1e-4 cm^2"', 'area = "3 blorps"'))
    r = run("card", bad)
    assert r.exit_code == 2 and "expected a unit of area" in r.stderr and "a area" not in r.stderr
    r = run("card", write(tmp_path, GOOD), "-q")
    assert " 1 cards" not in r.stdout and ": diode model card, modelgen" in r.stdout
    lot = tmp_path / "lot.csv"
    lot.write_text("name,area [um^2],p.doping [cm^-3],p.thickness [um],p.lifetime [ns],n.doping [cm^-3],"
                   "n.thickness [um],n.lifetime [us]\n"
                   + "\n".join(f"D{i},1e4,1e18,1,10,{1e16 * (1 + i / 10):g},50,1" for i in range(21)) + "\n")
    r = run("lots", lot, "-o", tmp_path / "lot.lib", "--dialect", "ngspice", "--corners", "5,50,95", "-q")
    assert r.exit_code == 0, r.output
    text = (tmp_path / "lot.lib").read_text()
    assert "the row at the 5th percentile of IS" in text and "50th" in text and "95th" in text
    assert " th percentile" not in text


@pytest.mark.parametrize("args, says", [
    (["card", "examples/switching_diode.toml", "--dialect", "nosuch"], "'nosuch' is not one of"),
    (["cardx"], "No such command 'cardx'"),
    (["card"], "Missing argument"),
    (["corners", "examples/switching_diode.toml", "--step", "fast"], "'fast' is not a valid float"),
    (["lots", "examples/lot_table.csv"], "Missing option '-o'"),
])
def test_usage_errors_are_one_line(args, says):
    # a bad option or a missing argument is bad input like any other: one line, exit 2, no usage dump
    r = run(*args)
    assert r.exit_code == 2
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("modelgen: error: ") and says in lines[0], r.stderr
    assert "--help" in lines[0]


def test_help_and_version_still_print_and_exit_0():
    assert run("--version").exit_code == 0
    r = run("corners", "--help")
    assert r.exit_code == 0 and "corners [OPTIONS] DEVICE.toml" in r.stdout  # (in-process the program is "main")

"""Measured I-V and C-V files: units in brackets, sweeps, compliance, noise floor, bad input.

Unit conversions are checked against hand conversions from the SI prefixes and
the Celsius scale (BIPM, *The International System of Units*, 9th ed., 2019:
m = 1e-3, u = 1e-6, n = 1e-9, p = 1e-12, f = 1e-15; T/K = t/degC + 273.15).
The expected points left out are those the test files were written to hold.
"""

from __future__ import annotations

import csv

import numpy as np
import pytest
from support import ROOT

from modelgen import measurements
from modelgen.errors import InputError
from modelgen.measurements import read_curve

MEASURED = ROOT / "examples" / "measured"


def write(tmp_path, text, name="m.csv"):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return str(path)


def iv_rows(v, i, extra=""):
    return "".join(f"{float(a)!r}, {float(b)!r}{extra}\n" for a, b in zip(v, i))


# ------------------------------------------------------------------------------------- units

def test_units_in_brackets_convert_to_si(tmp_path):
    path = write(tmp_path, "V [mV], I [nA], T [degC], area [mm^2], perimeter [um]\n"
                           "100, 2, 27, 0.01, 400\n200, 30, 27, 0.01, 400\n300, 500, 27, 0.01, 400\n")
    c = read_curve(path, "iv")
    assert c.v == pytest.approx([0.1, 0.2, 0.3], rel=1e-15)               # 1 mV = 1e-3 V
    assert c.y == pytest.approx([2e-9, 30e-9, 500e-9], rel=1e-15)         # 1 nA = 1e-9 A
    assert c.temperature == pytest.approx([300.15] * 3, rel=1e-15)        # 27 degC = 300.15 K
    assert c.area == pytest.approx([1e-8] * 3, rel=1e-15)                 # 0.01 mm^2 = 0.01 * 1e-6 m^2
    assert c.perimeter == pytest.approx([400e-6] * 3, rel=1e-15)          # 400 um = 4e-4 m
    assert c.line.tolist() == [2, 3, 4]


def test_capacitance_units_and_kelvin(tmp_path):
    path = write(tmp_path, "V [V], C [fF], T [K], area [um^2]\n-2, 1500, 233.15, 2500\n-1, 1800, 233.15, 2500\n"
                           "0, 2500, 233.15, 2500\n")
    c = read_curve(path, "cv")
    assert c.y == pytest.approx([1.5e-12, 1.8e-12, 2.5e-12], rel=1e-15)   # 1 fF = 1e-15 F
    assert c.temperature == pytest.approx([233.15] * 3, rel=1e-15)
    assert c.area == pytest.approx([2.5e-9] * 3, rel=1e-15)               # 1 um^2 = 1e-12 m^2
    assert np.isnan(c.perimeter).all() and (c.group == "").all()
    path = write(tmp_path, "V [V], C [pF]\n-1, 2.5\n0, 3\n0.3, 3.5\n", "pf.csv")
    assert read_curve(path, "cv").y == pytest.approx([2.5e-12, 3e-12, 3.5e-12], rel=1e-15)  # 1 pF = 1e-12 F


def test_comment_lines_skipped_and_lines_counted_as_an_editor_does(tmp_path):
    path = write(tmp_path, "# invented\n# scenario\nV [V], I [A]\n0.1, 1e-9\n# a remark\n\n0.2, 1e-8\n0.3, 1e-7\n")
    c = read_curve(path, "iv")
    assert c.line.tolist() == [4, 7, 8]
    crlf = write(tmp_path, "# x\r\nV [V], I [A]\r\n0.1, 1e-9\r\n0.2, 1e-8\r\n0.3, 1e-7\r\n", "crlf.csv")
    assert read_curve(crlf, "iv").line.tolist() == [3, 4, 5]


# ------------------------------------------------------------------------------------- sweeps and groups

def test_groups_and_sweeps_split(tmp_path):
    rows = []
    for wafer in ("W1", "W2"):
        for t in (27, 125):
            rows += [f"{wafer}, {v}, {1e-9 * 10 ** k}, {t}" for k, v in enumerate((0.1, 0.2, 0.3, 0.4))]
    rows += [f"W1, {v}, {-1e-9 * 10 ** k}, 27" for k, v in enumerate((-0.1, -0.5, -1.0))]  # a falling sweep
    path = write(tmp_path, "wafer, V [V], I [A], T [degC]\n" + "\n".join(rows) + "\n")
    c = read_curve(path, "iv", group="wafer")
    sweeps = c.sweeps()
    assert [s.tolist() for s in sweeps] == [[0, 1, 2, 3], [4, 5, 6, 7], [8, 9, 10, 11], [12, 13, 14, 15],
                                           [16, 17, 18]]
    assert c.group[sweeps[2]].tolist() == ["W2"] * 4
    assert c.temperature[sweeps[1]] == pytest.approx([398.15] * 4)
    assert c.use.all() and c.notes == []
    part = c.take(c.group == "W2")
    assert len(part) == 8 and part.line.tolist() == c.line[8:16].tolist() and len(part.sweeps()) == 2


def test_geometry_changes_start_a_sweep(tmp_path):
    path = write(tmp_path, "V [V], I [A], area [um^2], perimeter [um]\n"
                           + iv_rows([0.1, 0.2, 0.3], [1e-9, 1e-8, 1e-7], ", 100, 40")
                           + iv_rows([0.1, 0.2, 0.3], [1e-9, 1e-8, 1e-7], ", 100, 50")
                           + iv_rows([0.1, 0.2, 0.3], [1e-9, 1e-8, 1e-7], ", 400, 50"))
    assert [s.tolist() for s in read_curve(path, "iv").sweeps()] == [[0, 1, 2], [3, 4, 5], [6, 7, 8]]


# ------------------------------------------------------------------------------------- compliance

def exponential(v):
    return 1e-14 * np.exp(np.asarray(v) / 0.025)


def test_compliance_found_at_the_end_of_a_sweep(tmp_path):
    v = np.round(np.arange(1, 11) * 0.05, 3)                 # 0.05 .. 0.5 V
    i = exponential(v)                                       # 7e-14 .. 4.9e-6 A
    i[-3:] = [1e-6, 1.0004e-6, 0.9998e-6]                    # the last three read a 1 uA compliance
    path = write(tmp_path, "# header comment\nV [V], I [A]\n" + iv_rows(v, i))
    c = read_curve(path, "iv")
    assert c.line[~c.use].tolist() == [10, 11, 12]
    assert c.notes == [(f"{path}: 3 points at the 1 uA compliance (found: the largest current repeated at the end "
                        "of a sweep) left out (lines 10-12)")]


def test_compliance_found_in_reverse(tmp_path):
    v = [-3.0, -2.0, -1.5, -1.0, -0.5, -0.2]
    i = [-1e-3, -1e-3, -0.6e-3, -1e-6, -1e-9, -1e-10]        # the two most negative biases at -1 mA
    c = read_curve(write(tmp_path, "V [V], I [mA]\n" + iv_rows(v, np.array(i) * 1e3)), "iv")
    assert c.line[~c.use].tolist() == [2, 3]


def test_one_largest_point_is_not_compliance(tmp_path):
    v = np.arange(1, 8) * 0.05
    c = read_curve(write(tmp_path, "V [V], I [A]\n" + iv_rows(v, exponential(v))), "iv")
    assert c.use.all() and c.notes == []


def test_compliance_stated(tmp_path):
    v = np.arange(1, 9) * 0.05
    i = np.minimum(exponential(v), 1e-7)                     # 1e-7 A reached at 0.35 V (1e-14 e^14 = 1.2e-8: no)
    i[-1] = 1e-7
    c = read_curve(write(tmp_path, "V [V], I [A]\n" + iv_rows(v, i)), "iv", compliance=1e-7)
    assert c.line[~c.use].tolist() == [9]
    assert "at the 100 nA compliance (stated) left out (line 9)" in c.notes[0]


# ------------------------------------------------------------------------------------- noise floor

def test_noise_floor_found_below_the_monotonic_rise(tmp_path):
    v = np.round(np.arange(1, 13) * 0.05, 3)                 # 0.05 .. 0.6 V
    i = exponential(v)
    i[:4] = [3e-13, -2e-13, 4e-13, 1e-13]                    # the instrument's noise, not the diode
    c = read_curve(write(tmp_path, "V [V], I [A]\n" + iv_rows(v, i)), "iv")
    # left out: the four noise points, and 1e-14 e^10 = 2.2e-10 A is far above twice the 0.4 pA level
    assert c.line[~c.use].tolist() == [2, 3, 4, 5]
    assert "4 points at the noise floor" in c.notes[0] and "level 400 fA" in c.notes[0]


def test_a_dip_among_large_currents_is_not_the_floor(tmp_path):
    v = np.round(np.arange(1, 13) * 0.05, 3)
    i = exponential(v)                                       # 7e-14 .. 2.6e-4 A
    i[-2] = i[-1] * 1.01                                     # a dip at the top (heating, noise): not a floor
    c = read_curve(write(tmp_path, "V [V], I [A]\n" + iv_rows(v, i)), "iv")
    assert c.use.all() and c.notes == []


def test_units_with_unicode_spellings(tmp_path):
    c = read_curve(write(tmp_path, "V [V], I [µA], T [°C]\n0.1, 1, 25\n0.2, 2, 25\n0.3, 4, 25\n"), "iv")
    assert c.y == pytest.approx([1e-6, 2e-6, 4e-6], rel=1e-15)          # 1 uA = 1e-6 A
    assert c.temperature == pytest.approx([298.15] * 3, rel=1e-15)      # 25 degC = 298.15 K


def test_noise_floor_level_also_applies_to_reverse_points(tmp_path):
    v = [-2.0, -1.0, -0.5, 0.05, 0.1, 0.15, 0.2, 0.3, 0.4]
    i = [-5e-12, -6e-13, -3e-13, 4e-13, -1e-13, 1e-12, 1e-11, 1e-10, 1e-9]
    c = read_curve(write(tmp_path, "V [V], I [A]\n" + iv_rows(v, i)), "iv")
    # forward noise up to 0.1 V (level 0.4 pA); reverse points not above 0.8 pA go too
    assert c.line[~c.use].tolist() == [3, 4, 5, 6]


def test_noise_floor_stated(tmp_path):
    v = np.arange(1, 9) * 0.05
    c = read_curve(write(tmp_path, "V [V], I [A]\n" + iv_rows(v, exponential(v))), "iv", floor=1e-12)
    # 1e-14 e^2 = 7.4e-14, e^4 = 5.5e-13, e^6 = 4.0e-12: two points below 1 pA
    assert c.line[~c.use].tolist() == [2, 3]
    assert "below the 1 pA noise floor (stated)" in c.notes[0]


def test_a_sweep_left_too_short_is_left_out_whole(tmp_path):
    rows = iv_rows([0.1, 0.2, 0.3, 0.4], [1e-9, 1e-8, 1e-7, 1e-6], ", 27")
    rows += iv_rows([0.1, 0.2, 0.3, 0.4], [1e-13, 1e-12, 1e-3, 1e-3], ", 125")  # 2 compliance, 2 usable
    c = read_curve(write(tmp_path, "V [V], I [A], T [degC]\n" + rows), "iv")
    assert c.line[~c.use].tolist() == [6, 7, 8, 9]
    assert any("sweeps left with fewer than 3 usable points left out (lines 6-7)" in n for n in c.notes)


# ------------------------------------------------------------------------------------- bad input

GOOD = "V [V], I [A]\n0.1, 1e-9\n0.2, 1e-8\n0.3, 1e-7\n"

BAD = [
    # (text, kind, options, line, column, words in the message)
    ("V, I [A]\n0.1, 1e-9\n0.2, 1e-8\n0.3, 1e-7\n", "iv", {}, 1, "V", "no unit"),
    ("# c\nV [V], I [V]\n0.1, 1e-9\n0.2, 1e-8\n0.3, 1e-7\n", "iv", {}, 2, "I", "not a unit of current"),
    ("V [V], C [A]\n0.1, 1\n0.2, 1\n0.3, 1\n", "cv", {}, 1, "C", "not a unit of capacitance"),
    ("V [V], I [A], T [m]\n0.1, 1e-9, 1\n0.2, 1e-8, 1\n0.3, 1e-7, 1\n", "iv", {}, 1, "T", "not a unit of temperature"),
    ("V [V], I [A], area [um]\n0.1, 1e-9, 1\n0.2, 1e-8, 1\n0.3, 1e-7, 1\n", "iv", {}, 1, "area", "not a unit of area"),
    ("I [A]\n1e-9\n1e-8\n1e-7\n", "iv", {}, 1, "V", "no bias column"),
    ("V [V]\n0.1\n0.2\n0.3\n", "iv", {}, 1, "I", "no current column"),
    ("V [V], I [A]\n0.1, 1\n0.2, 1\n0.3, 1\n", "cv", {}, 1, "I", "current column in a C-V file"),
    ("V [V], I [A]\n0.1, 1e-9\n0.2, nan\n0.3, 1e-7\n", "iv", {}, 3, "I", "not a finite number"),
    ("V [V], I [A]\n0.1, 1e-9\n0.2, 1e-8\ninf, 1e-7\n", "iv", {}, 4, "V", "not a finite number"),
    ("V [V], I [A]\n0.1, 1e-9\n0.2, abc\n0.3, 1e-7\n", "iv", {}, 3, "I", "not a number"),
    ("V [V], I [A]\n0.1, 1e-9\n0.2, \n0.3, 1e-7\n", "iv", {}, 3, "I", "empty cell"),
    ("V [V], C [pF]\n-1, 2\n0, 0\n0.3, 3\n", "cv", {}, 3, "C", "at or below zero"),
    ("V [V], C [pF]\n-1, 2\n0, -3\n0.3, 3\n", "cv", {}, 3, "C", "at or below zero"),
    ("V [V], I [A]\n0.1, 1e-9\n0.3, 1e-8\n0.2, 1e-7\n", "iv", {}, 4, "V", "turns back"),
    ("V [V], I [A]\n0.1, 1e-9\n0.1, 1e-8\n0.2, 1e-7\n", "iv", {}, 3, "V", "repeats"),
    ("V [V], I [A], T [degC]\n0.1, 1e-9, 27\n0.2, 1e-8, 27\n0.1, 1e-9, 27\n0.2, 1e-8, 27\n", "iv", {}, 4, "V",
     "strictly monotonic"),
    ("V [V], I [A], T [K]\n0.1, 1e-9, 300\n0.2, 1e-8, 300\n0.3, 1e-7, 300\n0.1, 1e-9, 350\n0.2, 1e-8, 350\n",
     "iv", {}, 5, "V", "a sweep of 2 points"),
    ("V [V], I [A], T [K]\n0.1, 1e-9, 0\n0.2, 1e-8, 0\n0.3, 1e-7, 0\n", "iv", {}, 2, "T", "absolute zero"),
    ("wafer, V [V], I [A]\nW1, 0.1, 1e-9\nW1, 0.2, 1e-8\nW1, 0.3, 1e-7\n", "iv", {}, 2, "wafer",
     "pass its name as the group"),
    (GOOD, "iv", {"group": "lot"}, 1, "lot", "no such column"),
    ("V [V], I [A]\n0.1, 1e-9\n0.2\n0.3, 1e-7\n", "iv", {}, 3, "columns", "has 1 cells"),
    ("V [V], I [A], V [mV]\n0.1, 1e-9, 1\n0.2, 1e-8, 2\n0.3, 1e-7, 3\n", "iv", {}, 1, "V", "given twice"),
    ("V [V], I [A]\n0.1, 1e-9\n0.2, 1e-8\n0.3, 1e-7\n", "iv", {"floor": 1e-7}, 2, "I", "only 0 points usable"),
]


@pytest.mark.parametrize("text, kind, options, line, column, words", BAD, ids=[b[5] + f"-{k}" for k, b in enumerate(BAD)])
def test_bad_input_is_one_located_error(tmp_path, text, kind, options, line, column, words):
    path = write(tmp_path, text)
    with pytest.raises(InputError) as e:
        read_curve(path, kind, **options)
    assert (e.value.file, e.value.row, e.value.key) == (path, line, column)
    message = str(e.value)
    assert words in message and "\n" not in message and message.startswith(f"{path}: line {line}: {column}: ")


def test_file_errors_name_the_file(tmp_path, monkeypatch):
    empty = write(tmp_path, "# only a comment\n", "empty.csv")
    with pytest.raises(InputError, match="no header") as e:
        read_curve(empty, "iv")
    assert e.value.file == empty
    with pytest.raises(InputError, match="no such file"):
        read_curve(str(tmp_path / "absent.csv"), "iv")
    monkeypatch.setattr(measurements, "READ_LIMIT", 16)
    with pytest.raises(InputError, match="larger than 16 bytes") as e:
        read_curve(write(tmp_path, GOOD, "big.csv"), "iv")
    assert e.value.file.endswith("big.csv")


def test_floor_and_compliance_are_for_iv_only(tmp_path):
    path = write(tmp_path, "V [V], C [pF]\n-1, 2\n0, 3\n0.3, 4\n")
    with pytest.raises(InputError, match="I-V files only") as e:
        read_curve(path, "cv", floor=1e-12)
    assert e.value.key == "floor"


def test_unknown_numeric_column_is_noted_not_used(tmp_path):
    c = read_curve(write(tmp_path, "t [s], V [V], I [A]\n0, 0.1, 1e-9\n1, 0.2, 1e-8\n2, 0.3, 1e-7\n"), "iv")
    assert c.use.all() and len(c.notes) == 1 and "column 't' not used" in c.notes[0]


# ------------------------------------------------------------------------------------- the examples

def data_lines(path):
    """Lines of a CSV that are neither blank, nor # comments, nor the header (counted without modelgen)."""
    with open(path, encoding="utf-8") as fh:
        rows = [r for r in csv.reader(fh) if r and not r[0].lstrip().startswith("#")]
    return len(rows) - 1


@pytest.mark.parametrize("name, kind, group, sweeps", [("testchip_iv.csv", "iv", None, 9),
                                                      ("testchip_cv.csv", "cv", None, 9),
                                                      ("lot_iv.csv", "iv", "wafer", 3),
                                                      ("lot_cv.csv", "cv", "wafer", 3)])
def test_example_files_read(name, kind, group, sweeps):
    path = MEASURED / name
    c = read_curve(path, kind, group=group)
    assert len(c) == data_lines(path)
    assert len(c.sweeps()) == sweeps  # 3 geometries x 3 temperatures, or 3 wafers (make_measurements.py)
    if kind == "cv":
        assert len(c) == 13 * sweeps and c.use.all()  # 13 biases per C-V sweep (make_measurements.py)
        return
    # the 10 mA compliance of make_measurements.py is found and every sweep reaching it loses its end
    assert any("at the 10 mA compliance" in n for n in c.notes)
    for s in c.sweeps():
        used = s[c.use[s] & (c.v[s] > 0)]
        assert np.all(np.diff(c.y[used]) > 0) and np.all(c.y[used] > 0)  # what is kept rises steadily
        assert np.abs(c.y[s][c.use[s]]).max() < 10e-3
    if group:
        assert sorted(set(c.group)) == ["W01", "W02", "W03"]


def test_reading_is_deterministic():
    a = read_curve(MEASURED / "testchip_iv.csv", "iv")
    b = read_curve(MEASURED / "testchip_iv.csv", "iv")
    for name in ("v", "y", "line", "temperature", "area", "perimeter", "use"):
        assert np.array_equal(getattr(a, name), getattr(b, name), equal_nan=True)
    assert a.notes == b.notes and a.group.tolist() == b.group.tolist()


# ------------------------------------------------------------------------------------- temperature jitter

def test_a_wandering_chuck_temperature_is_one_sweep_at_its_median(tmp_path):
    # a logged temperature that moves by 0.1-0.3 K from point to point is one sweep (a chuck's regulation;
    # common practice), taken at its median; a step of 2 K starts a new sweep. Celsius to kelvin: +273.15 (BIPM)
    jitter = [27.1, 26.9, 27.2, 27.0, 26.8]
    rows = "".join(f"{0.1 * (k + 1)!r}, {1e-9 * 10 ** k!r}, {t!r}\n" for k, t in enumerate(jitter))
    rows += "".join(f"{0.1 * (k + 1)!r}, {2e-9 * 10 ** k!r}, {t!r}\n" for k, t in enumerate([85.0, 85.1, 84.9]))
    c = read_curve(write(tmp_path, "V [V], I [A], T [degC]\n" + rows), "iv", floor=1e-12)
    sweeps = c.sweeps()
    assert [len(s) for s in sweeps] == [5, 3]
    assert c.temperature[:5] == pytest.approx([27.0 + 273.15] * 5, abs=1e-9)
    assert c.temperature[5:] == pytest.approx([85.0 + 273.15] * 3, abs=1e-9)
    assert sum("taken as its median" in n for n in c.notes) == 2


def test_a_temperature_step_beyond_the_tolerance_splits_the_sweep(tmp_path):
    rows = "".join(f"{0.1 * (k + 1)!r}, {1e-9 * 10 ** k!r}, {t!r}\n" for k, t in enumerate([27.0, 27.0, 27.0]))
    rows += "".join(f"{0.1 * (k + 1)!r}, {1e-9 * 10 ** k!r}, {t!r}\n" for k, t in enumerate([28.0, 28.0, 28.0]))
    c = read_curve(write(tmp_path, "V [V], I [A], T [degC]\n" + rows), "iv", floor=1e-12)
    assert [len(s) for s in c.sweeps()] == [3, 3]
    assert not any("median" in n for n in c.notes)

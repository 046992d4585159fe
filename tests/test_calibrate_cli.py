"""modelgen calibrate from the command line: one device, groups into a lot table, lots and check after it.

The measured files are synthetic (examples/measured/make_measurements.py: the numerical solver on an invented
device, with noise and a compliance), so the truth is known: the generator's inputs, read here from its own
module, not from any result modelgen computed.
"""

from __future__ import annotations

import csv
import importlib.util
import json

import pytest

from modelgen import description, extraction
from support import ROOT, need, run

MEASURED = ROOT / "examples" / "measured"
DEVICE = MEASURED / "testchip.toml"


def _truth():
    spec = importlib.util.spec_from_file_location("make_measurements", MEASURED / "make_measurements.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)  # defines constants and functions only; main() is not run
    return module


def test_calibrated_description_loads_and_recovers_the_light_side(tmp_path):
    out = tmp_path / "cal.toml"
    res = run("calibrate", DEVICE, "--iv", MEASURED / "testchip_iv.csv", "--cv", MEASURED / "testchip_cv.csv",
              "--free", "n.doping,n.lifetime,recombination_lifetime", "-o", out)
    assert res.exit_code == 0, res.output
    text = out.read_text()
    assert text.startswith("# Calibrated by modelgen against: ")
    assert "# calibrated: standard error" in text
    r = extraction.derive(description.load(out))          # every other command takes it
    true = description.load(DEVICE)
    assert r.device.n.doping[0] == pytest.approx(true.n.doping[0], rel=0.02)   # the 2 %
    assert "residuals (model against measured): recombination rms" in res.output  # printed, as in the file
    assert run("card", out, "-q").exit_code == 0


def test_json_gives_values_errors_correlation_residuals():
    res = run("calibrate", DEVICE, "--iv", MEASURED / "testchip_iv.csv", "--cv", MEASURED / "testchip_cv.csv",
              "--free", "n.doping,n.lifetime", "--format", "json", "-q")
    assert res.exit_code == 0, res.output
    d = json.loads(res.stdout)
    assert set(d["fitted"]) == {"n.doping", "n.lifetime"}
    for v in d["fitted"].values():
        assert v["value"] > 0 and v["stderr"] > 0
    assert d["correlation"]["keys"] == ["n.doping", "n.lifetime"]
    assert d["correlation"]["matrix"][0][0] == pytest.approx(1.0)
    assert "capacitance" in d["residuals"] and "ideal" in d["residuals"]
    assert any("compliance" in n for n in d["measurement_notes"])


def test_groups_become_a_lot_table_that_lots_and_check_take(tmp_path):
    """The issue's end to end: calibrate --by wafer, then lots, then check; each wafer's light-side doping
    within 2.5 % of the value its data were made with."""
    truth = _truth().WAFERS
    table = tmp_path / "lot.csv"
    res = run("calibrate", DEVICE, "--iv", MEASURED / "lot_iv.csv", "--cv", MEASURED / "lot_cv.csv",
              "--by", "wafer", "-o", table)
    assert res.exit_code == 0, res.output
    rows = list(csv.DictReader(table.open()))
    assert [r["name"] for r in rows] == [f"DTC_DEMO_{w}" for w in sorted(truth)]
    for r in rows:
        nd = float(r["n.doping [m^-3]"]) / 1e6
        assert nd == pytest.approx(truth[r["name"].rsplit("_", 1)[1]][0], rel=0.025)
        assert float(r["n.doping.stderr [m^-3]"]) > 0
    lib = tmp_path / "lot.lib"
    res = run("lots", table, "-o", lib, "--dialect", "ngspice")
    assert res.exit_code == 0, res.output
    need("ngspice")
    res = run("check", lib)
    assert res.exit_code == 0, res.output


@pytest.mark.parametrize("args, words", [
    ((), "--iv IV.csv and/or --cv CV.csv"),
    (("--iv", MEASURED / "testchip_iv.csv", "--free", "n.colour"), "n.colour"),
    (("--iv", MEASURED / "missing.csv"), "missing.csv"),
    (("--iv", MEASURED / "testchip_iv.csv", "--compliance", "ten"), "--compliance"),
])
def test_bad_requests_are_one_line(args, words):
    res = run("calibrate", DEVICE, *args)
    assert res.exit_code == 2
    assert words in res.output and "Traceback" not in res.output
    assert len(res.output.strip().splitlines()) == 1


def test_numeric_physics_recovers_each_wafer(tmp_path):
    """With the solver correcting the closed forms, each wafer's light-side doping within 1 % and lifetime
    within 3 % of the values its data were made with, and the contact resistance within three standard
    errors of its true 2 ohm."""
    truth = _truth().WAFERS
    res = run("calibrate", DEVICE, "--iv", MEASURED / "lot_iv.csv", "--cv", MEASURED / "lot_cv.csv", "--by", "wafer",
              "--physics", "numeric", "--free", "n.doping,n.lifetime,contact_resistance", "--format", "json", "-q")
    assert res.exit_code == 0, res.output
    groups = json.loads(res.stdout)["groups"]
    for wafer, (nd, tau) in truth.items():
        f = groups[wafer]["fitted"]
        assert f["n.doping"]["value"] / 1e6 == pytest.approx(nd, rel=0.01)
        assert f["n.lifetime"]["value"] == pytest.approx(tau, rel=0.03)
        rc = f["contact_resistance"]
        assert abs(rc["value"] - 2.0) < 3 * rc["stderr"]
        assert groups[wafer]["notes"][0].startswith("solver correction: ")


def test_curves_at_several_temperatures_fit_the_lifetime_law(tmp_path):
    """The test chip's curves at -40, 27 and 125 degC free the lifetime temperature exponent by default; the
    data were made with lifetimes that do not change with temperature (exponent 0: the generator's
    description leaves it at its default), and the fit finds it within three standard errors of 0."""
    out = tmp_path / "cal.toml"
    res = run("calibrate", DEVICE, "--iv", MEASURED / "testchip_iv.csv", "--cv", MEASURED / "testchip_cv.csv",
              "--format", "json", "-q")
    assert res.exit_code == 0, res.output
    doc = json.loads(res.stdout)
    f = doc["fitted"]["lifetime_temperature_exponent"]
    assert abs(f["value"]) < 3 * f["stderr"] + 1e-3 and f["stderr"] < 0.5
    # the IS(T) check after the fit: the ideal region's median residual at each of the three temperatures
    by_t = doc["residuals"]["ideal by temperature"]
    assert sorted(by_t) == ["233.15 K", "300.15 K", "398.15 K"]
    assert all(abs(r) < 0.05 for r in by_t.values()), by_t
    res = run("calibrate", DEVICE, "--iv", MEASURED / "testchip_iv.csv", "--cv", MEASURED / "testchip_cv.csv",
              "-o", out)
    assert res.exit_code == 0, res.output
    assert description.load(out).lifetime_exponent[0] == pytest.approx(f["value"], rel=1e-5)


def test_several_geometries_separate_the_sidewall():
    """Three perimeter-to-area ratios free the sidewall height (junction_depth) by default; the data were
    made with 0.5 um (the generator's description) and the fit finds it within two standard errors."""
    res = run("calibrate", DEVICE, "--iv", MEASURED / "testchip_iv.csv", "--cv", MEASURED / "testchip_cv.csv",
              "--format", "json", "-q")
    assert res.exit_code == 0, res.output
    f = json.loads(res.stdout)["fitted"]["junction_depth"]
    true = description.load(DEVICE).junction_depth[0]
    assert abs(f["value"] - true) < 2 * f["stderr"] and f["stderr"] < 0.3 * true

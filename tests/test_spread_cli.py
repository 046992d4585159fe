"""modelgen spread from the command line: seeded and reproducible, JSON in SI, bad requests one line."""

from __future__ import annotations

import json

import pytest

from support import run

#: An invented device with a [spread] table (a demo scenario, not a real process).
DEVICE = """name = "DSP"
area = "0.01 mm^2"
[p]
doping = "1e19 cm^-3"
thickness = "1 um"
lifetime = "10 ns"
[n]
doping = "5e16 cm^-3"
thickness = "5 um"
lifetime = "1 us"
[spread]
"n.doping" = { sigma = "5 %", distribution = "lognormal", shared = "global" }
"n.lifetime" = { sigma = "20 %", distribution = "lognormal", shared = "global" }
"""


@pytest.fixture
def device(tmp_path):
    path = tmp_path / "spread.toml"
    path.write_text(DEVICE)
    return path


def test_same_seed_same_bytes_other_seed_other_numbers(device):
    a = run("spread", device, "--samples", "500", "--seed", "11")
    b = run("spread", device, "--samples", "500", "--seed", "11")
    c = run("spread", device, "--samples", "500", "--seed", "12")
    assert a.exit_code == 0, a.output
    assert a.stdout == b.stdout and a.stdout != c.stdout


def test_json_statistics_in_si(device):
    res = run("spread", device, "--samples", "2000", "--figure", "VF@1mA", "--figure", "C@-1V", "--format", "json")
    assert res.exit_code == 0, res.output
    d = json.loads(res.stdout)
    assert d["samples"] == 2000 and set(d["figures"]) == {"VF@1mA", "C@-1V"}
    vf = d["figures"]["VF@1mA"]
    assert vf["unit"] == "V" and 0.4 < vf["p5"] <= vf["p50"] <= vf["p95"] < 1.0
    # a 5 % lognormal doping spreads the depletion capacitance by about half of that (C ~ sqrt(N) for a
    # one-sided abrupt junction, Sze & Ng 2007, ch. 2): 2.5 % within sampling and second-order terms
    c = d["figures"]["C@-1V"]
    assert c["std"] / c["mean"] == pytest.approx(0.025, rel=0.15)


@pytest.mark.parametrize("args, words", [(("--figure", "VF@bad"), "VF@bad"), (("--kind", "odd"), "--kind")])
def test_bad_requests_are_one_line(device, args, words):
    res = run("spread", device, *args)
    assert res.exit_code == 2 and words in res.output and "Traceback" not in res.output
    assert len(res.output.strip().splitlines()) == 1


def test_a_description_without_spread_is_refused(tmp_path):
    path = tmp_path / "plain.toml"
    path.write_text(DEVICE.split("[spread]")[0])
    res = run("spread", path)
    assert res.exit_code == 2 and "no [spread] table" in res.output


def test_a_sample_the_physics_refuses_is_named(tmp_path):
    # a thin, lightly doped side whose drawn doping and thickness leave no neutral region at the reference
    # bias (the depletion approximation, Sze & Ng 2007, ch. 2) is refused naming the sample, in one line
    path = tmp_path / "thin.toml"
    path.write_text(DEVICE.split("[spread]")[0].replace('doping = "5e16 cm^-3"\nthickness = "5 um"',
                                                        'doping = "1e15 cm^-3"\nthickness = "1.5 um"')
                    + '[spread]\n"n.doping" = { sigma = "60 %", distribution = "lognormal" }\n'
                      '"n.thickness" = { sigma = "0.3 um" }\n')
    res = run("spread", path, "--samples", "20000")
    assert res.exit_code == 2 and "Traceback" not in res.output
    assert len(res.output.strip().splitlines()) == 1
    assert "thin.toml: sample " in res.output and "n.thickness" in res.output and "depleted" in res.output

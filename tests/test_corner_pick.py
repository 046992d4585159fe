"""Corners chosen by a figure (modelgen.corner_pick, modelgen spread --corner): proven in ngspice.

External references: the standard normal distribution's percentiles (scipy.stats.norm, and the
handbook values of Abramowitz & Stegun, Handbook of Mathematical Functions (1964), table 26.1);
ngspice, which runs each section of the written library on its own; the one-sided abrupt
junction's C ~ sqrt(N) (Sze & Ng, Physics of Semiconductor Devices, 3rd ed. (2007), ch. 2).
"""

from __future__ import annotations

import re
import subprocess

import numpy as np
import pytest
from scipy.stats import norm

from modelgen import cards, corner_pick, spread
from modelgen.errors import InputError

from support import ROOT, need, run

EXAMPLE = ROOT / "examples" / "switching_diode.toml"
NAME = "DSW_DEMO"
SAMPLES, SEED = 20000, 1


def ngspice_vf(library, section, current=1e-3, name=NAME):
    """ngspice's terminal voltage at ``current`` through NAME from ``.lib library section`` [V]."""
    deck = library.parent / f"vf_{section}.cir"
    deck.write_text("\n".join(["* forward voltage", f".lib {library} {section}", f"I1 0 a dc {current!r}",
                               f"D1 a 0 {name}", ".control", "set numdgt=12", "op", "print v(a)", ".endc",
                               ".end"]) + "\n")
    done = subprocess.run(["ngspice", "-b", str(deck)], check=False, capture_output=True, text=True, timeout=60)
    said = done.stdout + done.stderr
    assert "rror" not in said and "warning" not in said.lower(), said  # the section loads with no warning
    found = re.findall(r"^v\(a\)\s*=\s*(\S+)", done.stdout, re.MULTILINE)
    assert len(found) == 1, done.stdout
    return float(found[0])


@pytest.fixture(scope="module")
def vf_library(tmp_path_factory):
    """The README's corner library by forward voltage (and one by leakage) for the example, in ngspice."""
    out = tmp_path_factory.mktemp("corners") / "corners.lib"
    r = run("spread", EXAMPLE, "--samples", SAMPLES, "--seed", SEED, "--corner", "VF@1mA:low",
            "--corner", "VF@1mA:typical", "--corner", "VF@1mA:high", "--corner", "IR@-5V:low",
            "--corner", "IR@-5V:high", "-o", out)
    assert r.exit_code == 0, r.output
    return out, r


@pytest.fixture(scope="module")
def samples():
    device, tolerances, _ = spread.load(EXAMPLE)
    return spread.run(device, tolerances, SAMPLES, SEED, ("VF@1mA", "IR@-5V"))


def test_positions_are_the_normal_percentiles():
    # Phi(3) = 0.998650102, Phi(2.5) = 0.993790335 (Abramowitz & Stegun 1964, table 26.1)
    assert corner_pick.position_percentile("low") == pytest.approx(100 * (1 - 0.998650102), rel=1e-6)
    assert corner_pick.position_percentile("high") == pytest.approx(100 * 0.998650102, rel=1e-9)
    assert corner_pick.position_percentile("+2.5sigma") == pytest.approx(100 * 0.993790335, rel=1e-9)
    assert corner_pick.position_percentile("-2.5sigma") == pytest.approx(100 * (1 - 0.993790335), rel=1e-6)
    assert corner_pick.position_percentile("typical") == 50
    assert corner_pick.position_percentile("p99.5") == 99.5


def test_vf_corners_in_ngspice_sit_at_the_samples_percentiles(vf_library, samples):
    need("ngspice")
    lib, _ = vf_library
    vf = samples.figures["VF@1mA"]
    measured = {s: ngspice_vf(lib, s) for s in ("vf_1ma_low", "vf_1ma_typical", "vf_1ma_high", "typical")}
    # each corner's forward voltage, run by ngspice from its own section, lies among the samples within
    # 0.1 sigma (in probability) of the asked position: -3, 0, +3 sigma, percentiles of the standard normal
    for section, z in (("vf_1ma_low", -3.0), ("vf_1ma_typical", 0.0), ("vf_1ma_high", 3.0)):
        lo, hi = np.percentile(vf, 100 * norm.cdf([z - 0.1, z + 0.1]))
        assert lo <= measured[section] <= hi, (section, lo, measured[section], hi)
    assert measured["vf_1ma_low"] < measured["vf_1ma_typical"] < measured["vf_1ma_high"]
    assert measured["vf_1ma_low"] < measured["typical"] < measured["vf_1ma_high"]


def test_the_header_states_what_ngspice_measures(vf_library):
    need("ngspice")
    lib, _ = vf_library
    text = lib.read_text()
    stated = float(re.search(r"corner vf_1ma_low:.*\n\* sample \d+ of 20000 .*: VF@1mA = (\S+) V", text).group(1))
    assert ngspice_vf(lib, "vf_1ma_low") == pytest.approx(stated, abs=2e-6)  # 6 digits stated


def test_every_section_passes_check_and_defines_one_model_name(vf_library):
    need("ngspice")
    lib, _ = vf_library
    parsed = cards.reader.read_file(lib)
    assert [c.section for c in parsed] == ["typical", "vf_1ma_low", "vf_1ma_typical", "vf_1ma_high", "ir_m5v_low",
                                           "ir_m5v_high"]
    assert {c.name for c in parsed} == {NAME}
    r = run("check", lib)
    assert r.exit_code == 0, r.output
    rows = [ln.split() for ln in r.stdout.splitlines()[1:] if ln.startswith(NAME)]
    assert len(rows) == 6 and all(row[-1] == "ok" for row in rows), r.stdout


def test_picking_by_leakage_picks_other_samples_ordered_in_leakage(vf_library, samples):
    lib, _ = vf_library
    by_section = {c.section: c.params for c in cards.reader.read_file(lib)}
    vf_set = {tuple(sorted(by_section[s].items())) for s in ("vf_1ma_low", "vf_1ma_high")}
    ir_set = {tuple(sorted(by_section[s].items())) for s in ("ir_m5v_low", "ir_m5v_high")}
    assert not vf_set & ir_set
    text = lib.read_text()
    rows = {s: int(re.search(rf"corner {s}:.*\n\* sample (\d+) of", text).group(1)) - 1
            for s in ("ir_m5v_low", "ir_m5v_high")}
    ir = samples.figures["IR@-5V"]
    for section, z in (("ir_m5v_low", -3.0), ("ir_m5v_high", 3.0)):
        lo, hi = np.percentile(ir, 100 * norm.cdf([z - 0.1, z + 0.1]))
        assert lo <= ir[rows[section]] <= hi


def test_same_seed_same_bytes_other_seed_other_corners():
    args = ("spread", EXAMPLE, "--samples", 3000, "--corner", "VF@1mA:low", "--corner", "hot=IR@-5V:p99")
    a, b = run(*args, "--seed", 5), run(*args, "--seed", 5)
    c = run(*args, "--seed", 6)
    assert a.exit_code == 0, a.output
    assert a.stdout == b.stdout and a.stdout != c.stdout
    assert ".lib hot" in a.stdout and ".lib typical" in a.stdout
    # the summary goes to stderr, one line per corner after the run's line
    assert len([ln for ln in a.stderr.splitlines() if ln.startswith("modelgen: corner ")]) == 2


def test_the_most_probable_sample_moves_only_what_moves_the_figure(tmp_path):
    # C at -1 V of a one-sided abrupt junction rises with the lightly doped side's doping (C ~ sqrt(N),
    # Sze & Ng 2007, ch. 2) and does not depend on the lifetime. A monotone function keeps quantiles, so
    # the -3 sigma capacitance corner sits at -3 sigma of ln N (within the band), and of the samples there
    # the most probable has a lifetime near nominal.
    path = tmp_path / "d.toml"
    path.write_text(EXAMPLE.read_text().split("[spread]")[0] + "[spread]\n"
                    '"n.doping" = { sigma = "5 %", distribution = "lognormal" }\n'
                    '"n.lifetime" = { sigma = "30 %", distribution = "lognormal" }\n')
    device, tolerances, _ = spread.load(path)
    specs = corner_pick.parse_specs(["C@-1V:low", "C@-1V:high"])
    _, (low, high) = corner_pick.choose(device, tolerances, specs, 20000, 2)
    assert low.deviations["n.doping"] == pytest.approx(-3.0, abs=0.15)
    assert high.deviations["n.doping"] == pytest.approx(3.0, abs=0.15)
    assert abs(low.deviations["n.lifetime"]) < 0.5 and abs(high.deviations["n.lifetime"]) < 0.5


@pytest.mark.parametrize("spec", ["VF@1mA", "VF@bad:low", "VF@1mA:3sigma", "VF@1mA:p100", "VF@1mA:+7sigma",
                                  "XX:low", "1x=VF@1mA:low", "VF@1mA:middle", "IR@5V:high"])
def test_a_bad_spec_is_one_line_naming_it_and_writes_nothing(tmp_path, spec):
    r = run("spread", EXAMPLE, "--samples", 100, "--corner", spec, "-o", tmp_path / "c.lib")
    assert r.exit_code == 2 and "Traceback" not in r.output
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and "--corner" in lines[0] and spec in lines[0], r.stderr
    assert list(tmp_path.iterdir()) == []


def test_two_corners_in_one_section_and_dialects_without_sections_are_refused(tmp_path):
    r = run("spread", EXAMPLE, "--corner", "VF@1mA:low", "--corner", "vf_1ma_low=IS:high")
    assert r.exit_code == 2 and len(r.stderr.strip().splitlines()) == 1 and "given twice" in r.stderr
    for dialect in ("spice3", "gnucap"):
        r = run("spread", EXAMPLE, "--corner", "VF@1mA:low", "--dialect", dialect)
        assert r.exit_code == 2 and len(r.stderr.strip().splitlines()) == 1 and "no .lib sections" in r.stderr


def test_user_text_never_becomes_a_netlist_line():
    # section names are identifiers; the spec as written lands in comment lines only ("* ..."), so no
    # ngspice control line (*#) or gnucap command (*>) can come of it
    for spec in ("x\n.include evil=VF@1mA:low", "VF@1mA:low\n.include evil", "VF@1mA:low\r*#shell ls"):
        with pytest.raises(InputError, match="--corner"):
            corner_pick.parse_spec(spec)
    r = run("spread", EXAMPLE, "--samples", 200, "--corner", "#x=VF@1mA:low")
    assert r.exit_code == 2
    r = run("spread", EXAMPLE, "--samples", 200, "--corner", "VF@1mA:low")
    assert r.exit_code == 0, r.output
    for line in r.stdout.splitlines():
        assert not line.startswith(("*#", "*>")), line
        assert line.startswith(("*", "+", ".model", ".lib", ".endl")) or not line.strip(), line


def test_a_section_named_typical_replaces_the_nominal_one():
    r = run("spread", EXAMPLE, "--samples", 500, "--corner", "typical=VF@1mA:typical")
    assert r.exit_code == 0, r.output
    assert r.stdout.count(".lib typical") == 1 and "nominal description" not in r.stdout


@pytest.mark.parametrize("args, words", [(("--dialect", "ngspice"), "give --corner"),
                                         (("--corner", "VF@1mA:low", "--format", "json"), "--format"),
                                         (("--corner", "VF@1mA:low", "--figure", "TT"), "--figure")])
def test_options_that_do_not_go_with_corners_are_one_line(args, words):
    r = run("spread", EXAMPLE, "--samples", 100, *args)
    assert r.exit_code == 2 and len(r.stderr.strip().splitlines()) == 1 and words in r.stderr, r.stderr


def test_score_correlation_is_the_one_the_samples_show():
    # with correlated keys the most probable choice weighs the scores by the inverse of their correlation
    # matrix (Mahalanobis 1936); that matrix, from the [spread] table alone, must be the scores' sample
    # correlation (definition), within Fisher's standard error (1 - r^2)/sqrt(n), 4 of them
    device, tolerances, _ = spread.load(EXAMPLE)
    rows = spread.sample(device, tolerances, SAMPLES, SEED)
    keys, z = corner_pick.deviations(device, tolerances, rows)
    stated = corner_pick.correlation(tolerances, keys, float(device.area[0]))
    seen = np.corrcoef(z, rowvar=False)
    i, j = keys.index("n.doping"), keys.index("n.lifetime")
    assert stated[i, j] < -0.3  # the example correlates them at -0.5 in its global draws, which dominate
    assert np.allclose(seen, stated, atol=4 / np.sqrt(SAMPLES))


def test_leakage_corners_in_subckt_form_leak_in_ngspice_as_their_samples_do(tmp_path, samples):
    # a level-1 card's reverse current is its IS alone, so a corner chosen by leakage must carry its
    # generation current to leak in the simulator: with --form subckt each section's .subckt holds the source
    # fitted to its own physics. ngspice itself (at its default GMIN, 1e-12 S, which the source counts in, as
    # card --form subckt does) runs each section at -5 V; the corners' currents lie among the samples within
    # 0.1 sigma (in probability, standard normal) of -3 and +3 sigma of IR@-5V, and in order.
    need("ngspice")
    lib = tmp_path / "ir.lib"
    r = run("spread", EXAMPLE, "--samples", SAMPLES, "--seed", SEED, "--corner", "IR@-5V:low", "--corner",
            "IR@-5V:high", "--form", "subckt", "-o", lib)
    assert r.exit_code == 0, r.output
    measured = {}
    for section in ("typical", "ir_m5v_low", "ir_m5v_high"):
        deck = tmp_path / f"ir_{section}.cir"
        deck.write_text("\n".join(["* leakage", f".lib {lib} {section}", "V1 k 0 dc 5", f"X1 0 k {NAME}",
                                   ".control", "set numdgt=12", "op", "print i(V1)", ".endc", ".end"]) + "\n")
        done = subprocess.run(["ngspice", "-b", str(deck)], check=False, capture_output=True, text=True,
                              timeout=60)
        said = done.stdout + done.stderr
        assert "rror" not in said and "warning" not in said.lower(), said
        measured[section] = -float(re.findall(r"^i\(v1\)\s*=\s*(\S+)", done.stdout, re.MULTILINE)[0])
    ir = samples.figures["IR@-5V"]
    for section, z in (("ir_m5v_low", -3.0), ("ir_m5v_high", 3.0)):
        lo, hi = np.percentile(ir, 100 * norm.cdf([z - 0.1, z + 0.1]))
        assert lo <= measured[section] <= hi, (section, lo, measured[section], hi)
    assert measured["ir_m5v_low"] < measured["typical"] < measured["ir_m5v_high"]
    assert run("check", lib).exit_code == 0

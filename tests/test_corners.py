"""Temperature corners: material laws vs published data, the fitted card vs ngspice."""

import json

import numpy as np
import pytest
from click.testing import CliRunner

from modelgen import cards, corners, description, extraction, targets
from modelgen.cli import main
from modelgen.materials import silicon as si
from modelgen.spice import check, evaluator

from support import EXAMPLES, ROOT, need

CORNERS_C = np.array([-40.0, 27.0, 85.0, 125.0])


# --- material laws over 250-450 K ------------------------------------------------

def test_bandgap_against_an_independent_measurement_fit():
    # Alex, Finkbeiner & Weber, J. Appl. Phys. 79, 6943 (1996), photoluminescence/absorption fit
    # Eg = 1.1692 - 4.9e-4 T^2/(T + 655) eV (from memory); Thurmond's law within 3 meV over 250-450 K
    t = np.linspace(250, 450, 9)
    np.testing.assert_allclose(si.bandgap(t), 1.1692 - 4.9e-4 * t**2 / (t + 655), atol=3e-3)


def test_ni_against_sproul_green_and_the_density_of_states_law():
    # Sproul & Green, J. Appl. Phys. 70, 846 (1991), measured 275-375 K: 9.38e19 (T/300)^2 exp(-6884/T) cm^-3
    t = np.linspace(275, 375, 11)
    np.testing.assert_allclose(si.intrinsic_density(t) / 1e6, 9.38e19 * (t / 300) ** 2 * np.exp(-6884 / t),
                               rtol=0.05)
    # 250-450 K: ni = sqrt(Nc Nv) exp(-Eg/2kT), Nc, Nv of Green, J. Appl. Phys. 67, 2944 (1990) with their
    # T^1.5 law (from memory) and Thurmond's Eg; the T^1.5 law ignores the masses' temperature dependence,
    # which is worth about 13 % at 250 K
    t = np.linspace(250, 450, 9)
    nc, nv = si.effective_density_of_states(t)
    law = np.sqrt(nc * nv) * np.exp(-si.bandgap(t) / (2 * si.thermal_voltage(t)))
    np.testing.assert_allclose(si.intrinsic_density(t), law, rtol=0.15)


# --- the physics across temperature ---------------------------------------------

@pytest.fixture(scope="module")
def corner_results():
    out = {}
    for p in EXAMPLES:
        dev = description.load(p)
        temps = sorted(set(CORNERS_C) | {round(float(dev.temperature[0]) - 273.15, 9)})
        out[p.name] = (dev, np.array(temps), corners.evaluate(dev, np.array(temps) + 273.15))
    return out


def test_avalanche_breakdown_rises_with_temperature(corner_results):
    # common practice: avalanche breakdown has a positive temperature coefficient
    for dev, temps, r in corner_results.values():
        assert np.all(np.diff(r.params["BV"]) > 0)


def test_forward_voltage_falls_about_2_mV_per_K(corner_results):
    # common practice: a silicon diode's forward voltage at constant current falls by about 2 mV/K
    dev, temps, r = corner_results["switching_diode.toml"]
    nominal = list(temps).index(27.0)
    fitted = corners.fit(r, nominal, "ngspice")
    card = dict(cards.card_values(r, nominal, "ngspice", overrides=fitted.values)[0])
    v = np.linspace(0.3, 0.9, 6001)
    vf = []
    for tc in (0.0, 50.0):
        i, _ = evaluator.dc_current(card, v, "ngspice", temperature_c=tc)
        vf.append(np.interp(1e-4, i, v))
    slope = (vf[1] - vf[0]) / 50.0
    assert -2.5e-3 < slope < -1.5e-3


def test_user_values_hold_at_the_nominal_temperature(tmp_path):
    # a resistivity-specified side keeps its doping at every corner; a lifetime exponent scales lifetimes
    dev = description.load(ROOT / "examples" / "photodiode.toml")
    r = corners.evaluate(dev, CORNERS_C + 273.15)
    assert np.ptp(r.derived["n"]["doping"]) == 0
    np.testing.assert_allclose(r.derived["p"]["lifetime"], 10e-9)  # exponent 0: unchanged
    table = {"name": "DEXP", "area": "1e-4 cm^2", "lifetime_temperature_exponent": 1.5,
             "p": {"doping": "1e18 cm^-3", "thickness": "1 um", "lifetime": "100 ns"},
             "n": {"doping": "1e16 cm^-3", "thickness": "50 um", "lifetime": "1 us"}}
    r = corners.evaluate(description.from_mapping(table), np.array([300.15, 400.15]))
    assert r.derived["n"]["lifetime"][1] == pytest.approx(1e-6 * (400.15 / 300.15) ** 1.5, rel=1e-12)


@pytest.mark.parametrize("dialect", ["spice3", "ngspice", "gnucap"])
def test_fitted_card_keeps_is_within_5_percent(corner_results, dialect):
    for dev, temps, r in corner_results.values():
        f = corners.fit(r, list(temps).index(27.0), dialect)
        assert f.worst_error["IS"] < 0.05, (dev.name, f.worst_error)
        assert 0.9 < f.values["EG"] < 1.4 and 2 < f.values["XTI"] < 7


def test_fit_beats_the_provisional_defaults(corner_results):
    dev, temps, r = corner_results["thin_epi_rectifier.toml"]
    k = list(temps).index(27.0)
    provisional = corners.corner_errors(r, k, "spice3", {})
    fitted = corners.fit(r, k, "spice3")
    assert fitted.worst_error["IS"] < 0.2 * np.max(provisional["IS"])


# --- confirmed by the simulators --------------------------------------------------

def _ngspice_at(text, name, tc, dc, caps, rs):
    from modelgen.spice import ngspice
    # GMIN off: at -40 degC the diode's own current at 0.2 V is far below GMIN's 1e-12 S x 0.2 V
    return ngspice.simulate(text, [name], dc, caps, rs={name: rs}, temperature_c=tc, gmin=1e-30)[name]


@pytest.mark.parametrize("example", EXAMPLES, ids=lambda p: p.name)
def test_fitted_card_in_ngspice_tracks_the_physics_at_every_corner(corner_results, example):
    need("ngspice")
    dev, temps, r = corner_results[example.name]
    k0 = list(temps).index(27.0)
    for dialect in ("spice3", "ngspice"):
        f = corners.fit(r, k0, dialect)
        values = dict(cards.card_values(r, k0, dialect, overrides=f.values)[0])
        text = cards.card(r, k0, dialect=dialect, overrides=f.values)
        dc = np.round(np.arange(0.2, 0.45 + 1e-9, 0.05), 12)
        for k, tc in enumerate(temps):
            rs_t = evaluator.adjusted(values, tc, "ngspice")["RS"]
            got = _ngspice_at(text, dev.name[0], tc, dc, np.array(corners.CAP_BIASES), rs_t)
            assert got["messages"] == []
            # physics at the junction voltage ngspice reached (V - I RS), low injection only
            vd = dc - got["current"] * rs_t
            phys = np.array([extraction.predicted_current(r, [x])[k, 0] for x in vd])
            # above ngspice's numerical floor (its branch currents carry ~1e-16 A of round-off)
            # and well below the junction potential, where the depletion approximation holds
            seen = (got["current"] > 1e-13) & (vd < 0.75 * r.params["VJ"][k])
            if dialect == "spice3":
                # no ISR, no knee on the card: ngspice's current is IS(T) (exp(Vd/Vt) - 1) at any bias,
                # and IS(T) must match the physics IS at the corner within IS's fit error
                use = seen
                assert use.sum() >= 2
                vt = evaluator.SIMULATORS["ngspice"].boltzmann * (tc + 273.15) / evaluator.SIMULATORS["ngspice"].charge
                is_sim = got["current"][use] / np.expm1(vd[use] / vt)
                assert np.all(np.abs(is_sim / r.params["IS"][k] - 1) <= f.worst_error["IS"] + 1e-3)
            else:
                # diffusion + recombination, through the card's own knee I/(1 + sqrt(I/IKF)) (the SPICE
                # knee bends the current by sqrt(I/IKF) even at low injection); ngspice's recombination
                # width factor adds ~1 %
                expected = phys / (1 + np.sqrt(phys / values["IKF"]))
                assert seen.sum() >= 2
                bound = max(f.worst_error["IS"], f.worst_error["ISR"]) + 0.015
                assert np.all(np.abs(got["current"][seen] / expected[seen] - 1) <= bound)
            c_phys = extraction.predicted_capacitance(r, corners.CAP_BIASES)[k]
            # reverse biases: the diffusion capacitance is negligible there
            np.testing.assert_array_less(np.abs(got["capacitance"][1:] / c_phys[1:] - 1),
                                         f.worst_error["CJO"] + 1e-3)


@pytest.mark.parametrize("dialect,simulator", [("ngspice", "ngspice"), ("spice3", "ngspice"),
                                               ("spice3", "gnucap"), ("gnucap", "gnucap")])
def test_per_corner_library_loads_in_the_simulators(tmp_path, dialect, simulator):
    need(simulator)
    out = tmp_path / "corners.lib"
    args = ["corners", str(ROOT / "examples" / "switching_diode.toml"), "--per-corner", "--dialect", dialect,
            "--at", "-40", "--at", "27", "--at", "125", "-o", str(out), "-q"]
    r = CliRunner().invoke(main, args)
    assert r.exit_code == 0, r.output
    text = out.read_text()
    outcomes = check.check_text(text, [simulator])
    assert all(o.ok for o in outcomes), outcomes
    if targets.get(dialect).sections:
        # one model name in every section: switching corners changes one .lib line, not every instance
        assert sorted((o.section, o.model) for o in outcomes) == [("T125", "DSW_DEMO"), ("T27", "DSW_DEMO"),
                                                                  ("TM40", "DSW_DEMO")]
    else:
        assert sorted(o.model for o in outcomes) == ["DSW_DEMO_125", "DSW_DEMO_27", "DSW_DEMO_M40"]
    # per-corner cards are not a fit: no message about a single card, and no dangling header lines
    assert "single card" not in text and "single card" not in r.stderr
    assert "temperature fit" not in text and "fitted EG" not in text


# --- the command line -------------------------------------------------------------

def test_corners_json_and_temperature_parsing():
    r = CliRunner().invoke(main, ["corners", str(ROOT / "examples" / "thin_epi_rectifier.toml"), "--format", "json",
                                  "--at", "-40", "--at", "300 K", "--at", "257 degF", "-q"])
    assert r.exit_code == 0, r.output
    j = json.loads(r.stdout)
    temps = [c["temperature"] for c in j["corners"]]
    # temperatures as given: -40 degC is 233.15 K, not 233.14999999999998
    assert temps[0] == 233.15 and temps[1] == 300.0
    assert temps[2] == pytest.approx(398.15, abs=1e-9)  # 257 degF = 125 degC
    assert [c["temperature_c"] for c in j["corners"]][0] == -40
    assert set(j["fit"]) >= {"EG", "XTI", "worst_error_percent"}
    assert set(j["fit"]["worst_error_percent"]) >= {"IS", "CJO", "BV"}
    assert all(set(c) == {"temperature", "temperature_c", "params", "derived"} for c in j["corners"])
    # errors in percent everywhere: the JSON's figures are the ones stderr prints
    r2 = CliRunner().invoke(main, ["corners", str(ROOT / "examples" / "thin_epi_rectifier.toml"),
                                   "--at", "-40", "--at", "300 K", "--at", "257 degF"])
    is_pct = j["fit"]["worst_error_percent"]["IS"]
    assert f"IS {is_pct:.3g} %" in r2.stderr
    # units for the derived quantities as for the parameters
    assert j["derived_units"]["p"]["doping"] == "m^-3" and j["derived_units"]["temperature"] == "K"


def test_corners_card_header_carries_the_fit_and_range_option_works():
    r = CliRunner().invoke(main, ["corners", str(ROOT / "examples" / "graded_varactor.toml"),
                                  "--from", "-40", "--to", "125", "--step", "15", "--dialect", "ngspice"])
    assert r.exit_code == 0, r.output
    header = [ln for ln in r.stdout.splitlines() if ln.startswith("*")]
    assert any("temperature fit over -40 to 125 degC" in ln for ln in header)
    assert any("worst error over the corners: IS" in ln for ln in header)
    assert "worst error over the corners" in r.stderr
    assert "TCV=" in r.stdout and "TRS1=" in r.stdout


def test_corners_bad_temperature_is_exit_2():
    r = CliRunner().invoke(main, ["corners", str(ROOT / "examples" / "switching_diode.toml"), "--at", "hot"])
    assert r.exit_code == 2 and "--at" in r.stderr
    r = CliRunner().invoke(main, ["corners", str(ROOT / "examples" / "switching_diode.toml"), "--from", "0"])
    assert r.exit_code == 2


def test_a_fit_needs_two_corners_besides_the_nominal():
    # one corner cannot fit EG and XTI: exit 2 with a one-line reason, not EG=0 XTI=0 with exit 0
    dev = str(ROOT / "examples" / "switching_diode.toml")
    for args in (["--at", "27"], ["--at", "85"], ["--at", "27", "--at", "85"]):
        r = CliRunner().invoke(main, ["corners", dev, *args])
        assert r.exit_code == 2, (args, r.output)
        assert len(r.stderr.strip().splitlines()) == 1 and "at least two corners" in r.stderr
        assert "EG=0" not in r.stdout
    # per-corner cards need no fit: a single temperature is fine there
    r = CliRunner().invoke(main, ["corners", dev, "--at", "85", "--per-corner", "--dialect", "ngspice"])
    assert r.exit_code == 0, r.output
    assert "TNOM=8.5e+01" in r.stdout


def test_range_includes_its_end_point_and_unions_with_at():
    # 0.1 K steps accumulate rounding: 0 to 0.3 by 0.1 must still end at 0.3
    assert corners.corner_temperatures((), 0.0, 0.3, 0.1) == [0.0, 0.1, 0.2, 0.3]
    assert corners.corner_temperatures((), -40.0, 125.0, 15.0)[-1] == 125.0
    # a step that does not land on the end stops before it
    assert corners.corner_temperatures((), 0.0, 10.0, 4.0) == [0.0, 4.0, 8.0]
    # --at plus a range: the documented union, sorted, without duplicates
    assert corners.corner_temperatures((150.0, 0.0), 0.0, 20.0, 10.0) == [0.0, 10.0, 20.0, 150.0]


@pytest.mark.parametrize("args", [["--from", "0", "--to", "100", "--step", "1e-300"],
                                  ["--from", "0", "--to", "inf", "--step", "1"],
                                  ["--from", "0", "--to", "nan", "--step", "1"],
                                  ["--from", "0", "--to", "100", "--step", "0"],
                                  ["--from", "100", "--to", "0", "--step", "1"],
                                  ["--at", "1e300"]])
def test_absurd_ranges_are_a_clear_error_not_a_hang(args):
    r = CliRunner().invoke(main, ["corners", str(ROOT / "examples" / "switching_diode.toml"), *args])
    assert r.exit_code == 2, r.output
    assert len(r.stderr.strip().splitlines()) == 1 and "Traceback" not in r.output


def test_spice3_corners_say_which_dialect_carries_the_rs_and_bv_laws():
    # spice3 cards have no TCV/TRS: the RS and BV errors get a hint instead of silence
    r = CliRunner().invoke(main, ["corners", str(ROOT / "examples" / "switching_diode.toml")])
    assert r.exit_code == 0
    assert "no temperature coefficient for RS and BV" in r.stderr and "ngspice dialect fits them" in r.stderr
    r = CliRunner().invoke(main, ["corners", str(ROOT / "examples" / "switching_diode.toml"), "--dialect",
                                  "ngspice"])
    assert "no temperature coefficient" not in r.stderr

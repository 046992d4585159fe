"""gnucap runner: I-V and C-V of model cards run in gnucap, checked against closed forms.

References, outside modelgen:
- the ideal-diode equation I = IS (exp(Vj/(N Vt)) - 1) with Vt = k T / q, and V = Vj + RS I
  solved here with scipy.optimize.brentq;
- the junction capacitance CJO / (1 - Vj/VJ)^M below FC*VJ and its linear extension
  CJO / (1 - FC)^(1+M) * (1 - FC (1+M) + M Vj/VJ) above, plus TT * dI/dVj: the formulas of
  gnucap 0.36's apps/d_diode.model ("eval Cj"), the same as Berkeley SPICE's;
- the saturation-current temperature law of the same file ("eval Yj"):
  IS(T) = IS (T/TNOM)^XTI exp(EG/(N Vt) (T/TNOM - 1)), Vt = k T / q at T;
- k/q = 1.3806226e-23 / 1.6021918e-19 J/C, the P_K and P_Q of gnucap's include/constant.h
  (the old SPICE values), against scipy.constants (CODATA 2018) for comparison.
"""

import os
import shutil

import numpy as np
import pytest
import scipy.constants
from scipy.optimize import brentq

from modelgen import cards, description, extraction
from modelgen.spice import gnucap
from support import ROOT, need

K_Q_GNUCAP = 1.3806226e-23 / 1.6021918e-19  # gnucap include/constant.h: P_K / P_Q
K_Q_SCIPY = scipy.constants.k / scipy.constants.e
ZERO_C = 273.15
GMIN_DEFAULT = 1e-12  # gnucap lib/u_opt1.cc: OPT::gmin


# Written the way `modelgen card` writes cards: comments, one parameter per "+" line, "+ )".
LIBRARY = """\
* test library
* DHI: a card with series resistance and charge storage
.model DHI D (
+ IS=2.5e-14
+ N=1.7
+ RS=12
+ CJO=3e-12
+ VJ=0.7
+ M=0.33
+ FC=0.5
+ TT=5e-09
+ EG=1.11
+ XTI=3
+ TNOM=27
+ )
* DLO: no series resistance
.model DLO D (
+ IS=1e-16
+ N=1.0
+ CJO=1e-12
+ VJ=0.9
+ M=0.5
+ TT=2e-08
+ )
"""
PARAMS = {
    "DHI": dict(IS=2.5e-14, N=1.7, RS=12.0, CJO=3e-12, VJ=0.7, M=0.33, FC=0.5, TT=5e-9, EG=1.11, XTI=3.0),
    "DLO": dict(IS=1e-16, N=1.0, RS=0.0, CJO=1e-12, VJ=0.9, M=0.5, FC=0.5, TT=2e-8, EG=1.11, XTI=3.0),
}
DC_VOLTS = np.array([0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.0, -1.0, -5.0])
CAP_VOLTS = np.array([-5.0, -1.0, 0.0, 0.2, 0.3, 0.4, 0.6, 0.7, 0.8])


@pytest.fixture
def needs_gnucap():
    need("gnucap")


def junction_voltage(v, p, vt, gmin_internal=0.0):
    """Vj from V = Vj + RS (I(Vj) + gmin Vj), by brentq."""
    if p["RS"] == 0.0:
        return float(v)
    f = lambda x: x + p["RS"] * (p["IS"] * np.expm1(x / vt) + gmin_internal * x) - v
    return brentq(f, min(v, 0.0) - 1.0, max(v, 0.0) + 1.0, xtol=1e-16, rtol=1e-15)


def ideal_current(volts, p, temperature_c=27.0, k_q=K_Q_GNUCAP, gmin_internal=0.0):
    vt = p["N"] * k_q * (temperature_c + ZERO_C)
    return np.array([p["IS"] * np.expm1(junction_voltage(v, p, vt, gmin_internal) / vt) for v in volts])


def ideal_capacitance(volts, p, temperature_c=27.0, k_q=K_Q_GNUCAP):
    vt = p["N"] * k_q * (temperature_c + ZERO_C)
    out = []
    for v in volts:
        vj = junction_voltage(v, p, vt)
        if vj < p["FC"] * p["VJ"]:
            depletion = p["CJO"] / (1 - vj / p["VJ"]) ** p["M"]
        else:
            depletion = (p["CJO"] / (1 - p["FC"]) ** (1 + p["M"])
                         * (1 - p["FC"] * (1 + p["M"]) + p["M"] * vj / p["VJ"]))
        out.append(depletion + p["TT"] * p["IS"] * np.exp(vj / vt) / vt)
    return np.array(out)


def test_current_is_the_ideal_diode_with_series_resistance(needs_gnucap):
    result = gnucap.simulate(LIBRARY, ["DHI", "DLO"], DC_VOLTS, CAP_VOLTS)
    for name, p in PARAMS.items():
        current = result[name]["current"]
        assert current.shape == DC_VOLTS.shape
        # gnucap's gmin (1e-12 S on each node) moves Vj by RS gmin V < 1e-11 V: below this tolerance
        np.testing.assert_allclose(current, ideal_current(DC_VOLTS, p), rtol=1e-8, atol=1e-24)
        assert current[DC_VOLTS == 0.0] == 0.0
        assert current[DC_VOLTS == -5.0] == pytest.approx(-p["IS"], rel=1e-12)  # -IS (1 - e^-67) at most
        assert result[name]["messages"] == []


def test_capacitance_is_depletion_plus_transit_time_charge(needs_gnucap):
    result = gnucap.simulate(LIBRARY, ["DHI", "DLO"], DC_VOLTS, CAP_VOLTS)
    for name, p in PARAMS.items():
        c = result[name]["capacitance"]
        assert c.shape == CAP_VOLTS.shape
        np.testing.assert_allclose(c, ideal_capacitance(CAP_VOLTS, p), rtol=1e-8)
    # hand check of one point: CJO / (1 + 1/0.7)^0.33 at -1 V, transit term negligible
    assert result["DHI"]["capacitance"][1] == pytest.approx(3e-12 / (1 + 1 / 0.7) ** 0.33, rel=1e-9)


def test_temperature_scales_is_only_with_gnucaps_law(needs_gnucap):
    t = 75.0
    result = gnucap.simulate(LIBRARY, ["DHI"], DC_VOLTS, [-5.0, -1.0], temperature_c=t)["DHI"]
    p = dict(PARAMS["DHI"])
    ratio = (t + ZERO_C) / (27.0 + ZERO_C)
    vt = p["N"] * K_Q_GNUCAP * (t + ZERO_C)
    p["IS"] = p["IS"] * ratio ** p["XTI"] * np.exp(p["EG"] / vt * (ratio - 1))
    np.testing.assert_allclose(result["current"], ideal_current(DC_VOLTS, p, temperature_c=t),
                               rtol=1e-8, atol=1e-24)
    # SPICE3 divides XTI by N; gnucap does not: the reverse current tells them apart by 20 %
    spice3 = PARAMS["DHI"]["IS"] * ratio ** (p["XTI"] / p["N"]) * np.exp(p["EG"] / vt * (ratio - 1))
    assert abs(-result["current"][-1] / spice3 - 1) > 0.1
    # CJO and VJ are not temperature scaled in gnucap's diode
    np.testing.assert_allclose(result["capacitance"], ideal_capacitance([-5.0, -1.0], PARAMS["DHI"]), rtol=1e-8)


def test_thermal_voltage_uses_the_old_spice_constants(needs_gnucap):
    v = np.array([0.6, 0.7])
    current = gnucap.simulate(LIBRARY, ["DLO"], v, [])["DLO"]["current"]
    # DLO has no RS and N = 1: (V2 - V1) / ln(I2/I1) = k T / q (the -1 of exp(V/Vt) - 1 is e^-23 here)
    vt = (v[1] - v[0]) / np.log(current[1] / current[0])
    assert vt == pytest.approx(K_Q_GNUCAP * 300.15, rel=1e-9)
    assert vt / (K_Q_SCIPY * 300.15) - 1 == pytest.approx(-2.8587e-5, rel=1e-3)  # CODATA 2018 k/q is larger
    # so a closed form with CODATA 2018 constants misses gnucap by ~9e-4 at 0.8 V (V/Vt = 31)
    at_08 = gnucap.simulate(LIBRARY, ["DLO"], [0.8], [])["DLO"]["current"][0]
    codata = ideal_current([0.8], PARAMS["DLO"], k_q=K_Q_SCIPY)[0]
    gap = np.exp(0.8 / 300.15 * (1 / K_Q_GNUCAP - 1 / K_Q_SCIPY)) - 1
    assert at_08 / codata - 1 == pytest.approx(gap, rel=1e-4)
    assert gap == pytest.approx(8.85e-4, rel=0.01)


def test_gmin_sits_on_the_nodes_not_in_the_diode_current(needs_gnucap):
    big = 1e-3  # S, large enough to move Vj by millivolts through RS = 12 ohm
    v = np.array([0.3, 0.6, 0.9, -1.0])
    current = gnucap.simulate(LIBRARY, ["DHI"], v, [], gmin=big)["DHI"]["current"]
    # the internal anode node's gmin draws current through RS but not through the junction
    np.testing.assert_allclose(current, ideal_current(v, PARAMS["DHI"], gmin_internal=big), rtol=1e-8)
    assert abs(current[1] / ideal_current(v, PARAMS["DHI"])[1] - 1) > 0.05


def test_breakdown_is_not_modelled(needs_gnucap):
    library = ".model DBV D (IS=1e-14 RS=1 BV=10 IBV=1e-3)\n"
    result = gnucap.simulate(library, ["DBV"], [-5.0, -10.0, -20.0, -40.0], [])["DBV"]
    # d_diode.model's default reverse branch is IS (exp(V/Vt) - 1): no current rise at BV, no warning
    np.testing.assert_allclose(result["current"], -1e-14, rtol=1e-12)
    assert result["messages"] == []


def test_sidewall_capacitance_needs_an_instance_perimeter(needs_gnucap):
    library = (".model DSW D (IS=1e-15 CJO=1e-12 VJ=0.8 M=0.5 CJSW=5e-12 PBSW=0.6 MJSW=0.3)\n"
               ".model DPL D (IS=1e-15 CJO=1e-12 VJ=0.8 M=0.5)\n")
    result = gnucap.simulate(library, ["DSW", "DPL"], [], [-2.0, 0.0])
    # the diode's perim defaults to 0, so CJSW * perim = 0: C is CJO / (1 - V/VJ)^M alone
    expected = 1e-12 / (1 + np.array([2.0, 0.0]) / 0.8) ** 0.5
    for name in ("DSW", "DPL"):
        np.testing.assert_allclose(result[name]["capacitance"], expected, rtol=1e-9)
        assert result[name]["messages"] == []


def test_unknown_parameters_are_reported_and_known_ones_are_not(needs_gnucap):
    known = ("IS=1e-15 RS=1 N=1 TT=1e-9 CJO=1e-12 VJ=0.8 M=0.4 EG=1.11 XTI=3 KF=0 AF=1 FC=0.5 BV=30 "
             "IBV=1e-3 CJSW=1e-13 PBSW=0.7 MJSW=0.3 GP=0 TNOM=27")
    aliases = "IS=1e-15 PB=0.8 MJ=0.4 EGAP=1.11 CJS=1e-13 PBS=0.7 MJS=0.3 GPARALLEL=0"
    unknown = "IS=1e-15 ISR=1e-12 NR=2 IKF=1e-3 JSW=1e-20 PHP=0.8 FOO=3"
    library = (f".model DKNOWN D ({known})\n.model DALIAS D ({aliases})\n"
               f".model DLONG_MODEL_NAME_X D ({unknown})\n")
    result = gnucap.simulate(library, ["DKNOWN", "DALIAS", "DLONG_MODEL_NAME_X"], [0.5], [0.0])
    assert result["DKNOWN"]["messages"] == []
    assert result["DALIAS"]["messages"] == []
    assert result["DLONG_MODEL_NAME_X"]["messages"] == [
        f"? DLONG_MODEL_NAME_X: bad parameter {p} ignored" for p in ("ISR", "NR", "IKF", "JSW", "PHP", "FOO")]
    # the ignored ISR leaves the ideal diode: 1e-15 (exp(0.5/Vt) - 1)
    vt = K_Q_GNUCAP * 300.15
    assert result["DLONG_MODEL_NAME_X"]["current"][0] == pytest.approx(1e-15 * np.expm1(0.5 / vt), rel=1e-9)


def test_messages_about_other_cards_stay_with_them(needs_gnucap):
    library = LIBRARY + ".model DOTHER D (IS=1e-15 ISR=1e-12)\n"
    assert gnucap.simulate(library, ["DHI"], [0.5], [])["DHI"]["messages"] == []
    assert gnucap.simulate(library, ["DOTHER"], [0.5], [])["DOTHER"]["messages"] == [
        "? DOTHER: bad parameter ISR ignored"]


def test_a_card_gnucap_cannot_load_raises_one_line_and_keeps_its_output(needs_gnucap):
    library = ".model DLEVEL D (IS=1e-15 LEVEL=1)\n"
    with pytest.raises(RuntimeError, match="DLEVEL") as info:
        gnucap.simulate(library, ["DLEVEL"], [0.5], [0.0])
    assert "can't find" in str(info.value)  # gnucap reads LEVEL=1 as a model type "D1"
    assert "\n" not in str(info.value)  # one line for the user ...
    assert "Gnucap" in info.value.output  # ... the whole output (banner included) kept apart


def test_the_switching_diode_example_card(needs_gnucap):
    result_ = extraction.derive(description.load(os.path.join(ROOT, "examples", "switching_diode.toml")))
    text = cards.card(result_, 0, dialect="gnucap")
    values = {}
    for line in text.splitlines():
        if line.startswith("+ ") and "=" in line:
            key, value = line[2:].split("=")
            values[key] = float(value)
    p = {k: values.get(k, d) for k, d in dict(IS=0, N=1, RS=0, CJO=0, VJ=1, M=0.5, FC=0.5, TT=0).items()}
    name = result_.device.name[0]
    result = gnucap.simulate(text, [name.lower()], DC_VOLTS, CAP_VOLTS)[name.lower()]
    np.testing.assert_allclose(result["current"], ideal_current(DC_VOLTS, p), rtol=1e-8, atol=1e-24)
    np.testing.assert_allclose(result["capacitance"], ideal_capacitance(CAP_VOLTS, p), rtol=1e-8)
    assert result["messages"] == []


def test_without_gnucap_on_path(monkeypatch, tmp_path):
    monkeypatch.setenv("PATH", str(tmp_path))
    assert shutil.which("gnucap") is None
    assert gnucap.available() is False
    with pytest.raises(RuntimeError, match="gnucap"):
        gnucap.simulate(LIBRARY, ["DHI"], [0.5], [])


def test_names_must_be_d_models_of_the_library():
    with pytest.raises(ValueError, match="not in the library"):
        gnucap.simulate(LIBRARY, ["DNONE"], [0.5], [])
    with pytest.raises(ValueError, match="twice"):
        gnucap.simulate(LIBRARY, ["DHI", "dhi"], [0.5], [])

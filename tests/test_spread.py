"""Process spread: the [spread] table, sampling, figures and statistics (modelgen.spread)."""

from __future__ import annotations

import json
import tomllib

import numpy as np
import pytest
from support import ROOT

from modelgen import description, extraction, spread
from modelgen.errors import InputError
from modelgen.spice import evaluator

BASE = ROOT / "examples" / "switching_diode.toml"
#: The example without its own [spread] table (the tests give theirs).
PLAIN = BASE.read_text().split("\n[spread]")[0]


def base_table():
    return tomllib.loads(PLAIN)


def device_and(tolerances, **changes):
    """The switching diode (with ``changes`` to its sides: ``n={...}``) and a parsed [spread] table."""
    table = base_table()
    for side, keys in changes.items():
        table[side].update(keys) if isinstance(keys, dict) else table.__setitem__(side, keys)
    device = description.from_mapping(table, file="demo.toml")
    return device, spread.parse(tolerances, device, file="demo.toml")


def test_same_seed_same_bytes_and_another_seed_differs():
    # reproducibility is the contract of a seeded Monte Carlo (common practice)
    device, tol = device_and({"n.doping": {"sigma": "5 %", "distribution": "lognormal"},
                              "n.lifetime": [{"sigma": "20 %", "distribution": "lognormal"},
                                             {"sigma": "2 %", "shared": "local"}],
                              "contact_resistance": {"sigma": "0.2 ohm", "distribution": "uniform"}})
    one = json.dumps(spread.run(device, tol, 300, seed=7).statistics())
    two = json.dumps(spread.run(device, tol, 300, seed=7).statistics())
    other = json.dumps(spread.run(device, tol, 300, seed=8).statistics())
    assert one == two
    assert one != other


def test_ln_saturation_current_follows_ln_doping_with_slope_minus_one():
    # Shockley's diffusion law for a long neutral region: J0 = q ni^2 Dp / (N_D Lp), so with the
    # minority mobility and lifetime given, d ln J0 / d ln N_D = -1 (Sze & Ng 2007, ch. 2); the
    # first-order propagation of the input variance gives std(ln J0) = std(ln N_D). Band-gap narrowing
    # at 2e15 cm^-3 moves the slope by under 0.5 % (Slotboom & de Graaff 1976 law, as the material states).
    device, tol = device_and({"n.doping": {"sigma": "10 %", "distribution": "lognormal"}},
                             n={"doping": "2e15 cm^-3", "thickness": "500 um", "minority_mobility": "450 cm^2/(V*s)"})
    n = 5000
    s = spread.run(device, tol, n, seed=3, figures=())
    ln_nd = np.log(s.result.device.n.doping)
    ln_j0 = np.log(s.result.derived["n"]["saturation_current_density"])
    slope = np.polyfit(ln_nd, ln_j0, 1)[0]
    assert slope == pytest.approx(-1.0, abs=0.01)
    assert np.std(ln_j0, ddof=1) == pytest.approx(np.std(ln_nd, ddof=1), rel=0.01)
    # the sampler: a lognormal sigma of 10 % is the standard deviation of ln N_D; the sample standard
    # deviation has a relative standard error of 1/sqrt(2 (n - 1)) (normal theory), 1 % here: 4 of them allowed
    assert np.std(ln_nd, ddof=1) == pytest.approx(0.10, rel=4 / np.sqrt(2 * (n - 1)))
    assert np.median(s.result.device.n.doping) == pytest.approx(2e21, rel=0.01)  # the nominal is the median


def test_lognormal_stays_positive_where_a_normal_draw_is_refused():
    # a lognormal variable is positive by construction (definition); a normal one with sigma 40 % of
    # the value goes below zero with probability Phi(-2.5) = 0.6 % (standard normal table), so 5000
    # draws almost surely hold one, which is refused rather than clipped
    device, tol = device_and({"n.doping": {"sigma": "40 %", "distribution": "lognormal"}})
    s = spread.run(device, tol, 5000, seed=1, figures=("VF@1mA",))
    assert np.all(s.result.device.n.doping > 0)
    assert np.all(s.result.params["IS"] > 0) and np.all(np.isfinite(s.result.params["IS"]))
    _, normal = device_and({"n.doping": {"sigma": "40 %", "distribution": "normal"}})
    with pytest.raises(InputError) as e:
        spread.sample(device, normal, 5000, seed=1)
    text = str(e.value)
    assert "demo.toml" in text and "spread.n.doping" in text and "lognormal" in text and "\n" not in text


def test_uniform_sigma_is_its_standard_deviation():
    # a uniform distribution of half-width a has standard deviation a / sqrt(3) (definition)
    device, tol = device_and({"contact_resistance": {"sigma": "0.3 ohm", "distribution": "uniform"}})
    rows = spread.sample(device, tol, 20000, seed=5, kind="global")
    r = rows.contact_resistance
    assert r.max() - 1.5 <= 0.3 * np.sqrt(3) and 1.5 - r.min() <= 0.3 * np.sqrt(3)
    assert r.max() - 1.5 > 0.99 * 0.3 * np.sqrt(3)
    assert np.std(r, ddof=1) == pytest.approx(0.3, rel=0.03)


def test_global_and_local_sharing_and_area_scaling():
    # mismatch (local) scales as 1/sqrt(area) (Pelgrom, Duinmaijer & Welbers, IEEE JSSC 24, 1433 (1989));
    # a lot-to-lot (global) spread does not depend on the device's size
    tolerances = {"reference_area": "0.625e-5 cm^2",  # a quarter of the demo's 2.5e-5 cm^2: sigma halves
                  "n.lifetime": [{"sigma": "10 %", "distribution": "lognormal", "shared": "global"},
                                 {"sigma": "10 %", "distribution": "lognormal", "shared": "local"}],
                  "p.lifetime": {"sigma": "10 %", "distribution": "lognormal", "shared": "local",
                                 "area_scaling": False}}
    device, tol = device_and(tolerances)
    n = 20000
    tol_err = 4 / np.sqrt(2 * (n - 1))  # four standard errors of a sample standard deviation
    local = spread.sample(device, tol, n, seed=11, kind="local")
    glob = spread.sample(device, tol, n, seed=11, kind="global")
    both = spread.sample(device, tol, n, seed=11, kind="both")
    def ln(d, s):
        return np.log(getattr(d, s).lifetime)
    assert np.std(ln(local, "n"), ddof=1) == pytest.approx(0.05, rel=tol_err)
    assert np.std(ln(local, "p"), ddof=1) == pytest.approx(0.10, rel=tol_err)  # area_scaling = false
    assert np.std(ln(glob, "n"), ddof=1) == pytest.approx(0.10, rel=tol_err)
    assert np.all(glob.p.lifetime == device.p.lifetime[0])  # a global sample leaves local keys nominal
    # independent global and local parts add in variance (Bienayme)
    assert np.var(ln(both, "n"), ddof=1) == pytest.approx(0.10**2 + 0.05**2, rel=2 * tol_err)
    # the global part of a "both" sample is the "global" sample's (separate streams)
    assert np.corrcoef(ln(both, "n"), ln(glob, "n"))[0, 1] == pytest.approx(np.sqrt(0.01 / 0.0125), abs=0.02)


def test_description_with_spread_loads_as_without(tmp_path):
    # a [spread] table is not a part of the nominal device: the card is the one without it
    plain = description.load(BASE)
    path = tmp_path / "with_spread.toml"
    path.write_text(PLAIN + '\n[spread]\n"n.doping" = { sigma = "5 %", distribution = "lognormal" }\n'
                    'p.lifetime = { sigma = "0.2 ns", shared = "local" }\n')
    device, tol, _raw = spread.load(path)
    a, b = extraction.derive(plain), extraction.derive(device)
    assert all(a.params[k][0] == b.params[k][0] for k in extraction.PARAMETERS)
    assert [t.key for t in tol.entries] == ["n.doping", "p.lifetime"]
    assert tol.entries[1].sigma == pytest.approx(0.2e-9) and tol.reference_area == pytest.approx(2.5e-9)
    (tmp_path / "plain.toml").write_text(PLAIN)
    with pytest.raises(InputError, match="no \\[spread\\] table"):
        spread.load(tmp_path / "plain.toml")


@pytest.mark.parametrize("body, key, words", [
    ('"n.dopping" = { sigma = "5 %" }', "spread.n.dopping", "unknown key"),
    ('name = { sigma = "5 %" }', "spread.name", "text or choice"),
    ('temperature = { sigma = "1 K" }', "spread.temperature", "condition"),
    ('"n.doping" = { sigma = "5 V" }', "spread.n.doping", "not a unit of concentration"),
    ('"n.doping" = { sigma = "5 %", distribution = "gauss" }', "spread.n.doping", "distribution"),
    ('"n.doping" = { sigma = "5 %", shared = "wafer" }', "spread.n.doping", "shared"),
    ('"n.doping" = { sigma = "3e16 cm^-3", distribution = "lognormal" }', "spread.n.doping", "below the value"),
    ('"n.doping" = { distribution = "normal" }', "spread.n.doping", "sigma is required"),
    ('"n.doping" = { sigma = "5 %", corr = 1 }', "spread.n.doping", "unknown field"),
    ('"n.doping" = [{ sigma = "5 %" }, { sigma = "1 %" }]', "spread.n.doping", "two global"),
    ('"n.diffusion_length" = { sigma = "5 %" }', "spread.n.diffusion_length", "no finite"),
    ('"n.doping" = "5 %"', "spread.n.doping", "expected a table"),
    ('"card.fc" = { sigma = "0.1 V" }', "spread.card.fc", "plain number"),
])
def test_bad_spread_gives_one_line_naming_file_and_key(tmp_path, body, key, words):
    # the rule of the person we build for: bad input gets one line naming the file and the key
    path = tmp_path / "bad.toml"
    path.write_text(PLAIN + "\n[spread]\n" + body + "\n")
    with pytest.raises(InputError) as e:
        spread.load(path)
    text = str(e.value)
    assert "bad.toml" in text and key in text and words in text and "\n" not in text


@pytest.mark.parametrize("text, name, bias", [
    ("VF@1mA", "VF", 1e-3), ("vf@10 uA", "VF", 1e-5), ("IR@-5V", "IR", -5.0), ("C@-1V", "C", -1.0),
    ("C@0.2 V", "C", 0.2), ("BV", "BV", None), ("TT", "TT", None),
])
def test_figures_parse_with_units(text, name, bias):
    # SI prefixes m = 1e-3, u = 1e-6 (BIPM SI brochure, 9th ed.)
    f = spread.parse_figure(text)
    assert f.name == name and (f.bias == pytest.approx(bias) if bias is not None else f.bias is None)


@pytest.mark.parametrize("text, words", [
    ("VF", "needs a bias"), ("VF@-1mA", "positive"), ("IR@5V", "negative"), ("VF@1V", "not a unit of current"),
    ("XX@1V", "unknown figure"), ("BV@1V", "takes no bias"), ("C@", "needs a bias"),
])
def test_bad_figures_give_one_line(text, words):
    with pytest.raises(InputError) as e:
        spread.parse_figure(text)
    assert words in str(e.value) and "\n" not in str(e.value) and "figure" in str(e.value)


def test_forward_voltage_passes_the_current_in_the_simulators_equations():
    # modelgen.spice.evaluator is checked against ngspice itself to 0.1 % (tests/test_simulators.py);
    # its dc_current solves the terminal voltage with RS on its own path, so it checks VF independently
    device, tol = device_and({"n.doping": {"sigma": "20 %", "distribution": "lognormal"},
                              "contact_resistance": {"sigma": "0.4 ohm", "distribution": "uniform"}})
    s = spread.run(device, tol, 6, seed=2, figures=("VF@1mA", "VF@20mA"))
    for i in range(6):
        card = {k: s.result.params[k][i] for k in ("IS", "N", "RS", "ISR", "NR", "VJ", "M", "IKF")}
        card["TNOM"] = s.result.derived["temperature"][i] - 273.15
        for text, amps in (("VF@1mA", 1e-3), ("VF@20mA", 2e-2)):
            current, _ = evaluator.dc_current(card, np.array([s.figures[text][i]]))
            assert current[0] == pytest.approx(amps, rel=1e-4)  # GMIN's 1e-12 S is below that


def test_statistics_hold_parameters_and_figures():
    # percentiles of a sample lie in order between its min and max (definition)
    device, tol = device_and({"n.doping": {"sigma": "5 %", "distribution": "lognormal"}})
    stats = spread.run(device, tol, 500, seed=4).statistics()
    assert set(stats["parameters"]) == set(extraction.PARAMETERS)
    assert list(stats["figures"]) == ["VF@1mA", "IR@-5V", "C@-1V", "BV", "TT"]
    for entry in list(stats["parameters"].values()) + list(stats["figures"].values()):
        assert entry["count"] == 500
        ordered = [entry[k] for k in ("min", "p1", "p5", "p50", "p95", "p99", "max")]
        assert ordered == sorted(ordered)
    assert stats["figures"]["IR@-5V"]["min"] > 0 and stats["figures"]["C@-1V"]["unit"] == "F"
    # a one-sided junction's capacitance goes as sqrt(N_D) (Sze & Ng 2007, ch. 2): a 5 % lognormal
    # doping gives about 2.5 % in C at a fixed bias (VJ moves it a little)
    c = stats["figures"]["C@-1V"]
    assert c["std"] / c["mean"] == pytest.approx(0.025, rel=0.15)


def test_capacitance_asked_at_or_beyond_the_junction_potential_is_refused():
    # the depletion approximation's C ~ (VJ - V)^-M has no value at or above VJ (Sze & Ng 2007, ch. 2)
    device, tol = device_and({"n.doping": {"sigma": "5 %", "distribution": "lognormal"}})
    with pytest.raises(InputError) as e:
        spread.run(device, tol, 10, seed=1, figures=("C@2V",))
    assert "junction potential" in str(e.value) and "\n" not in str(e.value)
    with pytest.raises(ValueError, match="kind"):
        spread.sample(device, tol, 10, seed=1, kind="wafer")


def test_correlated_draws_follow_the_stated_correlation_and_keep_their_spread():
    # the Cholesky factor L of the correlation matrix turns independent standard normals w into z = L w
    # with covariance L L^T (Golub & Van Loan, Matrix Computations, 4th ed., 2013, sec. 4.2); the sample
    # correlation of n pairs has a standard error of (1 - rho^2) / sqrt(n) (Fisher 1915): 4 allowed
    rho = -0.6
    device, tol = device_and({"n.doping": {"sigma": "5 %", "distribution": "lognormal"},
                              "n.lifetime": {"sigma": "20 %", "distribution": "lognormal"},
                              "correlations": [["n.lifetime", "n.doping", rho]]})
    n = 20000
    rows = spread.sample(device, tol, n, seed=5)
    ln_nd, ln_tau = np.log(rows.n.doping), np.log(rows.n.lifetime)
    assert np.corrcoef(ln_nd, ln_tau)[0, 1] == pytest.approx(rho, abs=4 * (1 - rho ** 2) / np.sqrt(n))
    se = 4 / np.sqrt(2 * (n - 1))  # the sample standard deviation's relative standard error, 4 of them
    assert np.std(ln_nd, ddof=1) == pytest.approx(0.05, rel=se)
    assert np.std(ln_tau, ddof=1) == pytest.approx(0.20, rel=se)


def test_correlation_enters_the_propagated_variance():
    # first-order propagation with correlated inputs (JCGM 100:2008, the GUM, eq. 13):
    # var(y) = a^2 s1^2 + b^2 s2^2 + 2 a b rho s1 s2, with a, b the sensitivities of y = ln IS to ln N_D
    # and ln tau (central differences of the physics at +/- 1 %)
    entries = {"n.doping": {"sigma": "4 %", "distribution": "lognormal"},
               "n.lifetime": {"sigma": "15 %", "distribution": "lognormal"}}
    device, _ = device_and({})
    grid = [(1, 1), (1.01, 1), (1 / 1.01, 1), (1, 1.01), (1, 1 / 1.01)]
    rows = spread.repeated(device, len(grid))
    rows = spread.with_key(rows, "n.doping", device.n.doping[0] * np.array([g[0] for g in grid]))
    rows = spread.with_key(rows, "n.lifetime", device.n.lifetime[0] * np.array([g[1] for g in grid]))
    ln_is = np.log(extraction.derive(rows).params["IS"])
    a = (ln_is[1] - ln_is[2]) / (2 * np.log(1.01))
    b = (ln_is[3] - ln_is[4]) / (2 * np.log(1.01))
    n = 20000
    for rho in (-0.7, 0.0, 0.7):
        _, tol = device_and(dict(entries, correlations=[["n.doping", "n.lifetime", rho]]))
        s = spread.run(device, tol, n, seed=9, figures=())
        predicted = np.sqrt(a * a * 0.04 ** 2 + b * b * 0.15 ** 2 + 2 * a * b * rho * 0.04 * 0.15)
        # sampling (relative standard error 1/sqrt(2(n-1)), 0.5 %) and second-order terms: 3 % allowed
        assert np.std(np.log(s.params["IS"]), ddof=1) == pytest.approx(predicted, rel=0.03)


@pytest.mark.parametrize("correlations, words", [
    ([["n.doping", "n.lifetime", 1.0]], "strictly between -1 and 1"),
    ([["n.doping", "p.doping", 0.5]], "has no entry"),
    ([["n.doping", "contact_resistance", 0.5]], "uniform"),
    ([["n.doping", "n.lifetime", 0.9], ["n.doping", "n.thickness", 0.9], ["n.lifetime", "n.thickness", -0.9]],
     "not positive definite"),
    ("n.doping", "list of [KEY1, KEY2, rho]"),
])
def test_bad_correlations_are_one_line_naming_the_key(correlations, words):
    # a correlation matrix must be positive definite to belong to a joint normal distribution (definition)
    entries = {"n.doping": {"sigma": "4 %", "distribution": "lognormal"},
               "n.lifetime": {"sigma": "15 %", "distribution": "lognormal"},
               "n.thickness": {"sigma": "2 %"},
               "contact_resistance": {"sigma": "0.1 ohm", "distribution": "uniform"},
               "correlations": correlations}
    with pytest.raises(InputError) as e:
        device_and(entries)
    text = str(e.value)
    assert words in text and "spread.correlations" in text and "demo.toml" in text and "\n" not in text


def test_a_second_process_and_chunks_give_the_same_numbers(monkeypatch):
    # the contract that one device and a million take one code path: rows are derived independently, so
    # how they are split (chunks, a forked second process) cannot change a number (common practice)
    device, tol = device_and({"n.doping": {"sigma": "5 %", "distribution": "lognormal"},
                              "contact_resistance": {"sigma": "0.1 ohm", "distribution": "uniform"}})
    whole = spread.run(device, tol, 700, seed=4, figures=("VF@1mA", "IR@-5V"))
    monkeypatch.setattr(spread, "CHUNK", 64)
    monkeypatch.setattr(spread, "FORK_MIN", 100)
    split = spread.run(device, tol, 700, seed=4, figures=("VF@1mA", "IR@-5V"), fork=True)
    for k in whole.params:
        np.testing.assert_array_equal(whole.params[k], split.params[k])
    for k in whole.figures:
        np.testing.assert_array_equal(whole.figures[k], split.figures[k])


def test_a_parameter_that_does_not_vary_has_no_spread():
    # a constant has zero variance and is its own mean (definition); summing 500 equal floats would
    # otherwise leave round-off of 1e-16 relative in both
    device, tol = device_and({"n.doping": {"sigma": "5 %", "distribution": "lognormal"}})
    stats = spread.run(device, tol, 500, seed=4, figures=()).statistics()["parameters"]
    for name in ("IBV", "EG", "XTI", "N"):
        assert stats[name]["std"] == 0.0 and stats[name]["mean"] == stats[name]["min"] == stats[name]["max"]
    assert stats["IS"]["std"] > 0

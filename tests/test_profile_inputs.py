"""Diffused and tabulated profiles and the [fit] window in descriptions.

The keys parse with their units and a table's path is taken relative to its description; each bad
input is one line naming the file, line and key (exit 2, no traceback); the solver Structure of an
erfc, gaussian or table device holds the profile the description gives, checked against the
diffusion profiles written out here with scipy (Plummer, Deal & Griffin, *Silicon VLSI Technology*,
2000, ch. 7: a constant-source diffusion is Cs erfc(x / 2 sqrt(D t)), a limited-source one
Cs exp(-(x / 2 sqrt(D t))^2)); the junction lies where the acceptors equal the substrate's donors
(Sze & Ng, *Physics of Semiconductor Devices*, 3rd ed., 2007, ch. 2: the metallurgical junction).
"""

import math
from pathlib import Path

import numpy as np
import pytest
from scipy.integrate import quad
from scipy.optimize import brentq
from scipy.special import erfc

from modelgen import description, extraction, lots, structures
from modelgen.device import concatenate
from modelgen.errors import InputError

from support import ROOT, run

DIFFUSED = ROOT / "examples" / "diffused_emitter.toml"
TABLE = ROOT / "examples" / "implanted_anode.toml"
CM3 = 1e6  # 1 cm^-3 in m^-3 (SI definition of the centimetre)
UM = 1e-6

ERFC = """name = "DX"
area = "100 um^2"
profile = "erfc"
surface_concentration = "1e20 cm^-3"
junction_depth = "0.5 um"
[p]
lifetime = "10 ns"
[n]
doping = "1e16 cm^-3"
thickness = "20 um"
lifetime = "1 us"
"""

TABLE_TOML = """name = "DT"
area = "100 um^2"
profile = "table"
profile_table = "{csv}"
[p]
lifetime = "10 ns"
[n]
lifetime = "1 us"
"""

GOOD_CSV = """# invented test profile
depth [um],net_doping [cm^-3]
0,-1e19
0.5,-1e17
1.0,1e15
2.0,1e15
10,1e15
"""


def refused(r, *words):
    """Exit 2, exactly one error line holding ``words``, no traceback."""
    assert r.exit_code == 2, r.output
    errors = [ln for ln in r.stderr.splitlines() if ln.startswith("modelgen: error:")]
    assert len(errors) == 1, r.stderr[:2000]
    assert "Traceback" not in r.output and "Traceback" not in r.stderr
    for w in words:
        assert w in errors[0], (w, errors[0])
    return errors[0]


def write_table(folder, csv_text, name="prof.csv"):
    folder.mkdir(parents=True, exist_ok=True)
    (folder / name).write_text(csv_text)
    toml = folder / "dev.toml"
    toml.write_text(TABLE_TOML.format(csv=name))
    return toml


# ---- keys ----------------------------------------------------------------------------------------

def test_diffused_keys_parse_in_si():
    d = description.from_mapping(description.parse_toml(ERFC, "x"))
    assert d.profile[0] == "erfc"
    assert d.surface_concentration[0] == pytest.approx(1e20 * CM3, rel=1e-12)
    assert d.junction_depth[0] == pytest.approx(0.5 * UM, rel=1e-12)
    assert np.isnan(d.characteristic_length[0]) and np.isnan(d.p.doping[0])
    other = ERFC.replace('junction_depth = "0.5 um"', 'characteristic_length = "180 nm"')
    d = description.from_mapping(description.parse_toml(other, "x"))
    assert d.characteristic_length[0] == pytest.approx(0.18 * UM, rel=1e-12)


def test_table_path_is_relative_to_the_description(tmp_path, monkeypatch):
    # the description lives in a sub-folder; the run starts elsewhere
    toml = write_table(tmp_path / "sub", GOOD_CSV.replace("depth [um]", "depth [nm]")
                       .replace("0.5,", "500,").replace("1.0,", "1000,").replace("2.0,", "2000,")
                       .replace("10,", "10000,"))
    monkeypatch.chdir(tmp_path)
    d = description.load(toml)
    t = d.profile_table[0]
    np.testing.assert_allclose(t.depth, np.array([0, 0.5, 1.0, 2.0, 10.0]) * UM, rtol=1e-12)  # 1 nm = 1e-9 m
    np.testing.assert_allclose(t.net_doping, np.array([-1e19, -1e17, 1e15, 1e15, 1e15]) * CM3, rtol=1e-12)
    assert Path(t.file) == tmp_path / "sub" / "prof.csv"
    r = run("card", toml, "-q")
    assert r.exit_code == 0, r.output
    assert ".model DT D" in r.stdout


def test_fit_keys_parse_and_validate():
    text = ERFC + """[fit]
current_low = "1 nA"
current_high = "10 mA"
reverse_bias = "-5 V"
capacitance_low = "-5 V"
capacitance_high = "300 mV"
"""
    d = description.from_mapping(description.parse_toml(text, "x"))
    assert (d.fit_current_low[0], d.fit_current_high[0]) == (pytest.approx(1e-9), pytest.approx(1e-2))
    assert d.fit_reverse_bias[0] == -5.0
    assert (d.fit_capacitance_low[0], d.fit_capacitance_high[0]) == (-5.0, pytest.approx(0.3))
    plain = description.from_mapping(description.parse_toml(ERFC, "x"))
    assert all(np.isnan(getattr(plain, f"fit_{k}")[0]) for k in
               ("current_low", "current_high", "reverse_bias", "capacitance_low", "capacitance_high"))
    bad = {
        "current_high": (text.replace('current_high = "10 mA"', 'current_high = "1 pA"'), "must go from low"),
        "capacitance_high": (text.replace('capacitance_high = "300 mV"', 'capacitance_high = "-6 V"'),
                             "must go from low"),
        "reverse_bias": (text.replace('reverse_bias = "-5 V"', 'reverse_bias = "0 V"'), "not a reverse bias"),
        "current_low": (text.replace('current_low = "1 nA"', 'current_low = "-1 nA"'), "must be positive"),
        "bias": (text.replace('reverse_bias = "-5 V"', 'bias = "-5 V"'), "unknown key"),
    }
    for key, (t, words) in bad.items():
        with pytest.raises(InputError) as e:
            description.from_mapping(description.parse_toml(t, "dev.toml"), file="dev.toml")
        assert e.value.key == f"fit.{key}" and words in e.value.message, (key, str(e.value))


def test_fit_columns_in_a_lot_table(tmp_path):
    f = tmp_path / "lot.csv"
    f.write_text("name,area [um^2],p.doping [cm^-3],p.thickness [um],n.doping [cm^-3],n.thickness [um],"
                 "fit.current_low [nA],fit.current_high [mA],fit.reverse_bias [V]\n"
                 "D1,100,1e19,1,1e16,10,1,10,-3\nD2,100,1e19,1,1e16,10,2,20,\n")
    table = lots.read_csv(f)
    result, good = lots.derive(table)
    assert good.all()
    np.testing.assert_allclose(result.device.fit_current_low, [1e-9, 2e-9])
    assert result.device.fit_reverse_bias[0] == -3.0 and np.isnan(result.device.fit_reverse_bias[1])


# ---- bad input: one line naming file, line and key ------------------------------------------------

BAD_TABLES = {
    "missing column": ("depth [um],doping [cm^-3]\n0,-1e19\n1,1e15\n2,1e15\n", "line 1", "net_doping",
                       "no net_doping column"),
    "no unit": ("depth,net_doping [cm^-3]\n0,-1e19\n1,1e15\n2,1e15\n", "line 1", "depth", "unit in brackets"),
    "not increasing": ("depth [um],net_doping [cm^-3]\n0,-1e19\n1,-1e17\n0.8,1e15\n2,1e15\n", "line 4", "depth",
                       "increase strictly"),
    "no junction": ("depth [um],net_doping [cm^-3]\n0,-1e19\n1,-1e17\n2,-1e15\n", "line 2", "net_doping",
                    "no junction"),
    "second junction": ("depth [um],net_doping [cm^-3]\n0,-1e19\n1,1e16\n2,-1e15\n3,1e15\n", "line 4",
                        "net_doping", "one junction"),
    "not finite": ("depth [um],net_doping [cm^-3]\n0,-1e19\n1,nan\n2,1e15\n", "line 3", "net_doping",
                   "not a finite number"),
    "not a number": ("depth [um],net_doping [cm^-3]\n0,-1e19\n1,lots\n2,1e15\n", "line 3", "net_doping",
                     "not a number"),
    "too few points": ("depth [um],net_doping [cm^-3]\n0,-1e19\n2,1e15\n", "", "", "needs 3 to"),
    "not from the contact": ("depth [um],net_doping [cm^-3]\n0.1,-1e19\n1,1e15\n2,1e15\n", "line 2", "depth",
                             "first depth must be 0"),
    "bad unit": ("depth [V],net_doping [cm^-3]\n0,-1e19\n1,1e15\n2,1e15\n", "line 1", "depth", "column unit"),
}


@pytest.mark.parametrize("case", BAD_TABLES, ids=list(BAD_TABLES))
def test_bad_profile_table_is_one_line(tmp_path, case):
    text, line, key, words = BAD_TABLES[case]
    toml = write_table(tmp_path, text)
    refused(run("card", toml, "-o", tmp_path / "out.lib"), str(tmp_path / "prof.csv"), line, key, words)
    assert not (tmp_path / "out.lib").exists()


def test_missing_profile_table_names_the_description(tmp_path):
    toml = write_table(tmp_path, GOOD_CSV)
    (tmp_path / "prof.csv").unlink()
    refused(run("card", toml), str(toml), "profile_table", "'prof.csv'", "no such file")


BAD_DESCRIPTIONS = {
    "no surface": (ERFC.replace('surface_concentration = "1e20 cm^-3"\n', ""), "surface_concentration", "needs"),
    "p doping given": (ERFC.replace("[p]\n", '[p]\ndoping = "1e19 cm^-3"\n'), "p.doping", "leave p.doping out"),
    "both lengths": (ERFC.replace('junction_depth = "0.5 um"', 'junction_depth = "0.5 um"\n'
                                  'characteristic_length = "0.2 um"'), "characteristic_length", "not both"),
    "no depth": (ERFC.replace('junction_depth = "0.5 um"\n', ""), "junction_depth", "needs junction_depth"),
    "unknown profile": (ERFC.replace('"erfc"', '"exponential"'), "profile", "is not one of"),
    "table file on erfc": (ERFC.replace('profile = "erfc"', 'profile = "erfc"\nprofile_table = "a.csv"'),
                           "profile_table", "applies only"),
    "surface on abrupt": (ERFC.replace('profile = "erfc"\n', "").replace("[p]\n", '[p]\ndoping = "1e19 cm^-3"\n'
                                                                        'thickness = "1 um"\n'),
                          "surface_concentration", "applies only"),
    "surface below substrate": (ERFC.replace('"1e20 cm^-3"', '"5e15 cm^-3"'), "surface_concentration",
                                "makes no junction"),
    "table without file": (TABLE_TOML.replace('profile_table = "{csv}"\n', ""), "profile_table", "needs"),
    "fit forward bias": (ERFC + '[fit]\nreverse_bias = "2 V"\n', "fit.reverse_bias", "not a reverse bias"),
    "fit range reversed": (ERFC + '[fit]\ncapacitance_low = "0 V"\ncapacitance_high = "-3 V"\n',
                           "fit.capacitance_high", "must go from low to high"),
    "fit current unit": (ERFC + '[fit]\ncurrent_low = "1 V"\n', "fit.current_low", "current"),
}


@pytest.mark.parametrize("case", BAD_DESCRIPTIONS, ids=list(BAD_DESCRIPTIONS))
def test_bad_profile_keys_are_one_line(tmp_path, case):
    text, key, words = BAD_DESCRIPTIONS[case]
    f = tmp_path / "dev.toml"
    f.write_text(text)
    refused(run("card", f), str(f), key, words)


def test_table_profile_refuses_side_widths(tmp_path):
    toml = write_table(tmp_path, GOOD_CSV)
    toml.write_text(toml.read_text().replace("[n]\n", '[n]\nthickness = "5 um"\n'))
    refused(run("card", toml), str(toml), "n.thickness", "table profile gives", "leave n.thickness out")
    toml.write_text(TABLE_TOML.format(csv="prof.csv").replace('profile = "table"',
                                                               'profile = "table"\njunction_depth = "1 um"'))
    refused(run("card", toml), str(toml), "junction_depth", "table gives the junction depth")


def test_a_table_side_depleted_through_names_the_table(tmp_path):
    # a 1e14 cm^-3 n side 5 um long at -50 V: an abrupt one-sided junction depletes about
    # sqrt(2 eps V / (q N)) = 26 um (Sze & Ng 2007, sec. 2.2), beyond the n contact
    toml = write_table(tmp_path, "depth [um],net_doping [cm^-3]\n0,-1e19\n0.01,-1e18\n0.02,1e14\n5,1e14\n")
    toml.write_text(toml.read_text().replace('area = "100 um^2"', 'area = "100 um^2"\nreference_bias = "-50 V"'))
    refused(run("card", toml), str(toml), "profile_table", "n side of the equivalent abrupt junction",
            "depleted through")


def test_lots_take_erfc_columns_and_refuse_tables(tmp_path):
    f = tmp_path / "lot.csv"
    f.write_text("name,area [um^2],profile,surface_concentration [cm^-3],junction_depth [um],"
                 "n.doping [cm^-3],n.thickness [um]\n"
                 "D1,100,erfc,1e20,0.5,1e16,20\nD2,100,gaussian,1e19,0.8,1e16,20\n")
    result, good = lots.derive(lots.read_csv(f))
    assert good.all() and list(structures.closed_form_holds(result)) == [False, False]
    assert result.rows_by_kind()["profile"] == 2
    out = tmp_path / "out"
    out.mkdir()
    r = run("lots", f, "-o", out / "lot.lib")
    assert r.exit_code == 0, r.output
    g = tmp_path / "tab.csv"
    g.write_text("name,area [um^2],profile,profile_table\nD1,100,table,prof.csv\n")
    refused(run("lots", g, "-o", out / "tab.lib"), str(g), "line 2", "profile_table", "not from a lot table")


# ---- the solver Structure holds the described profile --------------------------------------------

def test_structure_of_the_erfc_example_puts_the_junction_where_described():
    r = extraction.derive(description.load(DIFFUSED))
    s = structures.structure_for(r, 0)
    cs, nb, xj = 1e20 * CM3, 2e15 * CM3, 0.5 * UM  # the example's surface, substrate and junction depth
    # constant-source diffusion (Plummer, Deal & Griffin 2000, ch. 7): N_A = Cs erfc(x / d); the junction
    # where N_A equals the substrate (Sze & Ng 2007, ch. 2) fixes d
    d = brentq(lambda d: cs * erfc(xj / d) - nb, 1e-9, 1e-5, xtol=1e-20, rtol=1e-14)
    x = np.array([0.0, 0.1, 0.3, 0.45, 0.5, 0.55, 0.8, 2.0, 100.0]) * UM
    np.testing.assert_allclose(s.profile(x), nb - cs * erfc(x / d), rtol=1e-9, atol=1e-6 * nb)
    assert abs(s.profile(np.array([xj]))[0]) < 1e-6 * nb  # N(xj) = background - Cs erfc(xj/d) = 0
    assert s.profile.junctions[0] == pytest.approx(xj, rel=1e-9)
    assert s.profile.length == pytest.approx(xj + 250 * UM, rel=1e-12)  # [n] thickness from the junction
    assert s.area == pytest.approx(0.25e-6 + 2e-3 * xj, rel=1e-12)  # bottom plus perimeter x junction depth
    assert s.velocity_p == pytest.approx(1e3) and math.isinf(s.velocity_n)  # 1e5 cm/s; ohmic n contact


def test_structure_of_a_gaussian_from_its_characteristic_length():
    text = (ERFC.replace('"erfc"', '"gaussian"')
            .replace('junction_depth = "0.5 um"', 'characteristic_length = "0.3 um"'))
    r = extraction.derive(description.from_mapping(description.parse_toml(text, "x")))
    s = structures.structure_for(r, 0)
    cs, nb, d = 1e20 * CM3, 1e16 * CM3, 0.3 * UM
    # limited-source diffusion, surface value Cs (Plummer, Deal & Griffin 2000, ch. 7): Cs exp(-(x/d)^2) = Nb
    xj = brentq(lambda x: cs * math.exp(-(x / d) ** 2) - nb, 0.0, 10 * d, xtol=1e-20, rtol=1e-14)
    x = np.linspace(0, 2 * xj, 9)
    np.testing.assert_allclose(s.profile(x), nb - cs * np.exp(-(x / d) ** 2), rtol=1e-9, atol=1e-6 * nb)
    assert s.profile.junctions[0] == pytest.approx(xj, rel=1e-9)
    assert s.profile.length == pytest.approx(xj + 20 * UM, rel=1e-12)


def test_structure_of_the_table_example_follows_its_csv():
    r = extraction.derive(description.load(TABLE))
    s = structures.structure_for(r, 0)
    data = np.loadtxt(ROOT / "examples" / "implanted_anode_profile.csv", delimiter=",", comments="#", skiprows=4)
    depth, net = data[:, 0] * UM, data[:, 1] * CM3
    np.testing.assert_allclose(s.profile(depth), net, rtol=1e-9)  # the interpolation passes through the points
    k = np.flatnonzero(np.diff(np.sign(net)))[0]
    assert depth[k] < s.profile.junctions[0] < depth[k + 1]
    assert s.profile.length == pytest.approx(depth[-1])


def test_equivalent_junction_of_an_erfc_emitter():
    # the light side is the uniform substrate: its equivalent doping is the substrate's; the heavy side's is
    # the mean net acceptor density over its neutral region, integrated here with quad
    r = extraction.derive(description.from_mapping(description.parse_toml(ERFC, "x")))
    p, n = r.derived["p"], r.derived["n"]
    cs, nb, xj = 1e20 * CM3, 1e16 * CM3, 0.5 * UM
    d = brentq(lambda d: cs * erfc(xj / d) - nb, 1e-9, 1e-5, xtol=1e-20, rtol=1e-14)
    assert n["doping"][0] == pytest.approx(nb, rel=1e-3)
    edge = xj - p["depletion_extent"][0]
    mean = quad(lambda x: cs * erfc(x / d) - nb, 0.0, edge, epsabs=0, epsrel=1e-12)[0] / edge
    assert p["doping"][0] == pytest.approx(mean, rel=1e-3)
    assert p["thickness"][0] == pytest.approx(xj) and n["thickness"][0] == pytest.approx(20 * UM)
    found = {(m.severity, m.kind) for m in r.findings_for(0)}
    assert ("warning", "profile") in found


def test_closed_form_holds_only_for_abrupt_and_linear():
    abrupt = ERFC.replace('profile = "erfc"\n', "").replace('surface_concentration = "1e20 cm^-3"\n', "").replace(
        "[p]\n", '[p]\ndoping = "1e19 cm^-3"\nthickness = "1 um"\n').replace('junction_depth = "0.5 um"\n', "")
    linear = abrupt.replace('area = "100 um^2"', 'area = "100 um^2"\nprofile = "linear"\ngrading = "1e20 cm^-4"')
    gauss = ERFC.replace('"erfc"', '"gaussian"')
    devices = [description.from_mapping(description.parse_toml(t, "x")) for t in (abrupt, linear, ERFC, gauss)]
    r = extraction.derive(concatenate(devices))
    assert structures.closed_form_holds(r).tolist() == [True, True, False, False]
    assert [("warning", "profile") in {(m.severity, m.kind) for m in r.findings_for(i)} for i in range(4)] == \
        [False, False, True, True]
    # abrupt rows keep the closed forms' own structure: the step at the p side's thickness (1 um)
    s = structures.structure_for(r, 0)
    assert s.profile.junctions == (pytest.approx(1 * UM),)
    assert s.profile(np.array([0.5 * UM, 2 * UM])).tolist() == [-1e19 * CM3, pytest.approx(1e16 * CM3)]


def test_profile_rows_give_the_same_numbers_alone_and_in_a_table():
    # one code path for one device and a table (the project's rule): each row's equivalent junction
    # depends on that row alone, also mixed with abrupt rows and a tabulated profile
    abrupt = ERFC.replace('profile = "erfc"\n', "").replace('surface_concentration = "1e20 cm^-3"\n', "").replace(
        "[p]\n", '[p]\ndoping = "1e19 cm^-3"\nthickness = "1 um"\n').replace('junction_depth = "0.5 um"\n', "")
    texts = [ERFC, abrupt, ERFC.replace('"erfc"', '"gaussian"').replace('"0.5 um"', '"0.9 um"'),
             ERFC.replace('"1e20 cm^-3"', '"3e19 cm^-3"').replace('area = "100 um^2"', 'area = "100 um^2"\n'
                                                                     'reference_bias = "-2 V"')]
    devices = [description.from_mapping(description.parse_toml(t, "x")) for t in texts]
    devices.append(description.load(TABLE))
    together = extraction.derive(concatenate(devices))
    for i, d in enumerate(devices):
        alone = extraction.derive(d)
        for k in extraction.PARAMETERS:
            assert np.array_equal(alone.params[k], together.params[k][i:i + 1], equal_nan=True), (i, k)


def _table_mapping(**more):
    import tomllib

    table = tomllib.loads(TABLE.read_text())
    table["profile_table"] = str(TABLE.parent / table["profile_table"])
    table.update(more)
    return table


def test_a_profile_row_takes_the_descriptions_intrinsic_density_and_mobilities():
    # the solver of a tabulated profile once ignored material.ni and a side's given mobility. With ni doubled
    # the forward current must grow between 2x (depletion-region recombination, proportional to ni: Sah,
    # Noyce & Shockley 1957) and 4x (diffusion, proportional to ni^2: Shockley 1949), nearer 4x as the
    # bias rises and diffusion takes over
    from modelgen.physics import driftdiffusion as dd

    base = extraction.derive(description.from_mapping(_table_mapping()))
    ni = float(base.derived["ni"][0])
    doubled = extraction.derive(description.from_mapping(_table_mapping(material={"ni": f"{2 * ni / CM3!r} cm^-3"})))
    v = np.array([0.3, 0.4, 0.5])
    ratio = (dd.solve(structures.structure_for(doubled, 0), v).current
             / dd.solve(structures.structure_for(base, 0), v).current)
    assert np.all((ratio > 2.0) & (ratio < 4.0)) and np.all(np.diff(ratio) > 0), ratio
    # a side's given minority mobility is the solver's mobility for that side's minority carriers there
    table = _table_mapping()
    table["n"] = dict(table["n"], minority_mobility="300 cm^2/(V*s)")
    s = structures.structure_for(extraction.derive(description.from_mapping(table)), 0)
    x_n = np.array([1.8 * UM, 3.0 * UM])  # in the n epi, beyond the junction at about 1.6 um
    assert np.all(s.profile(x_n) > 0)
    assert s.hole_mobility(x_n) == pytest.approx(0.03, rel=1e-12)  # 300 cm^2/(V s)
    plain = structures.structure_for(base, 0)
    assert s.electron_mobility(x_n) == pytest.approx(plain.electron_mobility(x_n), rel=1e-12)  # the model kept

"""modelgen report: each kind builds from the examples, the page is self-contained and deterministic, and the
plotted arrays are the API's numbers."""

from __future__ import annotations

import json
import os
import re
import shutil
import subprocess
import sys
from html.parser import HTMLParser

import numpy as np
import pytest

import support

pytest.importorskip("matplotlib", reason="matplotlib is not installed (the 'report' and 'test' extras)")

from modelgen import calibration, cards, corners, description, extraction, lots, measurements, numeric  # noqa: E402
from modelgen import report  # noqa: E402
from modelgen.report import device as device_report  # noqa: E402
from modelgen.report import lot as lot_report  # noqa: E402
from modelgen.report.panels import series  # noqa: E402
from modelgen.spice import evaluator  # noqa: E402

EXAMPLES = support.ROOT / "examples"
MEASURED = EXAMPLES / "measured"


class _Page(HTMLParser):
    """The page's svg elements, their path data, every attribute that could load something, and the text."""

    def __init__(self):
        super().__init__()
        self.svgs, self.paths, self.loads, self.tags, self.depth = [], [], [], [], 0
        self.text = []

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        self.tags.append(tag)
        if tag == "svg":
            self.svgs.append(a)
            self.paths.append(0)
        if tag == "path" and self.svgs and a.get("d", "").strip():
            self.paths[-1] += 1
        for k in ("src", "href", "xlink:href", "action", "data"):
            if k in a:
                self.loads.append(a[k])

    def handle_data(self, data):
        self.text.append(data)


def parse(text):
    page = _Page()
    page.feed(text)
    page.close()
    return page


def check_page(text, figures):
    """The page parses, holds ``figures`` figures each with drawn paths, and refers to no network resource."""
    page = parse(text)
    assert len(page.svgs) == figures
    assert all(n > 0 for n in page.paths), page.paths
    assert "script" not in page.tags and "link" not in page.tags and "iframe" not in page.tags
    assert not re.search(r"https?://", text, re.I)
    assert all(v.startswith("#") for v in page.loads), [v for v in page.loads if not v.startswith("#")]
    assert "@import" not in text and "url(http" not in text
    ids = re.findall(r'\bid="([^"]+)"', text)
    assert len(ids) == len(set(ids)), "duplicate ids across figures"
    body = "".join(page.text)
    assert "check it against measured I-V and C-V" in body and "derate them" in body  # the standing caution
    assert "modelgen" in body
    return page


@pytest.fixture(scope="module")
def switching():
    """The switching diode's device report (ngspice's run where it is installed)."""
    r = report.build(str(EXAMPLES / "switching_diode.toml"))
    yield r
    r.close()


@pytest.fixture(scope="module")
def lot_files(tmp_path_factory):
    """``modelgen lots`` on the example lot table: its summary JSON and CSV."""
    d = tmp_path_factory.mktemp("lot")
    res = support.run("lots", EXAMPLES / "lot_table.csv", "-o", d / "lot.lib", "--dialect", "ngspice", "-q")
    assert res.exit_code == 0, res.output
    return d / "lot.summary.json", d / "lot.summary.csv"


# --------------------------------------------------------------------------- device


def test_device_report_builds_for_every_example():
    for path in support.EXAMPLES:
        r = report.build(str(path), simulate=False)
        try:
            assert r.kind == "device"
            page = check_page(r.html(), 5)
            name = str(description.load(str(path)).name[0])
            assert name in "".join(page.text)
            assert ".model " + name in r.html()  # the card itself
        finally:
            r.close()


def test_device_forward_curves_are_the_apis(switching):
    dev = switching.data
    fig = switching.panels[0].figure
    (x, y), = series(fig, "card")
    # the evaluator of ngspice's equations on the card's own values
    card = dict(cards.card_values(dev.result, 0, "ngspice")[0])
    assert np.array_equal(y, np.abs(evaluator.dc_current(card, x, "ngspice", gmin=0.0)[0]))
    (xs, ys), = series(fig, "solver")
    sw = numeric.sweep(extraction.derive(description.load(str(EXAMPLES / "switching_diode.toml"))), 0)
    assert np.array_equal(xs, sw.forward_bias) and np.array_equal(ys, np.abs(sw.forward_current))
    (xp, yp), = series(fig, "physics")
    assert np.array_equal(yp, np.abs(calibration.terminal_current(dev.result, np.zeros(len(xp), int), xp)[0]))
    # the error table is numeric.errors_of of the card against the solver
    errs = numeric.errors_of(card, sw, "ngspice")
    table = switching.panels[0].table
    assert [row[0] for row in table[1:]] == list(errs)
    assert [row[1] for row in table[1:]] == [f"{100 * v:.3g} %" for v in errs.values()]


def test_device_capacitance_curve_is_the_evaluators(switching):
    dev = switching.data
    (x, y), = series(switching.panels[2].figure, "card")
    assert np.allclose(y, 1e12 * evaluator.capacitance(dev.card, x, "ngspice", gmin=0.0), rtol=1e-14, atol=0)


def test_device_simulator_curve_agrees_with_the_evaluator(switching):
    """ngspice's own run of the card against the evaluator of its equations (0.1 %, as modelgen check)."""
    support.need("ngspice")
    dev = switching.data
    for panel in (0, 1):  # forward and reverse
        (v, i), = series(switching.panels[panel].figure, "simulator")
        ref = np.abs(evaluator.dc_current(dev.card, v, "ngspice", gmin=device_report.GMIN)[0])  # the run's GMIN
        # 0.1 % as modelgen check, plus ngspice's own resolution of a current through RS: the junction voltage
        # to double precision, eps V / RS (about 2e-16 A at 5 V and 6 ohm; common practice of floating point)
        floor = 4 * np.finfo(float).eps * np.abs(v) / dev.card["RS"]
        assert np.all(np.abs(i - ref) <= 1e-3 * ref + floor)
    (v, c), = series(switching.panels[2].figure, "simulator")
    assert np.max(np.abs(c / (1e12 * evaluator.capacitance(dev.card, v, "ngspice")) - 1)) < 1e-3


def test_device_legend_says_when_ngspice_is_missing(monkeypatch):
    from modelgen.spice import ngspice

    monkeypatch.setattr(ngspice, "available", lambda: False)
    r = report.build(str(EXAMPLES / "graded_varactor.toml"))
    try:
        labels = r.panels[0].figure.axes[0].get_legend_handles_labels()[1]
        assert any("ngspice not installed" in t and "Debian package: ngspice" in t for t in labels)
        assert not series(r.panels[0].figure, "simulator")
    finally:
        r.close()


def test_field_integrates_to_the_junction_potential(switching):
    """Poisson in the depletion approximation: the area under E(x) is VJ - V (Sze & Ng 2007, sec. 2.2)."""
    dev = switching.data
    (x, e), = series(switching.panels[4].figure, "physics")
    from scipy.integrate import trapezoid

    area = trapezoid(e * 1e5, x * 1e-6)  # kV/cm and um back to V/m and m
    assert area == pytest.approx(float(dev.result.params["VJ"][0]) - dev.window.reverse_bias, rel=1e-3)


def test_excess_density_at_the_edge_is_the_law_of_the_junction(switching):
    """At each depletion edge the excess minority density is n_i,eff^2/N (exp(V/Vt) - 1) (Shockley 1949)."""
    dev = switching.data
    from modelgen.constants import thermal_voltage

    vt = float(thermal_voltage(dev.temperature))
    fig = switching.panels[3].figure
    for axis, side in ((0, "p"), (1, "n")):
        (x, u), = series(fig, "physics", axis)
        s = dev.result.derived[side]
        edge = float(s["ni_eff"][0]) ** 2 / float(s["doping"][0]) * np.expm1(dev.profile_bias / vt)
        k = np.argmin(np.abs(x))
        assert u[k] * 1e6 == pytest.approx(edge, rel=1e-12)


# --------------------------------------------------------------------------- lot


def test_lot_report_from_summary_json_csv_and_table(lot_files):
    js, cs = lot_files
    doc = json.loads(js.read_text())
    columns = doc["columns"]
    for path in (js, cs, EXAMPLES / "lot_table.csv"):
        r = report.build(str(path))
        try:
            assert r.kind == "lot"
            check_page(r.html(), 2)
            hist = r.panels[0].figure
            bars = [a for ax in hist.axes for a in ax.patches if getattr(a, "modelgen_role", "") == "histogram"]
            counts, edges = bars[0].modelgen_data
            assert counts.sum() == len(columns["IS"])
            assert np.array_equal(counts, np.histogram(np.asarray(columns["IS"], float), edges)[0])
            # the scatter's points are the lot's rows
            (x, y), = series(r.panels[1].figure, "lot")
            data = r.data
            assert np.array_equal(x, data.x[0][data.shown]) and np.array_equal(y, data.y[0][data.shown])
            # the corners marked are the rows lots picks
            is_col = np.asarray(columns["IS"], float)
            marked = [xy for xy in series(r.panels[1].figure, "corner")]
            rows = [row for _, row, *_ in data.corners]
            assert len(marked) == 3
            for (cx, cy), row in zip(marked, rows):
                assert cx[0] == data.x[0][row] and cy[0] == data.y[0][row]
            assert [is_col[row] for row in rows] == sorted(is_col[row] for row in rows)
        finally:
            r.close()


def test_lot_forward_voltage_passes_its_current(lot_files):
    """The VF@1mA figure: each row's card in ngspice's equations carries 1 mA there (evaluator, RS solved)."""
    columns = json.loads(lot_files[0].read_text())["columns"]
    vf, unit = lot_report.figure_column({k: np.asarray(v, float) if k not in ("name", "p.regime", "n.regime")
                                         else v for k, v in columns.items()}, "VF@1mA")
    assert unit == "V"
    for k in range(len(vf)):
        card = {p: columns[p][k] for p in ("IS", "N", "ISR", "NR", "VJ", "M", "IKF", "RS")}
        card["TNOM"] = columns["temperature"][k] - 273.15
        i = evaluator.dc_current(card, np.array([vf[k]]), "ngspice", gmin=0.0)[0][0]
        assert i == pytest.approx(1e-3, rel=1e-6)


def test_big_lot_scatter_is_subsampled_evenly(tmp_path, lot_files):
    doc = json.loads(lot_files[0].read_text())
    n = 5000
    big = {k: (v * (n // len(v) + 1))[:n] for k, v in doc["columns"].items()}
    big["name"] = [f"D{k}" for k in range(n)]
    path = tmp_path / "big.summary.json"
    path.write_text(json.dumps({"rows": n, "statistics": {}, "skipped": [], "columns": big}))
    r = report.build(str(path))
    try:
        (x, _), = series(r.panels[1].figure, "lot")
        assert len(x) == lot_report.MAX_POINTS
        assert np.array_equal(r.data.shown, np.unique(np.linspace(0, n - 1, lot_report.MAX_POINTS).round()
                                                      .astype(int)))
    finally:
        r.close()


# --------------------------------------------------------------------------- corners


def test_corners_report(tmp_path):
    path = str(EXAMPLES / "switching_diode.toml")
    r = report.build(path, corners=[-40, 27, 85, 125])
    try:
        assert r.kind == "corners"
        check_page(r.html(), 5)
        run = corners.run(description.load(path), [-40, 27, 85, 125], "ngspice")
        (tg, is_grid), (t, is_phys) = series(r.panels[0].figure, "physics")
        assert np.array_equal(t, run.evaluated) and np.array_equal(is_phys, run.result.params["IS"])
        # between the corners: the same physics (corners.evaluate) at every temperature of the curve
        between = corners.evaluate(description.load(path), corners.kelvin(tg))
        assert np.array_equal(is_grid, between.params["IS"])
        assert set(run.evaluated) <= set(tg)
        # the card's IS at each corner is what ngspice's temperature law makes of the fitted card
        card = dict(cards.card_values(run.result, run.nominal, "ngspice", overrides=run.fit.values)[0])
        (tg, is_card), = series(r.panels[0].figure, "card")
        for tc, v in zip(tg[::10], is_card[::10]):
            a = evaluator.adjusted(card, tc, "ngspice")
            assert v == a["IS"] + a["JSW"] * a["PJ"]
        # residuals at the corners: worst equals the fit's own worst IS error
        (_, res), = series(r.panels[0].figure, "card", axis=1)
        assert np.max(np.abs(res)) / 100 == pytest.approx(run.fit.worst_error["IS"], rel=1e-9)
        assert "TCV" in r.html() and ".model DSW_DEMO" in r.html()
    finally:
        r.close()


# --------------------------------------------------------------------------- calibration


def test_calibration_report():
    r = report.build(str(MEASURED / "testchip.toml"), iv=str(MEASURED / "testchip_iv.csv"),
                     cv=str(MEASURED / "testchip_cv.csv"))
    try:
        assert r.kind == "calibration"
        check_page(r.html(), 2)
        iv = measurements.read_curve(str(MEASURED / "testchip_iv.csv"), "iv")
        (v, i), = series(r.panels[0].figure, "measurement")
        assert np.array_equal(v, iv.v[iv.use]) and np.array_equal(i, np.abs(iv.y[iv.use]))
        cal = r.data.calibration
        for k, f in cal.fitted.items():
            assert f"{f['value']:.5g}" in r.html()
        # the residual plot holds the physics against the measured points that were used
        rv, rr = r.data.model["iv_residual"]
        (pv, pr), = series(r.panels[0].figure, "physics", axis=1)
        assert np.array_equal(pv, rv) and np.array_equal(pr, rr)
        # the rms of the plotted residuals over the I-V matches the calibration's own per-region counts
        assert sum(v["points"] for k, v in cal.residuals.items() if "points" in v and k != "capacitance") == len(rr)
    finally:
        r.close()


# --------------------------------------------------------------------------- command line


def test_same_input_gives_the_same_bytes(tmp_path, lot_files):
    for args in ([EXAMPLES / "switching_diode.toml", "--no-simulator"], [lot_files[0]]):
        outs = []
        for k in range(2):
            out = tmp_path / f"r{k}.html"
            res = support.run("report", *args, "-o", out)
            assert res.exit_code == 0, res.output
            outs.append(out.read_bytes())
        assert outs[0] == outs[1]


def test_png_folder(tmp_path, lot_files):
    figs = tmp_path / "figs"
    figs.mkdir()
    res = support.run("report", lot_files[0], "-o", tmp_path / "lot.html", "--png", figs)
    assert res.exit_code == 0, res.output
    names = sorted(os.listdir(figs))
    assert names == ["histograms.png", "scatter.png"]
    for n in names:
        assert (figs / n).read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_user_text_is_escaped(tmp_path):
    src = tmp_path / "a<b>&c.toml"
    shutil.copy(EXAMPLES / "graded_varactor.toml", src)
    out = tmp_path / "r.html"
    res = support.run("report", src, "-o", out, "--no-simulator")
    assert res.exit_code == 0, res.output
    text = out.read_text()
    assert "a<b>&c.toml" not in text and "a&lt;b&gt;&amp;c.toml" in text


@pytest.mark.parametrize("make, message", [
    (lambda d: d / "missing.toml", "missing.toml"),
    (lambda d: (d / "bad.toml").write_text("name = \"X\"\n[p]\ndoping = 1e17\n") and d / "bad.toml", "bad.toml"),
    (lambda d: (d / "junk.bin").write_bytes(b"\x00\x01") and d / "junk.bin", "junk.bin"),
    (lambda d: (d / "e.summary.json").write_text("{\"columns\": {}}") and d / "e.summary.json", "summary"),
    (lambda d: (d / "lot.csv").write_text("name,area [um^2],p.doping [cm^-3],p.thickness [um],n.doping [cm^-3],"
                                          "n.thickness [um]\nA,2500,5e19,0.8,2e16,4\nB,abc,5e19,0.8,2e16,4\n")
     and d / "lot.csv", "lot.csv: line 3: area"),
    (lambda d: (d / "t.summary.csv").write_text("name,line,IS,N\nA,2,1e-15,1\nB,3,1e-15\n") and d / "t.summary.csv",
     "t.summary.csv: line 3"),
])
def test_bad_input_is_one_line_and_writes_nothing(tmp_path, make, message):
    src = make(tmp_path)
    out = tmp_path / "r.html"
    res = support.run("report", src, "-o", out)
    assert res.exit_code == 2, res.output
    lines = res.output.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("modelgen: error:") and message in lines[0], res.output
    assert "Traceback" not in res.output
    assert not out.exists()
    assert not [p for p in os.listdir(tmp_path) if ".modelgen-" in p]


def test_bad_options_are_one_line(tmp_path, lot_files):
    for args, message in (([lot_files[0], "--scatter", "VF@1mA"], "--scatter"),
                          ([lot_files[0], "--scatter", "VF@1mA,nonsense"], "nonsense"),
                          ([EXAMPLES / "switching_diode.toml", "--corners", "-40,x"], "--corners"),
                          ([EXAMPLES / "switching_diode.toml", "--corners", "27,85"], "two corners"),
                          ([lot_files[0], "--corners", "-40,27,125"], "description"),
                          ([EXAMPLES / "switching_diode.toml", "-o", tmp_path / "nofolder" / "r.html"], "folder")):
        out = tmp_path / "r.html"
        res = support.run("report", *args, *(["-o", out] if "-o" not in args else []))
        assert res.exit_code == 2, res.output
        assert len(res.output.strip().splitlines()) == 1 and message in res.output, res.output
        assert not out.exists()


def test_missing_matplotlib_names_the_extra(tmp_path, monkeypatch):
    for name in [m for m in sys.modules if m == "matplotlib" or m.startswith("matplotlib.")
                 or m.startswith("modelgen.report")]:
        monkeypatch.delitem(sys.modules, name)
    monkeypatch.setitem(sys.modules, "matplotlib", None)  # import matplotlib raises ImportError
    res = support.run("report", EXAMPLES / "switching_diode.toml", "-o", tmp_path / "r.html")
    assert res.exit_code == 2
    assert "matplotlib" in res.output and "'report' extra" in res.output
    assert len(res.output.strip().splitlines()) == 1
    assert not (tmp_path / "r.html").exists()


def test_card_command_does_not_import_matplotlib():
    code = ("import sys; from modelgen import cli; from click.testing import CliRunner; "
            "r = CliRunner().invoke(cli.main, ['card', sys.argv[1]]); assert r.exit_code == 0, r.output; "
            "print('matplotlib' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code, str(EXAMPLES / "switching_diode.toml")], capture_output=True,
                         text=True, env={**os.environ, "PYTHONPATH": str(support.ROOT)}, check=True)
    assert out.stdout.strip() == "False"


def test_detect_by_content(tmp_path, lot_files):
    renamed = tmp_path / "device.txt"
    shutil.copy(EXAMPLES / "photodiode.toml", renamed)
    assert report.detect(str(renamed)) == "device"
    assert report.detect(str(lot_files[0])) == "lot"
    assert report.detect(str(lot_files[1])) == "lot"
    assert report.detect(str(EXAMPLES / "lot_table.csv")) == "lot"


def test_bias_and_png_options_are_checked_before_any_work(tmp_path):
    sw = EXAMPLES / "switching_diode.toml"
    for args, message in ((["--bias", "1.5 V"], "--bias"), (["--bias", "2 A"], "--bias"),
                          (["--png", tmp_path / "nowhere"], "--png")):
        out = tmp_path / "r.html"
        res = support.run("report", sw, "-o", out, "--no-simulator", *args)
        assert res.exit_code == 2, res.output
        assert len(res.output.strip().splitlines()) == 1 and message in res.output, res.output
        assert not out.exists()


# --------------------------------------------------------------------------- a card file beside its description
def test_card_file_report_draws_that_card_against_the_description(tmp_path):
    # a hand-edited card (IS doubled) beside its description: the card curve is the evaluator of ngspice's
    # equations on the edited numbers, the physics curve the description's, unchanged by the card
    shutil.copy(EXAMPLES / "switching_diode.toml", tmp_path / "switching_diode.toml")
    text = support.run("card", tmp_path / "switching_diode.toml", "--dialect", "ngspice", "-q").stdout
    is_line = next(ln for ln in text.splitlines() if ln.startswith("+ IS="))
    edited = text.replace(is_line, f"+ IS={2 * float(is_line.split('=')[1])!r}")
    card_file = tmp_path / "edited.lib"
    card_file.write_text(edited)
    r = report.build(str(card_file), simulate=False)
    try:
        assert r.kind == "device" and r.inputs == [str(tmp_path / "switching_diode.toml"), str(card_file)]
        check_page(r.html(), 5)
        params = cards.reader.read_cards(edited)[0].params
        (x, y), = series(r.panels[0].figure, "card")
        assert np.array_equal(y, np.abs(evaluator.dc_current(dict(params), x, "ngspice", gmin=0.0)[0]))
        derived = extraction.derive(description.load(str(tmp_path / "switching_diode.toml")))
        (xp, yp), = series(r.panels[0].figure, "physics")
        assert np.array_equal(yp, np.abs(calibration.terminal_current(derived, np.zeros(len(xp), int), xp)[0]))
        assert "+ IS=" in r.card and "edited.lib" in r.settings
        # its worst errors against the solver, in the table's first column, are numeric.errors_of of that card
        errs = numeric.errors_of(dict(params), numeric.sweep(derived, 0), "ngspice")
        table = r.panels[0].table
        assert "card file edited.lib" in table[0][1]
        assert [row[1] for row in table[1:]] == [f"{100 * v:.3g} %" for v in errs.values()]
    finally:
        r.close()


def test_card_file_report_finds_or_asks_for_its_description_and_section(tmp_path):
    lib = tmp_path / "corners.lib"
    res = support.run("spread", EXAMPLES / "switching_diode.toml", "--samples", "2000", "--corner", "VF@1mA:low",
                      "-o", lib)
    assert res.exit_code == 0, res.output
    out = tmp_path / "r.html"
    # the header names switching_diode.toml, which is not beside the copy: one line asking for --description
    res = support.run("report", lib, "-o", out, "--no-simulator")
    assert res.exit_code == 2 and "--description" in res.output and not out.exists()
    assert len(res.output.strip().splitlines()) == 1
    # two sections define the card: one line asking for --section, before any solving
    res = support.run("report", lib, "--description", EXAMPLES / "switching_diode.toml", "-o", out,
                      "--no-simulator")
    assert res.exit_code == 2 and "--section" in res.output and "vf_1ma_low" in res.output and not out.exists()
    res = support.run("report", lib, "--description", EXAMPLES / "switching_diode.toml", "--section", "vf_1ma_low",
                      "-o", out, "--no-simulator")
    assert res.exit_code == 0, res.output
    assert "corners.lib" in out.read_text()


def test_a_scalable_card_file_is_drawn_at_the_description_geometry(tmp_path):
    # the scalable subcircuit taken at the description's own area and perimeter is the per-device card
    # (tests/test_scalable.py proves that in ngspice); so its drawn forward curve is the derived card's
    shutil.copy(EXAMPLES / "switching_diode.toml", tmp_path / "switching_diode.toml")
    lib = tmp_path / "scalable.lib"
    assert support.run("card", tmp_path / "switching_diode.toml", "--scalable", "--form", "subckt", "-q", "-o",
                       lib).exit_code == 0
    r = report.build(str(lib), simulate=False)
    try:
        (x, y), = series(r.panels[0].figure, "card")
        derived = extraction.derive(description.load(str(tmp_path / "switching_diode.toml")))
        card = dict(cards.card_values(derived, 0, "ngspice")[0])
        assert np.allclose(y, np.abs(evaluator.dc_current(card, x, "ngspice", gmin=0.0)[0]), rtol=1e-9, atol=0)
        assert any("subcircuit" in text for _, text in r.notes)
    finally:
        r.close()


def test_lot_report_marks_corners_chosen_by_a_figure(lot_files):
    # --lot-corners takes a figure as lots --corners does: the marked rows are the rows nearest those
    # percentiles of the forward voltage each row's card gives in ngspice's equations (the
    # spread.forward_voltage the scatter plots), ordered in it
    js, _ = lot_files
    r = report.build(str(js), corner_spec="VF@1mA:5,50,95")
    try:
        data = r.data
        vf = lot_report.figure_column(data.columns, "VF@1mA")[0]
        rows = [row for _, row, *_ in data.corners]
        assert [section for section, *_ in data.corners] == ["low", "typical", "high"]
        order = np.argsort(vf, kind="stable")
        n = len(vf)
        assert rows == [int(order[int(round(p / 100 * (n - 1)))]) for p in (5, 50, 95)]
        assert vf[rows[0]] <= vf[rows[1]] <= vf[rows[2]]
    finally:
        r.close()
    from modelgen.errors import InputError

    with pytest.raises(InputError) as e:  # a summary has no leakage: IR corners need the lot table
        report.build(str(js), corner_spec="IR@-1V:5,50,95")
    assert "--lot-corners" in str(e.value)

"""Lot tables: batch equals single, bad rows, keep-going, determinism, atomic writes, ngspice (writing under faults and chunked = one pass: test_output.py)."""

import json
import re

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from modelgen import cards, description, extraction, lots

from support import ROOT, need, run

HEADER = ("name,area [um^2],p.doping [cm^-3],p.thickness [um],p.lifetime [ns],n.doping [cm^-3],"
          "n.thickness [um],n.lifetime [us]")


def write_table(path, rows, header=HEADER):
    path.write_text(header + "\n" + "\n".join(",".join(str(x) for x in r) for r in rows) + "\n")
    return str(path)


row = st.tuples(
    st.floats(100, 1e5), st.floats(17, 20).map(lambda x: 10 ** x), st.floats(0.3, 3),
    st.floats(0.5, 500), st.floats(14, 17).map(lambda x: 10 ** x), st.floats(3, 200), st.floats(0.005, 50))


@settings(max_examples=25, deadline=None)
@given(st.lists(row, min_size=1, max_size=6))
def test_batch_equals_single(tmp_path_factory, rows):
    tmp = tmp_path_factory.mktemp("lot")
    named = [(f"D{i}",) + tuple(f"{x:.6g}" for x in r) for i, r in enumerate(rows)]
    table = lots.read_csv(write_table(tmp / "t.csv", named))
    result, good = lots.derive(table)
    errors = {e.row for e in table.problems.errors()}
    for i, r in enumerate(named):
        line = i + 2
        single_table = {"name": r[0], "area": f"{r[1]} um^2",
                        "p": {"doping": f"{r[2]} cm^-3", "thickness": f"{r[3]} um", "lifetime": f"{r[4]} ns"},
                        "n": {"doping": f"{r[5]} cm^-3", "thickness": f"{r[6]} um", "lifetime": f"{r[7]} us"}}
        try:
            single = extraction.derive(description.from_mapping(single_table))
        except Exception:
            assert line in errors  # the same row is refused in the table
            continue
        k = list(result.device.name).index(r[0])
        for name in extraction.PARAMETERS:
            a, b = result.params[name][k], single.params[name][0]
            assert a == b or (np.isnan(a) and np.isnan(b)), name


def test_example_lot_to_library_and_summary(tmp_path):
    out = tmp_path / "lot.lib"
    r = run("lots", ROOT / "examples" / "lot_table.csv", "-o", out, "--dialect", "ngspice", "--corners", "5,50,95")
    assert r.exit_code == 0, r.output
    text = out.read_text()
    assert text.count(".model ") == 6 + 3
    assert [ln for ln in text.splitlines() if ln.startswith((".lib", ".endl"))] == [
        ".lib lot", ".endl lot", ".lib slow", ".endl slow", ".lib typical", ".endl typical", ".lib fast", ".endl fast"]
    csv_lines = (tmp_path / "lot.summary.csv").read_text().splitlines()
    assert len(csv_lines) == 7 and csv_lines[0].startswith("name,line,IS,")
    j = json.loads((tmp_path / "lot.summary.json").read_text())
    assert j["rows"] == 6 and len(j["columns"]["IS"]) == 6
    s = j["statistics"]["IS"]
    assert s["min"] <= s["percentiles"]["50"] <= s["max"] and s["median"] == s["percentiles"]["50"]
    # the typical corner is the median-IS row, fast the high, slow the low (by IS rank)
    is_values = sorted(j["columns"]["IS"])
    parsed = cards.reader.read_cards(text)
    corner = {c.section: c.params["IS"] for c in parsed if c.name == "DCORNER"}
    assert corner["slow"] <= corner["typical"] <= corner["fast"]
    assert corner["slow"] == is_values[0] and corner["fast"] == is_values[-1]


BAD_ROWS = [
    ["DA", 2500, "5e19", 0.8, 2, "2e16", 4, 0.02],
    ["DB", 2500, "5e19", -0.8, 2, "2e16", 4, 0.02],     # line 3: negative thickness
    ["DC", 2500, "abc", 0.8, 2, "2e16", 4, 0.02],       # line 4: not a number
    ["DA", 2500, "5e19", 0.8, 2, "2e16", 4, 0.02],      # line 5: name used before
    ["DE", 2500, "5e19", 0.8, 2, "2e16", 0.05, 0.02],   # line 6: n side depleted through
    ["DF", 2500, "5e19", 0.8, 2, "2e16", 4, 0.02],
]


def test_bad_rows_are_reported_and_nothing_is_written(tmp_path):
    f = write_table(tmp_path / "bad.csv", BAD_ROWS)
    out = tmp_path / "bad.lib"
    r = run("lots", f, "-o", out)
    assert r.exit_code == 2
    lines = [ln for ln in r.stderr.splitlines() if ln.startswith("modelgen: error:")]
    assert [ln.split(": ")[3] for ln in lines] == ["line 3", "line 4", "line 5", "line 6"]
    assert ": line 3: p.thickness: must be positive" in lines[0]
    assert ": line 4: p.doping: not a finite number: 'abc'" in lines[1]
    assert ": line 5: name: model name 'DA' is used by an earlier row" in lines[2]
    assert ": line 6: n.thickness: this side is depleted through" in lines[3]
    assert "Traceback" not in r.output
    assert sorted(p.name for p in tmp_path.iterdir()) == ["bad.csv"]


def test_keep_going_writes_the_good_rows(tmp_path):
    f = write_table(tmp_path / "bad.csv", BAD_ROWS)
    out = tmp_path / "bad.lib"
    r = run("lots", f, "-o", out, "--keep-going")
    assert r.exit_code == 4
    names = [c.name for c in cards.reader.read_file(out)]
    assert names == ["DA", "DF"]
    j = json.loads((tmp_path / "bad.summary.json").read_text())
    assert [s["row"] for s in j["skipped"]] == [3, 4, 5, 6]


def test_output_is_deterministic_and_writes_are_atomic(tmp_path):
    out = tmp_path / "lot.lib"
    args = ("lots", ROOT / "examples" / "lot_table.csv", "-o", out)
    assert run(*args).exit_code == 0
    first = {p.name: p.read_bytes() for p in tmp_path.iterdir()}
    assert run(*args).exit_code == 0
    assert {p.name: p.read_bytes() for p in tmp_path.iterdir()} == first
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".modelgen-")]
    # a failing run leaves the earlier outputs untouched
    bad = write_table(tmp_path / "bad.csv", BAD_ROWS)
    assert run("lots", bad, "-o", out).exit_code == 2
    assert {p.name: p.read_bytes() for p in tmp_path.iterdir() if p.name != "bad.csv"} == first


def test_set_columns_name_pattern_and_per_cell_units(tmp_path):
    f = tmp_path / "t.csv"
    f.write_text("p.doping,n.doping [cm^-3],n.lifetime\n5e19 cm^-3,2e16,20 ns\n1e25 m^-3,3e16,2e-8 s\n")
    out = tmp_path / "t.lib"
    r = run("lots", f, "-o", out, "--name", "DLOT{row:03d}", "--set", "area=2500 um^2",
            "--set", "p.thickness=0.8 um", "--set", "n.thickness=4 um", "--set", "p.lifetime=2 ns")
    assert r.exit_code == 0, r.output
    cs = cards.reader.read_file(out)
    assert [c.name for c in cs] == ["DLOT002", "DLOT003"]
    # 1e25 m^-3 is 1e19 cm^-3: the per-cell unit path
    t = lots.read_csv(str(f), sets={"area": "2500 um^2", "p.thickness": "0.8 um", "n.thickness": "4 um",
                                    "p.lifetime": "2 ns"}, name_pattern="D{index}")
    assert t.columns["p.doping"][1] == pytest.approx(1e25)
    assert t.columns["n.lifetime"][0] == pytest.approx(2e-8)


def test_file_level_errors_are_one_line(tmp_path):
    f = tmp_path / "t.csv"
    f.write_text("name,p.dopping [cm^-3]\nDA,1e17\n")
    r = run("lots", f, "-o", tmp_path / "x.lib")
    assert r.exit_code == 2 and "p.dopping: unknown column" in r.stderr and len(r.stderr.splitlines()) == 1
    f.write_text("name,p.doping [V]\nDA,1e17\n")
    r = run("lots", f, "-o", tmp_path / "x.lib")
    assert r.exit_code == 2 and "not a unit of concentration" in r.stderr


def test_toml_list_form(tmp_path):
    f = tmp_path / "lot.toml"
    # the example's device tables, without its [spread] table
    base = (ROOT / "examples" / "switching_diode.toml").read_text().split("\n[spread]")[0]
    body = base.replace("[p]", "[device.p]").replace("[n]", "[device.n]")
    head, _, rest = body.partition("[device.p]")
    f.write_text("[[device]]\n" + head + "[device.p]" + rest + "\n[[device]]\n"
                 + head.replace("DSW_DEMO", "DSW_TWO") + "[device.p]" + rest)
    out = tmp_path / "lot.lib"
    r = run("lots", f, "-o", out)
    assert r.exit_code == 0, r.output
    single = extraction.derive(description.load(ROOT / "examples" / "switching_diode.toml"))
    got = {c.name: c.params for c in cards.reader.read_file(out)}
    assert got["DSW_TWO"]["IS"] == float(cards.format_number(single.params["IS"][0]))


def test_library_of_1000_rows_loads_in_ngspice(tmp_path):
    need("ngspice")
    rng = np.random.default_rng(3)
    rows = [[f"DK{i:04d}", f"{rng.uniform(1e3, 1e4):.5g}", f"{10 ** rng.uniform(18, 20):.4g}",
             f"{rng.uniform(0.5, 2):.3g}", f"{rng.uniform(1, 20):.3g}", f"{10 ** rng.uniform(15, 16.5):.4g}",
             f"{rng.uniform(5, 50):.3g}", f"{rng.uniform(0.01, 5):.3g}"] for i in range(1000)]
    out = tmp_path / "k.lib"
    r = run("lots", write_table(tmp_path / "k.csv", rows), "-o", out, "--dialect", "ngspice", "-q")
    assert r.exit_code == 0, r.output
    from modelgen.spice import ngspice
    text = out.read_text()
    names = [c.name for c in cards.reader.read_cards(text)]
    assert len(names) == 1000
    res = ngspice.simulate(text, names, np.array([0.4, 0.5]), np.array([]), timeout=300)
    assert all(res[nm]["messages"] == [] for nm in names)
    assert all(np.all(res[nm]["current"] > 0) for nm in names)


@pytest.mark.parametrize("spec", ["5,50", "5,x", "0sigma", "xsigma", "VF@x:3sigma", "XX:5,50,95", "VF@1mA:5,50",
                                  "IR@5V:3sigma"])
def test_bad_corner_spec_is_one_line_naming_the_option_once(tmp_path, spec):
    r = run("lots", ROOT / "examples" / "lot_table.csv", "-o", tmp_path / "c.lib", "--dialect", "ngspice",
            "--corners", spec)
    assert r.exit_code == 2 and len(r.stderr.splitlines()) == 1 and r.stderr.count("--corners") == 1, r.stderr
    assert list(tmp_path.iterdir()) == []


def test_summary_numbers_read_the_same_in_every_dialect(tmp_path):
    # one format for every number in a summary: NR was "2.0" in spice3 and "2e+00" in ngspice
    table = write_table(tmp_path / "t.csv", [("DA", 1e4, 1e19, 1, 10, 1e16, 50, 1)])
    texts = {}
    for dialect in ("spice3", "ngspice", "gnucap"):
        out = tmp_path / f"{dialect}.lib"
        r = run("lots", table, "-o", out, "--dialect", dialect, "-q")
        assert r.exit_code == 0, r.output
        texts[dialect] = (tmp_path / f"{dialect}.summary.csv").read_text()
    assert texts["spice3"] == texts["ngspice"] == texts["gnucap"]
    header, first = texts["spice3"].splitlines()[:2]
    cells = dict(zip(header.split(","), first.split(",")))
    assert cells["N"] == "1e+00" and re.fullmatch(r"\d(\.\d+)?e[+-]\d\d", cells["NR"]), cells["NR"]


def test_lots_counts_warnings_by_kind(tmp_path):
    # rows without a lifetime use the lifetime model: counted once per kind on stderr, not once per row
    rows = [(f"D{i}", 1e4, 1e18, 1, "", 1e16, 50, 1) for i in range(5)] + [("DX", 1e4, 1e18, 1, 10, 1e16, 50, 1)]
    table = write_table(tmp_path / "t.csv", rows)
    r = run("lots", table, "-o", tmp_path / "t.lib")
    assert r.exit_code == 0, r.output
    assert "warning: 5 of 6 rows: lifetime modelled, not given" in r.stderr
    assert r.stderr.count("lifetime modelled") == 1


def test_standard_error_columns_ride_along_unused(tmp_path):
    """A calibration's table carries KEY.stderr beside KEY: lots reads it and makes the same cards as without."""
    base = (ROOT / "examples" / "lot_table.csv").read_text().splitlines()
    head = base[0].split(",")
    k = head.index("n.doping [cm^-3]")
    with_err = [",".join(head[:k + 1] + ["n.doping.stderr [cm^-3]"] + head[k + 1:])]
    with_err += [",".join(r.split(",")[:k + 1] + ["3e14"] + r.split(",")[k + 1:]) for r in base[1:] if r]
    (tmp_path / "err.csv").write_text("\n".join(with_err) + "\n")
    a = lots.read_csv(tmp_path / "err.csv")
    b = lots.read_csv(ROOT / "examples" / "lot_table.csv")
    assert set(a.columns) == set(b.columns)
    np.testing.assert_array_equal(a.columns["n.doping"], b.columns["n.doping"])


def _ngspice_vf(lib, section, names, tmp_path, current=1e-3):
    """ngspice's terminal voltage at ``current`` of each model of ``names`` in ``.lib lib section`` [V]."""
    import subprocess

    lines = ["* forward voltages", f".lib {lib} {section}"]
    for k, name in enumerate(names):
        lines += [f"I{k} 0 n{k} dc {current!r}", f"D{k} n{k} 0 {name}"]
    lines += [".control", "set numdgt=12", "op"] + [f"print v(n{k})" for k in range(len(names))] + [".endc", ".end"]
    deck = tmp_path / f"vf_{section}.cir"
    deck.write_text("\n".join(lines) + "\n")
    done = subprocess.run(["ngspice", "-b", str(deck)], check=False, capture_output=True, text=True, timeout=60)
    assert "rror" not in done.stdout + done.stderr, done.stdout + done.stderr
    found = dict(re.findall(r"^v\((n\d+)\)\s*=\s*(\S+)", done.stdout, re.MULTILINE))
    return np.array([float(found[f"n{k}"]) for k in range(len(names))])


def test_corners_by_forward_voltage_are_the_lot_rows_ngspice_ranks_so(tmp_path):
    # a lot's corners by a figure: real rows, the lowest and highest forward voltage at -3 / +3 sigma of
    # six rows (the normal percentiles 0.135 and 99.865 fall on the extreme ranks), ranked here by ngspice
    # itself running every row's card (the simulator as the outside reference)
    need("ngspice")
    out = tmp_path / "vf.lib"
    r = run("lots", ROOT / "examples" / "lot_table.csv", "-o", out, "--dialect", "ngspice", "--corners",
            "VF@1mA:3sigma", "-q")
    assert r.exit_code == 0, r.output
    parsed = cards.reader.read_file(out)
    rows = [c for c in parsed if c.section == "lot"]
    corner = {c.section: c.params for c in parsed if c.name == "DCORNER"}
    assert list(corner) == ["low", "typical", "high"]
    vf = _ngspice_vf(out, "lot", [c.name for c in rows], tmp_path)
    assert corner["low"] == rows[int(np.argmin(vf))].params
    assert corner["high"] == rows[int(np.argmax(vf))].params
    assert corner["typical"] in [c.params for c in rows]
    vf_corner = {s: _ngspice_vf(out, s, ["DCORNER"], tmp_path)[0] for s in corner}
    assert vf_corner["low"] < vf_corner["typical"] < vf_corner["high"]
    r = run("check", out)
    assert r.exit_code == 0, r.output


def test_corners_by_leakage_pick_other_rows_and_bare_specs_still_mean_is(tmp_path):
    lot = ROOT / "examples" / "lot_table.csv"
    texts = {}
    for spec in ("IR@-5V:0,50,100", "VF@1mA:0,50,100", "3sigma", "IS:3sigma"):
        out = tmp_path / f"{len(texts)}.lib"
        r = run("lots", lot, "-o", out, "--dialect", "ngspice", "--corners", spec, "-q")
        assert r.exit_code == 0, r.output
        texts[spec] = out.read_text()
    assert texts["3sigma"] == texts["IS:3sigma"]  # IS stays the default figure, with its section names
    by = {spec: {c.section: c.params for c in cards.reader.read_cards(t) if c.name == "DCORNER"}
          for spec, t in texts.items()}
    assert list(by["IS:3sigma"]) == ["slow", "typical", "fast"]
    assert by["IR@-5V:0,50,100"]["low"] != by["VF@1mA:0,50,100"]["low"]
    assert "percentile of IR@-5V" in texts["IR@-5V:0,50,100"]

"""Hostile descriptions and tables: each gets one line naming the file (and line or entry, and key),
exit status 2, no traceback and no output file; files a spreadsheet writes simply work."""

import json
import os
from pathlib import Path

import pytest

from modelgen import description, lots
from modelgen.cards import reader
from modelgen.errors import InputError

from support import ROOT, run
EXAMPLE = (ROOT / "examples" / "switching_diode.toml").read_text()
LOT = (ROOT / "examples" / "lot_table.csv").read_text()
BOM = "\ufeff"


def refused(r, folder, inputs, *words):
    """Exit 2, exactly one error line holding ``words``, no traceback, nothing written in ``folder``."""
    assert r.exit_code == 2, r.output
    errors = [ln for ln in r.stderr.splitlines() if ln.startswith("modelgen: error:")]
    assert len(errors) == 1, r.stderr[:2000]
    assert "Traceback" not in r.output and "Traceback" not in r.stderr
    assert len(errors[0]) < 600
    for w in words:
        assert w in errors[0], (w, errors[0])
    assert sorted(p.name for p in Path(folder).iterdir()) == sorted(inputs)
    return errors[0]


def card_refused(tmp_path, text, *words, binary=False):
    f = tmp_path / "dev.toml"
    f.write_bytes(text) if binary else f.write_text(text)
    return refused(run("card", f, "-o", tmp_path / "out.lib"), tmp_path, ["dev.toml"], str(f), *words)


# ---- descriptions ----------------------------------------------------------------------------

@pytest.mark.parametrize("text", ["", "   \n\n\t\n", "# only a comment\n# and another\n"],
                         ids=["empty", "blank", "comments only"])
def test_empty_description_is_one_line(tmp_path, text):
    card_refused(tmp_path, text, "empty description")


def test_devices_and_empty_pipes_as_description(tmp_path):
    # a device is refused before anything is read (/dev/zero would never end, /dev/tty would wait for a
    # keyboard); a FIFO with no writer reads as empty instead of stalling the run
    for device in ("/dev/null", "/dev/zero"):
        r = run("card", device, "-o", tmp_path / "out.lib")
        refused(r, tmp_path, [], device, "is not a regular file")
    (tmp_path / "in").mkdir()
    fifo = tmp_path / "in" / "pipe.toml"
    os.mkfifo(fifo)
    r = run("card", fifo, "-o", tmp_path / "out.lib")
    refused(r, tmp_path, ["in"], str(fifo), "empty description")


DEEP = {
    "arrays": "a = " + "[" * 100_000 + "]" * 100_000 + "\n",
    "inline tables": "p = " + "{a = " * 100_000 + "1" + "}" * 100_000 + "\n",
    "dotted table header": "[p." + ".".join(["a"] * 100_000) + "]\n",
}


@pytest.mark.parametrize("case", DEEP, ids=list(DEEP))
def test_deep_nesting_in_a_description_is_one_line(tmp_path, case):
    card_refused(tmp_path, DEEP[case] + EXAMPLE if case != "dotted table header" else EXAMPLE + DEEP[case])


def test_oversized_description_is_refused_before_parsing(tmp_path):
    card_refused(tmp_path, EXAMPLE + "# " + "x" * (2 * 2**20) + "\n", "larger than 1 MiB")


def test_description_with_a_byte_order_mark_works(tmp_path):
    plain, marked = tmp_path / "plain.toml", tmp_path / "marked.toml"
    plain.write_text(EXAMPLE)
    marked.write_text(BOM + EXAMPLE, encoding="utf-8")
    a, b = run("card", plain, "-q"), run("card", marked, "-q")
    assert a.exit_code == 0 and b.exit_code == 0, b.output
    assert b.stdout.replace("marked.toml", "plain.toml") == a.stdout


# Absurd but finite values: refused by the key's accepted range, named with the key and the value got.
ABSURD = {
    "mobility 1e308": ("[p]", "[p]\nminority_mobility = \"1e308 cm^2/(V*s)\"", "p.minority_mobility"),
    "area 1e-320": ('area = "2.5e-5 cm^2"', 'area = "1e-320 m^2"', "area"),
    "perimeter 1e300": ('perimeter = "200 um"', 'perimeter = "1e300 um"', "perimeter"),
    "permittivity 1e300": ('name = "DSW_DEMO"', 'name = "DSW_DEMO"\nmaterial = {name = "silicon", '
                           'relative_permittivity = 1e300}', "material.relative_permittivity"),
    "ni 1e300": ('name = "DSW_DEMO"', 'name = "DSW_DEMO"\nmaterial = {name = "silicon", ni = "1e300 cm^-3"}',
                 "material.ni"),
    "lifetime 1e300": ('lifetime = "2 ns"', 'lifetime = "1e300 s"', "p.lifetime"),
    "junction depth 1 km": ('junction_depth = "0.8 um"', 'junction_depth = "1 km"', "junction_depth"),
    "bandgap 1e-300": ('name = "DSW_DEMO"', 'name = "DSW_DEMO"\nmaterial = {name = "silicon", '
                       'bandgap = "1e-300 eV"}', "material.bandgap"),
    "surface velocity 1e300": ("[n]", "[n]\nsurface_recombination = \"1e300 cm/s\"", "n.surface_recombination"),
    "contact resistance 1e300": ('contact_resistance = "1.5 ohm"', 'contact_resistance = "1e300 ohm"',
                                 "contact_resistance"),
}


@pytest.mark.parametrize("case", ABSURD, ids=list(ABSURD))
def test_absurd_values_are_outside_the_accepted_range(tmp_path, case):
    old, new, key = ABSURD[case]
    assert old in EXAMPLE
    card_refused(tmp_path, EXAMPLE.replace(old, new, 1), f": {key}: ", "outside the accepted range")


def test_every_accepted_range_is_in_the_readme():
    readme = (ROOT / "README.md").read_text()
    for key, spec in description.KEYS.items():
        if spec.accepted:
            assert spec.accepted in readme, key


@pytest.mark.parametrize("text,words", [
    (EXAMPLE.replace('"2 ns"', '"2 ' + "n" * 1_000_000 + 's"'), "at most 100"),
    ('"' + "k" * 1_000_000 + '" = 1\n' + EXAMPLE, "unknown key"),
    ('"a\\nb\\u2028c" = 1\n' + EXAMPLE, "unknown key"),
    (EXAMPLE.replace('"DSW_DEMO"', '"' + "D" * 1_000_000 + '"'), "not a valid model name"),
    ('material = "' + "x" * 100_000 + '"\n' + EXAMPLE, "unknown material"),
    ('profile = "' + "x" * 100_000 + '"\n' + EXAMPLE, "is not one of"),
    ("p = 5\n" + EXAMPLE.replace("[p]", "[q]"), "must be a table"),
    (EXAMPLE.replace('"2 ns"', '"2 ns\\u0000"'), "control character"),
    (EXAMPLE.replace('"2 ns"', '"2 n\\ts"'), "control character"),
], ids=["1 MB unit", "1 MB key", "key with line breaks", "1 MB name", "long material", "long choice",
        "side not a table", "NUL in a unit", "tab in a unit"])
def test_long_or_odd_text_gives_one_short_line(tmp_path, text, words):
    card_refused(tmp_path, text, words)


# ---- tables ----------------------------------------------------------------------------------

def lots_refused(tmp_path, name, text, *words, args=(), binary=False):
    f = tmp_path / name
    f.write_bytes(text) if binary else f.write_text(text, encoding="utf-8")
    return refused(run("lots", f, "-o", tmp_path / "out.lib", *args), tmp_path, [name], str(f), *words)


def devices(**change):
    """Two description tables of the example device, the second one changed by ``change``."""
    base = {"name": "DA", "area": "2.5e-5 cm^2", "p": {"doping": "5e19 cm^-3", "thickness": "0.8 um",
            "lifetime": "2 ns"}, "n": {"doping": "2e16 cm^-3", "thickness": "4 um", "lifetime": "20 ns"}}
    second = json.loads(json.dumps(base))
    second["name"] = "DB"
    for k, v in change.items():
        if v is None:
            second.pop(k)
        else:
            second[k] = v
    return [base, second]


def as_toml(entries):
    out = []
    for e in entries:
        out.append("[[device]]")
        out += [f"{k} = {json.dumps(v)}" for k, v in e.items() if not isinstance(v, dict)]
        for side in ("p", "n"):
            if side in e:
                out.append(f"[device.{side}]")
                out += [f"{k} = {json.dumps(v)}" for k, v in e[side].items()]
    return "\n".join(out) + "\n"


def test_empty_required_cell_is_an_error_not_a_card_without_is(tmp_path):
    lines = LOT.splitlines()
    cells = lines[2].split(",")
    cells[1] = ""  # the area of the second device
    lines[2] = ",".join(cells)
    lots_refused(tmp_path, "t.csv", "\n".join(lines) + "\n", ": line 3: area: ", "required")


@pytest.mark.parametrize("form", ["json", "toml"])
def test_list_entry_without_area_names_the_entry(tmp_path, form):
    entries = devices(area=None)
    text = json.dumps(entries) if form == "json" else as_toml(entries)
    lots_refused(tmp_path, f"lot.{form}", text, ": entry 2: area: ", "required")


LIST_CASES = {
    "unknown key": (json.dumps(devices(colour="red")), ": entry 2: colour: unknown key"),
    "unknown key, not a missing area": (json.dumps(devices(dopping="1e16 cm^-3")), ": entry 2: dopping: unknown"),
    "NaN": (json.dumps(devices(area=float("nan"))), ": entry 2: area: "),
    "1e400": (json.dumps(devices(area="x")).replace('"x"', "1e400"), ": entry 2: area: "),
    "NaN permittivity": (json.dumps(devices(material={"name": "silicon", "relative_permittivity": float("nan")})),
                         ": entry 2: material.relative_permittivity: expected a finite plain number"),
    "number for a quantity": (json.dumps(devices(area=2.5e-9)), ": entry 2: area: a bare number needs a unit"),
    "integer name": (json.dumps(devices(name=7)), ": entry 2: name: expected a string, got integer"),
    "entry not a table": ('[' + json.dumps(devices()[0]) + ', "DB"]', ": entry 2: expected a table of keys"),
    "deep nesting": ("[" * 100_000 + "]" * 100_000, "nested too deeply"),
    "huge integer": ("[" + "9" * 5000 + "]", "not valid JSON"),
    "duplicate names": (json.dumps(devices(name="DA")), ": entry 2: name: model name 'DA' is used"),
    "side a list": (json.dumps(devices(p=[])), ": entry 2: p: [p] must be a table of keys, got list"),
    "value a table": (json.dumps(devices(p={"doping": {"x": 1}, "thickness": "1 um"})),
                      ": entry 2: p.doping: expected a value, got a table"),
}


@pytest.mark.parametrize("case", LIST_CASES, ids=list(LIST_CASES))
def test_json_list_errors_name_the_entry_and_the_key(tmp_path, case):
    text, words = LIST_CASES[case]
    err = lots_refused(tmp_path, "lot.json", text, words)
    if "unknown key" in case:
        assert "required" not in err


def test_toml_list_errors_name_the_entry_and_the_key(tmp_path):
    lots_refused(tmp_path, "lot.toml", as_toml(devices(name=7)), ": entry 2: name: expected a string")
    lots_refused(tmp_path, "lot.toml", as_toml(devices()) + "\n[other]\nx = 1\n", ": other: unknown top-level key")
    lots_refused(tmp_path, "lot.toml", "a = " + "[" * 100_000 + "]" * 100_000 + "\n", "nested too deeply")


def test_byte_order_mark_from_a_spreadsheet_simply_works(tmp_path):
    (tmp_path / "plain.csv").write_text(LOT)
    (tmp_path / "marked.csv").write_text(BOM + LOT.replace("\n", "\r\n"), encoding="utf-8")
    (tmp_path / "marked.toml").write_text(BOM + as_toml(devices()), encoding="utf-8")
    for name in ("plain", "marked"):
        assert run("lots", tmp_path / f"{name}.csv", "-o", tmp_path / f"{name}.lib", "-q").exit_code == 0
    strip = lambda p: [ln for ln in p.read_text().splitlines() if ".csv" not in ln]  # noqa: E731
    assert strip(tmp_path / "marked.lib") == strip(tmp_path / "plain.lib")
    r = run("lots", tmp_path / "marked.toml", "-o", tmp_path / "t.lib", "-q")
    assert r.exit_code == 0, r.output
    assert [c.name for c in reader.read_file(tmp_path / "t.lib")] == ["DA", "DB"]


def quoted(lines, row, col, value):
    cells = lines[row].split(",")
    cells[col] = value
    out = list(lines)
    out[row] = ",".join(cells)
    return out


@pytest.mark.parametrize("col,value,key", [
    (0, '"DLOT\nW02"', "name"),
    (2, '"4e19\n"', "p.doping"),
    (1, '"25\n00"', "area"),
], ids=["name", "number with a trailing break", "number split"])
def test_quoted_line_break_in_a_cell_names_the_row_and_column(tmp_path, col, value, key):
    lines = quoted(LOT.splitlines(), 2, col, value)
    lots_refused(tmp_path, "t.csv", "\n".join(lines) + "\n", f": line 3: {key}: ")


def test_line_numbers_after_a_quoted_line_break(tmp_path):
    # row 2's name is quoted (with a comma inside, legal CSV but not a legal name), row 3 spans two lines,
    # and row 5 (line 7 in the file) has a bad doping: every message names the line an editor shows
    lines = LOT.splitlines()
    lines = quoted(lines, 2, 2, '"4e19\n"')
    lines = quoted(lines, 5, 2, "abc")
    f = tmp_path / "t.csv"
    f.write_text("\n".join(lines) + "\n")
    table = lots.read_csv(str(f))
    lots.derive(table)
    found = {(e.row, e.key) for e in table.problems.errors()}
    assert found == {(3, "p.doping"), (7, "p.doping")}


def test_overlong_cell_is_refused_without_padding_the_column(tmp_path):
    lines = quoted(LOT.splitlines(), 3, 2, "9" * 50 + "x" * 1_000_000)
    lots_refused(tmp_path, "t.csv", "\n".join(lines) + "\n", ": line 4: p.doping: ", "at most 100")


def test_directory_as_table(tmp_path):
    with pytest.raises(InputError, match="is a directory"):
        lots.read(str(tmp_path))


BAD_PATTERNS = ["{row.__class__.__mro__}", "{row[0]}", "{row:>999999999}", "{row!r}", "{name}", "{0}", "{}",
                "D{row:x}", "D{row:{index}}", "D{row", "D" * 100 + "{row}", "D{index:099d}", "D-{row}",
                "{row}D", "D{{x}}{row}", "D{row:5d}"]


@pytest.mark.parametrize("pattern", BAD_PATTERNS)
def test_name_pattern_allows_only_row_and_index_with_integer_formats(tmp_path, pattern):
    text = "\n".join(ln.split(",", 1)[1] for ln in LOT.splitlines()) + "\n"  # no name column
    lots_refused(tmp_path, "t.csv", text, ": --name: ", args=("--name", pattern))


@pytest.mark.parametrize("form", ["csv", "json", "toml"])
def test_set_and_name_apply_to_every_table_form(tmp_path, form):
    entries = devices()
    for e in entries:
        e.pop("name"), e.pop("area")
    if form == "csv":
        text = ("p.doping,p.thickness,p.lifetime,n.doping,n.thickness,n.lifetime\n"
                + "\n".join(",".join(list(e["p"].values()) + list(e["n"].values())) for e in entries) + "\n")
    else:
        text = json.dumps(entries) if form == "json" else as_toml(entries)
    f = tmp_path / f"lot.{form}"
    f.write_text(text)
    out = tmp_path / "lot.lib"
    r = run("lots", f, "-o", out, "--name", "DQ{index:03d}", "--set", "area=50 um^2", "-q")
    assert r.exit_code == 0, r.output
    got = reader.read_file(out)
    assert [c.name for c in got] == ["DQ000", "DQ001"]
    t = lots.read(str(f), sets={"area": "50 um^2"}, name_pattern="D{row}")
    assert t.columns["area"] == pytest.approx([50e-12, 50e-12], rel=1e-15)  # 1 um^2 = 1e-12 m^2


@pytest.mark.parametrize("form", ["csv", "json"])
def test_name_pattern_with_names_in_the_table_is_an_error(tmp_path, form):
    text = LOT if form == "csv" else json.dumps(devices())
    lots_refused(tmp_path, f"t.{form}", text, ": --name: ", "names its devices already", args=("--name", "D{row}"))


def test_set_of_a_key_the_list_gives_is_an_error(tmp_path):
    lots_refused(tmp_path, "t.json", json.dumps(devices()), ": area: given both", args=("--set", "area=1 um^2"))


def test_set_value_out_of_range_is_one_line_not_one_per_row(tmp_path):
    (tmp_path / "t.csv").write_text(LOT)
    r = run("lots", tmp_path / "t.csv", "-o", tmp_path / "out.lib", "--set", "material.ni=1e300 cm^-3")
    refused(r, tmp_path, ["t.csv"], "--set: material.ni: ", "outside the accepted range")

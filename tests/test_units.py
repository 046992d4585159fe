"""Units at the input boundary: the unit-factor cache on disk, and text parsing in linear time.

The conftest fixture points MODELGEN_CACHE_DIR at a temporary folder for every test; the tests
here point it at a folder of their own.
"""

import json
import os
from pathlib import Path

import pytest
from click.testing import CliRunner

from modelgen import lots, units
from modelgen.cli import main
from modelgen.errors import InputError

from support import ROOT
EXAMPLE = ROOT / "examples" / "switching_diode.toml"
UM2 = 1e-12  # 1 um^2 in m^2 (SI prefixes; common practice)


@pytest.fixture
def cache(tmp_path, monkeypatch):
    """A fresh cache folder; the in-process copy of the cache is dropped before and after."""
    folder = tmp_path / "cache"
    monkeypatch.setenv(units.CACHE_ENV, str(folder))
    monkeypatch.setitem(units._known, "factors", None)
    yield folder
    units._known["factors"] = None


def plant(folder, content, *, mode=0o600, folder_mode=0o700):
    """Write ``content`` where the cache file for this code is read."""
    folder.mkdir(mode=folder_mode, exist_ok=True)
    os.chmod(folder, folder_mode)
    path = Path(units.cache_file())
    path.write_text(content if isinstance(content, str) else json.dumps(content))
    os.chmod(path, mode)
    units._known["factors"] = None
    return path


def entry(factors):
    return {"code": units._code_hash(), "factors": factors}


POISON = entry({"m^2|um^2": [1.0, 0.0]})  # would make 100 um^2 a square metre-sized 100 m^2


def area_um2():
    return units.parse_quantity("100 um^2", "area")


def test_trusted_cache_is_used(cache):
    # control for the refusals below: a private, valid file is read (a unit pint does not know
    # answers from it), so a refusal is the checks at work, not a cache never read
    plant(cache, entry({"m|zz": [2.0, 0.0]}))
    assert units.parse_quantity("3 zz", "length") == 6.0


POISONED = {
    "file writable by the group": dict(content=POISON, mode=0o664),
    "file writable by anyone": dict(content=POISON, mode=0o666),
    "folder writable by anyone": dict(content=POISON, folder_mode=0o777),
    "folder writable by the group": dict(content=POISON, folder_mode=0o770),
    "not JSON": dict(content="{not json"),
    "a list": dict(content=[1, 2]),
    "written by other code": dict(content={"code": "0" * 20, "factors": {"m^2|um^2": [1.0, 0.0]}}),
    "non-finite factor": dict(content='{"code": "%s", "factors": {"m^2|um^2": [NaN, 0.0]}}' % units._code_hash()),
    "negative factor": dict(content=entry({"m^2|um^2": [-1e-12, 0.0]})),
    "offset on an area": dict(content=entry({"m^2|um^2": [1e-12, 5.0]})),
    "unknown target": dict(content=entry({"furlong|um^2": [1.0, 0.0]})),
    "a string factor": dict(content=entry({"m^2|um^2": ["1", 0.0]})),
    "too large": dict(content=entry({f"m|u{i}": [1.0, 0.0] for i in range(5000)})),
}


@pytest.mark.parametrize("case", POISONED, ids=list(POISONED))
def test_untrusted_or_invalid_cache_is_not_read(cache, case):
    plant(cache, **POISONED[case])
    assert area_um2() == pytest.approx(100 * UM2, rel=1e-15)


def test_cache_file_owned_by_another_user_is_not_read(cache):
    if os.geteuid() != 0:
        pytest.skip("changing a file's owner needs root")
    path = plant(cache, POISON)
    os.chown(path, 65534, 65534)
    assert area_um2() == pytest.approx(100 * UM2, rel=1e-15)


def test_cache_file_that_is_a_symlink_is_not_read(cache, tmp_path):
    elsewhere = tmp_path / "elsewhere.json"
    elsewhere.write_text(json.dumps(POISON))
    cache.mkdir(mode=0o700)
    os.symlink(elsewhere, units.cache_file())
    assert area_um2() == pytest.approx(100 * UM2, rel=1e-15)


def test_cache_is_private_and_keyed_by_the_code(cache):
    assert area_um2() == pytest.approx(100 * UM2, rel=1e-15)
    path = Path(units.cache_file())
    assert path.parent == cache and units._code_hash() in path.name
    assert os.stat(cache).st_mode & 0o777 == 0o700 and os.stat(path).st_mode & 0o777 == 0o600
    data = json.loads(path.read_text())
    assert data["code"] == units._code_hash() and data["factors"]["m^2|um^2"] == [1e-12, 0.0]


def test_cache_can_be_switched_off(tmp_path, monkeypatch):
    monkeypatch.setenv(units.CACHE_ENV, "")
    monkeypatch.setitem(units._known, "factors", None)
    monkeypatch.chdir(tmp_path)
    assert units.cache_file() is None
    assert area_um2() == pytest.approx(100 * UM2, rel=1e-15)
    assert list(tmp_path.iterdir()) == []


def test_poisoned_cache_does_not_change_a_card(cache, monkeypatch):
    # the whole command: a writable-by-others cache file with wrong factors gives the same card as no cache
    monkeypatch.setenv(units.CACHE_ENV, "")
    clean = CliRunner().invoke(main, ["card", str(EXAMPLE), "-q"])
    assert clean.exit_code == 0
    monkeypatch.setenv(units.CACHE_ENV, str(cache))
    plant(cache, entry({"m^2|cm^2": [1.0, 0.0], "m|um": [1.0, 0.0], "m^-3|cm^-3": [1.0, 0.0]}), mode=0o666)
    r = CliRunner().invoke(main, ["card", str(EXAMPLE), "-q"])
    assert r.exit_code == 0 and r.stdout == clean.stdout


# ---- linear-time parsing and length limits (each case took seconds to hours before) ----------

LONG_TEXT = {
    "1 MB unit": ("1 " + "m" * 1_000_000, "at most 100"),
    "40,000 prefix letters": ("1 " + "k" * 40_000 + "m", "at most 100"),
    "100,000 digits then a bad character": ("1" * 100_000 + "x", "at most 100"),
    "1 MB of blanks inside": ("1" + " " * 1_000_000 + "m!", "at most 100"),
}


@pytest.mark.parametrize("case", LONG_TEXT, ids=list(LONG_TEXT))
def test_overlong_quantities_are_refused_with_the_limit(case):
    text, words = LONG_TEXT[case]
    with pytest.raises(InputError, match=words):
        units.parse_quantity(text, "length", key="p.thickness")


def test_overlong_unit_is_refused_with_the_limit():
    with pytest.raises(ValueError, match="at most 64"):
        units.unit_factor("k" * 40_000 + "m", "length")


def test_quantities_still_parse():
    # SI prefixes and the degree Celsius offset (BIPM SI Brochure, 9th ed.)
    assert units.parse_quantity("  2.5e-5 cm^2 ", "area") == pytest.approx(2.5e-9, rel=1e-15)
    assert units.parse_quantity("+.5um", "length") == pytest.approx(5e-7, rel=1e-15)
    assert units.parse_quantity("27 degC", "temperature") == pytest.approx(300.15, rel=1e-15)
    assert units.parse_quantity("1200 cm^2/(V*s)", "mobility") == pytest.approx(0.12, rel=1e-15)
    with pytest.raises(InputError, match="no unit"):
        units.parse_quantity("12", "length")


def test_header_with_thousands_of_blanks_reads_in_linear_time(tmp_path):
    f = tmp_path / "t.csv"
    f.write_text("name,area [" + " " * 3000 + "um^2" + " " * 3000 + "]\nDA,2500\n")
    table = lots.read_csv(str(f))
    assert table.columns["area"][0] == pytest.approx(2500 * UM2, rel=1e-15)


@pytest.mark.parametrize("header,words", [
    ("name,area [" + "k" * 1_000_000 + "m^2]", "at most 64"),
    ("name,area [um^2" + " " * 3000, "is not 'key' or 'key [unit]'"),
    ("name," + "p" * 100_000 + " [um]", "at most 64"),
    ("name,area [um^2]]", "is not 'key' or 'key [unit]'"),
], ids=["1 MB unit", "unclosed bracket", "100,000-letter key", "two brackets"])
def test_bad_headers_are_one_line(tmp_path, header, words):
    f = tmp_path / "t.csv"
    f.write_text(header + "\nDA,2500\n")
    r = CliRunner().invoke(main, ["lots", str(f), "-o", str(tmp_path / "x.lib")])
    assert r.exit_code == 2
    err = r.stderr.strip().splitlines()
    assert len(err) == 1 and str(f) in err[0] and words in err[0] and len(err[0]) < 400
    assert sorted(p.name for p in tmp_path.iterdir()) == ["t.csv"]


def test_cache_in_a_folder_whose_parent_anyone_may_write_is_not_read(cache):
    # another user could rename the cache folder away and put their own in its place
    plant(cache, POISON)
    os.chmod(cache.parent, 0o777)
    try:
        assert area_um2() == pytest.approx(100 * UM2, rel=1e-15)
        os.chmod(cache.parent, 0o1777)  # unless the sticky bit stops them, as on /tmp
        units._known["factors"] = None
        assert area_um2() == 100.0  # the planted (private) file is read: the check is the parent's mode alone
    finally:
        os.chmod(cache.parent, 0o700)

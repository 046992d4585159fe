"""Reading SPICE .model cards and libraries back (modelgen.cards.reader).

The expected values come from SPICE conventions, not from modelgen:
"ngspice manual" means the ngspice User's Manual, chapter 2 (Circuit
Description): section "Some naming conventions" with Table 2.2 "Ngspice scale
factors" for numbers, fields separated by blanks, commas, '=' and parentheses,
and '+' continuation lines; "Comments" for '*' lines and the '$ ' / ';' / '//'
end-of-line comments; ".lib" for library sections closed by ".endl".
"""

import math

import pytest
from hypothesis import given, settings, strategies as st

from modelgen import cards, description, extraction, targets
from modelgen.cards.reader import Card, CardSyntaxError, parse_number, read_cards, read_file
from modelgen.errors import InputError

from support import ROOT


# --- numbers -----------------------------------------------------------------

@pytest.mark.parametrize("text, value", [
    # ngspice manual, Table 2.2; case-insensitive, so M and m are both milli
    ("1T", 1e12), ("1t", 1e12),
    ("1G", 1e9), ("1g", 1e9),
    ("1MEG", 1e6), ("1Meg", 1e6), ("1meg", 1e6),
    ("1K", 1e3), ("1k", 1e3),
    ("1M", 1e-3), ("1m", 1e-3),
    ("10mil", 10 * 25.4e-6), ("1MIL", 25.4e-6),
    ("3.3u", 3.3e-6), ("3.3U", 3.3e-6),
    ("1n", 1e-9), ("1p", 1e-12), ("1f", 1e-15),
    # no atto: not in the ngspice manual's table, and ngspice-39 reads "1a" as 1 (a unit letter)
    ("1a", 1.0), ("1A", 1.0), ("1mA", 1e-3),
    # ngspice manual: letters after a number or a scale factor are ignored
    ("47pF", 47e-12), ("10pF", 1e-11), ("1megohm", 1e6), ("5mA", 5e-3), ("2.5V", 2.5),
    ("10", 10.0), ("10V", 10.0), ("10Volts", 10.0), ("10Hz", 10.0),
    ("1000", 1e3), ("1000.0", 1e3), ("1000Hz", 1e3), ("1e3", 1e3), ("1.0e3", 1e3), ("1kHz", 1e3),
    ("1MA", 1e-3), ("1MSec", 1e-3), ("1MMhos", 1e-3),
    # integer, floating point and exponent fields (ngspice manual examples)
    ("12", 12.0), ("-44", -44.0), ("3.14159", 3.14159), ("1e-14", 1e-14), ("2.65e3", 2650.0),
    ("1e-15", 1e-15), ("1.5E+3", 1500.0), ("+.5", 0.5), ("5.", 5.0),
    # a scale factor after an exponent multiplies it (ngspice reads 1e3k as 1e6)
    ("1e3k", 1e6), ("1e-3k", 1.0), ("2E-6MEG", 2.0),
    (" 1k ", 1e3),
])
def test_spice_numbers(text, value):
    assert parse_number(text) == value


def test_suffix_gives_the_correctly_rounded_value():
    # 3.3p is the double nearest 3.3e-12, not 3.3 * 1e-12 (which is one ulp off)
    assert 3.3 * 1e-12 != 3.3e-12
    assert parse_number("3.3p") == 3.3e-12
    assert parse_number("22pF") == 22e-12
    assert parse_number("1.5n") == 1.5e-9
    assert parse_number("0.1MIL") == 2.54e-6


@pytest.mark.parametrize("text", ["", "abc", "k", "1.2.3", "1k2", "--1", "e5", "{2*x}", "'2*x'",
                                  "1e400", "inf", "nan", "1,5", "10pF/um"])
def test_not_numbers(text):
    with pytest.raises(CardSyntaxError):
        parse_number(text)


def test_number_error_is_an_input_error_with_its_place():
    with pytest.raises(InputError) as e:
        parse_number("x1", file="lib.txt", line=7, key="IS")
    assert isinstance(e.value, CardSyntaxError)
    assert (e.value.file, e.value.row, e.value.line, e.value.key) == ("lib.txt", 7, 7, "IS")
    assert str(e.value).startswith("lib.txt: line 7: IS: ")


@settings(deadline=None)
@given(st.floats(allow_nan=False, allow_infinity=False))
def test_formatted_numbers_read_back_exactly(x):
    assert parse_number(cards.format_number(x)) == x


# --- cards -------------------------------------------------------------------

CARD = """\
* a hand-written diode card
.Model D1N_test d ( IS = 2.52n, n=1.752 ; ideality
* a comment between continuation lines

+ Rs=0.568   $ series resistance
   +  cjo=4pF,M=0.4 tt=20ns
+ BV=100 IBV=100uA
+ )
"""


def test_multiline_card():
    # ngspice manual: '*' comment lines, '$ ' and ';' end-of-line comments,
    # '+' continuation, fields separated by blanks, commas, '=' and parentheses
    (c,) = read_cards(CARD)
    assert c.name == "D1N_test"
    assert c.type == "D"
    assert c.line == 2
    assert c.section is None
    assert c.params == {"IS": 2.52e-9, "N": 1.752, "RS": 0.568, "CJO": 4e-12, "M": 0.4,
                        "TT": 20e-9, "BV": 100.0, "IBV": 100e-6}
    assert list(c.params) == ["IS", "N", "RS", "CJO", "M", "TT", "BV", "IBV"]


def test_card_forms():
    text = """\
.MODEL DA D(IS=1e-14)
.model DB D IS=1e-14 N=2
.model DC D (IS=1e-14 N=1
+ RS=2)
.model DD D
.model QA npn (bf=50 is=1e-13 vbf=50)
R1 1 2 10k
.include other.lib
.param x=5
"""
    got = read_cards(text)
    assert [(c.name, c.type, c.line) for c in got] == [
        ("DA", "D", 1), ("DB", "D", 2), ("DC", "D", 3), ("DD", "D", 5), ("QA", "NPN", 6)]
    assert got[0].params == {"IS": 1e-14}
    assert got[1].params == {"IS": 1e-14, "N": 2.0}
    assert got[2].params == {"IS": 1e-14, "N": 1.0, "RS": 2.0}
    assert got[3].params == {}
    # the ngspice manual's own .model example
    assert got[4].params == {"BF": 50.0, "IS": 1e-13, "VBF": 50.0}


def test_dollar_needs_a_blank_and_slashes_comment():
    # ngspice: '$' starts a comment only when a blank follows; '//' starts one too
    with pytest.raises(CardSyntaxError):
        read_cards(".model D1 D IS=1e-14 N=1$x\n")
    (c,) = read_cards(".model D1 D IS=1e-14 // N=3\n+ N=2 $\n")
    assert c.params == {"IS": 1e-14, "N": 2.0}


def test_reading_stops_at_end():
    got = read_cards(".model D1 D IS=1\n.end\n.model D2 D IS=2\n")
    assert [c.name for c in got] == ["D1"]


def test_library_sections():
    text = """\
* a library with two corners and a card outside both
.model DOUT D (IS=1e-15)

.LIB fast
.model DF D (IS=2e-15 RS=1)
.ENDL fast

.lib slow
.param unused=1
.model DS D
+ (IS=5e-16 RS=3)
.endl

.lib other.lib typical
"""
    got = read_cards(text)
    assert got == [Card("DOUT", "D", {"IS": 1e-15}, 2, None),
                   Card("DF", "D", {"IS": 2e-15, "RS": 1.0}, 5, "fast"),
                   Card("DS", "D", {"IS": 5e-16, "RS": 3.0}, 10, "slow")]


@pytest.mark.parametrize("text, line, key", [
    ("* card\n.model D1 D (IS=1e-14\n+ N=1x2)\n", 3, "N"),              # bad number
    (".model D1 D IS=1e-14\n+ n=1\n+ RS=2\n+ N=1\n", 4, "N"),          # duplicate, case-insensitive
    ("\n\n.model D1 D (IS=1e-14 N= )\n", 3, "N"),                       # '=' with no value
    (".model D1 D (IS=1e-14\n+ RS\n+ )\n", 2, "RS"),                    # no '=' at all
    (".model D1 D (IS=1e-14,\n+ N=)\n", 2, "N"),                        # value missing at ')'
])
def test_card_errors_give_line(text, line, key):
    with pytest.raises(CardSyntaxError) as e:
        read_cards(text, file="bad.lib")
    assert e.value.row == line
    assert e.value.key == key
    assert e.value.file == "bad.lib"


def test_duplicate_names_the_parameter():
    with pytest.raises(CardSyntaxError, match="parameter IS is given twice") as e:
        read_cards("* x\n.model D1 D IS=1e-14 is=2e-14\n")
    assert e.value.row == 2


@pytest.mark.parametrize("text, line", [
    (".model\n", 1),
    ("* x\n.model D1\n", 2),
    (".model D1 IS=1e-14\n", 1),
    (".model D1 (IS=1e-14)\n", 1),
    (".model D1 D (IS=1e-14\n", 1),
    (".model D1 D IS=1e-14)\n", 1),
    (".model D1 D (IS=1e-14) N=2\n", 1),
    (".model D1 D (IS=1e-14 (N=2))\n", 1),
    ("+ IS=1\n", 1),
    ("* x\n.lib a\n.lib b\n.endl\n.endl\n", 3),
    (".lib a\n.model D1 D\n", 1),
    (".lib a\n.endl b\n", 2),
    (".endl\n", 1),
    (".lib\n", 1),
])
def test_structure_errors_give_line(text, line):
    with pytest.raises(CardSyntaxError) as e:
        read_cards(text)
    assert e.value.row == line


def test_read_file(tmp_path):
    p = tmp_path / "diodes.lib"
    p.write_text("* \u00b5-diodes, UTF-8\r\n.model D1 D (IS=1e-14\r\n+ N=1.05)\r\n", encoding="utf-8")
    assert read_file(p) == [Card("D1", "D", {"IS": 1e-14, "N": 1.05}, 2, None)]
    bad = tmp_path / "bad.lib"
    bad.write_text("\n.model D1 D IS=x\n", encoding="utf-8")
    with pytest.raises(CardSyntaxError) as e:
        read_file(bad)
    assert (e.value.file, e.value.row) == (str(bad), 2)


def test_missing_file_names_it(tmp_path):
    missing = tmp_path / "nowhere.lib"
    with pytest.raises(InputError) as e:
        read_file(missing)
    assert e.value.file == str(missing)
    assert str(missing) in str(e.value)


# --- round trip --------------------------------------------------------------

@pytest.mark.parametrize("dialect", sorted(targets.TARGETS))
def test_round_trip_of_a_modelgen_card(dialect):
    r = extraction.derive(description.load(ROOT / "examples" / "switching_diode.toml"))
    text = cards.card(r, 0, dialect=dialect)
    (c,) = read_cards(text)
    assert c.name == r.row(0)["name"]
    assert c.type == "D"
    values, _ = cards.card_values(r, 0, dialect)
    assert list(c.params) == [k for k, _ in values]
    for k, v in values:
        assert math.isfinite(v)
        assert c.params[k] == v, k  # full precision
    assert c.params["TNOM"] == 27.0
    p = r.row(0)["params"]
    for k in ("N", "RS", "VJ", "M", "TT", "EG", "XTI"):
        assert c.params[k] == p[k]
    # the sidewall is folded into IS where the dialect has no sidewall terms, split where it has
    total_is = c.params["IS"] + c.params.get("JSW", 0.0) * c.params.get("PJ", 0.0)
    assert total_is == pytest.approx(p["IS"], rel=1e-15)


def test_reading_is_bounded_in_cards(monkeypatch):
    # a bound on the number of cards bounds the reading time along with the file size
    from modelgen.cards import reader
    monkeypatch.setattr(reader, "MAX_CARDS", 3)
    assert len(read_cards(".model A D\n.model B D\n.model C D\n")) == 3
    with pytest.raises(CardSyntaxError, match="more than 3 .model cards") as info:
        read_cards(".model A D\n* x\n.model B D\n.model C D\n.model E D\n")
    assert info.value.line == 5


def test_duplicate_model_names_per_section_any_case():
    # SPICE names are case-insensitive (ngspice manual, ch. 2); one name per section
    with pytest.raises(CardSyntaxError, match="defined twice") as info:
        read_cards(".model DA D (IS=1)\n.model da D (IS=2)\n")
    assert info.value.line == 2
    # the same name in different sections is what corner libraries are made of
    cards = read_cards(".lib a\n.model DX D\n.endl a\n.lib b\n.model DX D\n.endl b\n")
    assert [(c.name, c.section) for c in cards] == [("DX", "a"), ("DX", "b")]

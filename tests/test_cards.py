"""Card text: number formatting, safe comments, the model-name rule."""

import math

import pytest
from hypothesis import given, settings, strategies as st

from modelgen import cards, description, extraction
from modelgen.errors import InputError


@settings(deadline=None)
@given(st.floats(allow_nan=False, allow_infinity=False))
def test_numbers_round_trip_exactly(x):
    text = cards.format_number(x)
    assert "e" in text and float(text) == x


@settings(deadline=None, max_examples=500)
@given(st.floats(allow_nan=False, allow_infinity=False))
def test_fast_formatting_equals_numpy_scientific_unique(x):
    # numpy's format_float_scientific(unique=True) is the reference for the shortest exponent form
    import numpy as np
    assert cards.format_number(x) == np.format_float_scientific(x, unique=True, trim="-", exp_digits=2)
    assert cards.format_numbers([x, x, float("nan")]) == [cards.format_number(x)] * 2 + [None]


def test_number_formatting_examples():
    assert cards.format_number(0.5) == "5e-01"
    assert cards.format_number(1e-15) == "1e-15"
    with pytest.raises(ValueError):
        cards.format_number(math.inf)


@settings(deadline=None)
@given(st.text())
def test_no_text_can_start_a_line_of_its_own(text):
    for line in cards.comment_lines(text):
        assert line.startswith("*")
        assert "\n" not in line and "\r" not in line


@pytest.mark.parametrize("name", ["D1\n.control\nshell rm -rf /\n.endc", "D1 D(IS=1)", "", "9D", "D-1",
                                  "D1\r.include x", "a" * 65])
def test_model_name_must_be_an_identifier(name):
    with pytest.raises(InputError, match="letter followed by letters, digits or underscores"):
        description.check_name(name)


def test_hostile_input_text_stays_in_comments():
    table = {"name": "DSAFE", "area": "1e-4 cm^2",
             "p": {"doping": "1e18 cm^-3", "thickness": "1 um", "lifetime": "100 ns"},
             "n": {"doping": "1e16 cm^-3", "thickness": "50 um", "lifetime": "1 us"}}
    result = extraction.derive(description.from_mapping(table, file="x\n.control\nshell echo pwned\n.endc"))
    text = cards.card(result, 0, inputs={"p.doping": "1e18 cm^-3\n.control\n.endc\r.end"})
    for line in text.splitlines():
        assert line == "" or line.startswith(("* ", ".model DSAFE D (", "+ ")), line
    assert sum(line.startswith(".") for line in text.splitlines()) == 1

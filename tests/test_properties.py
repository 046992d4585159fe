"""Any valid description gives finite, positive parameters (hypothesis)."""

import math

import pytest
from hypothesis import given, settings, strategies as st

from modelgen import description, extraction


def q(lo, hi, unit):
    return st.floats(lo, hi).map(lambda x: f"{10 ** x:.6g} {unit}")


side = st.fixed_dictionaries(
    {"doping": q(14, 19.5, "cm^-3"), "thickness": q(0.3, 2.5, "um"), "lifetime": q(-9, -4, "s")},
    optional={"surface_recombination": q(-1, 7, "cm/s")},
)


@settings(max_examples=60, deadline=None)
@given(p=side, n=side, area=q(-6, -1, "cm^2"), bias=st.floats(-20, 0.2))
def test_valid_input_gives_finite_positive_parameters(p, n, area, bias):
    table = {"name": "DPROP", "area": area, "reference_bias": f"{bias:.4g} V", "p": p, "n": n}
    try:
        device = description.from_mapping(table, file="prop.toml")
        r = extraction.derive(device).row(0)
    except Exception as e:  # a side depleted through is the one rejection a valid-looking input may get
        assert "depleted through" in str(e) or "beyond the junction potential" in str(e), str(e)
        return
    for k, v in r["params"].items():
        if k == "BV" and math.isnan(v):
            assert any("no avalanche breakdown" in w for w in r["warnings"])
            continue
        assert math.isfinite(v) and v > 0, (k, v, table)
    # a current-weighted mean of per-side transit times, each at most its lifetime
    assert r["params"]["TT"] <= max(r["derived"]["p"]["lifetime"], r["derived"]["n"]["lifetime"]) * (1 + 1e-12)


# Defect 6: a device gave a different BV alone than in a lot with more than eight distinct temperatures
# (the breakdown solver switched method on the count of temperatures in the call).
_BATCH_DEVICE = {"name": "DTEMP", "area": "1e-3 cm^2",  # invented test device, thick abrupt junction
                 "p": {"doping": "1e18 cm^-3", "thickness": "2 um", "lifetime": "100 ns"},
                 "n": {"doping": "1e16 cm^-3", "thickness": "50 um", "lifetime": "1 us"}}


@settings(max_examples=15, deadline=None)
@given(temps=st.lists(st.floats(233.15, 423.15), min_size=2, max_size=14, unique=True),
       n_doping=st.floats(15.0, 17.5), graded=st.booleans())
def test_batch_equals_single_for_any_mix_of_temperatures(temps, n_doping, graded):
    import numpy as np

    from modelgen.device import concatenate
    table = {**_BATCH_DEVICE, "n": {**_BATCH_DEVICE["n"], "doping": f"{10 ** n_doping:.6g} cm^-3"}}
    if graded:
        table.update(profile="linear", grading="1e21 cm^-4")
    alone = [description.from_mapping({**table, "temperature": f"{t!r} K"}) for t in temps]
    lot = extraction.derive(concatenate(alone))
    for i, device in enumerate(alone):
        single = extraction.derive(device)
        for k in extraction.PARAMETERS:
            assert np.array_equal(lot.params[k][i], single.params[k][0], equal_nan=True), (k, temps[i])


# Defect 17 (results): any input, however absurd, gives an error naming a key or a card whose every
# parameter is finite and positive; no numpy warning escapes.
_ABSURD_KEYS = {  # key -> unit the value is written in
    "area": "m^2", "perimeter": "m", "p.minority_mobility": "cm^2/(V*s)", "n.majority_mobility": "cm^2/(V*s)",
    "n.lifetime": "s", "p.diffusion_length": "m", "material.ni": "cm^-3", "material.relative_permittivity": "",
    "material.bandgap": "eV", "contact_resistance": "ohm", "recombination_lifetime": "s",
    "n.surface_recombination": "cm/s", "n.neutral_width": "m", "reference_bias": "V",
}


@pytest.mark.filterwarnings("error::RuntimeWarning")
@settings(max_examples=80, deadline=None)
@given(changes=st.dictionaries(st.sampled_from(sorted(_ABSURD_KEYS)),
                               st.tuples(st.floats(-320, 308), st.sampled_from([1.0, -1.0])), min_size=1, max_size=3))
def test_absurd_inputs_give_an_error_or_a_complete_card(changes):
    import copy

    from modelgen.errors import InputError
    table = copy.deepcopy(_BATCH_DEVICE)
    for key, (exponent, sign) in changes.items():
        unit = _ABSURD_KEYS[key]
        value = sign * 10.0 ** exponent if key == "reference_bias" else 10.0 ** exponent
        text = f"{value:.6g} {unit}".strip()
        head, _, tail = key.partition(".")
        if key.startswith("material."):
            table.setdefault("material", {"name": "silicon"})
            table["material"][tail] = value if not unit else text
        elif tail:
            table[head][tail] = text
            if tail == "diffusion_length":
                table[head].pop("lifetime", None)
            if tail == "neutral_width":
                table[head].pop("thickness", None)
        else:
            table[key] = text
        if key == "perimeter":
            table["junction_depth"] = "1 um"
    try:
        r = extraction.derive(description.from_mapping(table, file="absurd.toml")).row(0)
    except InputError as e:
        assert e.key, str(e)
        return
    for k, v in r["params"].items():
        if k == "BV" and math.isnan(v):
            continue
        assert math.isfinite(v) and v > 0, (k, v, table)

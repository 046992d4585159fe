"""Any valid description gives finite, positive parameters (hypothesis)."""

import math

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

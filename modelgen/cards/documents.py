"""Plain-data documents of results, for JSON output (the same the command line prints)."""

from __future__ import annotations

import json
import math

import numpy as np

from ..extraction import PARAMETERS, UNITS, Result


def json_safe(v):
    """``v`` with non-finite floats as None, through dicts and lists (strict JSON); numpy arrays and
    scalars become lists and Python numbers."""
    if isinstance(v, dict):
        return {k: json_safe(x) for k, x in v.items()}
    if isinstance(v, np.ndarray):
        v = v.tolist()
    elif isinstance(v, np.generic):
        v = v.item()
    if isinstance(v, (list, tuple)):
        return [json_safe(x) for x in v]
    if isinstance(v, float) and not math.isfinite(v):
        return None
    return v


def row_document(result: Result, i=0):
    """Device ``i`` as plain data: name, params (SI), units, derived (SI), derived_units, warnings.

    Non-finite numbers become None: an ideal ohmic contact's velocity
    (infinite; ``contact`` says ``"ohmic"``) and a BV that was not found.
    """
    row = result.row(i)
    for side in ("p", "n"):
        s = row["derived"][side]
        v = s["contact_velocity"]
        s["contact"] = "ohmic" if math.isinf(v) else ("reflecting" if v == 0 else "finite")
    return json_safe({"name": row["name"], "params": row["params"], "units": {k: UNITS[k] for k in PARAMETERS},
                      "derived": row["derived"], "derived_units": derived_units(row["derived"]),
                      "warnings": row["warnings"]})


#: Units of the derived quantities in JSON documents (SI; energies in eV).
DERIVED_UNITS = {
    "temperature": "K", "ni": "m^-3", "bandgap": "eV", "builtin_voltage": "V", "depletion_width": "m",
    "depletion_width_reference": "m", "reference_bias": "V", "junction_area": "m^2", "bottom_area": "m^2",
    "recombination_lifetime": "s", "breakdown_peak_field": "V/m", "reach_through": "1", "leakage_bias": "V",
    "leakage": "A",
}
#: Units of each side's derived quantities.
SIDE_UNITS = {
    "doping": "m^-3", "thickness": "m", "neutral_width": "m", "minority_mobility": "m^2/(V s)",
    "majority_mobility": "m^2/(V s)", "diffusivity": "m^2/s", "lifetime": "s", "diffusion_length": "m",
    "w_over_l": "1", "regime": "1", "contact_velocity": "m/s", "finite_width_factor": "1",
    "bandgap_narrowing": "eV", "ni_eff": "m^-3", "saturation_current_density": "A/m^2", "transit_time": "s",
    "resistance": "ohm", "depletion_extent": "m", "contact": "1",
}


def derived_units(derived):
    """The unit of each entry of a row's ``derived`` dict, in the same shape ("1": a number or a word)."""
    out = {}
    for k, v in derived.items():
        if isinstance(v, dict):
            out[k] = {kk: SIDE_UNITS.get(kk, "1") for kk in v}
        else:
            out[k] = DERIVED_UNITS.get(k, "1")
    return out


def dumps(doc):
    """Strict JSON text of a document (indent 2, a final newline)."""
    return json.dumps(json_safe(doc), indent=2, allow_nan=False) + "\n"


def as_json(result: Result, i=0):
    """Device ``i`` as a JSON text (see :func:`row_document`)."""
    return dumps(row_document(result, i))


def as_json_list(documents):
    """One document as JSON text, several as a JSON list."""
    return dumps(documents[0] if len(documents) == 1 else list(documents))

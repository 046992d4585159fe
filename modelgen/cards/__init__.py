"""Model-card text: number formatting, safe comments, dialects, templates.

Templates hold no logic beyond loops: every number arrives formatted and
every comment arrives as a safe line. A dialect is a template plus the list of
parameters it carries (:data:`DIALECTS`).
"""

from __future__ import annotations

import json
import math
import re
from dataclasses import dataclass
from pathlib import Path

import jinja2
import numpy as np

from .. import __version__
from ..extraction import PARAMETERS, UNITS, Result

_HERE = Path(__file__).resolve().parent


def _template_dir():
    """templates/ inside the installed package, else the source tree's."""
    for d in (_HERE.parent / "templates", _HERE.parent.parent / "templates"):
        if d.is_dir():
            return d
    raise FileNotFoundError("modelgen templates directory not found")


@dataclass(frozen=True)
class Dialect:
    """An output dialect: its template and the parameters it carries."""

    name: str
    template: str
    title: str
    carries: tuple
    #: what each parameter left out costs, for the card's comment
    cost: dict


DIALECTS = {
    "spice3": Dialect(
        name="spice3", template="spice3.j2",
        title="Berkeley SPICE3 level-1 diode",
        carries=("IS", "N", "RS", "CJO", "VJ", "M", "FC", "TT", "BV", "IBV", "EG", "XTI"),
        cost={"ISR": "depletion-region recombination current: low-bias current is underestimated",
              "NR": "ideality of the recombination current",
              "IKF": "high-injection knee: high-current forward voltage is underestimated"}),
}


def format_number(x):
    """A float in exponent form with the fewest digits that read back exactly.

    ``1e-15`` -> ``1e-15``, ``0.5`` -> ``5e-01``, ``2.3234916272313127e-15``
    -> ``2.3234916272313127e-15``. Raises ValueError for non-finite values
    (they never belong on a card).
    """
    x = float(x)
    if not math.isfinite(x):
        raise ValueError(f"non-finite value {x!r} cannot go on a card")
    return np.format_float_scientific(x, unique=True, trim="-", exp_digits=2)


_CONTROL = re.compile(r"[\x00-\x1f\x7f-\x9f\u2028\u2029]")


def comment_lines(text, prefix="* "):
    """Turn any text into SPICE comment lines, one ``*`` line per input line.

    Control characters (including carriage returns, tabs, form feeds and
    Unicode line separators) are removed, so no part of the text can begin a
    line of its own: every returned line starts with ``prefix``.
    """
    out = []
    for line in str(text).splitlines() or [""]:
        out.append((prefix + _CONTROL.sub("", line)).rstrip())
    return out


def _inputs_lines(inputs):
    lines = []
    for k in sorted(inputs):
        v = inputs[k]
        shown = json.dumps(v, ensure_ascii=False) if isinstance(v, str) else repr(v)
        lines += comment_lines(f"  {k} = {shown}")
    return lines


CAUTION = ("CAUTION: a physics-derived estimate. Check it against measured I-V and C-V of real "
           "devices before design sign-off; derate and confirm breakdown.")


def card(result: Result, i=0, dialect="spice3", inputs=None):
    """The model card of device ``i`` as text.

    Parameters
    ----------
    result : Result
        From :func:`modelgen.extraction.derive`.
    i : int
        Which device.
    dialect : str
        A key of :data:`DIALECTS`.
    inputs : dict, optional
        The description's keys and values as the user wrote them, shown in
        the header.
    """
    d = DIALECTS[dialect]
    row = result.row(i)
    p = row["params"]
    header = comment_lines(f"{row['name']}: diode model card, modelgen {__version__}, dialect {d.name} ({d.title})")
    src = result.device.source[i] if len(result.device.source) else None
    if src:
        header += comment_lines(f"from: {Path(src).name}")
    if inputs:
        header += comment_lines("inputs:") + _inputs_lines(inputs)
    header += comment_lines("models:")
    for k, v in sorted(result.sources.items()):
        header += comment_lines(f"  {k}: {v}")
    header += comment_lines(CAUTION)
    for w in row["warnings"]:
        header += comment_lines(w)
    params, left_out = [], []
    for name in d.carries:
        v = p[name]
        if name in ("BV", "IBV") and (v is None or not math.isfinite(v)):
            left_out.append(f"{name}: no avalanche breakdown found")
            continue
        params.append((name, format_number(v)))
    params.append(("TNOM", format_number(round(row["derived"]["temperature"] - 273.15, 9))))
    for name in PARAMETERS:
        if name not in d.carries:
            left_out.append(f"{name}={format_number(p[name])} ({d.cost.get(name, 'not carried')})")
    notes = []
    if left_out:
        notes = comment_lines(f"left out, the {d.name} set cannot carry them:")
        for s in left_out:
            notes += comment_lines("  " + s)
    env = _environment()
    return env.get_template(d.template).render(header=header, notes=notes, name=row["name"], params=params)


_ENV = None


def _environment():
    global _ENV
    if _ENV is None:
        _ENV = jinja2.Environment(loader=jinja2.FileSystemLoader(str(_template_dir())),
                                  autoescape=False, keep_trailing_newline=True,
                                  undefined=jinja2.StrictUndefined, trim_blocks=True, lstrip_blocks=True)
    return _ENV


def _json_safe(v):
    if isinstance(v, dict):
        return {k: _json_safe(x) for k, x in v.items()}
    if isinstance(v, float) and not math.isfinite(v):
        return None
    return v


def as_json(result: Result, i=0):
    """Device ``i`` as a JSON text: name, params (SI), derived (SI), warnings.

    Non-finite numbers become ``null``: an ideal ohmic contact's velocity
    (infinite; ``contact`` says ``"ohmic"``) and a BV that was not found.
    """
    row = result.row(i)
    for side in ("p", "n"):
        s = row["derived"][side]
        v = s["contact_velocity"]
        s["contact"] = "ohmic" if math.isinf(v) else ("reflecting" if v == 0 else "finite")
    out = {"name": row["name"], "params": row["params"], "units": {k: UNITS[k] for k in PARAMETERS},
           "derived": row["derived"], "warnings": row["warnings"]}
    return json.dumps(_json_safe(out), indent=2, sort_keys=False, allow_nan=False) + "\n"

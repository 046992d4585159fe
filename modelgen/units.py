"""The one pint registry, and text-to-SI conversion at the input boundary.

pint is used only here, where text becomes numbers. Parse once per value
(or once per table column); the physics never sees a pint quantity.
"""

from __future__ import annotations

import json
import math
import os
import re
from functools import lru_cache

from .errors import InputError


@lru_cache(maxsize=1)
def registry():
    """The application's one pint registry, made on first use.

    Importing pint and building its registry cost about 0.4 s; pint's own
    definitions cache (``cache_folder=":auto:"``, the user's cache folder)
    brings later runs to a few hundredths. Without a writable cache folder
    the registry is built afresh.
    """
    import pint

    try:
        return pint.UnitRegistry(cache_folder=":auto:")
    except Exception:  # an unwritable or broken cache must not stop a run
        return pint.UnitRegistry()

#: Kinds of quantity: SI unit the physics uses, and an example for messages.
KINDS = {
    "concentration": ("m^-3", "1e17 cm^-3"),
    "grading": ("m^-4", "1e20 cm^-4"),
    "length": ("m", "2 um"),
    "area": ("m^2", "100 um^2"),
    "time": ("s", "1 us"),
    "velocity": ("m/s", "1e3 cm/s"),
    "mobility": ("m^2/(V*s)", "1200 cm^2/(V*s)"),
    "resistivity": ("ohm*m", "1 ohm*cm"),
    "resistance": ("ohm", "0.5 ohm"),
    "current": ("A", "1 mA"),
    "voltage": ("V", "-1 V"),
    "energy": ("eV", "1.12 eV"),
    "temperature": ("K", "27 degC"),
}

_NUMBER = re.compile(r"^\s*([+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)\s*(.*?)\s*$")
_SPELLINGS = (("Ω", "ohm"), ("µ", "u"), ("μ", "u"), ("·", "*"), ("°C", "degC"), ("°F", "degF"))
_unit_cache: dict = {}


def _unit(text):
    """A parsed pint unit and the factor to the SI unit of its kind (cached per text)."""
    if text not in _unit_cache:
        clean = text
        for a, b in _SPELLINGS:
            clean = clean.replace(a, b)
        _unit_cache[text] = registry().parse_units(clean)
    return _unit_cache[text]


_FACTORS: dict | None = None


def _factor_file():
    import importlib.metadata

    import platformdirs

    from . import __version__

    folder = platformdirs.user_cache_dir("modelgen")
    return os.path.join(folder, f"unit-factors-{__version__}-pint-{importlib.metadata.version('pint')}.json")


def _known_factors():
    """Factors found in earlier runs (a cache beside pint's own; importing pint costs ~0.2 s)."""
    global _FACTORS
    if _FACTORS is None:
        _FACTORS = {}
        try:
            with open(_factor_file(), encoding="utf-8") as fh:
                _FACTORS = {k: tuple(v) for k, v in json.load(fh).items()}
        except Exception:  # no cache yet, or an unreadable one: pint answers
            _FACTORS = {}
    return _FACTORS


def _remember(key, value):
    known = _known_factors()
    known[key] = value
    try:  # best effort, atomic: a cache that cannot be written costs only speed
        path = _factor_file()
        os.makedirs(os.path.dirname(path), exist_ok=True)
        tmp = f"{path}.{os.getpid()}.tmp"
        with open(tmp, "w", encoding="utf-8") as fh:
            json.dump(known, fh, sort_keys=True)
        os.replace(tmp, path)
    except Exception:
        pass


def unit_factor(unit_text, kind):
    """Multiplier and offset taking numbers in ``unit_text`` to SI numbers of ``kind``.

    Returns ``(scale, offset)`` with si = value * scale + offset (the offset is
    non-zero only for temperatures in degC or degF). Raises ValueError with a
    readable reason if the unit does not parse or has the wrong dimension.
    Factors pint has given once are kept in the user's cache folder (per
    modelgen and pint version), so a later run need not import pint.
    """
    key = f"{KINDS[kind][0]}|{unit_text}"  # the SI target and the text: all a factor depends on
    known = _known_factors()
    if key in known:
        return known[key]
    value = _unit_factor(unit_text, kind)
    _remember(key, value)
    return value


def _unit_factor(unit_text, kind):
    si, example = KINDS[kind]
    try:
        unit = _unit(unit_text)
    except Exception:
        raise ValueError(f"unknown unit {unit_text!r} (expected a {kind}, e.g. \"{example}\")") from None
    ureg = registry()
    target = ureg.parse_units(si.replace("^", "**"))
    if unit.dimensionality != target.dimensionality:
        raise ValueError(f"{unit_text!r} is not a unit of {kind} (e.g. \"{example}\")")
    zero = ureg.Quantity(0.0, unit).to(target).magnitude
    one = ureg.Quantity(1.0, unit).to(target).magnitude
    # pint's conversion factors carry float noise (1e-6 as 9.999999999999999e-07);
    # 15 significant digits keep every exact decimal factor exact
    return float(f"{one - zero:.15g}"), float(f"{zero:.15g}")


def apply_factor(x, scale, offset=0.0):
    """x * scale + offset, dividing by 1/scale where that is a whole number.

    Dividing by an exact power of ten keeps "10 us" at 1e-5 s exactly rather
    than 9.999999999999999e-06. Works on floats and numpy arrays alike.
    """
    inv = 1.0 / scale
    if scale < 1.0 and abs(inv - round(inv)) <= 1e-12 * inv:
        return x / float(round(inv)) + offset
    return x * scale + offset


def parse_quantity(value, kind, *, key=None, file=None, row=None):
    """Convert a quantity string such as ``"1e17 cm^-3"`` to an SI float.

    Parameters
    ----------
    value : str
        A number followed by a unit.
    kind : str
        A key of :data:`KINDS`.
    key, file, row :
        Where the value came from, for the error message.

    Returns
    -------
    float
        The value in the SI unit of ``kind`` (eV for energies).

    Raises
    ------
    InputError
        A bare number, an unknown unit, a wrong dimension, a non-finite value.
    """
    def bad(msg):
        return InputError(msg, key=key, file=file, row=row)

    si, example = KINDS[kind]
    if isinstance(value, bool) or not isinstance(value, (str, int, float)):
        raise bad(f"expected a quantity string such as \"{example}\", got {type(value).__name__}")
    if not isinstance(value, str):
        raise bad(f"a bare number needs a unit: write it as a string such as \"{example}\"")
    m = _NUMBER.match(value)
    if not m:
        raise bad(f"{value!r} is not a number followed by a unit (e.g. \"{example}\")")
    number, unit_text = m.groups()
    if not unit_text:
        raise bad(f"{value!r} has no unit (e.g. \"{example}\")")
    x = float(number)
    try:
        scale, offset = unit_factor(unit_text, kind)
    except ValueError as e:
        raise bad(str(e)) from None
    out = apply_factor(x, scale, offset)
    if not math.isfinite(out):
        raise bad(f"{value!r} is not a finite number")
    return out

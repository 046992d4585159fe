"""Device descriptions: TOML files (and, through :func:`assemble`, tables).

A description is read into flat dotted keys (``p.doping``), each value
converted to SI by :mod:`modelgen.units`, then checked and assembled into a
:class:`~modelgen.device.Device` by :func:`assemble`, which works on columns
of any length: one device and a table of devices take the same path.
"""

from __future__ import annotations

import math
import re
import tomllib
from dataclasses import dataclass

import numpy as np

from . import materials
from .device import Device, Side
from .errors import InputError, Problems
from .textio import read_text
from .units import parse_quantity


@dataclass(frozen=True)
class Key:
    """One key of the description: its kind, default and allowed range."""

    kind: str            # a units kind, or "text", "number", "choice"
    help: str
    default: object = None
    minimum: float | None = None     # exclusive lower bound
    at_least: float | None = None    # inclusive lower bound
    maximum: float | None = None     # exclusive upper bound
    choices: tuple = ()


_SIDE_KEYS = {
    "doping": Key("concentration", "dopant density, 1e12-1e22 cm^-3 (or give resistivity)",
                  at_least=1e18, maximum=1e28),
    "resistivity": Key("resistivity", "resistivity; converted to doping through the mobility model",
                       minimum=0.0),
    "thickness": Key("length", "metallurgical junction to contact; the depletion extent is subtracted",
                     minimum=0.0),
    "neutral_width": Key("length", "quasi-neutral width, given directly", minimum=0.0),
    "lifetime": Key("time", "minority-carrier lifetime", minimum=0.0),
    "diffusion_length": Key("length", "minority-carrier diffusion length", minimum=0.0),
    "minority_mobility": Key("mobility", "measured minority-carrier mobility", minimum=0.0),
    "majority_mobility": Key("mobility", "measured majority-carrier mobility", minimum=0.0),
    "surface_recombination": Key("velocity", "contact recombination velocity (absent or \"ohmic\": "
                                 "ideal ohmic contact; \"0 cm/s\": reflecting)", at_least=0.0,
                                 default=math.inf),
}

#: Every key of a description, flattened with dots, with its kind and default.
KEYS = {
    "name": Key("text", "model name, a SPICE identifier"),
    "material": Key("text", "material name (known: " + ", ".join(sorted(materials.MATERIALS)) + ")",
                    default="silicon"),
    "material.name": Key("text", "material name", default="silicon"),
    "material.ni": Key("concentration", "intrinsic density at the nominal temperature", minimum=0.0),
    "material.bandgap": Key("energy", "band gap at the nominal temperature", minimum=0.0),
    "material.relative_permittivity": Key("number", "relative permittivity", minimum=1.0),
    "temperature": Key("temperature", "nominal temperature, the card's TNOM, 50-700 K", default=300.15,
                       at_least=50.0, maximum=700.0),
    "area": Key("area", "junction area", minimum=0.0),
    "perimeter": Key("length", "junction perimeter (sidewall), with junction_depth", minimum=0.0),
    "junction_depth": Key("length", "junction depth (sidewall height), with perimeter", minimum=0.0),
    "reference_bias": Key("voltage", "bias at which the depletion edges fix the neutral widths", default=0.0),
    "contact_resistance": Key("resistance", "added to RS", default=0.0, at_least=0.0),
    "profile": Key("choice", "junction profile", default="abrupt", choices=("abrupt", "linear")),
    "grading": Key("grading", "impurity gradient of a linear profile", minimum=0.0),
    "recombination_lifetime": Key("time", "lifetime for the depletion-region current "
                                  "(default: the lighter side's)", minimum=0.0),
    "lifetime_temperature_exponent": Key("number", "lifetimes scale as (T/Tnom)^exponent away from the "
                                         "nominal temperature", default=0.0),
    "card.fc": Key("number", "SPICE FC, forward-bias depletion capacitance coefficient", default=0.5,
                   minimum=0.0, maximum=1.0),
    "card.breakdown_current": Key("current", "current at which BV is quoted (SPICE IBV)", default=1e-3,
                                  minimum=0.0),
}
for _side in ("p", "n"):
    for _k, _v in _SIDE_KEYS.items():
        KEYS[f"{_side}.{_k}"] = _v

_TABLES = {"material", "card", "p", "n"}
_REQUIRED = ("name", "area")
#: Pairs of keys of which exactly one (first pair) or at most one (second) is given.
_EXACTLY_ONE = (("doping", "resistivity"), ("thickness", "neutral_width"))
_AT_MOST_ONE = (("lifetime", "diffusion_length"),)

NAME_RULE = "a letter followed by letters, digits or underscores, at most 64 characters"
_NAME = re.compile(r"[A-Za-z][A-Za-z0-9_]{0,63}\Z")


def check_name(name, *, file=None, row=None, key="name"):
    """Check that ``name`` is a safe SPICE model name; raise InputError if not."""
    if not isinstance(name, str) or not _NAME.match(name):
        shown = repr(name) if isinstance(name, str) and len(name) <= 40 else "the given value"
        raise InputError(f"{shown} is not a valid model name: it must be {NAME_RULE}",
                         file=file, row=row, key=key)
    return name


def _flatten(table, file):
    flat = {}
    for k, v in table.items():
        if isinstance(v, dict):
            if k not in _TABLES:
                raise InputError(f"unknown table [{k}]; known tables: {', '.join(sorted(_TABLES))}",
                                 file=file, key=k)
            for kk, vv in v.items():
                key = f"{k}.{kk}"
                if isinstance(vv, dict) or key not in KEYS:
                    known = sorted(x.split(".", 1)[1] for x in KEYS if x.startswith(k + "."))
                    raise InputError(f"unknown key; known keys in [{k}]: {', '.join(known)}", file=file, key=key)
                flat[key] = vv
        else:
            if k not in KEYS or k in _TABLES - {"material"}:
                known = sorted(x for x in KEYS if "." not in x)
                raise InputError(f"unknown key; known top-level keys: {', '.join(known)}", file=file, key=k)
            flat[k] = v
    if "material" in flat:
        if "material.name" in flat:
            raise InputError("give the material as a name or as a table, not both", file=file, key="material")
        flat["material.name"] = flat.pop("material")
    return flat


def convert(flat, *, file=None, row=None):
    """Convert flat raw values (strings from TOML or a table cell) to SI numbers.

    Returns a dict of the keys given, each an SI float or a string.
    """
    out = {}
    for key, raw in flat.items():
        spec = KEYS[key]
        if spec.kind == "text":
            if not isinstance(raw, str):
                raise InputError(f"expected a string, got {type(raw).__name__}", file=file, row=row, key=key)
            out[key] = raw
        elif spec.kind == "choice":
            if raw not in spec.choices:
                raise InputError(f"{raw!r} is not one of: {', '.join(spec.choices)}", file=file, row=row, key=key)
            out[key] = raw
        elif spec.kind == "number":
            try:
                x = float(raw) if isinstance(raw, (str, int, float)) and not isinstance(raw, bool) else None
            except ValueError:
                x = None
            if x is None or not math.isfinite(x):
                raise InputError(f"expected a finite plain number, got {raw!r}", file=file, row=row, key=key)
            out[key] = x
        elif key.endswith(".surface_recombination") and raw == "ohmic":
            out[key] = math.inf
        else:
            out[key] = parse_quantity(raw, spec.kind, key=key, file=file, row=row)
    return out


def _column(columns, key, n):
    spec = KEYS[key]
    default = np.nan if spec.default is None else float(spec.default)
    if key in columns:
        v = np.asarray(columns[key], dtype=float)
        return np.where(np.isnan(v), default, v)  # a row that leaves the key out takes the default
    return np.full(n, default)


def assemble(columns, *, sources=None, rows=None, problems=None):
    """Check SI columns and build a :class:`Device`.

    Parameters
    ----------
    columns : dict
        Flat key -> sequence of values (SI floats, NaN where a row leaves an
        optional key out; strings for ``name``, ``material.name``,
        ``profile``). Every column has the same length.
    sources : sequence of str, optional
        The file each row came from, for messages.
    rows : sequence of int, optional
        The line number of each row in its file, for messages.
    problems : modelgen.errors.Problems, optional
        Collects broken rules row by row (for tables). Without it the first
        broken rule raises.

    Raises
    ------
    InputError
        A required column missing (always), or, without ``problems``, the
        first row that breaks a rule, naming its file, row and key.
    """
    n = len(columns["name"]) if "name" in columns else len(next(iter(columns.values())))
    sources = tuple(sources) if sources is not None else (None,) * n
    if problems is None:
        problems = Problems(n, sources=sources, rows=rows)
    fail = problems.add

    for key in _REQUIRED:
        if key not in columns:
            raise InputError("required key is missing", file=sources[0] if n else None, key=key)
    names = tuple(columns["name"])
    bad_name = np.array([not (isinstance(x, str) and _NAME.match(x)) for x in names], bool)
    if bad_name.any():
        shown = np.array([repr(x) if isinstance(x, str) and len(x) <= 40 else "the given value" for x in names],
                         dtype=object)
        fail(bad_name, "name", "{x} is not a valid model name: it must be " + NAME_RULE, {"x": shown})
    mats = tuple(columns.get("material.name", ("silicon",) * n))
    known = sorted(materials.MATERIALS)
    fail(~np.isin(np.asarray(mats, dtype=object), known), "material",
         "unknown material {m!r}; known: " + ", ".join(known), {"m": np.asarray(mats, dtype=object)})
    profile = np.asarray(columns.get("profile", ("abrupt",) * n))
    linear = profile == "linear"

    num = {k: _column(columns, k, n) for k, spec in KEYS.items() if spec.kind not in ("text", "choice")}
    for key, spec in KEYS.items():
        if key not in num or key not in columns:
            continue
        v = num[key]
        given = ~np.isnan(v)
        if spec.minimum is not None:
            fail(given & ~(v > spec.minimum), key,
                 "must be positive" if spec.minimum == 0 else f"must be greater than {spec.minimum:g}")
        if spec.at_least is not None:
            fail(given & ~(v >= spec.at_least), key,
                 "must not be negative" if spec.at_least == 0 else "is below the allowed range (" + spec.help + ")")
        if spec.maximum is not None:
            fail(given & ~(v < spec.maximum), key, "is above the allowed range (" + spec.help + ")")
    for side in ("p", "n"):
        for a, b in _EXACTLY_ONE:
            ga, gb = ~np.isnan(num[f"{side}.{a}"]), ~np.isnan(num[f"{side}.{b}"])
            fail(ga & gb, f"{side}.{a}", f"give {a} or {b}, not both")
            fail(~ga & ~gb, f"{side}.{a}", f"required: give {a} or {b}")
        for a, b in _AT_MOST_ONE:
            fail(~np.isnan(num[f"{side}.{a}"]) & ~np.isnan(num[f"{side}.{b}"]), f"{side}.{a}",
                 f"give {a} or {b}, not both")
    grading = num["grading"]
    fail(linear & np.isnan(grading), "grading", "a linear profile needs grading (e.g. \"1e20 cm^-4\")")
    fail(~linear & ~np.isnan(grading), "grading", "grading applies only to profile = \"linear\"")
    per, xj = num["perimeter"], num["junction_depth"]
    fail(np.isnan(per) & ~np.isnan(xj), "junction_depth",
         "perimeter and junction_depth go together (the sidewall area is perimeter x junction_depth)")
    fail(~np.isnan(per) & np.isnan(xj), "perimeter",
         "perimeter and junction_depth go together (the sidewall area is perimeter x junction_depth)")
    eps_r = num["material.relative_permittivity"]
    eps_default = np.array([materials.MATERIALS.get(m, materials.silicon).RELATIVE_PERMITTIVITY for m in mats])

    def side(s):
        return Side(**{k: num[f"{s}.{k}"] for k in _SIDE_KEYS})

    return Device(
        name=tuple(columns["name"]), material=mats,
        temperature=num["temperature"], area=num["area"],
        perimeter=np.nan_to_num(per, nan=0.0), junction_depth=np.nan_to_num(xj, nan=0.0),
        reference_bias=num["reference_bias"], contact_resistance=num["contact_resistance"],
        linear=linear, grading=grading,
        relative_permittivity=np.where(np.isnan(eps_r), eps_default, eps_r),
        ni=num["material.ni"], bandgap=num["material.bandgap"],
        fc=num["card.fc"], breakdown_current=num["card.breakdown_current"],
        recombination_lifetime=num["recombination_lifetime"],
        reference_temperature=num["temperature"],
        lifetime_exponent=num["lifetime_temperature_exponent"],
        p=side("p"), n=side("n"), source=sources,
        line=tuple(rows) if rows is not None else (),
    )


def read_mapping(table, *, file=None):
    """The flat, SI-converted keys of one description given as a dict."""
    return convert(_flatten(table, file), file=file)


def from_mapping(table, *, file=None):
    """A :class:`Device` of length 1 from a description given as a dict."""
    flat = read_mapping(table, file=file)
    return assemble({k: [v] for k, v in flat.items()}, sources=[file])


def _read_toml(path):
    text = read_text(path, "description file")
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as e:
        raise InputError(f"not valid TOML: {e}", file=path) from None


def load_with_inputs(path):
    """Like :func:`load`, and also the flat keys as the user wrote them.

    Returns
    -------
    (Device, dict)
        The device, and ``{dotted key: value as written}`` for card headers.
    """
    path = str(path)
    table = _read_toml(path)
    raw = _flatten(table, path)
    device = assemble({k: [v] for k, v in convert(raw, file=path).items()}, sources=[path])
    return device, raw


def load(path):
    """Read a TOML device description into a :class:`Device` of length 1.

    Raises
    ------
    InputError
        Unreadable file, TOML syntax error, or any rule of the description
        broken; the message names the file and key.
    """
    return load_with_inputs(path)[0]

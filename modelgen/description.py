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
from .device import Device, ProfileTable, Side
from .errors import InputError, Problems, shown, type_name
from .textio import read_text
from .units import KINDS, MAX_QUANTITY, apply_factor, parse_quantity, unit_factor

#: Largest description file read (a description is about 1 KB).
DESCRIPTION_LIMIT = 2**20
#: Largest profile table read (a process simulator's export of 100,000 points is about 3 MB).
PROFILE_LIMIT = 16 * 2**20
#: Fewest and most points of a profile table.
PROFILE_POINTS = (3, 200000)
#: The junction profiles a description may name; :data:`modelgen.device.CLOSED_FORM_PROFILES` the closed forms take.
PROFILES = ("abrupt", "linear", "erfc", "gaussian", "table")
#: The columns of a profile table: key -> units kind.
PROFILE_COLUMNS = {"depth": "length", "net_doping": "concentration"}


@dataclass(frozen=True)
class Key:
    """One key of the description: its kind, default and allowed range.

    ``plausible`` is an inclusive range of SI values a practitioner would
    accept, written for people in ``accepted`` and justified in ``why``;
    values outside it are refused before any physics (an absurd input gives
    absurd numbers, never a card). ``help`` states it.
    """

    kind: str            # a units kind, or "text", "number", "choice"
    text: str
    default: object = None
    minimum: float | None = None     # exclusive lower bound
    at_least: float | None = None    # inclusive lower bound
    maximum: float | None = None     # exclusive upper bound
    choices: tuple = ()
    plausible: tuple | None = None   # inclusive (low, high), SI
    accepted: str = ""               # the plausible range as people write it
    why: str = ""                    # why those bounds
    infinite_ok: bool = False        # an infinite value means something (an ohmic contact)

    @property
    def help(self):
        """What the key means and, where it has one, its accepted range and why."""
        return self.text + (f"; accepted: {self.accepted} ({self.why})" if self.accepted else "")


def _range(low, high, accepted, why, **kw):
    """A key with plausibility bounds (SI ``low`` to ``high``, inclusive)."""
    return dict(plausible=(low, high), accepted=accepted, why=why, **kw)


_LENGTH_WHY = "thinner than a few atomic layers leaves no neutral region; thicker is more than any wafer"
_LIFETIME = _range(1e-13, 1.0, "0.1 ps to 1 s", "shorter is no longer a carrier lifetime; the best "
                   "float-zone silicon reaches tens of ms", minimum=0.0)
_MOBILITY = _range(1e-4, 10.0, "1 to 1e5 cm^2/(V*s)", "from heavily compensated material to "
                   "high-purity InSb (about 8e4 cm^2/(V*s) at room temperature)", minimum=0.0)

_SIDE_KEYS = {
    "doping": Key("concentration", "dopant density (or give resistivity)", minimum=0.0,
                  **_range(1e18, 1e28, "1e12 to 1e22 cm^-3", "purer than the purest "
                           "float-zone silicon below; beyond the solid solubility of any dopant above")),
    "resistivity": Key("resistivity", "resistivity; converted to doping through the mobility model", minimum=0.0,
                       **_range(1e-7, 1e4, "1e-5 to 1e6 ohm*cm", "from degenerate doping "
                                "(about 1e-4 ohm*cm) to beyond intrinsic silicon (about 2e5 ohm*cm)")),
    "thickness": Key("length", "metallurgical junction to contact; the depletion extent is subtracted",
                     minimum=0.0, **_range(1e-9, 1e-2, "1 nm to 1 cm", _LENGTH_WHY)),
    "neutral_width": Key("length", "quasi-neutral width, given directly", minimum=0.0,
                         **_range(1e-9, 1e-2, "1 nm to 1 cm", _LENGTH_WHY)),
    "lifetime": Key("time", "minority-carrier lifetime", **_LIFETIME),
    "diffusion_length": Key("length", "minority-carrier diffusion length", minimum=0.0,
                            **_range(1e-9, 0.1, "1 nm to 10 cm", "a 1 s lifetime at the highest "
                                     "silicon diffusivity gives about 6 cm")),
    "minority_mobility": Key("mobility", "measured minority-carrier mobility", **_MOBILITY),
    "majority_mobility": Key("mobility", "measured majority-carrier mobility", **_MOBILITY),
    "surface_recombination": Key("velocity", "contact recombination velocity (absent or \"ohmic\": "
                                 "ideal ohmic contact; \"0 cm/s\": reflecting)", at_least=0.0,
                                 default=math.inf, infinite_ok=True,
                                 **_range(0.0, 1e7, "0 to 1e9 cm/s, or \"ohmic\"", "a hundred "
                                          "times the thermal velocity (about 1e7 cm/s), beyond which a contact "
                                          "is ohmic: write \"ohmic\"")),
}

#: Every key of a description, flattened with dots, with its kind and default.
KEYS = {
    "name": Key("text", "model name, a SPICE identifier"),
    "material": Key("text", "material name (known: " + ", ".join(sorted(materials.MATERIALS)) + ")",
                    default="silicon"),
    "material.name": Key("text", "material name", default="silicon"),
    "material.ni": Key("concentration", "intrinsic density at the nominal temperature", minimum=0.0,
                       **_range(1e-14, 1e25, "1e-20 to 1e19 cm^-3", "from wide-gap "
                                "semiconductors (GaN about 1e-10 cm^-3) to narrow-gap InSb (about 2e16 cm^-3)")),
    "material.bandgap": Key("energy", "band gap at the nominal temperature", minimum=0.0,
                            **_range(0.01, 10.0, "0.01 to 10 eV", "InSb's 0.17 eV to AlN's 6.2 eV, "
                                     "with margin")),
    "material.relative_permittivity": Key("number", "relative permittivity",
                                          **_range(1.0, 1000.0, "1 to 1000", "vacuum to beyond "
                                                   "the largest semiconductor value (PbTe, several hundred)")),
    "temperature": Key("temperature", "nominal temperature, the card's TNOM", default=300.15,
                       **_range(50.0, 700.0, "50 to 700 K", "the span of the material models")),
    "area": Key("area", "junction area", minimum=0.0,
                **_range(1e-18, 1.0, "1e-18 to 1 m^2", "1 nm^2 to 1 m^2: below a square nanometre "
                         "there is no junction; above a square metre is more than a wafer")),
    "perimeter": Key("length", "junction perimeter (sidewall), with junction_depth", minimum=0.0,
                     **_range(1e-9, 1e3, "1 nm to 1 km", "a comb of 1 um fingers filling a 10 cm^2 "
                              "die has about 1 km of edge")),
    "junction_depth": Key("length", "junction depth (sidewall height), with perimeter", minimum=0.0,
                          **_range(1e-9, 1e-3, "1 nm to 1 mm", "deeper than any diffusion or "
                                   "epitaxial layer above")),
    "reference_bias": Key("voltage", "bias at which the depletion edges fix the neutral widths", default=0.0,
                          **_range(-1e5, 10.0, "-100 kV to 10 V", "more reverse bias than any "
                                   "junction withstands; forward bias beyond the junction potential has no "
                                   "depletion region")),
    "contact_resistance": Key("resistance", "added to RS", default=0.0, at_least=0.0,
                              **_range(0.0, 1e9, "0 to 1 Gohm", "beyond it the device is "
                                       "an open circuit, not a diode")),
    "profile": Key("choice", "junction profile", default="abrupt", choices=PROFILES),
    "surface_concentration": Key("concentration", "surface acceptor density of the diffused p side "
                                 "(profile erfc or gaussian)", minimum=0.0,
                                 **_range(1e18, 1e28, "1e12 to 1e22 cm^-3", "as doping: beyond the solid "
                                          "solubility of any dopant above")),
    "characteristic_length": Key("length", "characteristic length 2 sqrt(D t) of the diffused p side "
                                 "(profile erfc or gaussian; or give junction_depth)", minimum=0.0,
                                 **_range(1e-9, 1e-3, "1 nm to 1 mm", "as junction_depth")),
    "profile_table": Key("text", "CSV file of the net doping, columns depth and net_doping with units "
                         "(profile table), relative to the description"),
    "grading": Key("grading", "impurity gradient of a linear profile", minimum=0.0,
                   **_range(1e20, 1e38, "1e12 to 1e30 cm^-4", "from a 1e12 cm^-3 change over 1 cm "
                            "to 1e22 cm^-3 over 1 nm")),
    "recombination_lifetime": Key("time", "lifetime for the depletion-region current "
                                  "(default: the lighter side's)", **_LIFETIME),
    "lifetime_temperature_exponent": Key("number", "lifetimes scale as (T/Tnom)^exponent away from the "
                                         "nominal temperature", default=0.0,
                                         **_range(-10.0, 10.0, "-10 to 10", "published exponents "
                                                  "lie within about -2 to +3")),
    "card.fc": Key("number", "SPICE FC, forward-bias depletion capacitance coefficient", default=0.5,
                   minimum=0.0, maximum=1.0),
    "card.breakdown_current": Key("current", "current at which BV is quoted (SPICE IBV)", default=1e-3,
                                  minimum=0.0, **_range(1e-15, 1e3, "1 fA to 1 kA",
                                                        "beyond the currents a diode model is used at")),
}
for _side in ("p", "n"):
    for _k, _v in _SIDE_KEYS.items():
        KEYS[f"{_side}.{_k}"] = _v

_FIT_CURRENT = _range(1e-15, 1e3, "1 fA to 1 kA", "beyond the currents a diode model is used at", minimum=0.0)
_FIT_BIAS = _range(-1e5, 10.0, "-100 kV to 10 V", "as reference_bias")
#: The optional [fit] table: the window a card is fitted in when the numerical solver makes it.
FIT_KEYS = {
    "fit.current_low": Key("current", "lowest forward current of the I-V fit", **_FIT_CURRENT),
    "fit.current_high": Key("current", "highest forward current of the I-V fit", **_FIT_CURRENT),
    "fit.reverse_bias": Key("voltage", "reverse bias of the fit (negative: a value at or above 0 V is refused "
                            "first)", **_FIT_BIAS),
    "fit.capacitance_low": Key("voltage", "lowest bias of the C-V fit", **_FIT_BIAS),
    "fit.capacitance_high": Key("voltage", "highest bias of the C-V fit", **_FIT_BIAS),
}
KEYS.update(FIT_KEYS)

_TABLES = {"material", "card", "p", "n", "fit"}
#: The optional [spread] table: tolerances, read by :mod:`modelgen.spread`, not a part of the nominal device.
SPREAD_TABLE = "spread"
_REQUIRED = ("name", "area")
#: Pairs of keys of which exactly one (first pair) or at most one (second) is given.
_EXACTLY_ONE = (("doping", "resistivity"), ("thickness", "neutral_width"))
_AT_MOST_ONE = (("lifetime", "diffusion_length"),)

NAME_RULE = "a letter followed by letters, digits or underscores, at most 64 characters"
_NAME = re.compile(r"[A-Za-z][A-Za-z0-9_]{0,63}\Z")


def is_name(name):
    """True if ``name`` is a safe SPICE model name (:data:`NAME_RULE`)."""
    return isinstance(name, str) and _NAME.match(name) is not None


def check_name(name, *, file=None, row=None, key="name"):
    """Check that ``name`` is a safe SPICE model name; raise InputError if not."""
    if not is_name(name):
        shown = repr(name) if isinstance(name, str) and len(name) <= 40 else "the given value"
        raise InputError(f"{shown} is not a valid model name: it must be {NAME_RULE}",
                         file=file, row=row, key=key)
    return name


def _flatten(table, file, errors=None):
    """Flat dotted keys of a description given as nested dicts.

    Without ``errors`` the first unknown key raises; with a list, every
    problem is appended to it and the key is left out.
    """
    def problem(message, key):
        error = InputError(message, file=file, key=key)
        if errors is None:
            raise error
        errors.append(error)

    flat = {}
    for k, v in table.items():
        if k == SPREAD_TABLE and isinstance(v, dict):
            continue
        if isinstance(v, dict):
            if k not in _TABLES:
                problem(f"unknown table [{shown(k)}]; known tables: {', '.join(sorted(_TABLES))}", k)
                continue
            for kk, vv in v.items():
                key = f"{k}.{kk}"
                if key in KEYS and isinstance(vv, dict):
                    problem("expected a value, got a table", key)
                    continue
                if key not in KEYS:
                    known = sorted(x.split(".", 1)[1] for x in KEYS if x.startswith(k + "."))
                    problem(f"unknown key; known keys in [{k}]: {', '.join(known)}", key)
                    continue
                flat[key] = vv
        elif k in _TABLES - {"material"}:
            problem(f"[{k}] must be a table of keys, got {type_name(v)}", k)
        elif k not in KEYS:
            known = sorted(x for x in KEYS if "." not in x)
            problem(f"unknown key; known top-level keys: {', '.join(known)}", k)
        else:
            flat[k] = v
    if "material" in flat:
        if "material.name" in flat:
            problem("give the material as a name or as a table, not both", "material")
            del flat["material"]
        else:
            flat["material.name"] = flat.pop("material")
    return flat


def _convert_one(key, raw, file, row):
    spec = KEYS[key]
    if spec.kind == "text":
        if not isinstance(raw, str):
            raise InputError(f"expected a string, got {type_name(raw)}", file=file, row=row, key=key)
        return raw
    if spec.kind == "choice":
        if not isinstance(raw, str) or raw not in spec.choices:
            raise InputError(f"{shown(raw)} is not one of: {', '.join(spec.choices)}", file=file, row=row, key=key)
        return raw
    if spec.kind == "number":
        x = None
        if isinstance(raw, (int, float)) and not isinstance(raw, bool):
            x = float(raw)
        elif isinstance(raw, str) and len(raw) <= MAX_QUANTITY:
            try:
                x = float(raw)
            except ValueError:
                pass
        if x is None or not math.isfinite(x):
            raise InputError(f"expected a finite plain number, got {shown(raw)}", file=file, row=row, key=key)
        return x
    if key.endswith(".surface_recombination") and raw == "ohmic":
        return math.inf
    return parse_quantity(raw, spec.kind, key=key, file=file, row=row)


def convert(flat, *, file=None, row=None, errors=None):
    """Convert flat raw values (strings from TOML or a table cell) to SI numbers.

    Returns a dict of the keys given, each an SI float or a string. Without
    ``errors`` the first bad value raises; with a list, every bad value's
    error is appended to it and the key is left out.
    """
    out = {}
    for key, raw in flat.items():
        try:
            out[key] = _convert_one(key, raw, file, row)
        except InputError as e:
            if errors is None:
                raise
            errors.append(e)
    return out


def check_range(key, v, fail):
    """Report through ``fail(mask, key, message, values)`` the values of ``v`` (SI, NaN: not given)
    outside the allowed and accepted ranges of ``key``; the first broken rule of a value is reported."""
    spec = KEYS[key]
    given = ~np.isnan(v)
    if spec.minimum is not None:
        fail(given & ~(v > spec.minimum), key,
             "must be positive" if spec.minimum == 0 else f"must be greater than {spec.minimum:g}")
    if spec.at_least is not None:
        fail(given & ~(v >= spec.at_least), key,
             "must not be negative" if spec.at_least == 0 else "is below the allowed range (" + spec.help + ")")
    if spec.maximum is not None:
        fail(given & ~(v < spec.maximum), key, "is above the allowed range (" + spec.help + ")")
    if spec.plausible is not None:
        low, high = spec.plausible
        outside = given & ~((v >= low) & (v <= high))
        if spec.infinite_ok:
            outside &= ~np.isposinf(v)
        unit = KINDS[spec.kind][0] + " " if spec.kind in KINDS else ""
        fail(outside, key, "{v:.4g} " + unit + "is outside the accepted range, " + spec.accepted
             + " (" + spec.why + ")", {"v": v})


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
    if not columns:
        raise InputError("no keys given: a description needs at least name, area, [p] and [n]",
                         file=sources[0] if sources is not None and len(sources) else None)
    n = len(columns["name"]) if "name" in columns else len(next(iter(columns.values())))
    sources = tuple(sources) if sources is not None else (None,) * n
    if problems is None:
        problems = Problems(n, sources=sources, rows=rows)
    fail = problems.add

    for key in _REQUIRED:
        if key not in columns:
            raise InputError("required key is missing", file=sources[0] if n else None, key=key)
    names = tuple(columns["name"])
    fail(np.array([x is None or x == "" for x in names], bool), "name", "required key is missing")
    bad_name = np.array([not is_name(x) for x in names], bool)
    if bad_name.any():
        listed = np.array([shown(x) if isinstance(x, str) and len(x) <= 40 else "the given value" for x in names],
                          dtype=object)
        fail(bad_name, "name", "{x} is not a valid model name: it must be " + NAME_RULE, {"x": listed})
    mats = tuple(columns.get("material.name", ("silicon",) * n))
    known = sorted(materials.MATERIALS)
    unknown = ~np.isin(np.asarray(mats, dtype=object), known)
    if unknown.any():
        fail(unknown, "material", "unknown material {m}; known: " + ", ".join(known),
             {"m": np.array([shown(m) for m in mats], dtype=object)})
    profile = np.asarray(columns.get("profile", ("abrupt",) * n), dtype=object)
    linear = profile == "linear"

    num = {k: _column(columns, k, n) for k, spec in KEYS.items() if spec.kind not in ("text", "choice")}
    rev = num["fit.reverse_bias"]
    fail(~np.isnan(rev) & ~(rev < 0), "fit.reverse_bias", "{v:.4g} V is not a reverse bias: it must be below 0 V",
         {"v": rev})
    for key in KEYS:
        if key in num and key in columns:
            check_range(key, num[key], fail)
    for key in _REQUIRED:
        if key in num:
            fail(np.isnan(num[key]), key, "required key is missing")
    table, diffused, closed = _profile_rules(columns, profile, num, n, fail)
    for side, own in (("p", closed), ("n", ~table)):  # where the profile does not give the side's doping
        for a, b in _EXACTLY_ONE:
            ga, gb = ~np.isnan(num[f"{side}.{a}"]), ~np.isnan(num[f"{side}.{b}"])
            fail(own & ga & gb, f"{side}.{a}", f"give {a} or {b}, not both")
            fail(own & ~ga & ~gb, f"{side}.{a}", f"required: give {a} or {b}")
        for a, b in _AT_MOST_ONE:
            fail(~np.isnan(num[f"{side}.{a}"]) & ~np.isnan(num[f"{side}.{b}"]), f"{side}.{a}",
                 f"give {a} or {b}, not both")
    grading = num["grading"]
    fail(linear & np.isnan(grading), "grading", "a linear profile needs grading (e.g. \"1e20 cm^-4\")")
    fail(~linear & ~np.isnan(grading), "grading", "grading applies only to profile = \"linear\"")
    per, xj = num["perimeter"], num["junction_depth"]
    fail(closed & np.isnan(per) & ~np.isnan(xj), "junction_depth",
         "perimeter and junction_depth go together (the sidewall area is perimeter x junction_depth)")
    fail(closed & ~np.isnan(per) & np.isnan(xj), "perimeter",
         "perimeter and junction_depth go together (the sidewall area is perimeter x junction_depth)")
    for low, high, unit in (("fit.current_low", "fit.current_high", "A"),
                            ("fit.capacitance_low", "fit.capacitance_high", "V")):
        lo, hi = num[low], num[high]
        fail(~np.isnan(lo) & ~np.isnan(hi) & ~(lo < hi), high,
             "{hi:.4g} " + unit + " is not above " + low + " = {lo:.4g} " + unit + ": the range must go from low "
             "to high", {"lo": lo, "hi": hi})
    eps_r = num["material.relative_permittivity"]
    eps_default = np.array([materials.MATERIALS.get(m, materials.silicon).RELATIVE_PERMITTIVITY for m in mats])

    def side(s):
        return Side(**{k: num[f"{s}.{k}"] for k in _SIDE_KEYS})

    return Device(
        name=tuple(columns["name"]), material=mats,
        temperature=num["temperature"], area=num["area"],
        perimeter=np.nan_to_num(per, nan=0.0), junction_depth=np.nan_to_num(xj, nan=0.0),
        reference_bias=num["reference_bias"], contact_resistance=num["contact_resistance"],
        linear=linear, grading=grading, profile=profile,
        surface_concentration=num["surface_concentration"], characteristic_length=num["characteristic_length"],
        profile_table=table_column(columns, n),
        fit_current_low=num["fit.current_low"], fit_current_high=num["fit.current_high"],
        fit_reverse_bias=num["fit.reverse_bias"], fit_capacitance_low=num["fit.capacitance_low"],
        fit_capacitance_high=num["fit.capacitance_high"],
        relative_permittivity=np.where(np.isnan(eps_r), eps_default, eps_r),
        ni=num["material.ni"], bandgap=num["material.bandgap"],
        fc=num["card.fc"], breakdown_current=num["card.breakdown_current"],
        recombination_lifetime=num["recombination_lifetime"],
        reference_temperature=num["temperature"],
        lifetime_exponent=num["lifetime_temperature_exponent"],
        p=side("p"), n=side("n"), source=sources,
        line=tuple(rows) if rows is not None else (),
    )


def table_column(columns, n):
    """The ``profile_table`` column as an object array: a :class:`ProfileTable` where read, else None."""
    out = np.full(n, None, dtype=object)
    for i, v in enumerate(columns.get("profile_table", ())):
        if isinstance(v, ProfileTable):
            out[i] = v
    return out


def _profile_rules(columns, profile, num, n, fail):
    """The rules of the profile keys; returns the masks (table, diffused, closed form) of the rows."""
    table = profile == "table"
    diffused = (profile == "erfc") | (profile == "gaussian")
    closed = ~table & ~diffused
    cells = np.asarray(columns.get("profile_table", (None,) * n), dtype=object)
    named = np.array([v is not None and v != "" and not (isinstance(v, float) and math.isnan(v)) for v in cells],
                     bool)
    read = np.array([isinstance(v, ProfileTable) for v in cells], bool)
    kind = {"kind": profile}
    fail(table & ~named, "profile_table", "profile = \"table\" needs profile_table = \"FILE.csv\" (columns "
         "depth [um] and net_doping [cm^-3], depth from the p-side contact)")
    fail(~table & named, "profile_table", "profile_table applies only to profile = \"table\"")
    fail(table & named & ~read, "profile_table", "a profile table is read only from a device description "
         "(a TOML file), not from a lot table: lots take abrupt, linear, erfc and gaussian profiles")
    cs, ell, xj = num["surface_concentration"], num["characteristic_length"], num["junction_depth"]
    fail(diffused & np.isnan(cs), "surface_concentration", "profile = \"{kind}\" needs surface_concentration, "
         "the diffused p side's surface acceptor density (e.g. \"1e20 cm^-3\")", kind)
    fail(~diffused & ~np.isnan(cs), "surface_concentration",
         "applies only to profile = \"erfc\" or \"gaussian\"")
    fail(~diffused & ~np.isnan(ell), "characteristic_length",
         "applies only to profile = \"erfc\" or \"gaussian\"")
    fail(diffused & ~np.isnan(ell) & ~np.isnan(xj), "characteristic_length",
         "give characteristic_length or junction_depth, not both")
    fail(diffused & np.isnan(ell) & np.isnan(xj), "junction_depth", "profile = \"{kind}\" needs junction_depth "
         "(where its net doping changes sign, e.g. \"0.5 um\") or characteristic_length", kind)
    fail(table & ~np.isnan(xj), "junction_depth", "the profile table gives the junction depth: leave "
         "junction_depth out")
    for side, given_by in (("p", table | diffused), ("n", table)):
        for k in ("doping", "resistivity", "thickness", "neutral_width"):
            fail(given_by & ~np.isnan(num[f"{side}.{k}"]), f"{side}.{k}", "the {kind} profile gives this "
                 "side's doping and thickness: leave " + f"{side}.{k} out", kind)
    return table, diffused, closed


def read_profile_table(name, description_file=None):
    """Read the profile table ``name`` (a path relative to the description file's folder).

    The file is CSV (UTF-8, at most :data:`PROFILE_LIMIT` bytes; blank lines
    and lines starting with ``#`` are skipped). Its header names the columns
    ``depth [unit]`` (from the p-side contact) and ``net_doping [unit]``
    (N_D - N_A); other columns are ignored. The depths start at 0 and
    increase strictly; the net doping is negative (p) at the first depth,
    positive (n) at the last and changes sign once; there are
    :data:`PROFILE_POINTS` points at least and at most.

    Returns
    -------
    ProfileTable
        In SI units (m, m^-3).

    Raises
    ------
    InputError
        The file missing or unreadable (naming the description and
        ``profile_table``), or a rule broken (naming the table's file, line
        and column).
    """
    import csv
    import os

    if not isinstance(name, str) or not name:
        raise InputError("expected a file name", file=description_file, key="profile_table")
    folder = os.path.dirname(str(description_file)) if description_file else ""
    path = os.path.join(folder, name)
    try:
        text = read_text(path, "profile table", limit=PROFILE_LIMIT)
    except InputError as e:
        raise InputError(f"{shown(name)}: {e.message}" + ("" if path == name else f" ({path})"),
                         file=description_file, key="profile_table") from None

    def bad(message, line=None, key=None):
        return InputError(message, file=path, row=line, key=key)

    records = []
    for line, raw in enumerate(text.replace("\r\n", "\n").replace("\r", "\n").split("\n"), 1):  # as editors count
        if raw.strip(" \t,") and not raw.lstrip().startswith("#"):
            try:
                records.append((line, next(csv.reader([raw]))))
            except csv.Error as e:
                raise bad(f"not valid CSV: {e}", line) from None
    if not records:
        raise bad("empty profile table: it needs a header (depth [um], net_doping [cm^-3]) and points")
    head_line, header = records[0]
    where = {}
    for j, cell in enumerate(header):
        m = _HEADER.fullmatch(cell)
        key = m.group(1) if m else cell.strip()
        if key in PROFILE_COLUMNS:
            if key in where:
                raise bad("column given twice", head_line, key)
            if not m or not m.group(2):
                raise bad(f"give the unit in brackets, e.g. \"{key} [{_EXAMPLE_UNIT[key]}]\"", head_line, key)
            where[key] = (j, m.group(2))
    for key in PROFILE_COLUMNS:
        if key not in where:
            raise bad(f"no {key} column: the header must name depth [um] (from the p-side contact) and "
                      f"net_doping [cm^-3] (donors minus acceptors), got {shown(','.join(header))}", head_line, key)
    body = records[1:]
    low, high = PROFILE_POINTS
    if not low <= len(body) <= high:
        raise bad(f"{len(body)} points: a profile table needs {low} to {high}")
    lines = np.array([ln for ln, _ in body])
    values = {}
    for key, (j, unit) in where.items():
        try:
            scale, offset = unit_factor(unit, PROFILE_COLUMNS[key])
        except ValueError as e:
            raise bad(f"column unit: {e}", head_line, key) from None
        column = np.empty(len(body))
        for i, (line, cells) in enumerate(body):
            cell = cells[j].strip() if j < len(cells) else ""
            try:
                column[i] = float(cell)
            except ValueError:
                raise bad(f"not a number: {shown(cell)}" if cell else "empty cell: a number is required",
                          line, key) from None
            if not math.isfinite(column[i]):
                raise bad(f"not a finite number: {shown(cell)}", line, key)
        values[key] = apply_factor(column, scale, offset)
    x, c = values["depth"], values["net_doping"]
    if x[0] != 0:
        raise bad("the first depth must be 0 (the p-side contact)", lines[0], "depth")
    step = np.flatnonzero(~(np.diff(x) > 0))
    if len(step):
        raise bad("depth does not increase from the line before: depths must increase strictly",
                  lines[step[0] + 1], "depth")
    if x[-1] > 1e-2:
        raise bad(f"{x[-1] * 1e6:.4g} um is deeper than 1 cm, more than any wafer", lines[-1], "depth")
    big = np.flatnonzero(np.abs(c) > 1e28)
    if len(big):
        raise bad(f"{c[big[0]] / 1e6:.4g} cm^-3 is beyond 1e22 cm^-3, the solid solubility of any dopant",
                  lines[big[0]], "net_doping")
    sign = np.sign(c)
    nonzero = np.flatnonzero(sign != 0)
    if not len(nonzero) or np.all(sign[nonzero] == sign[nonzero[0]]):
        raise bad("the net doping never changes sign: there is no junction (it must be negative, p type, at "
                  "depth 0 and positive, n type, at the last depth)", lines[0], "net_doping")
    if not c[0] < 0:
        raise bad("the net doping must be negative (p type) at depth 0, the p-side contact", lines[0], "net_doping")
    if not c[-1] > 0:
        raise bad("the net doping must be positive (n type) at the last depth, the n-side contact", lines[-1],
                  "net_doping")
    changes = nonzero[1:][np.diff(sign[nonzero]) != 0]
    if len(changes) > 1:
        raise bad("the net doping changes sign a second time here: a diode's profile has one junction",
                  lines[changes[1]], "net_doping")
    return ProfileTable(depth=x, net_doping=c, file=path)


_HEADER = re.compile(r"\s*([^\[\]]*?)\s*(?:\[\s*([^\[\]]*?)\s*\])?\s*")
_EXAMPLE_UNIT = {"depth": "um", "net_doping": "cm^-3"}


def _read_tables(flat, file):
    """``flat`` with a table profile's file name replaced by the table read (relative to ``file``)."""
    if flat.get("profile") == "table" and isinstance(flat.get("profile_table"), str):
        flat = dict(flat, profile_table=read_profile_table(flat["profile_table"], file))
    return flat


def read_mapping(table, *, file=None, errors=None):
    """The flat, SI-converted keys of one description given as a dict.

    Without ``errors`` the first problem raises; with a list, every problem
    (an unknown key, a bad value) is appended to it and the good keys are
    returned.
    """
    return convert(_flatten(table, file, errors), file=file, errors=errors)


def from_mapping(table, *, file=None):
    """A :class:`Device` of length 1 from a description given as a dict."""
    flat = _read_tables(read_mapping(table, file=file), file)
    return assemble({k: [v] for k, v in flat.items()}, sources=[file])


def parse_toml(text, path):
    """The TOML ``text`` of file ``path`` as dicts; InputError naming the file if it is not valid TOML."""
    try:
        return tomllib.loads(text)
    except RecursionError:
        raise InputError("not valid TOML: nested too deeply", file=path) from None
    except ValueError as e:  # TOMLDecodeError, and integers too long to convert
        raise InputError(f"not valid TOML: {e}", file=path) from None


def _read_toml(path):
    table = parse_toml(read_text(path, "description file", limit=DESCRIPTION_LIMIT), path)
    if not table:
        raise InputError("empty description: it needs at least name, area, [p] and [n]", file=path)
    return table


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
    device = assemble({k: [v] for k, v in _read_tables(convert(raw, file=path), path).items()}, sources=[path])
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

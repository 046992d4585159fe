"""Process spread: tolerances on description keys, samples, and the spread of card parameters and figures.

The ``[spread]`` table of a description
---------------------------------------

Each entry names a numeric description key by its flat dotted name (quoted in
TOML, ``"n.doping"``; an unquoted ``n.doping`` is read the same) and gives a
table, or a list of at most two tables (one ``global``, one ``local``)::

    [spread]
    reference_area = "2.5e-5 cm^2"     # optional; default: the description's own area
    "n.doping"   = { sigma = "5 %", distribution = "lognormal", shared = "global" }
    "p.lifetime" = [{ sigma = "20 %", distribution = "lognormal", shared = "global" },
                    { sigma = "0.1 ns", distribution = "normal", shared = "local" }]
    "contact_resistance" = { sigma = "0.2 ohm", distribution = "uniform" }

Fields of an entry:

``sigma`` (required)
    A standard deviation, relative (``"5 %"``, of the key's nominal value) or
    absolute with a unit of the key's own kind (``"2e15 cm^-3"``; a plain
    number for a dimensionless key).
``distribution`` (default ``"normal"``)
    ``normal``: value + s z with z standard normal, s the sigma in the key's
    units. ``lognormal``: value exp(s' z), the nominal value is the median and
    s' = s / value is the standard deviation of ln(value) (an absolute sigma
    must be below the value); the draws stay positive. ``uniform``: value + s
    sqrt(3) u, u uniform on [-1, 1], so the half-width is sqrt(3) sigma and
    the standard deviation is sigma.
``shared`` (default ``"global"``)
    ``global``: lot to lot; one draw is shared by every device of a lot (of a
    circuit simulation run). ``local``: device to device (mismatch); each
    device draws its own, and sigma holds for a device of the reference area
    (``reference_area``, default the area of the description the table is in):
    a device of area A draws with sigma sqrt(reference_area / A) (Pelgrom's
    area law: Pelgrom, Duinmaijer & Welbers, IEEE JSSC 24, 1433 (1989)).
``area_scaling`` (default ``true``; local entries only)
    ``false`` keeps a local sigma whatever the area.

When a key has a global and a local entry, the lognormal factors multiply
the nominal value and the normal and uniform steps (each in units of the
nominal value) are added: ``value * exp(sum s' z) + sum s z``.

A normal or uniform draw that leaves a key's allowed range (a doping at or
below zero, a negative resistance) or its accepted range is an error naming
the key and the sample, never clipped: clipping would bend the distribution
the statistics describe. Give such a key a lognormal distribution or a
smaller sigma. Correlations between keys are not modelled (each key draws
independently).

Sampling and figures
--------------------

:func:`sample` draws ``n`` rows from one device (``numpy.random.Generator``
over ``PCG64(seed)``; the global draws come from the stream, the local ones
from the stream jumped once, so the global part of a ``"both"`` sample is the
``"global"`` sample's). In a sample each row is a lot of its own
(``kind="global"``), a device of the nominal lot (``"local"``), or a device
of a lot of its own (``"both"``). :func:`run` derives every row in one
:func:`modelgen.extraction.derive` call and evaluates the figures a designer
asks for (:func:`parse_figure`: ``VF@1mA``, ``IR@-5V``, ``C@-1V``, ``BV``,
``TT``); :meth:`Spread.statistics` summarises them. Same seed, same bytes.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, fields, replace

import numpy as np

from . import description, extraction, leakage
from .device import Side
from .errors import InputError, shown, type_name
from .spice import evaluator
from .textio import read_text
from .units import KINDS, parse_quantity

DISTRIBUTIONS = ("normal", "lognormal", "uniform")
SHARINGS = ("global", "local")
KINDS_OF_SAMPLE = ("global", "local", "both")
#: Fields of one entry of [spread].
FIELDS = ("sigma", "distribution", "shared", "area_scaling")
#: Percentiles :meth:`Spread.statistics` gives.
PERCENTILES = (1, 5, 50, 95, 99)

#: Description keys that do not spread: the nominal temperature is a condition, the fit window a choice.
_FIXED = ("temperature",)
#: Device attribute of each top-level description key (the side keys map to the Side's field of the same name).
_ATTRIBUTE = {"lifetime_temperature_exponent": "lifetime_exponent", "material.ni": "ni",
              "material.bandgap": "bandgap", "material.relative_permittivity": "relative_permittivity",
              "card.fc": "fc", "card.breakdown_current": "breakdown_current"}
_RELATIVE = re.compile(r"\s*([+]?(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][+-]?[0-9]+)?)\s*%\s*\Z")


def spreadable(key):
    """True if description key ``key`` may take a spread (numeric, not a condition or fit choice)."""
    spec = description.KEYS.get(key)
    return (spec is not None and spec.kind not in ("text", "choice") and key not in _FIXED
            and not key.startswith("fit."))


def _get(device, key):
    """The column of ``device`` holding description key ``key`` (SI)."""
    if key[:2] in ("p.", "n."):
        return getattr(getattr(device, key[0]), key[2:])
    return getattr(device, _ATTRIBUTE.get(key, key))


def _set(device, key, value):
    """``device`` with the column of ``key`` replaced by ``value``."""
    if key[:2] in ("p.", "n."):
        side = key[0]
        return replace(device, **{side: replace(getattr(device, side), **{key[2:]: value})})
    return replace(device, **{_ATTRIBUTE.get(key, key): value})


@dataclass(frozen=True)
class Tolerance:
    """One entry of [spread]: key, sigma in the key's SI units, distribution, sharing, area scaling."""

    key: str
    sigma: float
    distribution: str
    shared: str
    area_scaling: bool


@dataclass(frozen=True)
class Tolerances:
    """A parsed [spread] table: its entries (in key order, global before local) and reference area [m^2]."""

    entries: tuple
    reference_area: float
    file: str | None = None


def _entries(table, prefix=""):
    """(key, entry) pairs of a [spread] table, nested dotted tables flattened."""
    for k, v in table.items():
        key = prefix + k
        if isinstance(v, dict) and "sigma" not in v and any(x.startswith(key + ".") for x in description.KEYS):
            yield from _entries(v, key + ".")
        else:
            yield key, v


def parse(table, device, *, file=None):
    """Read a [spread] table (a dict from TOML) against the nominal ``device`` (length 1).

    Returns
    -------
    Tolerances

    Raises
    ------
    InputError
        One line naming the file and the key (``spread.KEY``): an unknown or
        non-numeric key, a key the description gives no value for, a missing
        or malformed sigma, a sigma in a unit of another kind, an unknown
        distribution or sharing, a lognormal absolute sigma not below the
        value, an unknown field.
    """
    if not isinstance(table, dict):
        raise InputError(f"[spread] must be a table, got {type_name(table)}", file=file, key="spread")
    reference = float(device.area[0])
    found = []
    for key, raw in _entries(table):
        where = f"spread.{key}"

        def bad(message, where=where):
            return InputError(message, file=file, key=where)

        if key == "reference_area":
            reference = parse_quantity(raw, "area", key=where, file=file)
            if not reference > 0:
                raise bad("must be positive")
            continue
        if key not in description.KEYS:
            raise bad("unknown key; [spread] takes numeric description keys by their dotted names, e.g. "
                      "\"n.doping\", and reference_area")
        if not spreadable(key):
            why = "a text or choice key" if description.KEYS[key].kind in ("text", "choice") else \
                "a condition or fit choice, not a process quantity"
            raise bad(f"cannot spread: {key} is {why}")
        items = raw if isinstance(raw, list) else [raw]
        if not 1 <= len(items) <= 2 or not all(isinstance(x, dict) for x in items):
            raise bad("expected a table { sigma = ..., distribution = ..., shared = ... } or a list of "
                      f"one global and one local such table, got {type_name(raw)}")
        nominal = float(_get(device, key)[0])
        if not math.isfinite(nominal):
            raise bad(f"the description gives no finite {key} to spread (give it, or spread the key it gives)")
        seen = set()
        for item in items:
            unknown = sorted(set(item) - set(FIELDS))
            if unknown:
                raise bad(f"unknown field {shown(unknown[0])}; known: {', '.join(FIELDS)}")
            distribution = item.get("distribution", "normal")
            if distribution not in DISTRIBUTIONS:
                raise bad(f"distribution {shown(distribution)} is not one of: {', '.join(DISTRIBUTIONS)}")
            shared = item.get("shared", "global")
            if shared not in SHARINGS:
                raise bad(f"shared {shown(shared)} is not one of: {', '.join(SHARINGS)}")
            if shared in seen:
                raise bad(f"two {shared} entries: give at most one global and one local")
            seen.add(shared)
            scaling = item.get("area_scaling", True)
            if not isinstance(scaling, bool):
                raise bad(f"area_scaling must be true or false, got {type_name(scaling)}")
            sigma = _sigma(item.get("sigma"), key, nominal, bad, file)
            if distribution == "lognormal" and not sigma < abs(nominal):
                raise bad(f"a lognormal sigma must be below the value ({sigma:.4g} against {nominal:.4g} "
                          f"{_unit(key)}): give it in %")
            if distribution == "lognormal" and not nominal > 0:
                raise bad("a lognormal spread needs a positive value")
            found.append(Tolerance(key, sigma, distribution, shared, scaling))
    found.sort(key=lambda t: (t.key, SHARINGS.index(t.shared)))
    return Tolerances(tuple(found), reference, file)


def _unit(key):
    kind = description.KEYS[key].kind
    return KINDS[kind][0] if kind in KINDS else ""


def _sigma(raw, key, nominal, bad, file):
    """A sigma as written -> an absolute standard deviation in the key's SI units."""
    kind = description.KEYS[key].kind
    if raw is None:
        raise bad("sigma is required: relative (\"5 %\") or absolute with a unit of the key")
    if isinstance(raw, str):
        m = _RELATIVE.match(raw)
        if m:
            return float(m.group(1)) / 100 * abs(nominal)
    if kind == "number":
        if isinstance(raw, (int, float)) and not isinstance(raw, bool) and math.isfinite(raw) and raw >= 0:
            return float(raw)
        raise bad(f"sigma {shown(raw)} is neither a percentage (\"5 %\") nor a plain number at or above 0")
    if not isinstance(raw, str):
        raise bad(f"sigma must be a string such as \"5 %\" or \"{KINDS[kind][1]}\", got {type_name(raw)}")
    if raw.strip().startswith("-"):
        raise bad(f"sigma {shown(raw)} is negative")
    try:
        return parse_quantity(raw, kind, key=f"spread.{key}", file=file)
    except InputError as e:
        raise bad(f"sigma: {e.message} (or relative: \"5 %\")") from None


def _refuse_draw(spread, key, mask, message, values):
    """Raise for the first drawn value of ``key`` that breaks a rule of the key (``mask``), naming the sample."""
    bad = np.flatnonzero(mask)
    if not len(bad):
        return
    i = int(bad[0])
    text = message.format(**{k: v[i] for k, v in values.items()}) if values else message
    raise InputError(f"{text}: a drawn value leaves the key's range; give it a lognormal distribution or a "
                     "smaller sigma", file=spread.file, row=i + 1, key=f"spread.{key}", label="sample")


def _repeat(device, n):
    """``device`` (length 1) repeated ``n`` times: what ``device.take(np.zeros(n, int))`` gives, made faster."""
    def rep(obj):
        kw = {}
        for f in fields(obj):
            v = getattr(obj, f.name)
            if isinstance(v, Side):
                kw[f.name] = rep(v)
            elif isinstance(v, tuple):
                kw[f.name] = v * n
            else:
                kw[f.name] = np.repeat(v, n)
        return type(obj)(**kw)

    return rep(device)


def effective_sigma(spread, tolerance, area):
    """The sigma entry ``tolerance`` of ``spread`` draws with for a device of ``area`` [m^2] (key's SI units).

    A local entry with area scaling: sigma sqrt(reference_area / area)
    (Pelgrom's area law, see the module text); any other: sigma as given.
    """
    if tolerance.shared == "local" and tolerance.area_scaling:
        return tolerance.sigma * math.sqrt(spread.reference_area / area)
    return tolerance.sigma


def load(path):
    """A description file with a [spread] table -> (nominal Device, Tolerances, flat inputs as written)."""
    path = str(path)
    device, raw = description.load_with_inputs(path)
    table = description.parse_toml(read_text(path, "description file", limit=description.DESCRIPTION_LIMIT), path)
    if "spread" not in table:
        raise InputError("no [spread] table: give each varying key's sigma there", file=path, key="spread")
    return device, parse(table["spread"], device, file=path), raw


def sample(device, spread, n, seed, kind="both"):
    """``n`` rows drawn around the nominal ``device`` (length 1) as one Device.

    Parameters
    ----------
    device : Device
        The nominal device, SI.
    spread : Tolerances
    n : int
        Number of rows (at least 1).
    seed : int
        Seed of ``numpy.random.PCG64``; the same seed gives the same rows.
    kind : {"global", "local", "both"}
        Which entries vary: each row is a lot of its own (global), a device
        of the nominal lot (local), or both.

    Returns
    -------
    Device
        ``n`` rows named as the nominal device; drawn keys replaced.

    Raises
    ------
    InputError
        A normal or uniform draw outside a key's allowed or accepted range
        (naming ``spread.KEY`` and the sample number, from 1).
    """
    if len(device) != 1:
        raise ValueError(f"sample draws around one device, got {len(device)}")
    if kind not in KINDS_OF_SAMPLE:
        raise ValueError(f"kind must be one of {', '.join(KINDS_OF_SAMPLE)}, not {kind!r}")
    n = int(n)
    if n < 1:
        raise ValueError("n must be at least 1")
    bits = np.random.PCG64(seed)
    streams = {"global": np.random.Generator(bits), "local": np.random.Generator(bits.jumped())}
    area = float(device.area[0])
    rows = _repeat(device, n)
    factor, shift = {}, {}
    for t in spread.entries:  # every entry draws, used or not, so that each key's draws depend on the seed alone
        rng = streams[t.shared]
        u = rng.standard_normal(n) if t.distribution != "uniform" else rng.uniform(-1.0, 1.0, n)
        if kind not in ("both", t.shared):
            continue
        nominal = float(_get(device, t.key)[0])
        s = effective_sigma(spread, t, area)
        if t.distribution == "lognormal":
            factor[t.key] = factor.get(t.key, 0.0) + s / nominal * u
        else:
            step = s * u if t.distribution == "normal" else s * math.sqrt(3.0) * u
            shift[t.key] = shift.get(t.key, 0.0) + step
    for key in sorted(set(factor) | set(shift)):
        nominal = float(_get(device, key)[0])
        value = nominal * np.exp(factor[key]) if key in factor else np.full(n, nominal)
        value = value + shift.get(key, 0.0)
        description.check_range(key, value, lambda mask, _, message, values=None, key=key:
                                _refuse_draw(spread, key, mask, message, values))
        rows = _set(rows, key, value)
    return rows


# ---------------------------------------------------------------------------------------------- figures

#: Figures: name -> (units kind of its bias or None, unit of the value, what it is).
FIGURES = {
    "VF": ("current", "V", ("forward voltage at a current, the card's own equations (ngspice's forward "
                            "branch: IS, N, ISR, NR, IKF) plus RS times the current")),
    "IR": ("voltage", "A", ("reverse leakage at a bias, the closed forms' diffusion plus generation current "
                            "(modelgen.leakage.closed_physics), as a positive number")),
    "C": ("voltage", "F", ("depletion capacitance at a bias, the closed forms' eps A / W "
                           "(modelgen.extraction.predicted_capacitance)")),
    "BV": (None, "V", "breakdown voltage, the card's BV (an estimate to derate and confirm)"),
    "TT": (None, "s", "transit time, the card's TT"),
}
FIGURE_SYNTAX = "VF@1mA, IR@-5V, C@-1V, BV or TT"


@dataclass(frozen=True)
class Figure:
    """A figure asked for: its name, its bias in SI (A for VF, V for IR and C; None for BV, TT), and its text."""

    name: str
    bias: float | None
    text: str

    @property
    def unit(self):
        return FIGURES[self.name][1]


def parse_figure(text):
    """``"VF@1mA"`` -> Figure("VF", 1e-3, ...); one-line InputError (key ``figure``) if it does not parse.

    VF takes a positive current, IR a negative voltage, C a voltage; BV and
    TT take none. The bias is written as a quantity with its unit, without
    or with a space (``VF@1mA``, ``VF@1 mA``).
    """
    def bad(message):
        return InputError(f"figure {shown(text)}: {message}; expected {FIGURE_SYNTAX}", key="figure")

    if not isinstance(text, str):
        raise bad(f"expected a string, got {type_name(text)}")
    name, at, bias_text = text.strip().partition("@")
    name = name.strip().upper()
    if name not in FIGURES:
        raise bad(f"unknown figure {shown(name)}")
    kind = FIGURES[name][0]
    if kind is None:
        if at:
            raise bad(f"{name} takes no bias")
        return Figure(name, None, name)
    if not at or not bias_text.strip():
        raise bad(f"{name} needs a bias after @, e.g. {name}@{'1mA' if kind == 'current' else '-5V'}")
    try:
        bias = parse_quantity(bias_text.strip(), kind)
    except InputError as e:
        raise bad(e.message) from None
    if name == "VF" and not bias > 0:
        raise bad("the forward current must be positive")
    if name == "IR" and not bias < 0:
        raise bad("the reverse bias must be negative")
    return Figure(name, bias, f"{name}@{bias_text.strip()}")


def forward_voltage(params, temperature, current, simulator="ngspice", halvings=42):
    """Terminal voltage at which each card passes ``current``, vectorised over cards [V].

    The card's own forward equations as ngspice 39 evaluates them
    (:func:`modelgen.spice.evaluator.forward_current`, checked against ngspice):
    I = IS (exp(Vd/(N Vt)) - 1) + ISR (exp(Vd/(NR Vt)) - 1) ((1 - Vd/VJ)^2
    + 0.005)^(M/2), then the high-injection knee I / (1 + sqrt(I/IKF)) where
    IKF > 0; the junction voltage Vd is found by bisection on [0, 10 V]
    (the current rises monotonically; 42 halvings leave 2e-12 V), and
    V = Vd + RS I. GMIN is left out
    (1e-12 S: a picoampere per volt). Valid for the forward currents the
    card is made for, below the knee or a little beyond.

    Parameters
    ----------
    params : dict
        Card parameters as columns over cards (IS, N, ISR, NR, VJ, M, IKF, RS).
    temperature : array_like
        The cards' temperature [K].
    current : float
        Forward current [A], positive.

    Returns
    -------
    numpy.ndarray
        [V]; NaN where the card does not reach the current below 10 V.
    """
    sim = evaluator.simulator_of(simulator)
    vt = sim.boltzmann * np.asarray(temperature, float) / sim.charge
    p = {k: np.asarray(params[k], float) for k in ("IS", "N", "ISR", "NR", "VJ", "M", "IKF", "RS")}

    def junction(vd):
        return evaluator.forward_current(p, vd, vt, sim)

    lo = np.zeros(len(vt))
    hi = np.full(len(vt), 10.0)
    with np.errstate(over="ignore", invalid="ignore"):
        reach = junction(hi) >= current
        for _ in range(halvings):
            mid = 0.5 * (lo + hi)
            over = junction(mid) >= current
            hi = np.where(over, mid, hi)
            lo = np.where(over, lo, mid)
    vd = 0.5 * (lo + hi)
    return np.where(reach, vd + p["RS"] * current, np.nan)


def figure_values(result, figure):
    """The values of ``figure`` (a :class:`Figure`) for every row of ``result``, SI, as an array."""
    if figure.name == "VF":
        return forward_voltage(result.params, result.derived["temperature"], figure.bias)
    if figure.name == "IR":
        return -leakage.closed_physics(result, [figure.bias])[:, 0]
    if figure.name == "C":
        vj = np.asarray(result.params["VJ"], float)
        above = ~(figure.bias < vj)
        if above.any():
            raise InputError(f"figure {shown(figure.text)}: {figure.bias:g} V is not below the junction potential "
                             f"VJ = {vj[above][0]:.4g} V of every sample: ask for a lower bias", key="figure")
        return extraction.predicted_capacitance(result, [figure.bias])[:, 0]
    return np.asarray(result.params[figure.name], float)


def summary(values):
    """count (finite values), mean, std (ddof 1), percentiles :data:`PERCENTILES`, min and max, as floats."""
    v = np.asarray(values, float)
    v = v[np.isfinite(v)]
    out = {"count": int(v.size)}
    if not v.size:
        return out
    out["mean"] = float(np.mean(v))
    out["std"] = float(np.std(v, ddof=1)) if v.size > 1 else 0.0
    for q, x in zip(PERCENTILES, np.percentile(v, PERCENTILES)):
        out[f"p{q}"] = float(x)
    out["min"] = float(v.min())
    out["max"] = float(v.max())
    return out


@dataclass
class Spread:
    """The outcome of :func:`run`: the samples' Result, the figures asked for, and how they were drawn."""

    result: extraction.Result
    figures: dict          # figure text -> array over samples (SI)
    units: dict            # figure text -> unit
    seed: int
    kind: str

    def __len__(self):
        return len(self.result)

    def statistics(self):
        """``{"parameters": {NAME: summary}, "figures": {TEXT: summary}}`` (see :func:`summary`).

        Card parameters in :data:`modelgen.extraction.PARAMETERS` order, figures in the order asked.
        """
        return {"samples": len(self), "seed": self.seed, "kind": self.kind,
                "parameters": {k: dict(summary(self.result.params[k]), unit=extraction.UNITS[k])
                               for k in extraction.PARAMETERS if k in self.result.params},
                "figures": {k: dict(summary(v), unit=self.units[k]) for k, v in self.figures.items()}}


def run(device, spread, n, seed, figures=("VF@1mA", "IR@-5V", "C@-1V", "BV", "TT"), kind="both"):
    """Sample ``n`` rows (:func:`sample`), derive them in one call and evaluate ``figures``.

    ``figures`` are texts (:func:`parse_figure`) or :class:`Figure`. Raises
    InputError as :func:`sample`, :func:`parse_figure` and
    :func:`modelgen.extraction.derive` do (the first sample the physics
    cannot describe, naming it).
    """
    asked = [f if isinstance(f, Figure) else parse_figure(f) for f in figures]
    rows = sample(device, spread, n, seed, kind)
    result = extraction.derive(rows)
    values = {f.text: figure_values(result, f) for f in asked}
    return Spread(result, values, {f.text: f.unit for f in asked}, int(seed), kind)

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
smaller sigma.

Correlations between keys (optional): ``correlations`` is a list of
``[KEY1, KEY2, rho]`` items, -1 < rho < 1, the correlation of the two keys'
standard normal draws (of ln(value) for a lognormal key) for each sharing
both keys have (global with global, local with local)::

    correlations = [["n.doping", "n.lifetime", -0.6]]

The draws of each sharing are made independent, then mixed by the Cholesky
factor of the correlation matrix, which must be positive definite (a set
of correlations no joint normal distribution has is refused). Uniform
entries take no correlation (mixing would change their distribution).
Keys without correlations draw independently, and the draws of a table
without ``correlations`` are unchanged by the feature.

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
import os
import re
import tempfile
from dataclasses import dataclass, fields, replace

import numpy as np

from . import description, extraction, leakage
from .device import Side
from .errors import InputError, Problems, shown, type_name
from .spice import evaluator
from .textio import read_text
from .units import KINDS, parse_quantity

DISTRIBUTIONS = ("normal", "lognormal", "uniform")
SHARINGS = ("global", "local")
KINDS_OF_SAMPLE = ("global", "local", "both")
#: Fields of one entry of [spread].
FIELDS = ("sigma", "distribution", "shared", "area_scaling")
#: Rows derived at a time by :func:`run` (the answer does not depend on it: rows are independent).
CHUNK = 16384
#: Samples from which :func:`run` may derive half of them in a second process (when asked to fork).
FORK_MIN = 100_000
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


def key_column(device, key):
    """The column of ``device`` holding description key ``key`` (SI)."""
    if key[:2] in ("p.", "n."):
        return getattr(getattr(device, key[0]), key[2:])
    return getattr(device, _ATTRIBUTE.get(key, key))


def with_key(device, key, value):
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
    correlations: tuple = ()   # (key1, key2, rho) with key1 < key2, as given

    def correlation_matrix(self, shared):
        """(entries of sharing ``shared`` that draw normals, their correlation matrix)."""
        chosen = [t for t in self.entries if t.shared == shared and t.distribution != "uniform"]
        index = {t.key: i for i, t in enumerate(chosen)}
        rho = np.eye(len(chosen))
        for a, b, r in self.correlations:
            if a in index and b in index:
                rho[index[a], index[b]] = rho[index[b], index[a]] = r
        return chosen, rho


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

        if key == "correlations":
            continue
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
        nominal = float(key_column(device, key)[0])
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
    tolerances = Tolerances(tuple(found), reference, file)
    if "correlations" in table:
        tolerances = replace(tolerances, correlations=_correlations(table["correlations"], tolerances, file))
    return tolerances


def _correlations(raw, tolerances, file):
    """The ``correlations`` list of [spread] -> ((key1, key2, rho), ...), checked (see the module docstring)."""
    def bad(message, item=None):
        where = "spread.correlations" + (f"[{item}]" if item is not None else "")
        return InputError(message, file=file, key=where)

    if not isinstance(raw, list):
        raise bad(f"expected a list of [KEY1, KEY2, rho] items, got {type_name(raw)}")
    out, seen = [], set()
    by_key = {}
    for t in tolerances.entries:
        by_key.setdefault(t.key, []).append(t)
    for i, item in enumerate(raw):
        if not (isinstance(item, list) and len(item) == 3 and all(isinstance(k, str) for k in item[:2])
                and isinstance(item[2], (int, float)) and not isinstance(item[2], bool)):
            raise bad(f"expected [KEY1, KEY2, rho] (two quoted keys and a number), got {shown(item)}", i)
        a, b, rho = item[0].strip(), item[1].strip(), float(item[2])
        for k in (a, b):
            if k not in by_key:
                raise bad(f"{shown(k)} has no entry in [spread]: correlate keys that spread", i)
            if any(t.distribution == "uniform" for t in by_key[k]):
                raise bad(f"{k} is uniform: correlations take normal and lognormal entries only", i)
        if a == b:
            raise bad(f"a key is not correlated with itself ({a})", i)
        if not -1.0 < rho < 1.0 or not math.isfinite(rho):
            raise bad(f"rho must lie strictly between -1 and 1, got {rho!r}", i)
        pair = tuple(sorted((a, b)))
        if pair in seen:
            raise bad(f"{pair[0]} and {pair[1]} are correlated twice", i)
        if not {t.shared for t in by_key[a]} & {t.shared for t in by_key[b]}:
            raise bad(f"{a} and {b} share no sharing (global or local): nothing to correlate", i)
        seen.add(pair)
        out.append((*pair, rho))
    result = replace(tolerances, correlations=tuple(out))
    for shared in SHARINGS:
        _, rho = result.correlation_matrix(shared)
        if len(rho) and np.linalg.eigvalsh(rho).min() <= 1e-9:
            raise bad(f"the {shared} correlations are not those of any joint normal distribution (their matrix "
                      "is not positive definite): make them smaller or consistent")
    return tuple(out)


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


def repeated(device, n):
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
    rows = repeated(device, n)
    factor, shift = {}, {}
    draws = {}
    for t in spread.entries:  # every entry draws, used or not, so that each key's draws depend on the seed alone
        rng = streams[t.shared]
        draws[t] = rng.standard_normal(n) if t.distribution != "uniform" else rng.uniform(-1.0, 1.0, n)
    for shared in SHARINGS if spread.correlations else ():
        chosen, rho = spread.correlation_matrix(shared)
        if len(chosen) > 1 and not np.array_equal(rho, np.eye(len(chosen))):
            mixed = np.linalg.cholesky(rho) @ np.array([draws[t] for t in chosen])
            draws.update(zip(chosen, mixed))
    for t in spread.entries:
        u = draws[t]
        if kind not in ("both", t.shared):
            continue
        nominal = float(key_column(device, t.key)[0])
        s = effective_sigma(spread, t, area)
        if t.distribution == "lognormal":
            factor[t.key] = factor.get(t.key, 0.0) + s / nominal * u
        else:
            step = s * u if t.distribution == "normal" else s * math.sqrt(3.0) * u
            shift[t.key] = shift.get(t.key, 0.0) + step
    for key in sorted(set(factor) | set(shift)):
        nominal = float(key_column(device, key)[0])
        value = nominal * np.exp(factor[key]) if key in factor else np.full(n, nominal)
        value = value + shift.get(key, 0.0)
        description.check_range(key, value, lambda mask, _, message, values=None, key=key:
                                _refuse_draw(spread, key, mask, message, values))
        rows = with_key(rows, key, value)
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


def forward_voltage(params, temperature, current, simulator="ngspice", halvings=12, steps=6):
    """Terminal voltage at which each card passes ``current``, vectorised over cards [V].

    The card's own forward equations as ngspice 39 evaluates them
    (:func:`modelgen.spice.evaluator.forward_current`, checked against ngspice):
    I = IS (exp(Vd/(N Vt)) - 1) + ISR (exp(Vd/(NR Vt)) - 1) ((1 - Vd/VJ)^2
    + 0.005)^(M/2), then the high-injection knee I / (1 + sqrt(I/IKF)) where
    IKF > 0, and V = Vd + RS I. GMIN is left out (1e-12 S: a picoampere per
    volt). Valid for the forward currents the card is made for, below the
    knee or a little beyond.

    The junction voltage Vd: the current rises monotonically in Vd, so
    ``halvings`` bisections of [0, 10 V] bracket it (12 leave 2.4 mV), then
    ``steps`` of the Illinois false-position method on ln I - ln I_target,
    kept inside the bracket (Dowell & Jarratt, BIT 11, 168 (1971)), finish
    it: ln I is nearly linear in Vd, so each step gains several digits; 4
    reach the last bit on the demo cards and 6 are taken (tests: the current
    at the returned voltage, with RS on its own path in
    :func:`modelgen.spice.evaluator.dc_current`, against the target).

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
    target = math.log(current)

    def gap(vd):  # ln I(vd) - ln I_target; -inf where no current flows
        return np.log(np.maximum(evaluator.forward_current(p, vd, vt, sim), 1e-300)) - target

    lo = np.zeros(len(vt))
    hi = np.full(len(vt), 10.0)
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        reach = gap(hi) >= 0
        for _ in range(halvings):
            mid = 0.5 * (lo + hi)
            over = gap(mid) >= 0
            hi = np.where(over, mid, hi)
            lo = np.where(over, lo, mid)
        g_lo, g_hi = gap(lo), gap(hi)
        x = 0.5 * (lo + hi)
        side = np.zeros(len(vt), int)  # which end moved last (Illinois: halve the other end's gap)
        for _ in range(steps):
            denom = g_hi - g_lo
            x = np.where(np.isfinite(denom) & (denom > 0), hi - g_hi * (hi - lo) / denom, 0.5 * (lo + hi))
            x = np.clip(x, lo, hi)
            g = gap(x)
            up = g >= 0
            g_hi = np.where(up, g, np.where(side == -1, 0.5 * g_hi, g_hi))
            g_lo = np.where(~up, g, np.where(side == 1, 0.5 * g_lo, g_lo))
            hi = np.where(up, x, hi)
            lo = np.where(up, lo, x)
            side = np.where(up, 1, -1)
    return np.where(reach, x + p["RS"] * current, np.nan)


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
    lo, hi = float(v.min()), float(v.max())
    out["mean"] = float(np.mean(v)) if lo != hi else lo  # a constant's mean and spread are exact
    out["std"] = float(np.std(v, ddof=1)) if v.size > 1 and lo != hi else 0.0
    for q, x in zip(PERCENTILES, np.percentile(v, PERCENTILES)):
        out[f"p{q}"] = float(x)
    out["min"] = lo
    out["max"] = hi
    return out


class Spread:
    """The outcome of :func:`run`: the samples, their card parameters, the figures asked for, how drawn.

    ``rows`` is the sampled Device, ``params`` every card parameter over the
    samples (name -> array), ``figures`` each figure asked for (text ->
    array, SI). The samples' whole :class:`modelgen.extraction.Result`
    (about 1 kB a sample) is not kept: :meth:`derive` gives it for the rows
    wanted, ``result`` for all of them, by the same physics and so with the
    same numbers (rows are derived independently of one another).
    """

    def __init__(self, rows, params, figures, units, seed, kind):
        self.rows = rows
        self.params = params
        self.figures = figures
        self.units = units
        self.seed = seed
        self.kind = kind
        self._result = None

    def derive(self, rows):
        """The Result of the samples ``rows`` (indices or a mask)."""
        return extraction.derive(self.rows.take(np.asarray(rows)))

    @property
    def result(self):
        """The Result of every sample (derived again on first use)."""
        if self._result is None:
            self._result = extraction.derive(self.rows)
        return self._result

    def __len__(self):
        return len(self.rows)

    def statistics(self):
        """``{"parameters": {NAME: summary}, "figures": {TEXT: summary}}`` (see :func:`summary`).

        Card parameters in :data:`modelgen.extraction.PARAMETERS` order, figures in the order asked.
        """
        return {"samples": len(self), "seed": self.seed, "kind": self.kind,
                "parameters": {k: dict(summary(self.params[k]), unit=extraction.UNITS[k])
                               for k in extraction.PARAMETERS if k in self.params},
                "figures": {k: dict(summary(v), unit=self.units[k]) for k, v in self.figures.items()}}


def run(device, spread, n, seed, figures=("VF@1mA", "IR@-5V", "C@-1V", "BV", "TT"), kind="both", *, fork=False):
    """Sample ``n`` rows (:func:`sample`), derive them (in chunks of :data:`CHUNK`) and evaluate ``figures``.

    ``figures`` are texts (:func:`parse_figure`) or :class:`Figure`. Raises
    InputError as :func:`sample`, :func:`parse_figure` and
    :func:`modelgen.extraction.derive` do (the first sample the physics
    cannot describe, naming it).

    ``fork``: on POSIX, derive the second half of the chunks in a forked
    second process (from :data:`FORK_MIN` samples; the command line asks for
    it, a library call does not unless told). The numbers are the same
    either way: rows are derived independently. A second process that fails
    is not trusted; its half is derived again here, where its error shows.
    """
    asked = [f if isinstance(f, Figure) else parse_figure(f) for f in figures]
    rows = sample(device, spread, n, seed, kind)
    starts = list(range(0, len(rows), CHUNK))
    half = len(starts) // 2 if fork and len(rows) >= FORK_MIN else len(starts)
    columns = None
    if half < len(starts):
        from .output import Beside

        handle, path = tempfile.mkstemp(prefix="modelgen-spread-", suffix=".npz")
        os.close(handle)

        def task():
            np.savez(path, **_flat(_derive_chunks(rows, starts[half:], asked)))

        beside = Beside(task, fork=True).start()
        try:
            columns = [_derive_chunks(rows, starts[:half], asked)]
            beside.join()
            with np.load(path) as saved:
                columns.append(_unflat({k: saved[k] for k in saved.files}))
        finally:
            beside.cancel()
            os.unlink(path)
    else:
        columns = [_derive_chunks(rows, starts, asked)]
    params = {k: np.concatenate([c[0][k] for c in columns]) for k in columns[0][0]}
    values = {f.text: np.concatenate([c[1][f.text] for c in columns]) for f in asked}
    return Spread(rows, params, values, {f.text: f.unit for f in asked}, int(seed), kind)


def _derive_chunks(rows, starts, asked):
    """(params, figures) of the chunks of ``rows`` starting at ``starts``, each name -> array."""
    params, values = [], {f.text: [] for f in asked}
    for start in starts:  # rows are independent: chunks keep the arrays small
        chunk = rows.take(slice(start, start + CHUNK))
        numbers = np.arange(start + 1, start + 1 + len(chunk))  # a sample the physics refuses is named
        part = extraction.derive(chunk, Problems(len(chunk), sources=chunk.source, rows=numbers, label="sample"))
        params.append(part.params)
        for f in asked:
            values[f.text].append(figure_values(part, f))
    if not params:
        return {}, {k: np.empty(0) for k in values}
    return ({k: np.concatenate([p[k] for p in params]) for k in params[0]},
            {k: np.concatenate(v) for k, v in values.items()})


def _flat(columns):
    """(params, figures) -> one name -> array mapping for ``numpy.savez`` (figure texts are not names)."""
    params, figures = columns
    out = {f"p_{k}": v for k, v in params.items()}
    out.update({f"f{i}": v for i, v in enumerate(figures.values())})
    out["figure_names"] = np.array(list(figures), dtype=str)
    return out


def _unflat(saved):
    """The inverse of :func:`_flat`."""
    params = {k[2:]: v for k, v in saved.items() if k.startswith("p_")}
    names = [str(x) for x in saved["figure_names"]]
    return params, {name: saved[f"f{i}"] for i, name in enumerate(names)}

"""Temperature corners: the physics at each corner, and one card that scales right.

:func:`evaluate` runs the physics core at each corner temperature (the
user's values, such as a measured lifetime or a resistivity, hold at the
description's nominal temperature; the models carry everything else to the
corner). :func:`fit` then chooses the card's temperature parameters so that
the simulator's own rescaling from TNOM reproduces the physics:

- EG and XTI, by linear least squares on ln IS(T)/IS(TNOM) and, weighted
  by :data:`ISR_WEIGHT`, ln ISR(T)/ISR(TNOM) (where the dialect carries
  ISR), which SPICE makes
  XTI/N ln(T/TNOM) + EG/(N kT/q) (T/TNOM - 1) (SPICE3 user's guide; the
  ngspice manual's diode temperature section);
- for the ngspice dialect also TCV (BV - TCV dT) and TRS1, TRS2
  (RS (1 + TRS1 dT + TRS2 dT^2)), by linear least squares.

CJO and VJ follow the simulator's fixed SPICE3 law, which has nothing to
fit; their error is reported with the others.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

import numpy as np

from . import cards, extraction, targets
from .constants import ZERO_CELSIUS
from .device import Device
from .errors import InputError
from .spice import evaluator

#: Corners used when none are given [degC].
DEFAULT_CORNERS_C = (-40.0, 27.0, 85.0, 125.0)
#: Biases at which the capacitance error is measured [V].
CAP_BIASES = (0.0, -1.0, -5.0)
#: Weight of the ISR rows in the EG/XTI least squares (IS rows weigh 1). ISR and IS
#: share EG and XTI on a card, but the physics gives them different laws (ISR goes
#: as ni Vt / (tau E) over a fit window that moves with temperature, and its fitted NR
#: changes with it; IS goes as ni^2 D / L), so one must give way: IS, the accurate
#: diffusion physics, is favoured. With 0.5 IS errors reach 7 % over -40..125 degC
#: on the example devices; with 0.2 they stay near 1 %, ISR near 20-40 % either way.
ISR_WEIGHT = 0.2
#: Temperatures the material models cover [K] (corners outside are refused).
TEMPERATURE_RANGE_K = (50.0, 700.0)
#: At most this many corners in one run.
MAX_CORNERS = 1000


def corner_temperatures(at=(), start=None, stop=None, step=None):
    """The corner temperatures [degC]: the ``at`` values and a range, as one sorted list.

    Parameters
    ----------
    at : sequence of float
        Single temperatures [degC].
    start, stop, step : float, optional
        A range [degC, degC, K], all three or none; ``stop`` is included when
        a step lands on it within rounding (1e-9 K).

    Returns
    -------
    list of float
        The union of both, sorted, each rounded to 1e-9 degC; the default
        corners when neither is given.

    Raises
    ------
    InputError
        An incomplete range, a non-positive or non-finite step, a range of
        more than :data:`MAX_CORNERS` corners, or a temperature outside the
        material models' range.
    """
    temps = [float(t) for t in at]
    if any(x is not None for x in (start, stop, step)):
        if None in (start, stop, step):
            raise InputError("--from, --to and --step go together", key="--step")
        for key, x in (("--from", start), ("--to", stop), ("--step", step)):
            if not math.isfinite(x):
                raise InputError(f"must be a finite number, got {x!r}", key=key)
        if not step > 0:
            raise InputError(f"must be positive, got {step!r}", key="--step")
        if stop < start:
            raise InputError(f"--to ({stop:g}) is below --from ({start:g})", key="--to")
        count = math.floor((stop - start) / step + 1e-9) + 1
        if count > MAX_CORNERS:
            raise InputError(f"the range gives {count:.3g} corners; at most {MAX_CORNERS}", key="--step")
        temps += [start + k * step for k in range(count)]
    if not temps:
        temps = list(DEFAULT_CORNERS_C)
    temps = sorted({round(t, 9) for t in temps})
    lo, hi = TEMPERATURE_RANGE_K
    for t in (temps[0], temps[-1]):
        if not lo < t + ZERO_CELSIUS < hi:
            raise InputError(f"{t:g} degC is outside {lo:g}-{hi:g} K, the material models' range", key="--at")
    return temps


def kelvin(temperatures_c):
    """degC -> K, rounded to 1e-9 K so that -40 degC is 233.15 K, not 233.14999999999998."""
    return np.round(np.asarray(temperatures_c, float) + ZERO_CELSIUS, 9)


def replicate(device: Device, temperatures):
    """The (single) device once per temperature, everything else unchanged.

    Parameters
    ----------
    device : Device
        Length 1.
    temperatures : array_like
        Evaluation temperatures [K].
    """
    t = np.asarray(temperatures, float)
    return replace(device.take(np.zeros(len(t), int)), temperature=t)


def evaluate(device: Device, temperatures):
    """The physics core at each temperature: a Result with one row per corner."""
    return extraction.derive(replicate(device, temperatures))


@dataclass
class Fit:
    """Fitted temperature parameters and how well the card then tracks the physics.

    ``values``: parameter name -> fitted value (EG, XTI, and where the
    target carries them TCV, TRS1, TRS2). ``worst_error``: quantity -> worst
    relative error over the corners, a fraction (IS, ISR, CJO, BV, RS where
    the card carries them; CJO is the worst capacitance error at 0, -1 and
    -5 V). ``errors``: the same per corner, arrays in corner order.
    """

    values: dict
    worst_error: dict
    errors: dict = field(default_factory=dict)


def _lsq(a, b):
    x, *_ = np.linalg.lstsq(np.asarray(a, float), np.asarray(b, float), rcond=None)
    return x


def fit(corner_result, nominal, dialect="ngspice"):
    """Fit the card's temperature parameters to the physics at the corners.

    Parameters
    ----------
    corner_result : Result
        From :func:`evaluate`, one row per corner.
    nominal : int
        Row of the nominal temperature (the card's TNOM).
    dialect : str
        A target name: it decides which parameters exist and whose
        temperature equations apply (:attr:`modelgen.targets.Target.simulator`).

    Returns
    -------
    Fit

    Raises
    ------
    InputError
        Fewer than two corners besides the nominal temperature: EG and XTI
        (and TRS1, TRS2) are two unknowns each.
    """
    target = targets.get(dialect)
    sim = target.simulator
    par = corner_result.params
    t = corner_result.derived["temperature"]
    t0 = t[nominal]
    others = len(np.unique(t[t != t0]))
    if others < 2:
        wanted = ", ".join(target.fitted_temperature_parameters())
        raise InputError(f"a temperature fit of {wanted} needs at least two corners besides the nominal "
                         f"{t0 - ZERO_CELSIUS:g} degC; got {others} (use --per-corner for cards at single temperatures)",
                         key="--at")
    ratio = t / t0
    vt = sim.boltzmann * t / sim.charge
    n, nr = par["N"][nominal], par["NR"][nominal]
    # ln ratio = XTI * ln(r)/N + EG * (r - 1)/(N vt)   [XTI not divided by N where the law says so]
    xti_div = n if sim.xti_per_n else 1.0
    rows = [np.column_stack([(ratio - 1) / (n * vt), np.log(ratio) / xti_div])]
    rhs = [np.log(par["IS"] / par["IS"][nominal])]
    if "ISR" in target.carries:
        rows.append(ISR_WEIGHT * np.column_stack([(ratio - 1) / (nr * vt), np.log(ratio) / nr]))
        rhs.append(ISR_WEIGHT * np.log(par["ISR"] / par["ISR"][nominal]))
    eg, xti = _lsq(np.vstack(rows), np.concatenate(rhs))
    values = {"EG": float(eg), "XTI": float(xti)}
    dt = t - t0
    fitted = target.fitted_temperature_parameters()
    if "TCV" in fitted:
        bv = par["BV"]
        if np.all(np.isfinite(bv)):
            values["TCV"] = float(-_lsq(dt[:, None], bv - bv[nominal])[0])
    if "TRS1" in fitted:
        rs = par["RS"]
        k1, k2 = _lsq(np.column_stack([dt, dt * dt]), rs / rs[nominal] - 1)
        values["TRS1"] = float(k1)
        if "TRS2" in fitted:
            values["TRS2"] = float(k2)
    errors = corner_errors(corner_result, nominal, dialect, values)
    return Fit(values=values, worst_error={k: float(np.max(v)) for k, v in errors.items()}, errors=errors)


def corner_errors(corner_result, nominal, dialect, overrides):
    """Relative error, per corner, of what the simulator makes of the nominal card.

    The nominal card (with ``overrides``) is rescaled by the temperature
    equations of the target's simulator
    (:func:`modelgen.spice.evaluator.adjusted`) to each corner and compared
    with the physics there.
    """
    target = targets.get(dialect)
    sim = target.simulator
    values, _ = cards.card_values(corner_result, nominal, dialect, overrides=overrides)
    card = dict(values)
    t_c = corner_result.derived["temperature"] - ZERO_CELSIUS
    par = corner_result.params
    errors = {k: np.zeros(len(t_c)) for k in ("IS", "ISR", "CJO", "BV", "RS")
              if k in target.carries or k == "CJO"}
    if not np.all(np.isfinite(par["BV"])) or "BV" not in target.carries:
        errors.pop("BV", None)
    c_phys = extraction.predicted_capacitance(corner_result, CAP_BIASES)
    for k, tc in enumerate(t_c):
        a = evaluator.adjusted(card, tc, sim)
        is_total = a["IS"] + a.get("JSW", 0.0) * (a.get("PJ", 0.0) if "PJ" in card else 0.0)
        errors["IS"][k] = abs(is_total / par["IS"][k] - 1)
        if "ISR" in errors:
            errors["ISR"][k] = abs(a["ISR"] / par["ISR"][k] - 1)
        if "BV" in errors:
            errors["BV"][k] = abs(a["BV"] / par["BV"][k] - 1)
        if "RS" in errors:
            errors["RS"][k] = abs(a["RS"] / par["RS"][k] - 1)
        c_card = evaluator.capacitance({**card, "TT": 0.0, "RS": 0.0}, np.array(CAP_BIASES), sim,
                                       gmin=0.0, temperature_c=tc)
        errors["CJO"][k] = float(np.max(np.abs(c_card / c_phys[k] - 1)))
    return errors


def corner_tag(temperature_c):
    """A name-safe tag for a temperature in degC: -40 -> 'M40', 27.5 -> '27P5'."""
    text = f"{abs(temperature_c):g}".replace(".", "P")
    return ("M" if temperature_c < 0 else "") + text


def _percent(x):
    return f"{100 * x:.3g} %"


@dataclass
class Run:
    """One device at its corners: the physics, and the fit unless cards are per corner.

    ``temperatures``: the requested corners [degC]; ``evaluated``: those and
    the nominal temperature [degC], sorted; ``result``: the physics, one row
    per evaluated temperature; ``nominal``: the row of the nominal
    temperature; ``fit``: the :class:`Fit` (None for per-corner cards).
    """

    device: Device
    dialect: str
    temperatures: list
    evaluated: list
    result: object
    nominal: int
    fit: Fit | None
    max_error: float

    @property
    def rows(self):
        """Rows of ``result`` at the requested corners."""
        return [self.evaluated.index(t) for t in self.temperatures]

    def over(self):
        """Quantities whose worst error exceeds ``max_error`` (a fraction)."""
        if self.fit is None:
            return {}
        return {k: v for k, v in self.fit.worst_error.items() if v > self.max_error}

    def fit_lines(self):
        """What the fit did, for headers and stderr."""
        temps = self.temperatures
        span = f"{temps[0]:g} to {temps[-1]:g} degC ({', '.join(f'{t:g}' for t in temps)})"
        if self.fit is None:
            return [f"cards per corner over {span}: each card has its own TNOM"]
        lines = [f"temperature fit over {span}, dialect {self.dialect}:",
                 "  fitted " + ", ".join(f"{k}={cards.format_number(v)}" for k, v in self.fit.values.items()),
                 "  worst error over the corners: " + ", ".join(f"{k} {_percent(v)}"
                                                               for k, v in self.fit.worst_error.items())]
        target = targets.get(self.dialect)
        constant = [k for k, c in (("RS", "TRS1"), ("BV", "TCV")) if k in target.carries and c not in target.carries]
        if constant:
            with_law = sorted(name for name, t in targets.TARGETS.items()
                              if all(c in t.carries for c in ("TCV", "TRS1")))
            lines.append(f"  the {self.dialect} dialect has no temperature coefficient for {' and '.join(constant)}: "
                         "the simulator keeps them at their TNOM values; the "
                         + (" or ".join(with_law) + " dialect fits them, or " if with_law else "")
                         + "--per-corner gives each corner its own card")
        return lines

    def warnings(self):
        over = self.over()
        if not over:
            return []
        return [f"warning: the single card misses the physics at some corner by more than "
                f"{_percent(self.max_error)}: " + ", ".join(f"{k} {_percent(v)}" for k, v in over.items())]


def run(device: Device, temperatures_c, dialect="spice3", *, per_corner=False, max_error=0.05):
    """The physics at each corner and, unless ``per_corner``, the fitted single card's parameters.

    Parameters
    ----------
    device : Device
        One device (length 1); its temperature is the nominal one.
    temperatures_c : sequence of float
        Corners [degC] (see :func:`corner_temperatures`).
    dialect : str
        A target name.
    per_corner : bool
        One card per corner: no fit.
    max_error : float
        Fraction above which a fit's worst error is warned about.

    Raises
    ------
    InputError
        A fit with too few corners, or physics that fails at a corner.
    """
    targets.get(dialect)
    temps = [float(t) for t in temperatures_c]
    nominal_c = round(float(device.temperature[0]) - ZERO_CELSIUS, 9)
    evaluated = sorted(set(temps) | ({nominal_c} if not per_corner else set()))
    result = evaluate(device, kelvin(evaluated))
    nominal = evaluated.index(nominal_c) if nominal_c in evaluated else None
    fitted = None if per_corner else fit(result, nominal, dialect)
    return Run(device=device, dialect=dialect, temperatures=temps, evaluated=evaluated, result=result,
               nominal=nominal, fit=fitted, max_error=max_error)


def card_text(r: Run, inputs=None):
    """The single fitted card (``per_corner`` False) or the per-corner library, as text.

    Per-corner cards carry one model name in every section where the dialect
    has sections (so switching corners changes one ``.lib`` line), and names
    suffixed by the corner (``_M40``, ``_27``, ``_125``) where it has none.
    """
    name = r.device.name[0]
    if r.fit is not None:
        return cards.card(r.result, r.nominal, dialect=r.dialect, inputs=inputs, overrides=r.fit.values,
                          extra=r.fit_lines() + r.warnings())
    sectioned = targets.get(r.dialect).sections
    parts = []
    for t, k in zip(r.temperatures, r.rows):
        suffixed = f"{name}_{corner_tag(t)}"
        if not sectioned and len(suffixed) > 64:
            raise InputError("too long for a corner suffix (64 characters at most)", key="name")
        parts.append(cards.Part(r.result, rows=[k], section=f"T{corner_tag(t)}" if sectioned else None,
                                names=[name if sectioned else suffixed], inputs=[inputs] if inputs else None))
    return cards.render(parts, r.dialect, title=f"{name} at {len(parts)} temperature corners",
                        extra=r.fit_lines())


def document(r: Run):
    """The run as plain data: every corner's parameters and derived quantities, and the fit.

    Errors are in percent, like ``--max-error`` and the messages;
    temperatures in K as evaluated and in degC as given.
    """
    rows = []
    for t, k in zip(r.temperatures, r.rows):
        d = cards.row_document(r.result, k)
        rows.append({"temperature": d["derived"]["temperature"], "temperature_c": t, "params": d["params"],
                     "derived": d["derived"]})
    first = cards.row_document(r.result, r.rows[0])
    doc = {"name": r.device.name[0], "dialect": r.dialect, "units": first["units"],
           "derived_units": first["derived_units"], "corners": rows}
    if r.fit is not None:
        doc["fit"] = {**r.fit.values, "worst_error_percent": {k: 100 * v for k, v in r.fit.worst_error.items()},
                      "max_error_percent": 100 * r.max_error}
    doc["warnings"] = (r.result.warnings(r.nominal) if r.nominal is not None else []) + r.warnings()
    return doc

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

from dataclasses import dataclass, field, replace

import numpy as np

from . import cards, extraction
from .device import Device
from .spice import evaluator

#: Corners used when none are given [degC].
DEFAULT_CORNERS_C = (-40.0, 27.0, 85.0, 125.0)
#: Biases at which the capacitance error is measured [V].
CAP_BIASES = (0.0, -1.0, -5.0)
#: Weight of the ISR rows in the EG/XTI least squares (IS rows weigh 1). ISR and IS
#: share EG and XTI on a card, but the physics gives them different laws (ISR goes
#: as ni W / tau, IS as ni^2 D / L), so one must give way: IS, the accurate
#: diffusion physics, is favoured over the Sah-Noyce-Shockley estimate, itself an
#: upper bound. With equal weights IS errors near 4 % over -40..125 degC; with
#: 0.5 near 1 %, ISR near 10 % (the example devices).
ISR_WEIGHT = 0.5
#: Which simulator's temperature equations stand for each dialect.
SCALING = {"spice3": "ngspice", "ngspice": "ngspice", "gnucap": "gnucap"}


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

    ``values``: parameter name -> fitted value (EG, XTI, and for ngspice TCV,
    TRS1, TRS2). ``worst_error``: quantity -> worst relative error over the
    corners (IS, ISR, CJO, BV, RS where the card carries them; CJO is the
    worst capacitance error at 0, -1 and -5 V). ``errors``: the same per
    corner, arrays in corner order.
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
        Card dialect; it decides which parameters exist and whose temperature
        equations apply (:data:`SCALING`).

    Returns
    -------
    Fit
    """
    d = cards.DIALECTS[dialect]
    sim = evaluator.SIMULATORS[SCALING[dialect]]
    par = corner_result.params
    t = corner_result.derived["temperature"]
    t0 = t[nominal]
    ratio = t / t0
    vt = sim.boltzmann * t / sim.charge
    n, nr = par["N"][nominal], par["NR"][nominal]
    with_isr = "ISR" in d.carries
    # ln ratio = XTI * ln(r)/N + EG * (r - 1)/(N vt)   [gnucap: XTI * ln(r), not divided by N]
    xti_div = 1.0 if SCALING[dialect] == "gnucap" else n
    rows = [np.column_stack([(ratio - 1) / (n * vt), np.log(ratio) / xti_div])]
    rhs = [np.log(par["IS"] / par["IS"][nominal])]
    if with_isr:
        rows.append(ISR_WEIGHT * np.column_stack([(ratio - 1) / (nr * vt), np.log(ratio) / nr]))
        rhs.append(ISR_WEIGHT * np.log(par["ISR"] / par["ISR"][nominal]))
    eg, xti = _lsq(np.vstack(rows), np.concatenate(rhs))
    values = {"EG": float(eg), "XTI": float(xti)}
    dt = t - t0
    if dialect == "ngspice":
        bv = par["BV"]
        if np.all(np.isfinite(bv)):
            values["TCV"] = float(-_lsq(dt[:, None], bv - bv[nominal])[0])
        rs = par["RS"]
        k1, k2 = _lsq(np.column_stack([dt, dt * dt]), rs / rs[nominal] - 1)
        values["TRS1"], values["TRS2"] = float(k1), float(k2)
    errors = corner_errors(corner_result, nominal, dialect, values)
    return Fit(values=values, worst_error={k: float(np.max(v)) for k, v in errors.items()}, errors=errors)


def corner_errors(corner_result, nominal, dialect, overrides):
    """Relative error, per corner, of what the simulator makes of the nominal card.

    The nominal card (with ``overrides``) is rescaled by the simulator's
    temperature equations (:func:`modelgen.spice.evaluator.adjusted`) to each
    corner and compared with the physics there.
    """
    d = cards.DIALECTS[dialect]
    simulator = SCALING[dialect]
    values, _ = cards.card_values(corner_result, nominal, dialect, overrides=overrides)
    card = dict(values)
    t_c = corner_result.derived["temperature"] - 273.15
    par = corner_result.params
    errors = {k: np.zeros(len(t_c)) for k in ("IS", "ISR", "CJO", "BV", "RS")
              if k in d.carries or k == "CJO"}
    if not np.all(np.isfinite(par["BV"])) or "BV" not in d.carries:
        errors.pop("BV", None)
    c_phys = extraction.predicted_capacitance(corner_result, CAP_BIASES)
    for k, tc in enumerate(t_c):
        a = evaluator.adjusted(card, tc, simulator)
        is_total = a["IS"] + a.get("JSW", 0.0) * (a.get("PJ", 0.0) if "PJ" in card else 0.0)
        errors["IS"][k] = abs(is_total / par["IS"][k] - 1)
        if "ISR" in errors:
            errors["ISR"][k] = abs(a["ISR"] / par["ISR"][k] - 1)
        if "BV" in errors:
            errors["BV"][k] = abs(a["BV"] / par["BV"][k] - 1)
        if "RS" in errors:
            errors["RS"][k] = abs(a["RS"] / par["RS"][k] - 1)
        c_card = evaluator.capacitance({**card, "TT": 0.0, "RS": 0.0}, np.array(CAP_BIASES), simulator,
                                       gmin=0.0, temperature_c=tc)
        errors["CJO"][k] = float(np.max(np.abs(c_card / c_phys[k] - 1)))
    return errors


def corner_tag(temperature_c):
    """A name-safe tag for a temperature in degC: -40 -> 'M40', 27.5 -> '27P5'."""
    text = f"{abs(temperature_c):g}".replace(".", "P")
    return ("M" if temperature_c < 0 else "") + text

"""What a simulator computes from a diode card: DC current and capacitance.

The SPICE level-1 diode equations as the two open-source simulators we test
against implement them, vectorized over bias points:

- ``ngspice`` (version 39): Berkeley SPICE3 equations (Nagel, ERL-M520,
  1975; SPICE3 user's guide) plus ngspice's extensions: recombination current
  ISR, NR with its depletion-width factor ((1 - Vd/VJ)^2 + 0.005)^(M/2), the
  high-injection knee IKF (I / (1 + sqrt(I/IKF))), sidewall JSW/CJSW/MJSW/PHP
  with perimeter PJ, and breakdown BV/IBV/NBV matched to IBV as SPICE does.
  Read from the ngspice manual's diode section and checked against ngspice's
  own output in the tests.
- ``gnucap`` (version 0.36): the same forward and capacitance equations; in
  its default path the reverse current is IS (exp(Vd/(N Vt)) - 1) with no
  cubic tail, no breakdown and no GMIN. Checked against gnucap in the tests.

Each simulator has its own values of k and q, which matter at 1e-4: a
forward current at 0.8 V scales as exp(V q/kT). The evaluator is what
modelgen's checks and later fits use to say what a card will do in a
simulator. It works at the card's TNOM (temperature scaling comes later).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class Simulator:
    """Constants and equation variants of one simulator."""

    name: str
    boltzmann: float
    charge: float
    gmin: float               # default GMIN across the junction [S]
    reverse_tail: bool        # SPICE's -IS (1 + (3 N Vt / (e V))^3) below -3 N Vt
    breakdown: bool           # BV / IBV modelled
    recombination: bool       # ISR / NR
    knee: bool                # IKF
    sidewall_current: bool    # JSW with PJ


SIMULATORS = {
    # ngspice 39 src/include/ngspice/const.h: CODATA 2014 values
    "ngspice": Simulator("ngspice", 1.38064852e-23, 1.6021766208e-19, 1e-12, True, True, True, True, True),
    # gnucap 0.36 include/constant.h: the values "(spice)"
    "gnucap": Simulator("gnucap", 1.3806226e-23, 1.6021918e-19, 0.0, False, False, False, False, False),
}

#: SPICE defaults of the parameters the evaluator uses (common practice;
#: ngspice manual, diode model table).
DEFAULTS = {"IS": 1e-14, "N": 1.0, "RS": 0.0, "CJO": 0.0, "VJ": 1.0, "M": 0.5, "FC": 0.5, "TT": 0.0,
            "BV": np.inf, "IBV": 1e-3, "NBV": 1.0, "ISR": 0.0, "NR": 2.0, "IKF": 0.0,
            "JSW": 0.0, "CJSW": 0.0, "MJSW": 0.33, "PHP": 1.0, "FCS": 0.5, "AREA": 1.0, "PJ": 0.0,
            "TNOM": 27.0}


def _params(card):
    p = dict(DEFAULTS)
    for k, v in card.items():
        k = k.upper()
        if k == "CJP":
            k = "CJSW"
        if k in ("VJSW", "PBSW"):
            k = "PHP"
        p[k] = float(v)
    return p


def thermal_voltage(card, simulator="ngspice"):
    """kT/q at the card's TNOM with the simulator's constants [V]."""
    s = SIMULATORS[simulator]
    t = _params(card)["TNOM"] + 273.15
    return s.boltzmann * t / s.charge


def _breakdown_knee(p, csat, vt):
    """The internal breakdown voltage that makes the current IBV at -BV.

    SPICE's iteration (as in SPICE3's diode temperature routine): solve
    IS (exp((BV - x)/(NBV Vt)) - 1 + x/Vt) = IBV for x.
    """
    bv, cbv, nbv = p["BV"], p["IBV"], p["NBV"]
    if not np.isfinite(bv):
        return np.inf
    if cbv < csat * bv / vt:
        return bv
    xbv = bv - nbv * vt * np.log(1 + cbv / csat)
    for _ in range(25):
        xbv = bv - nbv * vt * np.log(cbv / csat + 1 - xbv / vt)
    return xbv


def junction_current(card, vd, simulator="ngspice", gmin=None):
    """Current through the junction (RS excluded) at junction voltage vd.

    Parameters
    ----------
    card : dict
        Parameter name -> value (upper or lower case), as read from a card.
        Missing parameters take their SPICE defaults.
    vd : array_like
        Junction voltage, anode to cathode [V].
    simulator : {'ngspice', 'gnucap'}
    gmin : float, optional
        Conductance the simulator puts across the junction [S]; default the
        simulator's.

    Returns
    -------
    (current, bottom_conductance) : numpy.ndarray
        Current [A] and d(bottom diode current)/dV before the knee and GMIN
        [S], which is what multiplies TT in the diffusion capacitance.
    """
    s = SIMULATORS[simulator]
    p = _params(card)
    g = s.gmin if gmin is None else gmin
    vd = np.asarray(vd, float)
    vt = thermal_voltage(card, simulator)
    vte = p["N"] * vt
    csat = p["IS"] * p["AREA"]
    if s.sidewall_current and "NS" not in {k.upper() for k in card}:
        csat = csat + p["JSW"] * p["PJ"]
    ev = np.exp(np.minimum(vd / vte, 700.0))
    i_fwd = csat * (ev - 1)
    g_fwd = csat * ev / vte
    if s.recombination and p["ISR"] > 0:
        vtr = p["NR"] * vt
        er = np.exp(np.minimum(vd / vtr, 700.0))
        u = 1 - vd / p["VJ"]
        t1 = u * u + 0.005
        fac = t1 ** (p["M"] / 2)
        dfac = -p["M"] * u * t1 ** (p["M"] / 2 - 1) / p["VJ"]
        isr = p["ISR"] * p["AREA"]
        i_rec = isr * (er - 1)
        g_fwd = g_fwd + isr * er / vtr * fac + i_rec * dfac
        i_fwd = i_fwd + i_rec * fac
    if s.reverse_tail:
        forward = vd >= -3 * vte
        with np.errstate(divide="ignore", invalid="ignore"):
            arg = (3 * vte / (vd * np.e)) ** 3
        i_rev = -csat * (1 + arg)
        g_rev = csat * 3 * arg / vd
        xbv = _breakdown_knee(p, csat, vt) if s.breakdown else np.inf
        vtb = p["NBV"] * vt
        in_bd = vd < -xbv
        evr = np.exp(np.minimum(-(xbv + vd) / vtb, 700.0)) if np.isfinite(xbv) else 0.0
        i_bd = -csat * evr
        g_bd = csat * evr / vtb
        i = np.where(forward, i_fwd, np.where(in_bd, i_bd, i_rev))
        gb = np.where(forward, g_fwd, np.where(in_bd, g_bd, g_rev))
    else:
        forward = np.ones(vd.shape, bool)
        i, gb = i_fwd, g_fwd
    if s.knee and p["IKF"] > 0:
        ikf = p["IKF"] * p["AREA"]
        kneed = forward & (i > 1e-18)
        with np.errstate(invalid="ignore"):
            i = np.where(kneed, i / (1 + np.sqrt(np.where(kneed, i, 0.0) / ikf)), i)
    return i + g * vd, gb


def dc_current(card, v, simulator="ngspice", gmin=None, iterations=200):
    """Terminal current at terminal voltage v, the series RS solved exactly.

    Solves v = vd + RS I(vd) for vd by bisection (the left side rises
    monotonically with vd), 200 halvings: exact to the last bit.

    Parameters
    ----------
    card : dict
        Card parameters (see :func:`junction_current`).
    v : array_like
        Voltage across the whole diode [V].

    Returns
    -------
    (current, vd) : numpy.ndarray
        Terminal current [A] and junction voltage [V].
    """
    v = np.asarray(v, float)
    rs = _params(card)["RS"] / _params(card)["AREA"]
    if rs == 0:
        return junction_current(card, v, simulator, gmin)[0], v
    lo, hi = np.minimum(v, 0.0), np.maximum(v, 0.0)
    for _ in range(iterations):
        mid = 0.5 * (lo + hi)
        over = mid + rs * junction_current(card, mid, simulator, gmin)[0] > v
        hi = np.where(over, mid, hi)
        lo = np.where(over, lo, mid)
        if np.all(hi - lo <= 4 * np.finfo(float).eps * np.maximum(np.abs(hi), 1e-300)):
            break
    vd = 0.5 * (lo + hi)
    return junction_current(card, vd, simulator, gmin)[0], vd


def _depletion(c0, vj, m, fc, vd):
    f2 = (1 - fc) ** (1 + m)
    f3 = 1 - fc * (1 + m)
    with np.errstate(invalid="ignore"):
        below = c0 * np.power(np.maximum(1 - vd / vj, 1e-300), -m)
    above = c0 / f2 * (f3 + m * vd / vj)
    return np.where(vd < fc * vj, below, above)


def capacitance(card, v, simulator="ngspice", gmin=None):
    """Small-signal junction capacitance at terminal voltage v [F].

    Depletion capacitance CJO (1 - Vd/VJ)^-M below FC VJ and SPICE's linear
    extension above it, the same for the sidewall (CJSW, PHP, MJSW, FCS, times
    PJ), plus the diffusion capacitance TT dI/dVd of the bottom diode, at the
    junction voltage of the DC solution.
    """
    p = _params(card)
    i, vd = dc_current(card, v, simulator, gmin)
    _, gb = junction_current(card, vd, simulator, gmin)
    c = _depletion(p["CJO"] * p["AREA"], p["VJ"], p["M"], p["FC"], vd)
    # gnucap 0.36 takes the perimeter only from the instance (default 0), never from the card
    pj = p["PJ"] if SIMULATORS[simulator].sidewall_current else 0.0
    if p["CJSW"] > 0 and pj > 0:
        fcs = p["FCS"] if simulator == "ngspice" else p["FC"]
        c = c + _depletion(p["CJSW"] * pj, p["PHP"], p["MJSW"], fcs, vd)
    return c + p["TT"] * gb

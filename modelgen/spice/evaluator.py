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

from functools import lru_cache

import numpy as np

from .. import targets


#: The simulators and their constants and equation variants (see :mod:`modelgen.targets`).
SIMULATORS = targets.SIMULATORS


def simulator_of(simulator):
    """The :class:`~modelgen.targets.Simulator` for a name (or the object itself)."""
    if isinstance(simulator, targets.Simulator):
        return simulator
    try:
        return SIMULATORS[simulator]
    except KeyError:
        raise KeyError(f"unknown simulator {simulator!r}; known: {', '.join(SIMULATORS)}") from None


#: SPICE defaults of the parameters the evaluator uses (common practice;
#: ngspice manual, diode model table).
DEFAULTS = {"IS": 1e-14, "N": 1.0, "RS": 0.0, "CJO": 0.0, "VJ": 1.0, "M": 0.5, "FC": 0.5, "TT": 0.0,
            "BV": np.inf, "IBV": 1e-3, "NBV": 1.0, "ISR": 0.0, "NR": 2.0, "IKF": 0.0,
            "JSW": 0.0, "CJSW": 0.0, "MJSW": 0.33, "PHP": 1.0, "FCS": 0.5, "AREA": 1.0, "PJ": 0.0,
            "TNOM": 27.0, "EG": 1.11, "XTI": 3.0}
#: Other names the simulators read for the same parameters (ngspice's diode parameter table).
ALIASES = {"CJ": "CJO", "CJ0": "CJO", "PB": "VJ", "MJ": "M", "CJP": "CJSW", "VJSW": "PHP", "PBSW": "PHP"}


def _params(card):
    p = dict(DEFAULTS)
    for k, v in card.items():
        k = k.upper()
        p[ALIASES.get(k, k)] = float(v)
    return p


def thermal_voltage(card, simulator="ngspice", temperature_c=None):
    """kT/q at ``temperature_c`` (default the card's TNOM) with the simulator's constants [V]."""
    s = simulator_of(simulator)
    t = (_params(card)["TNOM"] if temperature_c is None else temperature_c) + 273.15  # the simulators' own CtoK
    return s.boltzmann * t / s.charge


#: SPICE3's reference temperature, 27 degC [K].
REFTEMP = 300.15


def adjusted(card, temperature_c=None, simulator="ngspice"):
    """The card's parameters as the simulator rescales them to a temperature.

    ngspice (TLEV = TLEVC = 0, as our cards leave them), from the SPICE3 diode
    temperature routine:

    - IS(T) = IS exp((T/TNOM - 1) EG/(N Vt) + XTI/N ln(T/TNOM)), Vt = kT/q;
      ISR the same with NR; JSW the same with N.
    - VJ(T), CJO(T): SPICE3's law with its own band gap
      1.16 - 7.02e-4 T^2/(T + 1108) eV and a 400e-6 /K grading term; PHP and
      CJSW alike.
    - BV(T) = BV - TCV (T - TNOM); RS(T) = RS (1 + TRS1 dT + TRS2 dT^2);
      TT(T) = TT (1 + TTT1 dT + TTT2 dT^2).

    gnucap 0.36 (temperature law ``"saturation_only"``) rescales IS alone,
    with (T/TNOM)^XTI (XTI not divided by N).

    Parameters
    ----------
    card : dict
    temperature_c : float, optional
        Circuit temperature [degC]; default TNOM (no change).
    simulator : str or Simulator
        A key of :data:`SIMULATORS`; its ``temperature_law`` decides the equations.

    Returns
    -------
    dict
        All parameters, the temperature-dependent ones rescaled, with ``T``
        the temperature [K].
    """
    sim = simulator_of(simulator)
    p = _params(card)
    tnom = p["TNOM"] + 273.15
    t = tnom if temperature_c is None else temperature_c + 273.15
    p["T"] = t
    if t == tnom:
        return p
    vt = sim.boltzmann * t / sim.charge
    ratio = t / tnom
    if sim.temperature_law == "saturation_only":
        p["IS"] = p["IS"] * ratio ** p["XTI"] * np.exp(p["EG"] / (p["N"] * vt) * (ratio - 1))
        return p

    def sat(value, n):
        return value * np.exp((ratio - 1) * p["EG"] / (n * vt) + p["XTI"] / n * np.log(ratio))

    p["IS"] = sat(p["IS"], p["N"])
    p["ISR"] = sat(p["ISR"], p["NR"])
    p["JSW"] = sat(p["JSW"], p.get("NS", p["N"]))
    k, q = sim.boltzmann, sim.charge
    vtnom = k * tnom / q

    def pbfact(temp, v_t):
        egfet = 1.16 - 7.02e-4 * temp * temp / (temp + 1108)
        arg = -egfet / (2 * k * temp) + 1.1150877 / (k * 2 * REFTEMP)
        return -2 * v_t * (1.5 * np.log(temp / REFTEMP) + q * arg)

    pb_t, pb_nom = pbfact(t, vt), pbfact(tnom, vtnom)
    for cap, pot, grade in (("CJO", "VJ", "M"), ("CJSW", "PHP", "MJSW")):
        pbo = (p[pot] - pb_nom) / (tnom / REFTEMP)
        gma_old = (p[pot] - pbo) / pbo
        c = p[cap] / (1 + p[grade] * (400e-6 * (tnom - REFTEMP) - gma_old))
        p[pot] = pb_t + (t / REFTEMP) * pbo
        gma_new = (p[pot] - pbo) / pbo
        p[cap] = c * (1 + p[grade] * (400e-6 * (t - REFTEMP) - gma_new))
    dt = t - tnom
    p["BV"] = p["BV"] - p.get("TCV", 0.0) * dt
    p["RS"] = p["RS"] * (1 + p.get("TRS1", 0.0) * dt + p.get("TRS2", 0.0) * dt * dt)
    p["TT"] = p["TT"] * (1 + p.get("TTT1", 0.0) * dt + p.get("TTT2", 0.0) * dt * dt)
    return p


def _breakdown_knee(p, csat, vt):
    """The internal breakdown voltage that makes the current IBV at -BV.

    SPICE's iteration (as in SPICE3's diode temperature routine): solve
    IS (exp((BV - x)/(NBV Vt)) - 1 + x/Vt) = IBV for x.
    """
    return _knee(float(p["BV"]), float(p["IBV"]), float(p["NBV"]), float(csat), float(vt))


@lru_cache(maxsize=4096)
def _knee(bv, cbv, nbv, csat, vt):
    if not np.isfinite(bv):
        return np.inf
    if csat <= 0 or cbv < csat * bv / vt:
        return bv
    xbv = bv - nbv * vt * np.log(1 + cbv / csat)
    for _ in range(25):
        xbv = bv - nbv * vt * np.log(cbv / csat + 1 - xbv / vt)
    return xbv


def junction_current(card, vd, simulator="ngspice", gmin=None, temperature_c=None):
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
    temperature_c : float, optional
        Circuit temperature [degC]; default the card's TNOM. The parameters
        are rescaled as :func:`adjusted` says.

    Returns
    -------
    (current, bottom_conductance) : numpy.ndarray
        Current [A] and d(bottom diode current)/dV before the knee and GMIN
        [S], which is what multiplies TT in the diffusion capacitance.
    """
    s = simulator_of(simulator)
    return _junction(adjusted(card, temperature_c, s), s, s.gmin if gmin is None else gmin, vd,
                     "NS" in {k.upper() for k in card})


def _reverse_tail(csat, vte, vd):
    """SPICE3's reverse branch below -3 N Vt: -csat (1 + (3 N Vt / (e Vd))^3) and its conductance.

    Arrays broadcast together (``csat`` and ``vte`` may be columns over cards).
    """
    with np.errstate(divide="ignore", invalid="ignore"):
        arg = (3 * vte / (vd * np.e)) ** 3
    return -csat * (1 + arg), csat * 3 * arg / vd


def deep_reverse_current(is_total, n, vd, thermal_voltage, simulator="ngspice"):
    """Junction current of many cards at reverse junction voltages, vectorised over cards and biases [A].

    What the simulator's level-1 diode gives well in reverse (below -3 N Vt,
    short of breakdown; ISR is not applied there in ngspice 39, and gnucap has
    neither ISR nor the cubic tail), plus GMIN: the saturation current's
    reverse branch of :func:`junction_current`, for cards given as columns.

    Parameters
    ----------
    is_total : array_like
        Bottom plus sidewall saturation current of each card [A].
    n : array_like
        Emission coefficient N.
    vd : array_like
        Junction voltages [V], each below -3 N Vt (checked).
    thermal_voltage : array_like
        kT/q at the card's temperature with the simulator's constants [V].
    simulator : str or Simulator

    Returns
    -------
    numpy.ndarray
        [A], negative.
    """
    s = simulator_of(simulator)
    vd = np.asarray(vd, float)
    vte = np.asarray(n, float) * np.asarray(thermal_voltage, float)
    if not np.all(vd < -3 * vte):
        raise ValueError("deep_reverse_current: every bias must lie below -3 N Vt")
    csat = np.asarray(is_total, float)
    if s.reverse_tail:
        i = _reverse_tail(csat, vte, vd)[0]
    else:
        i = csat * np.expm1(vd / vte)
    return i + s.gmin * vd


def _junction(p, s, g, vd, own_sidewall_n):
    """:func:`junction_current` from parameters already rescaled (:func:`adjusted`)."""
    vd = np.asarray(vd, float)
    vt = s.boltzmann * p["T"] / s.charge
    vte = p["N"] * vt
    csat = p["IS"] * p["AREA"]
    if s.sidewall_current and not own_sidewall_n:
        csat = csat + p["JSW"] * p["PJ"]
    ev = np.exp(np.minimum(vd / vte, 700.0))
    i_fwd = csat * (ev - 1)
    g_fwd = csat * ev / vte
    if s.recombination and p["ISR"] > 0:
        i_rec, g_rec = _recombination(p["ISR"] * p["AREA"], p["NR"] * vt, p["VJ"], p["M"], vd)
        i_fwd = i_fwd + i_rec
        g_fwd = g_fwd + g_rec
    if s.reverse_tail:
        forward = vd >= -3 * vte
        i_rev, g_rev = _reverse_tail(csat, vte, vd)
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
        i = _ikf_knee(i, p["IKF"] * p["AREA"], forward & (i > 1e-18))
    return i + g * vd, gb


def _recombination(isr, vtr, vj, m, vd):
    """ngspice's recombination term ISR (exp(Vd/(NR Vt)) - 1) ((1 - Vd/VJ)^2 + 0.005)^(M/2) and its
    conductance [A], [S]; ``vtr`` = NR Vt. Arrays broadcast together."""
    er = np.exp(np.minimum(vd / vtr, 700.0))
    u = 1 - vd / vj
    t1 = u * u + 0.005
    fac = t1 ** (m / 2)
    dfac = -m * u * t1 ** (m / 2 - 1) / vj
    i_rec = isr * (er - 1)
    return i_rec * fac, isr * er / vtr * fac + i_rec * dfac


def _ikf_knee(i, ikf, kneed):
    """The high-injection knee I / (1 + sqrt(I/IKF)) where ``kneed``, I elsewhere."""
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(kneed, i / (1 + np.sqrt(np.where(kneed, i, 0.0) / ikf)), i)


def forward_current(params, vd, thermal_voltage, simulator="ngspice"):
    """Forward junction current of many cards at once, vectorised over cards [A].

    The forward branch of :func:`junction_current` (IS, the ISR term where
    the simulator has it and ISR > 0, the IKF knee where it has it and
    IKF > 0) for cards given as columns of one length with ``vd`` and
    ``thermal_voltage`` (the card's kT/q with the simulator's constants);
    without GMIN, sidewall terms (pass totals) or temperature rescaling (the
    cards at their TNOM). Valid for vd >= -3 N Vt.
    """
    s = simulator_of(simulator)
    p = {k: np.asarray(params[k], float) for k in ("IS", "N", "ISR", "NR", "VJ", "M", "IKF")}
    vd = np.asarray(vd, float)
    i = p["IS"] * (np.exp(np.minimum(vd / (p["N"] * thermal_voltage), 700.0)) - 1)
    if s.recombination:
        isr = np.nan_to_num(p["ISR"])
        i = i + np.where(isr > 0, _recombination(isr, p["NR"] * thermal_voltage, p["VJ"], p["M"], vd)[0], 0.0)
    if s.knee:
        ikf = np.nan_to_num(p["IKF"])
        i = _ikf_knee(i, np.where(ikf > 0, ikf, 1.0), (ikf > 0) & (i > 1e-18))
    return i


def dc_current(card, v, simulator="ngspice", gmin=None, iterations=200, temperature_c=None):
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
    s = simulator_of(simulator)
    p = adjusted(card, temperature_c, s)  # once, not at every bisection step
    g = s.gmin if gmin is None else gmin
    own_sidewall_n = "NS" in {k.upper() for k in card}
    rs = p["RS"] / p["AREA"]

    def current(x):
        return _junction(p, s, g, x, own_sidewall_n)[0]

    if rs == 0:
        return current(v), v
    lo, hi = np.minimum(v, 0.0), np.maximum(v, 0.0)
    for _ in range(iterations):
        mid = 0.5 * (lo + hi)
        over = mid + rs * current(mid) > v
        hi = np.where(over, mid, hi)
        lo = np.where(over, lo, mid)
        if np.all(hi - lo <= 4 * np.finfo(float).eps * np.maximum(np.abs(hi), 1e-300)):
            break
    vd = 0.5 * (lo + hi)
    return current(vd), vd


def depletion_capacitance(c0, vj, m, fc, vd):
    """SPICE's depletion capacitance law [F], arrays broadcast together.

    C0 (1 - Vd/VJ)^-M below FC VJ, and above it the linear extension
    C0 / (1 - FC)^(1+M) (1 - FC (1 + M) + M Vd / VJ): the SPICE2 diode model
    (Nagel, UCB/ERL M520, 1975, from memory), as this module evaluates it for
    the simulators it is checked against (tests/test_simulators.py).
    Valid for any Vd; ``c0`` [F], ``vj`` and ``vd`` [V], ``m`` and ``fc`` [1].
    """
    f2 = (1 - fc) ** (1 + m)
    f3 = 1 - fc * (1 + m)
    with np.errstate(invalid="ignore"):
        below = c0 * np.power(np.maximum(1 - vd / vj, 1e-300), -m)
    above = c0 / f2 * (f3 + m * vd / vj)
    return np.where(vd < fc * vj, below, above)


def capacitance(card, v, simulator="ngspice", gmin=None, temperature_c=None):
    """Small-signal junction capacitance at terminal voltage v [F].

    Depletion capacitance CJO (1 - Vd/VJ)^-M below FC VJ and SPICE's linear
    extension above it, the same for the sidewall (CJSW, PHP, MJSW, FCS, times
    PJ), plus the diffusion capacitance TT dI/dVd of the bottom diode, at the
    junction voltage of the DC solution.
    """
    p = adjusted(card, temperature_c, simulator)
    i, vd = dc_current(card, v, simulator, gmin, temperature_c=temperature_c)
    _, gb = junction_current(card, vd, simulator, gmin, temperature_c)
    c = depletion_capacitance(p["CJO"] * p["AREA"], p["VJ"], p["M"], p["FC"], vd)
    # gnucap 0.36 takes the perimeter only from the instance (default 0), never from the card
    sim = simulator_of(simulator)
    pj = p["PJ"] if sim.sidewall_current else 0.0
    if p["CJSW"] > 0 and pj > 0:
        fcs = p[sim.sidewall_capacitance_fc]
        c = c + depletion_capacitance(p["CJSW"] * pj, p["PHP"], p["MJSW"], fcs, vd)
    return c + p["TT"] * gb

"""Reverse leakage: the generation current a level-1 diode leaves out, and a source that adds it.

In reverse bias a junction's dark current is mostly the Shockley-Read-Hall
generation current of its depletion region, q ni W(V) / (2 tau) for a mid-gap
trap (Sah, Noyce & Shockley, Proc. IRE 45, 1228 (1957); Sze & Ng, *Physics of
Semiconductor Devices*, 3rd ed. 2007, sec. 2.3.3), which grows with the
depletion width. None of the targets' diode equations carry it: ngspice 39
applies ISR only above -3 N Vt (its reverse branch is IS's cubic tail),
gnucap 0.36 has no ISR, and SPICE3 has neither. A card therefore leaks IS
(often picoamperes) where the device leaks nanoamperes.

This module measures that gap and closes it where a target allows: a
behavioural current source beside the diode, inside a ``.subckt``,

    I_gen(V) = -(IG (1 - min(V, 0) / VJ)^MG - IE) (1 - exp(min(V, 0) / VG)),

zero in forward bias (where ISR carries the recombination current), with
VG = 2 kT/q (the SNS generation law's (1 - exp(qV/2kT)) for a mid-gap trap)
and VJ the card's own: the generating width is the depletion width, which
grows as (1 - V/VJ)^M with the junction's grading M, less the slices at its
edges where a carrier density is above ni, which change little with bias
(IE); a graded side whose short-lifetime part depletes as the bias grows
makes the current grow faster, so the exponent (MG, written in the place of
M) is fitted too. IG and IE are fitted by linear least squares on the
relative error for each MG of a fixed grid, and the MG with the smallest
worst error is kept, against what the physics gives beyond the card's own
reverse current over the reverse biases of the fit window. Everything here is
vectorised over devices (rows) and biases (columns).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .constants import EPS0, thermal_voltage
from .physics import generation
from .spice import evaluator

#: Number of reverse biases the source is fitted at, spread geometrically from
#: :data:`NEAREST_FRACTION` of the window's reverse bias to the whole of it.
POINTS = 7
NEAREST_FRACTION = 0.02
#: Closest the fit comes to 0 V [V]: below -3 N Vt at any temperature the tool models (700 K, N <= 2.5).
NEAREST_BIAS = -0.5
#: The card leaks too little when the physics leaks this many times more at the window's reverse bias.
FINDING_RATIO = 1.5


def reverse_biases(reverse_bias, points=POINTS):
    """Reverse biases [V] at which leakage is compared and fitted, most reverse last.

    Parameters
    ----------
    reverse_bias : float
        The fit window's reverse bias [V], negative, at most :data:`NEAREST_BIAS`.
    points : int

    Returns
    -------
    numpy.ndarray
        ``points`` biases from max(NEAREST_FRACTION * reverse_bias, ...) to ``reverse_bias``.

    Raises
    ------
    ValueError
        ``reverse_bias`` not below :data:`NEAREST_BIAS`.
    """
    vr = float(reverse_bias)
    if not vr <= NEAREST_BIAS:
        raise ValueError(f"the reverse bias of a leakage fit must be {NEAREST_BIAS:g} V or below, not {vr:g} V")
    near = min(NEAREST_FRACTION * vr, NEAREST_BIAS)
    return -np.geomspace(-near, -vr, points)


@dataclass
class Generation:
    """A fitted generation source per device (arrays over devices; SI).

    Attributes
    ----------
    IG : amplitude of the depletion-width term [A] (0: nothing to add).
    IE : the edge slices' share taken off [A].
    M : the exponent of (1 - V/VJ), fitted (MG in the text).
    VJ : the card's junction potential [V].
    VG : 2 kT/q at the card's temperature [V].
    bias : the reverse biases fitted at [V] (one row for all devices).
    physics : the physical current there [A], (devices, biases).
    card : the diode card alone there [A], (devices, biases).
    worst_error : worst relative error of card plus source against the physics
        over those biases (fraction).
    """

    IG: np.ndarray
    IE: np.ndarray
    M: np.ndarray
    VJ: np.ndarray
    VG: np.ndarray
    bias: np.ndarray
    physics: np.ndarray
    card: np.ndarray
    worst_error: np.ndarray

    def source(self, v):
        """The source's current at junction biases ``v`` [A], (devices, biases)."""
        col = lambda a: np.asarray(a, float)[:, None]  # noqa: E731
        return source_current(col(self.IG), col(self.IE), col(self.M), col(self.VJ), col(self.VG),
                              np.asarray(v, float)[None, :])

    def values(self):
        """The source's numbers by name (arrays over devices), for the renderer."""
        return {"IG": self.IG, "IE": self.IE, "M": self.M, "VJ": self.VJ, "VG": self.VG}


def source_current(ig, ie, m, vj, vg, v):
    """I_gen(V) = -(IG (1 - min(V,0)/VJ)^MG - IE) (1 - exp(min(V,0)/VG)) [A], zero for V >= 0.

    The generating width W(V) - W_edges of the module docstring, W(V)
    following the card's own depletion law. Arrays broadcast together.
    """
    vr = np.minimum(np.asarray(v, float), 0.0)
    return (ig * (1.0 - vr / vj) ** m - ie) * np.expm1(vr / vg)


def card_reverse_current(params, bias, temperature, simulator="ngspice"):
    """What each card's diode gives at reverse biases below -3 N Vt, vectorised [A], (devices, biases).

    ``params``: card parameters as columns over devices (IS, N, and JSW where
    the target splits the sidewall off), as
    :func:`modelgen.cards.render.card_columns` gives them; ``temperature``
    the card's temperature [K]. Series resistance is left out: at reverse
    leakage currents its drop is negligible.
    """
    sim = evaluator.simulator_of(simulator)
    is_total = np.asarray(params["IS"], float)
    jsw = params.get("JSW")
    if jsw is not None and sim.sidewall_current:
        is_total = is_total + np.nan_to_num(np.asarray(jsw, float))
    vt = sim.boltzmann * np.asarray(temperature, float) / sim.charge
    return evaluator.deep_reverse_current(is_total[:, None], np.asarray(params["N"], float)[:, None],
                                          np.asarray(bias, float)[None, :], vt[:, None], sim)


#: Exponents of (1 - V/VJ) the fit tries: from a nearly constant generating width to one that grows
#: faster than any depletion law (a graded side whose short-lifetime part depletes as the bias grows).
EXPONENTS = np.round(np.arange(0.05, 3.0001, 0.025), 6)


def _amplitudes(y, f, g, use):
    """IG, IE minimising sum (I_gen / y - 1)^2 for fixed exponent terms f (devices, biases), vectorised."""
    with np.errstate(divide="ignore", invalid="ignore"):
        a = np.where(use, f * g / y, 0.0)
        b = np.where(use, -g / y, 0.0)
    saa, sab, sbb = (a * a).sum(1), (a * b).sum(1), (b * b).sum(1)
    sa, sb = a.sum(1), b.sum(1)
    det = saa * sbb - sab * sab
    with np.errstate(divide="ignore", invalid="ignore"):
        ok = det > 1e-12 * saa * sbb
        ig = np.where(ok, (sa * sbb - sb * sab) / det, 0.0)
        ie = np.where(ok, (sb * saa - sa * sab) / det, 0.0)
        bad = ~((ie >= 0) & (ie <= ig))
        # no edge term: one parameter, IG = sum(a) / sum(a^2)
        ig = np.where(bad, np.where(saa > 0, sa / saa, 0.0), ig)
    ie = np.where(bad, 0.0, ie)
    return np.where(use.any(1), np.maximum(ig, 0.0), 0.0), ie


def fit(bias, physics, card, vj, temperature):
    """Fit IG, IE and MG of the source to the leakage the card lacks, per device (vectorised).

    For each exponent MG of :data:`EXPONENTS`, IG and IE minimise the sum over
    biases of (I_gen / excess - 1)^2, excess = physics - card, which is linear
    in (IG, IE) and solved in closed form (2 x 2 normal equations per
    device); each device keeps the exponent whose worst relative error of
    card plus source against the physics is smallest. A device whose card
    already leaks as much as the physics everywhere gets IG = IE = 0; IE is
    kept between 0 and IG so the source never flows forward.

    Parameters
    ----------
    bias : array_like
        Reverse biases [V], (biases,).
    physics, card : array_like
        Physical and card currents [A], (devices, biases), negative.
    vj : array_like
        The card's VJ [V], (devices,).
    temperature : array_like
        [K], (devices,).

    Returns
    -------
    Generation
    """
    bias = np.asarray(bias, float)[None, :]
    physics = np.asarray(physics, float)
    card = np.asarray(card, float)
    vj = np.asarray(vj, float)
    vg = 2.0 * thermal_voltage(np.asarray(temperature, float))
    y = card - physics                                   # the missing leakage, positive where missing
    use = y > 0
    g = -np.expm1(bias / vg[:, None])
    base = np.log1p(-bias / vj[:, None])                 # ln(1 - V/VJ)
    n = len(vj)
    best = np.full(n, np.inf)
    ig = np.zeros(n)
    ie = np.zeros(n)
    mg = np.zeros(n)
    for m in EXPONENTS:  # a fixed grid, the same for every device
        f = np.exp(m * base)
        a, e = _amplitudes(y, f, g, use)
        total = card - (a[:, None] * f - e[:, None]) * g
        worst = np.max(np.abs(total / physics - 1.0), axis=1)
        better = worst < best
        best = np.where(better, worst, best)
        ig, ie, mg = np.where(better, a, ig), np.where(better, e, ie), np.where(better, m, mg)
    return Generation(IG=ig, IE=ie, M=mg, VJ=vj, VG=vg, bias=bias[0], physics=physics, card=card,
                      worst_error=best)


def closed_physics(result, bias):
    """The closed forms' reverse current at biases below -3 Vt [A], (devices, biases).

    Diffusion IS (exp(V/Vt) - 1) plus the depletion region's generation
    current (:func:`modelgen.physics.generation.generation_current_density`)
    over the junction area, with the closed forms' trap lifetime
    (``recombination_lifetime``), ni and depletion-approximation field.
    """
    d = result.device
    derived = result.derived
    t = derived["temperature"]
    col = lambda a: np.asarray(a, float)[:, None]  # noqa: E731  (devices down, biases across)
    b = np.asarray(bias, float)[None, :]
    tau = col(derived["recombination_lifetime"])
    j_gen = generation.generation_current_density(
        b, col(result.params["VJ"]), col(derived["p"]["doping"]), col(derived["n"]["doping"]),
        col(np.where(d.linear, d.grading, 1.0)), np.asarray(d.linear, bool)[:, None], col(derived["ni"]),
        col(d.relative_permittivity * EPS0), tau, tau, col(t))
    return col(result.params["IS"]) * np.expm1(b / col(thermal_voltage(t))) + col(derived["junction_area"]) * j_gen


def closed_form(result, params, reverse_bias, simulator="ngspice"):
    """The generation source fitted to the closed forms' reverse current (:func:`closed_physics`).

    Parameters
    ----------
    result : modelgen.extraction.Result
    params : dict
        The cards' parameters as columns (IS, N, VJ, and JSW where split).
    reverse_bias : float
        The fit window's reverse bias [V].
    simulator : str

    Returns
    -------
    Generation
    """
    bias = reverse_biases(reverse_bias)
    t = result.derived["temperature"]
    return fit(bias, closed_physics(result, bias), card_reverse_current(params, bias, t, simulator),
               params["VJ"], t)


def header_lines(sources, against="the closed forms"):
    """File-header lines that say what the ``.subckt`` form adds, how well, and how to use it."""
    worst = max(float(np.max(g.worst_error)) for g in sources)
    lo = min(float(g.bias[0]) for g in sources)
    hi = min(float(g.bias[-1]) for g in sources)
    gmin = evaluator.simulator_of("ngspice").gmin
    return (
        "subcircuit form: each card is a .subckt NAME a k holding the diode D1 and a behavioural source B1 for "
        "the depletion region's reverse generation current, which no level-1 diode carries (ngspice applies "
        "ISR only above -3 N Vt); use it as X1 anode cathode NAME",
        f"B1 = -(IG (1 - V/VJ)^MG - IE) (1 - exp(V/VG)) for V < 0, zero in forward bias; fitted from {lo:.3g} V "
        f"to {hi:.3g} V against {against}, worst error {100 * worst:.2g} %; it holds at TNOM only "
        "(no temperature scaling)",
        f"the fit counts ngspice's default GMIN ({gmin:g} S across the junction, {gmin * abs(hi) * 1e12:.3g} pA at "
        f"{hi:.3g} V) as part of the leakage: a run with a smaller .options gmin sees up to that much less",
    )

"""Cards fitted to the drift-diffusion solver over a bias window.

The closed-form card (:mod:`modelgen.extraction`) is exact where its
assumptions hold: low injection, diffusion current from the neutral regions,
ohmic regions of fixed resistance. Outside that window it drifts: at low
forward bias the depletion-region recombination dominates, at high injection
the lighter side floods and the current grows as exp(V / 2 Vt), a thick
lightly doped region is conductivity modulated (its resistance falls with
current), and in reverse the generation current of the depletion region
outgrows IS. This module

1. runs the solver (:mod:`modelgen.physics.driftdiffusion`) over a
   :class:`Window` (:func:`sweep`): forward I-V up to the window's top
   current, reverse I-V, C-V, stored charge, the current split by mechanism,
   and each forward point's region;
2. fits the card parameters the target carries to that sweep in the target
   simulator's own equations (:mod:`modelgen.spice.evaluator`) (:func:`fit`);
3. says where a card departs from the physics (:func:`errors_of`,
   :func:`comparison`), with warnings where no card of the target can follow
   it (conductivity modulation, reverse generation).

One device at a time: the solver is.

The solver solves the total junction area (bottom plus sidewall, as one
1-D junction), so the fit gives totals. Where the target has its own
sidewall terms (JSW, CJSW) the fitted totals are split in the closed forms'
ratio of sidewall to total area by :func:`modelgen.cards.render.card_columns`,
which is exact here: the sidewall has the bottom junction's physics per area.
ISR and IKF have no sidewall counterpart on the card and are totals.

References
----------
L. W. Nagel, SPICE2, ERL-M520, UC Berkeley (1975); the ngspice manual's diode
section (the card equations, through the evaluator).
C. T. Sah, R. N. Noyce and W. Shockley, Proc. IRE 45, 1228 (1957)
(depletion-region recombination and generation).
S. M. Sze and K. K. Ng, *Physics of Semiconductor Devices*, 3rd ed., Wiley
2007, ch. 2 (high injection, depletion capacitance); B. J. Baliga,
*Fundamentals of Power Semiconductor Devices*, Springer 2008, ch. 5
(conductivity modulation of the drift region of a p-i-n rectifier).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from scipy.optimize import least_squares

from . import leakage, structures, targets
from .cards.render import card_values
from .constants import thermal_voltage
from .errors import InputError
from .extraction import LEAKAGE_BIAS, Message
from .physics import driftdiffusion
from .spice import evaluator

#: Forward points are this many thermal voltages apart (divided by ``refine``).
STEP_VT = 1.0
#: Where the default window starts: this many thermal voltages of forward bias, where exp(V / (N Vt)) - 1
#: has become an exponential (the closed forms' ISR/NR fit starts there too), below any current at which
#: depletion-region recombination dominates.
LOW_BIAS_VT = 4.0
#: A forward point is "recombination" where the depletion-region SRH is at least this share of the current.
RECOMBINATION_SHARE = 0.5
#: A forward point is "high injection" where the minority density at the lighter side's depletion edge
#: is at least this fraction of its doping (Sze & Ng 2007, ch. 2: high injection begins where the
#: injected minority density approaches the majority doping; 10 % is where the current departs
#: from exp(V/Vt) by a few per cent, common practice).
HIGH_INJECTION = 0.1
#: Worst relative error inside the window above which a region gets a warning.
TOLERANCE = 0.05
#: Departure of the physics from the fitted card's constant RS that gets a warning [-].
RS_DEPARTURE = 0.10
#: A fitted RS whose drop at the window's top current is below this many thermal voltages is written 0.
NEGLIGIBLE_DROP = 1e-3
#: The card's reverse current this many times below the physics gets a leakage warning.
LEAKAGE_FACTOR = 10.0
#: Capacitance points whose diffusion part (dQ/dV of the stored charge) is below this share
#: of the total are taken as depletion capacitance alone for the CJO/VJ/M fit.
DIFFUSION_SHARE = 0.01
#: A window reaching this share of the closed forms' breakdown voltage gets a warning (the solver
#: has no impact ionisation; multiplication is a few per cent at 80 % of BV, Sze & Ng 2007, ch. 2).
BREAKDOWN_SHARE = 0.8
#: Bounds of the fitted ideality factors (N, NR) [-] (common practice: 1 for diffusion,
#: 2 for midgap recombination and high injection; a little room beyond).
IDEALITY_BOUNDS = (1.0, 2.5)
#: Bounds of the fitted VJ [V] and M [-].
VJ_BOUNDS = (0.1, 2.0)
M_BOUNDS = (0.1, 1.0)


class WindowError(InputError, ValueError):
    """A fit window that cannot be used (located by file, row and key when it came from a description)."""


def _check(ok, message, key):
    if not ok:
        raise WindowError(message, key=key)


@dataclass(frozen=True)
class Window:
    """Where a fitted card must hold (SI).

    Attributes
    ----------
    current_low, current_high : float
        Forward current range [A]; default from the bias of :data:`LOW_BIAS_VT`
        thermal voltages (``current_low`` 0: whatever current that is, so the
        recombination region of any device size is inside) to 100 mA.
    voltage_cap : float
        Forward terminal voltage where the sweep stops even if the top
        current is not reached [V].
    reverse_bias : float
        Most reverse terminal bias of the reverse I-V and of the leakage [V] (< 0).
    capacitance_low, capacitance_high : float
        Bias range of the C-V [V].
    """

    current_low: float = 0.0
    current_high: float = 0.1
    voltage_cap: float = 1.5
    reverse_bias: float = LEAKAGE_BIAS
    capacitance_low: float = -5.0
    capacitance_high: float = 0.3

    def __post_init__(self):
        self.validate()

    def validate(self):
        """Raise :class:`WindowError` (keyed ``fit.*``) on a window that cannot be swept."""
        for name in ("current_low", "current_high", "voltage_cap", "reverse_bias", "capacitance_low",
                     "capacitance_high"):
            v = getattr(self, name)
            _check(isinstance(v, (int, float)) and math.isfinite(v), f"must be a finite number, got {v!r}",
                   f"fit.{name}")
        _check(self.current_low >= 0, f"the forward current range must be positive, got {self.current_low:g} A",
               "fit.current_low")
        _check(self.current_low < self.current_high,
               f"the low current ({self.current_low:g} A) must be below the high current ({self.current_high:g} A)",
               "fit.current_low")
        _check(self.current_high <= 1e4, f"a top current of {self.current_high:g} A is beyond any diode",
               "fit.current_high")
        _check(0.1 <= self.voltage_cap <= 10.0,
               f"the forward voltage cap must be within 0.1 .. 10 V, got {self.voltage_cap:g} V", "fit.voltage_cap")
        _check(self.reverse_bias < 0, f"the reverse bias must be negative, got {self.reverse_bias:g} V",
               "fit.reverse_bias")
        _check(self.capacitance_low < self.capacitance_high,
               f"the capacitance range's low end ({self.capacitance_low:g} V) must be below its high end "
               f"({self.capacitance_high:g} V)", "fit.capacitance_low")
        _check(self.capacitance_high <= 0.5,
               f"the capacitance range must stay below 0.5 V forward (diffusion charge), got "
               f"{self.capacitance_high:g} V", "fit.capacitance_high")
        _check(self.capacitance_low >= -1e4 and self.reverse_bias >= -1e4, "reverse biases beyond -10 kV",
               "fit.reverse_bias")

    @classmethod
    def from_device(cls, device, i):
        """The window of device ``i``: its optional ``fit_*`` fields, NaN (or absent) meaning the default.

        Reads ``fit_current_low``, ``fit_current_high``, ``fit_reverse_bias``,
        ``fit_capacitance_low`` and ``fit_capacitance_high`` (SI; a Device
        without these fields gets the default window).

        Raises
        ------
        WindowError
            (an :class:`~modelgen.errors.InputError` and a ValueError) naming
            the device's file, row and the ``fit.*`` key.
        """
        default = cls()
        values = {}  # absent or NaN: the default
        for name in ("current_low", "current_high", "reverse_bias", "capacitance_low", "capacitance_high"):
            column = getattr(device, "fit_" + name, None)
            v = np.nan if column is None else float(np.asarray(column, float)[i])
            values[name] = getattr(default, name) if math.isnan(v) else v
        try:
            return cls(**values)
        except WindowError as e:
            raise e.located(file=_at(getattr(device, "source", ()), i), row=_at(getattr(device, "line", ()), i)) from None


def _low(w):
    """The window's low end as text: a current, or the default's bias."""
    return f"{LOW_BIAS_VT:g} Vt" if w.current_low == 0 else _si(w.current_low, "A")


def _at(seq, i):
    return seq[i] if len(seq) > i else None


@dataclass
class Sweep:
    """The solver's physics of one device over a window (SI; arrays over bias points).

    Attributes
    ----------
    window : Window
    temperature : float
        [K].
    forward_bias, forward_current : terminal voltage [V] and current [A] of the forward I-V,
        from near 0 up to the first point past the window's top current (or the voltage cap).
    components : dict of [A] per forward point: 'srh_depletion', 'srh_neutral', 'auger',
        'surface_p', 'surface_n', 'diffusion' (all but 'srh_depletion').
    stored_charge : excess minority charge in the neutral regions [C] per forward point.
    junction_voltage : quasi-Fermi split at the junction [V] per forward point.
    injection : minority density over doping at the lighter side's depletion edge [-].
    region : 'recombination', 'high injection' or 'ideal' per forward point.
    in_window : forward points inside the window's current range.
    reverse_bias, reverse_current : the reverse I-V [V], [A] (current negative).
    cv_bias, capacitance : the C-V [V], [F] (the solver's quasi-static dQ/dV).
    cv_diffusion : an upper estimate of the diffusion part of the C-V, |stored charge| / Vt [F].
    stopped : why the forward sweep ended: 'current' (past the window's top), 'voltage cap', or
        'solver' (the solver did not converge at a higher bias).
    contact_resistance : [ohm] added to the solver's bias for the terminal voltage (0 when the
        solver reports its own terminal bias).
    """

    window: Window
    temperature: float
    forward_bias: np.ndarray
    forward_current: np.ndarray
    components: dict
    stored_charge: np.ndarray
    junction_voltage: np.ndarray
    injection: np.ndarray
    region: np.ndarray
    in_window: np.ndarray
    reverse_bias: np.ndarray
    reverse_current: np.ndarray
    cv_bias: np.ndarray
    capacitance: np.ndarray
    cv_diffusion: np.ndarray
    stopped: str
    contact_resistance: float = 0.0

    def mask(self, region):
        """Forward points of ``region`` inside the window (bool array)."""
        return self.in_window & (self.region == region)

    @property
    def leakage(self):
        """The physical reverse current at the window's reverse bias [A] (positive)."""
        return float(-self.reverse_current[np.argmin(self.reverse_bias)])


def _thermal_voltage(t):
    return float(thermal_voltage(t))


def _closed_card(result, i):
    """The closed-form parameters of row ``i`` in the ngspice equations (the sweep's voltage guess)."""
    p = {k: float(result.params[k][i]) for k in ("IS", "N", "ISR", "NR", "IKF", "RS", "VJ", "M")}
    return {k: v for k, v in p.items() if np.isfinite(v)}


def _voltage_at(card, current, cap, simulator="ngspice"):
    """Terminal voltage at which ``card`` carries ``current`` (bisection in [0, cap]) [V]."""
    lo, hi = 0.0, float(cap)
    if evaluator.dc_current(card, hi, simulator, gmin=0.0)[0] < current:
        return hi
    for _ in range(25):  # to 0.1 mV: a guess
        mid = 0.5 * (lo + hi)
        if evaluator.dc_current(card, mid, simulator, gmin=0.0)[0] < current:
            lo = mid
        else:
            hi = mid
    return hi


#: The equilibrium field, as a share of its peak, below which a node counts as outside the depletion region
#: (a graded neutral region's built-in field, Vt / L for a doping that changes over L, stays below it).
EDGE_FIELD = 0.1


def _lighter_edge_injection(sol, structure):
    """Minority density over doping at the lighter side's depletion edge, per bias [-].

    Each side's doping is its net doping at its equilibrium depletion edge:
    the first node, walking from the junction outwards, where the majority
    density is within a factor two of the net doping and the equilibrium
    field has fallen below :data:`EDGE_FIELD` of its peak (so that a graded
    profile's compensated nodes at the junction, where the majority density
    can match a tiny net doping inside the depletion region, and a contact
    layer beyond a lightly doped region, do not count). The lighter side is the side with
    the smaller; at each bias its depletion edge is the first node outwards
    where the majority density is at least half the net doping and the net
    doping at least half the side's (the solver's own split of depletion and
    neutral nodes). Where no such node is left the side is flooded (inf).
    """
    m = sol.mesh
    c = structure.profile(m.x)
    k = m.junction
    eq_n, eq_p = np.exp(m.equilibrium[:, 1]) * m.c0, np.exp(m.equilibrium[:, 2]) * m.c0
    field = np.abs(np.diff(m.equilibrium[:, 0]) / np.diff(m.x))  # |E| / Vt on the edges
    at_node = np.concatenate([field[:1], np.maximum(field[:-1], field[1:]), field[-1:]])
    outside = at_node < EDGE_FIELD * field.max()
    sides = []
    for nodes, major_eq, sign in ((np.arange(k, -1, -1), eq_p, -1.0), (np.arange(k, len(c)), eq_n, 1.0)):
        dop = sign * c[nodes]
        edge = (dop > 0) & (major_eq[nodes] >= 0.5 * dop) & (major_eq[nodes] <= 2.0 * dop) & outside[nodes]
        sides.append((nodes, dop, float(dop[np.argmax(edge)]) if edge.any() else np.inf))
    (nodes, dop, doping), lighter_p = min(sides[0], sides[1], key=lambda t: t[2]), sides[0][2] <= sides[1][2]
    major, minor = (sol.p, sol.n) if lighter_p else (sol.n, sol.p)
    major, minor = major[:, nodes], minor[:, nodes]
    neutral = ((dop >= 0.5 * doping)[None, :]) & (major >= 0.5 * dop[None, :])
    first = np.argmax(neutral, axis=1)
    rows = np.arange(len(first))
    return np.where(neutral[rows, first], minor[rows, first] / doping, np.inf)


def sweep(result, i, window=None, refine=1.0, structure=None):
    """The solver's I-V, C-V, stored charge and current split of row ``i`` over ``window``.

    Forward biases are :data:`STEP_VT` thermal voltages apart (divided by
    ``refine``) from one step above 0 until the current passes the window's
    top (or the terminal voltage its cap); the reverse I-V has -0.1 and
    -0.25 V and the seven biases of :func:`modelgen.leakage.reverse_biases`
    (from -0.5 V to the window's reverse bias, where the ``.subckt`` form's
    source is fitted), or six points from -0.1 V when the window stops short
    of -0.5 V; the C-V twelve over the
    capacitance range. Each forward point is put in a region:
    'recombination' (the depletion-region SRH at least
    :data:`RECOMBINATION_SHARE` of the current), 'high injection' (the
    minority density at the lighter side's depletion edge at least
    :data:`HIGH_INJECTION` of its doping; Sze & Ng 2007, ch. 2), else
    'ideal'.

    Parameters
    ----------
    result : modelgen.extraction.Result
    i : int
        Row.
    window : Window, optional
        Default :class:`Window` ().
    refine : float
        Density multiplier of the solver's mesh and of the forward bias grid (1 = working).
    structure : modelgen.physics.driftdiffusion.Structure, optional
        Solved instead of :func:`modelgen.structures.structure_for` of the
        row, e.g. a profile with more layers than the description gives
        (the closed-form card still comes from ``result``).

    Returns
    -------
    Sweep

    Raises
    ------
    modelgen.physics.driftdiffusion.SolverError
        The solver did not converge at a reverse or C-V bias, or at no
        forward bias (a failure higher up ends the forward sweep there:
        ``stopped`` is 'solver').

    Notes
    -----
    The terminal voltage is the solver's ``terminal_bias`` where the
    Solution has one; otherwise the solver's bias plus the device's contact
    resistance times the current. Valid where the solver is: steady state,
    Boltzmann statistics, reverse biases short of breakdown.
    """
    window = Window() if window is None else window
    s = structures.structure_for(result, i) if structure is None else structure
    vt = _thermal_voltage(s.temperature)
    step = STEP_VT * vt / float(refine)
    rc = float(np.nan_to_num(np.asarray(result.device.contact_resistance, float)[i]))
    mesh = driftdiffusion.make_mesh(s, refine=refine, reverse_to=min(window.reverse_bias, window.capacitance_low))
    if window.reverse_bias <= leakage.NEAREST_BIAS:  # the leakage source's biases, and two nearer 0 V
        reverse = np.concatenate([[-0.1, -0.25], leakage.reverse_biases(window.reverse_bias)])
    else:
        reverse = -np.geomspace(0.1, -window.reverse_bias, 6)
    cv = np.linspace(window.capacitance_low, window.capacitance_high, 12)
    guess = _voltage_at(_closed_card(result, i), window.current_high, window.voltage_cap)
    top = min(window.voltage_cap, guess + 6 * vt)
    grid = np.arange(1, int(np.ceil(top / step)) + 1) * step

    def terminal(sol):
        tb = getattr(sol, "terminal_bias", None)
        return np.asarray(tb, float) if tb is not None else sol.bias + sol.current * rc

    def solve(forward, extra=(), want=None):
        biases = np.concatenate([forward, *extra])
        want = np.zeros(len(biases), bool) if want is None else np.concatenate([np.zeros(len(forward), bool), want])
        return driftdiffusion.solve(s, biases, mesh=mesh, capacitance=want)

    # reverse and C-V ride along with the first forward piece; if the solver fails anywhere in that
    # piece, they are solved alone and the forward sweep goes on in pieces
    tail = np.concatenate([np.zeros(len(reverse), bool), np.ones(len(cv), bool)])
    try:
        first = solve(grid, (reverse, cv), tail)
    except driftdiffusion.SolverError:
        grid = grid[:0]
        first = solve(grid, (reverse, cv), tail)
    parts = [(first, np.arange(len(grid)))] if len(grid) else []
    failed = None
    # extend until the current passes the top or the terminal voltage passes the cap
    while True:
        if parts:
            sol, idx = parts[-1]
            last_v, last_i = terminal(sol)[idx[-1]], sol.current[idx[-1]]
            if last_i >= window.current_high or last_v >= window.voltage_cap:
                break
            start = sol.bias[idx[-1]]
        else:
            start = 0.0
        more = start + np.arange(1, max(round(0.2 / step), 2) + 1) * step
        try:
            parts.append((solve(more), np.arange(len(more))))
        except driftdiffusion.SolverError:
            failed = float(more[-1])
            break
    if not parts:
        raise driftdiffusion.SolverError(f"no forward bias up to {failed:.3g} V converged")

    def pick(get):
        return np.concatenate([get(sol)[idx] for sol, idx in parts])

    vf, cur = pick(terminal), pick(lambda sol: sol.current)
    area = s.area
    comps = {k: np.concatenate([sol.components[k][idx] for sol, idx in parts]) * area for k in first.components}
    stored = pick(lambda sol: sol.stored_charge) * area
    vjn = pick(lambda sol: sol.junction_voltage)
    inj = np.concatenate([_lighter_edge_injection(sol, s)[idx] for sol, idx in parts])
    # keep up to the first point past the top current, and nothing past the voltage cap
    over = np.flatnonzero(cur >= window.current_high)
    keep = np.arange(len(vf)) <= (over[0] if len(over) else len(vf))
    keep &= vf <= window.voltage_cap * (1 + 1e-12)
    stopped = "current" if len(over) and keep[over[0]] else "solver" if failed is not None else "voltage cap"
    vf, cur, stored, vjn, inj = vf[keep], cur[keep], stored[keep], vjn[keep], inj[keep]
    comps = {k: v[keep] for k, v in comps.items()}
    if not (np.all(np.isfinite(cur)) and np.all(np.isfinite(vf))):
        raise driftdiffusion.SolverError("non-finite current in the forward sweep")
    region = np.where(comps["srh_depletion"] >= RECOMBINATION_SHARE * cur, "recombination", "ideal").astype(object)
    region[inj >= HIGH_INJECTION] = "high injection"
    in_window = (cur >= window.current_low * (1 - 1e-12)) & (cur <= window.current_high * (1 + 1e-12))
    if window.current_low == 0:  # the default: from LOW_BIAS_VT thermal voltages up, the whole recombination region
        in_window &= vf >= LOW_BIAS_VT * vt * (1 - 1e-9)
    nr = len(grid)
    rsel = np.arange(nr, nr + len(reverse))
    csel = np.arange(nr + len(reverse), nr + len(reverse) + len(cv))
    ccv = first.capacitance[csel]
    # diffusion part: the stored charge grows as exp(V / (n Vt)), n >= 1, so |Q| / Vt bounds dQ/dV
    cdiff = np.abs(first.stored_charge[csel] * area) / vt
    return Sweep(window=window, temperature=float(s.temperature), forward_bias=vf, forward_current=cur,
                 components=comps, stored_charge=stored, junction_voltage=vjn, injection=inj,
                 region=np.asarray(region, dtype="U14"), in_window=in_window,
                 reverse_bias=terminal(first)[rsel], reverse_current=first.current[rsel], cv_bias=cv,
                 capacitance=ccv, cv_diffusion=cdiff, stopped=stopped,
                 contact_resistance=0.0 if hasattr(first, "terminal_bias") else rc)


# --------------------------------------------------------------------------- card evaluation

#: The forward regions, in the order errors and findings list them.
FORWARD_REGIONS = ("recombination", "ideal", "high injection")
#: The DC parameters the fit may choose, in fit order (those the target carries).
DC_PARAMETERS = ("IS", "N", "ISR", "NR", "IKF", "RS")
_LOG = {"IS", "ISR", "IKF", "RS"}  # fitted as logarithms (positive)
_BOUNDS = {"IS": (1e-45, 1.0), "ISR": (1e-45, 1.0), "IKF": (1e-9, 1e5), "RS": (1e-6, 1e6),
           "N": IDEALITY_BOUNDS, "NR": IDEALITY_BOUNDS}
#: Card parameters that carry a sidewall share where the target splits it: total -> (bottom, sidewall).
_SPLIT = {"IS": "JSW", "CJO": "CJSW"}


def _simulator(dialect):
    return targets.get(dialect).simulator


def _with(card, values):
    """``card`` with the totals in ``values`` put in, each split like the card's own bottom/sidewall pair."""
    out = dict(card)
    for k, v in values.items():
        side = _SPLIT.get(k)
        if side in out:
            total = out[k] + out[side]
            share = out[side] / total if total > 0 else 0.0
            out[k], out[side] = v * (1 - share), v * share
        else:
            out[k] = v
    return out


def _forward_current(card, v, sim):
    """The card's terminal current at terminal voltages ``v`` [A] (the device's own: no GMIN)."""
    return evaluator.dc_current(card, v, sim, gmin=0.0)[0]


def _relative(a, b):
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.abs(np.asarray(a, float) / np.asarray(b, float) - 1.0)


def _card_points(card, sweep, sim):
    """The card's forward (window), reverse and C-V values at the sweep's points."""
    w = sweep.in_window
    fwd = _forward_current(card, sweep.forward_bias[w], sim)
    rev = _forward_current(card, sweep.reverse_bias, sim)
    cap = evaluator.capacitance(card, sweep.cv_bias, sim, gmin=0.0)
    return fwd, rev, cap


def errors_of(card, sweep, dialect):
    """The worst relative error of ``card`` against the physics of ``sweep``, per region.

    The card is evaluated in the equations of the simulator that stands for
    ``dialect`` (:mod:`modelgen.spice.evaluator`), without GMIN (the
    simulator adds GMIN V to every junction; 1e-12 S in ngspice, 5e-13 A at
    0.5 V, below 0.05 % of the window's default 1 nA).

    Parameters
    ----------
    card : dict
        Card parameters as the dialect carries them (:func:`modelgen.cards.render.card_values`).
    sweep : Sweep
    dialect : str

    Returns
    -------
    dict
        Region -> worst |I_card / I_physics - 1| over its points inside the
        window: 'recombination', 'ideal', 'high injection' (forward, by
        region), 'reverse' (the reverse I-V), 'capacitance' (the C-V, against
        C_card / C_physics); regions without points are left out.
    """
    sim = _simulator(dialect)
    fwd, rev, cap = _card_points(card, sweep, sim)
    err = _relative(fwd, sweep.forward_current[sweep.in_window])
    region = sweep.region[sweep.in_window]
    out = {r: float(err[region == r].max()) for r in FORWARD_REGIONS if np.any(region == r)}
    out["reverse"] = float(_relative(rev, sweep.reverse_current).max())
    out["capacitance"] = float(_relative(cap, sweep.capacitance).max())
    return out


@dataclass
class Comparison:
    """A table of the physics against cards: ``columns`` names, ``rows`` tuples of numbers.

    Columns: 'bias' [V], 'region', 'physics' [A], then per card '<name>' [A] and
    '<name> error' [-] (|I_card / I_physics - 1|); the window's forward points
    then the reverse ones.
    """

    columns: tuple
    rows: list


def comparison(sweep, cards, dialect):
    """The physics and each card's current at the sweep's window points, for a table.

    Parameters
    ----------
    sweep : Sweep
    cards : dict
        Name -> card parameters (as :func:`errors_of` takes them).
    dialect : str
        Whose simulator's equations evaluate the cards.

    Returns
    -------
    Comparison
    """
    sim = _simulator(dialect)
    w = sweep.in_window
    bias = np.concatenate([sweep.forward_bias[w], sweep.reverse_bias])
    region = list(sweep.region[w]) + ["reverse"] * len(sweep.reverse_bias)
    phys = np.concatenate([sweep.forward_current[w], sweep.reverse_current])
    cols = ["bias", "region", "physics"]
    data = [bias, region, phys]
    for name, card in cards.items():
        i = _forward_current(card, bias, sim)
        cols += [name, f"{name} error"]
        data += [i, _relative(i, phys)]
    rows = [tuple(x if isinstance(x, str) else float(x) for x in row) for row in zip(*data)]
    return Comparison(columns=tuple(cols), rows=rows)


def _voltage_for(card, current, sim):
    """The card's terminal voltage at forward ``current`` [V]: junction voltage by bisection, plus RS I."""
    p = evaluator.adjusted(card, None, sim)
    lo, hi = np.zeros_like(current), np.full_like(current, 5.0)
    for _ in range(80):
        mid = 0.5 * (lo + hi)
        below = evaluator.junction_current(card, mid, sim, gmin=0.0)[0] < current
        lo, hi = np.where(below, mid, lo), np.where(below, hi, mid)
    return 0.5 * (lo + hi) + p["RS"] / p["AREA"] * current


# --------------------------------------------------------------------------- the fit


@dataclass
class Fitted:
    """A card fitted to a sweep, and how well it and the closed-form card hold.

    Attributes
    ----------
    dialect : str
    params : dict
        The fitted values (totals over bottom and sidewall), usable as
        ``overrides`` for :func:`modelgen.cards.render.card_columns` and
        ``card_values``: the DC parameters the target carries, CJO, VJ, M, TT.
    card, closed_card : dict
        The fitted and the closed-form card as the dialect carries them.
    errors, closed_errors : dict
        :func:`errors_of` of each card.
    findings : list of modelgen.extraction.Message
        (severity 'note' or 'warning', kind, text).
    leakage : float
        The physical reverse current at the window's reverse bias [A] (positive).
    card_leakage : float
        What the fitted card gives there [A] (positive; without GMIN).
    """

    dialect: str
    params: dict
    card: dict
    closed_card: dict
    errors: dict
    closed_errors: dict
    findings: list = field(default_factory=list)
    leakage: float = np.nan
    card_leakage: float = np.nan


def _fit_capacitance(template, sweep, sim):
    """CJO, VJ, M by least squares on ln C over the C-V points without diffusion charge (FC kept)."""
    use = sweep.cv_diffusion < DIFFUSION_SHARE * sweep.capacitance
    if use.sum() < 3:
        return {}
    v, c = sweep.cv_bias[use], sweep.capacitance[use]
    base = {k: template[k] for k in ("FC", "TNOM") if k in template}

    def model(x):
        return evaluator.capacitance({**base, "CJO": math.exp(x[0]), "VJ": x[1], "M": x[2]}, v, sim, gmin=0.0)

    total = template["CJO"] + template.get("CJSW", 0.0)
    x0 = [math.log(total), float(np.clip(template["VJ"], *VJ_BOUNDS)), float(np.clip(template["M"], *M_BOUNDS))]
    lo = [math.log(total) - 5, VJ_BOUNDS[0], M_BOUNDS[0]]
    hi = [math.log(total) + 5, VJ_BOUNDS[1], M_BOUNDS[1]]
    x0 = np.clip(x0, np.nextafter(lo, hi), np.nextafter(hi, lo))
    r = least_squares(lambda x: np.log(model(x) / c), x0, bounds=(lo, hi), x_scale=[1.0, 0.1, 0.05])
    return {"CJO": math.exp(r.x[0]), "VJ": float(r.x[1]), "M": float(r.x[2])}


def _fit_dc(template, names, sweep, sim):
    """The DC parameters ``names`` by least squares on ln I over the window's forward points.

    Each fit is followed by a few rounds that weigh each point by its last
    error (Lawson's iteration towards the smallest worst error; C. L. Lawson,
    PhD thesis, UCLA 1961): the card is judged by its worst point. Where the
    target carries more than IS, N and RS, the full set is fitted twice,
    from the closed-form card and from the best IS, N, RS with the
    closed-form ISR, NR, IKF, and the smaller worst error kept (the extra
    terms can only help, but a local search may not find that alone).
    """
    w = sweep.in_window
    v, i = sweep.forward_bias[w], sweep.forward_current[w]
    if len(v) < len(names) + 1:
        return {}
    closed = {}
    for k in names:
        lo_b, hi_b = _BOUNDS[k]
        x = template[k] + template.get(_SPLIT.get(k), 0.0) if k in template else np.nan
        if not np.isfinite(x) or x <= 0:
            x = {"IS": 1e-15, "ISR": 1e-12, "IKF": 1.0, "RS": 1.0, "N": 1.0, "NR": 2.0}[k]
        closed[k] = float(np.clip(x, lo_b * 10, hi_b / 10) if k in _LOG else np.clip(x, lo_b, hi_b))
    core = [k for k in names if k in ("IS", "N", "RS")]
    best = _lawson(template, closed, core, v, i, sim)
    if len(core) < len(names):
        for start in (closed, {**closed, **best[0]}):
            got = _lawson(template, start, names, v, i, sim)
            if got[1] < best[1]:
                best = got
    # the same from there with the card's exact terminal current (RS solved by the evaluator)
    polished = _lawson(template, best[0], names, v, i, sim, rounds=4, exact=True)
    return polished[0] if polished[1] <= _worst(template, best[0], v, i, sim) else best[0]


def _worst(template, values, v, i, sim):
    """The worst |ln I_card / I| at the terminal voltages ``v``."""
    return float(np.abs(np.log(_forward_current(_with(template, values), v, sim) / i)).max())


def _linearised_error(card, v, i, sim):
    """ln I_card(V) / I to first order, without solving for the junction voltage.

    At the physics' point (V, I) the card's junction sits at Vd = V - RS I;
    its junction current there is I_j = I exp(d), and the terminal current
    at V is then I exp(d / (1 + RS I dlnI_j/dVd)) to first order in d: the
    series resistance takes up part of the junction's excess. Exact where
    d = 0; used for the search, the result checked with the exact current.
    """
    p = evaluator.adjusted(card, None, sim)
    rs = p["RS"] / p["AREA"]
    vd = v - rs * i
    h = 1e-4
    both = evaluator.junction_current(card, np.concatenate([vd, vd + h]), sim, gmin=0.0)[0]
    ij, ij2 = both[:len(v)], both[len(v):]
    tiny = 1e-300
    d = np.log(np.maximum(ij, tiny) / i)
    slope = np.log(np.maximum(ij2, tiny) / np.maximum(ij, tiny)) / h
    return d / (1.0 + rs * i * np.maximum(slope, 0.0))


def _lawson(template, start, names, v, i, sim, rounds=4, exact=False):
    """(values, worst |ln error|) of the DC parameters ``names`` fitted from ``start`` (others held).

    ``exact``: the card's terminal current from the evaluator (RS solved by
    bisection); else :func:`_linearised_error` (some forty times faster).
    """
    fixed = {k: x for k, x in start.items() if k not in names}
    lo = [math.log(_BOUNDS[k][0]) if k in _LOG else _BOUNDS[k][0] for k in names]
    hi = [math.log(_BOUNDS[k][1]) if k in _LOG else _BOUNDS[k][1] for k in names]

    def values(x):
        return {**fixed, **{k: (math.exp(xx) if k in _LOG else float(xx)) for k, xx in zip(names, x)}}

    def resid(x, weight):
        card = _with(template, values(x))
        if exact:
            return weight * np.log(np.maximum(_forward_current(card, v, sim), 1e-300) / i)
        return weight * _linearised_error(card, v, i, sim)

    x = np.clip([math.log(start[k]) if k in _LOG else start[k] for k in names], lo, hi)
    weight = np.ones(len(v))
    best, best_err = x, np.inf
    for _ in range(rounds):
        r = least_squares(resid, x, bounds=(lo, hi), args=(weight,), x_scale="jac", max_nfev=100)
        x = r.x
        err = np.abs(resid(x, 1.0))
        if err.max() < best_err:
            best, best_err = x, err.max()
        weight = weight * np.sqrt(err / err.max() + 0.05)
        weight /= weight.max()
    return values(best), best_err


def _transit_time(sweep, card, sim):
    """TT that gives the card the solver's stored charge: dQ/dI over the window's ideal points [s].

    The simulator's diffusion charge is TT times the junction current before
    the knee (its capacitance TT dI/dVd), so TT is the median slope of the
    solver's stored charge against the card's own junction current at the
    card's junction voltages; in the ideal region that current is the
    diffusion current and TT the charge's transit time (Sze & Ng 2007, ch. 2:
    diffusion capacitance). NaN with fewer than three ideal points.
    """
    use = sweep.mask("ideal")
    if use.sum() < 3:
        return np.nan
    _, vd = evaluator.dc_current(card, sweep.forward_bias[use], sim, gmin=0.0)
    current = evaluator.junction_current({**card, "IKF": 0.0}, vd, sim, gmin=0.0)[0]
    slope = np.diff(sweep.stored_charge[use]) / np.diff(current)
    return float(np.median(slope))


def _si(x, unit):
    """A number with an SI prefix, three digits: 1.23 mA."""
    x = float(x)
    if x == 0 or not math.isfinite(x):
        return f"{x:g} {unit}"
    for factor, prefix in ((1e3, "k"), (1.0, ""), (1e-3, "m"), (1e-6, "u"), (1e-9, "n"), (1e-12, "p"),
                           (1e-15, "f"), (1e-18, "a")):
        if abs(x) >= factor * 0.9995:
            return f"{x / factor:.3g} {prefix}{unit}"
    return f"{x:.3g} {unit}"


_REASON = {"recombination": ("ISR", "the target carries no ISR/NR for the depletion-region recombination"),
           "high injection": ("IKF", "the target carries no IKF for high injection")}


def fit(result, i, sweep, dialect):
    """The card of row ``i`` that best reproduces ``sweep`` in ``dialect``'s simulator's equations.

    In this order, each with the others held:

    - CJO, VJ, M (FC kept) by least squares on ln C over the C-V points whose
      diffusion part is below :data:`DIFFUSION_SHARE` (depletion capacitance);
    - IS, N, ISR, NR, IKF, RS (those the target carries; spice3 and gnucap
      carry IS, N, RS only, which are then the best compromise over the
      window) by least squares on ln I over the window's forward points
      (:func:`scipy.optimize.least_squares` from the closed-form card,
      positive parameters as logarithms, N and NR in
      :data:`IDEALITY_BOUNDS`), reweighted towards the smallest worst error;
    - TT as dQ/dI of the solver's stored charge against the fitted card's
      junction current over the ideal points (:func:`_transit_time`).

    The solver solves the total junction area, so the fitted values are
    totals; where the target has JSW and CJSW the totals are split in the
    closed forms' sidewall share (:func:`modelgen.cards.render.card_columns`).

    Parameters
    ----------
    result : modelgen.extraction.Result
    i : int
        Row.
    sweep : Sweep
        :func:`sweep` of the same row.
    dialect : str

    Returns
    -------
    Fitted
    """
    target = targets.get(dialect)
    sim = target.simulator
    sub = result.take([int(i)])
    closed = dict(card_values(sub, 0, dialect)[0])
    params = _fit_capacitance(closed, sweep, sim)
    template = _with(closed, params)
    names = [k for k in DC_PARAMETERS if k in target.carries]
    params.update(_fit_dc(template, names, sweep, sim))
    if "RS" in params and sweep.in_window.any():
        # a drop far below Vt at the window's top current is no resistance the window can see; kept, a
        # micro-ohm RS makes the simulator's current the difference of two node voltages over it, which
        # double precision resolves only to eps V / RS (5e-11 A at 1 uohm): written as 0 instead
        top = float(np.max(sweep.forward_current[sweep.in_window]))
        if params["RS"] * top < NEGLIGIBLE_DROP * _thermal_voltage(sweep.temperature):
            params["RS"] = 0.0
    tt = _transit_time(sweep, _with(template, params), sim)
    if np.isfinite(tt) and tt > 0:
        params["TT"] = tt
    for k, v in params.items():
        if not (math.isfinite(v) and (v > 0 or (k == "RS" and v == 0))):
            raise driftdiffusion.SolverError(f"the fit gave {k} = {v!r}")
    card = dict(card_values(sub, 0, dialect, params)[0])
    errors, closed_errors = errors_of(card, sweep, dialect), errors_of(closed, sweep, dialect)
    leakage = sweep.leakage
    k_rev = int(np.argmin(sweep.reverse_bias))
    card_leakage = float(-_forward_current(card, sweep.reverse_bias[k_rev:k_rev + 1], sim)[0])
    out = Fitted(dialect=dialect, params=params, card=card, closed_card=closed, errors=errors,
                 closed_errors=closed_errors, leakage=leakage, card_leakage=card_leakage)
    out.findings = _findings(sweep, out, target)
    kept = [what for what, done in (("CJO, VJ, M", "CJO" in params), ("DC parameters", "IS" in params),
                                    ("TT", "TT" in params)) if not done]
    if kept:
        out.findings.insert(1, Message("note", "numeric-kept",
                                       f"too few points in the window to fit {', '.join(kept)}: the closed-form "
                                       f"values are kept (a wider window or a finer sweep, refine > 1, helps)"))
    return out


def _findings(sweep, fitted, target):
    """The notes and warnings of a fit: what it covered, where its target's equations fall short."""
    sim = target.simulator
    w = sweep.window
    found = []
    order = [r for r in (*FORWARD_REGIONS, "reverse", "capacitance") if r in fitted.errors]
    table = ", ".join(f"{r} {100 * fitted.errors[r]:.3g} % (closed form {100 * fitted.closed_errors[r]:.3g} %)"
                      for r in order)
    found.append(Message("note", "numeric-fit",
                         f"fitted to the drift-diffusion solver over {_low(w)} .. "
                         f"{_si(w.current_high, 'A')} forward, {w.reverse_bias:g} V reverse, C-V "
                         f"{w.capacitance_low:g} .. {w.capacitance_high:g} V; worst error by region: {table}"))
    if sweep.stopped == "solver":
        top = sweep.forward_current[sweep.in_window].max(initial=0.0)
        found.append(Message("warning", "numeric-window",
                             f"the solver did not converge above {sweep.forward_bias[-1]:.3g} V: the forward "
                             f"sweep stopped at {_si(top, 'A')}, below the window's top {_si(w.current_high, 'A')}"))
    if sweep.stopped == "voltage cap":
        top = sweep.forward_current[sweep.in_window].max(initial=0.0)
        found.append(Message("note", "numeric-window",
                             f"the forward sweep stopped at the {w.voltage_cap:g} V cap at {_si(top, 'A')}, "
                             f"below the window's top {_si(w.current_high, 'A')}"))
    if "JSW" in fitted.card or "CJSW" in fitted.card:
        found.append(Message("note", "numeric-sidewall",
                             "the solver solves the whole junction area: IS and CJO are fitted as totals and "
                             "split into bottom and sidewall terms in the closed forms' area ratio"))
    # regions the target's equations cannot follow
    win = sweep.in_window
    card_i = _forward_current(fitted.card, sweep.forward_bias[win], sim)
    err = _relative(card_i, sweep.forward_current[win])
    for r in FORWARD_REGIONS:
        if fitted.errors.get(r, 0.0) > TOLERANCE:
            sel = np.flatnonzero(sweep.region[win] == r)
            k = sel[np.argmax(err[sel])]
            need, why = _REASON.get(r, (None, ""))
            reason = (why if need and need not in target.carries else
                      "no card of the target's equations follows the physics over the whole window")
            found.append(Message(
                "warning", "numeric-region",
                f"{r} region: the {target.name} card departs from the physics by up to "
                f"{100 * fitted.errors[r]:.3g} % (at {sweep.forward_bias[win][k]:.3f} V the card gives "
                f"{_si(card_i[k], 'A')}, the physics {_si(sweep.forward_current[win][k], 'A')}); {reason}"))
    if fitted.errors["capacitance"] > TOLERANCE:
        found.append(Message("warning", "numeric-capacitance",
                             f"C-V: the card departs from the physics by up to {100 * fitted.errors['capacitance']:.3g} %"))
    found += _resistance_finding(sweep, fitted, sim)
    bv = fitted.closed_card.get("BV", np.inf)
    deepest = -min(w.reverse_bias, w.capacitance_low)
    if np.isfinite(bv) and deepest >= BREAKDOWN_SHARE * bv:
        found.append(Message(
            "warning", "numeric-breakdown",
            f"the window reaches {-deepest:g} V, beyond {100 * BREAKDOWN_SHARE:.0f} % of the estimated breakdown "
            f"voltage {bv:.3g} V: the solver has no impact ionisation, so its reverse current there is not "
            f"the device's"))
    if fitted.leakage > LEAKAGE_FACTOR * max(fitted.card_leakage, 1e-300):
        extra = (f"{sim.name}'s diode applies ISR in forward bias only" if sim.recombination
                 else f"{sim.name}'s diode has no ISR")
        if target.leakage_template is not None:
            extra += "; --form subckt adds a source for it"
        found.append(Message(
            "warning", "numeric-leakage",
            f"reverse leakage: at {w.reverse_bias:g} V the physics gives {_si(fitted.leakage, 'A')} "
            f"(depletion-region generation), the card {_si(fitted.card_leakage, 'A')}, "
            f"{fitted.leakage / max(fitted.card_leakage, 1e-300):.3g} times less" + (f"; {extra}" if extra else "")))
    return found


def _resistance_finding(sweep, fitted, sim):
    """A warning where the physics departs from the fitted card's constant RS by more than RS_DEPARTURE.

    The physics' series resistance at each forward point inside the window is
    its series drop over its current, (V - Vj) / I, with Vj the quasi-Fermi
    split at the junction; it is judged where that drop is at least two
    thermal voltages (below, the split is too small to tell). A lightly doped
    region flooded by high injection (conductivity modulation; Baliga 2008,
    ch. 5) has a series resistance far below its unmodulated one, and one
    that changes with current, which no constant RS follows. The warning
    gives the card's and the physics' terminal voltages at the current where
    they differ most.
    """
    vt = _thermal_voltage(sweep.temperature)
    w = sweep.in_window
    v, i = sweep.forward_bias[w], sweep.forward_current[w]
    drop = v - sweep.junction_voltage[w]
    use = drop >= 2 * vt
    rs = fitted.card.get("RS", 0.0)
    if not use.any():
        return []
    r_phys = drop[use] / i[use]
    departure = np.abs(rs / r_phys - 1)
    if departure.max() <= RS_DEPARTURE:
        return []
    v, i = v[use], i[use]
    vcard = _voltage_for(fitted.card, i, sim)
    k = int(np.argmax(np.abs(vcard - v)))
    vclosed = float(_voltage_for(fitted.closed_card, i[k:k + 1], sim)[0])
    rs0 = fitted.closed_card.get("RS", 0.0)
    why = (f"the physics' series resistance (V - Vj) / I is {r_phys[0]:.3g} ohm at {_si(i[0], 'A')} and "
           f"{r_phys[-1]:.3g} ohm at {_si(i[-1], 'A')}")
    if r_phys.max() * (1 + RS_DEPARTURE) < rs0:
        why += f", far below the unmodulated {rs0:.3g} ohm of the closed forms (conductivity modulation)"
    return [Message(
        "warning", "numeric-resistance",
        f"series resistance: {why}, the card's constant RS = {rs:.3g} ohm departs from it by up to "
        f"{100 * departure.max():.3g} %: at {_si(i[k], 'A')} the card gives {vcard[k]:.3g} V, the physics "
        f"{v[k]:.3g} V (the closed-form card {vclosed:.3g} V)")]


# --------------------------------------------------------------------------- cards and documents


def generation_source(sweep, fitted):
    """The ``.subckt`` form's generation source fitted to the solver's reverse current
    (:func:`modelgen.leakage.fit` over the sweep's reverse points from -0.5 V on).

    Raises
    ------
    ValueError
        The window's reverse bias does not reach :data:`modelgen.leakage.NEAREST_BIAS`.
    """
    use = sweep.reverse_bias <= leakage.NEAREST_BIAS
    if use.sum() < 2:
        raise ValueError(f"the generation source needs a fit window reaching {leakage.NEAREST_BIAS:g} V or "
                         f"beyond in reverse, not {sweep.window.reverse_bias:g} V")
    bias = sweep.reverse_bias[use]
    card = {k: np.array([v]) for k, v in fitted.card.items()}
    t = np.array([sweep.temperature])
    sim = targets.get(fitted.dialect).equations
    return leakage.fit(bias, sweep.reverse_current[use][None, :],
                       leakage.card_reverse_current(card, bias, t, sim), card["VJ"], t)


def card_result(result, i, fitted):
    """Row ``i`` of ``result`` as a one-device Result whose findings include the fit's.

    Render it with ``overrides=fitted.params`` (:func:`modelgen.cards.card`).
    """
    from .extraction import Finding

    sub = result.take([int(i)])
    sub.findings = [f for f in sub.findings if f.kind != "leakage"]  # the fit's own leakage finding replaces it
    extra = [Finding(np.array([True]), m.text.replace("{", "{{").replace("}", "}}"), severity=m.severity,
                     kind=m.kind) for m in fitted.findings]
    sub.findings = list(sub.findings) + extra
    return sub


def header_lines(sweep, fitted):
    """The file-header line of a fitted card: what physics, how many points, whose equations.

    The window and the worst error per region are in the card's own note (kind ``numeric-fit``).
    """
    return (f"physics: numerical (1-D drift-diffusion solver, {len(sweep.forward_bias)} forward, "
            f"{len(sweep.reverse_bias)} reverse, {len(sweep.cv_bias)} C-V points); the card is fitted to it in "
            f"the {targets.get(fitted.dialect).equations} equations (its note gives the window and the worst "
            "error per region, of the fitted and of the closed-form card)",)


def window_document(w):
    """The window as plain data (SI)."""
    return {"current_low": w.current_low, "current_high": w.current_high, "voltage_cap": w.voltage_cap,
            "reverse_bias": w.reverse_bias, "capacitance_low": w.capacitance_low,
            "capacitance_high": w.capacitance_high}


def fit_document(sweep, fitted):
    """What a fitted card's JSON adds: physics, window, errors per region of both cards, leakage (SI)."""
    return {"physics": "numeric", "window": window_document(sweep.window),
            "errors": dict(fitted.errors), "closed_form_errors": dict(fitted.closed_errors),
            "leakage": fitted.leakage, "card_leakage": fitted.card_leakage,
            "findings": [{"severity": m.severity, "kind": m.kind, "text": m.text} for m in fitted.findings]}


def solve_document(name, sweep, fitted):
    """``modelgen solve``'s JSON: the physics' curves, the mechanisms, and each card's error (SI)."""
    return {
        "name": name, "dialect": fitted.dialect, "window": window_document(sweep.window),
        "forward": {"V": sweep.forward_bias, "I": sweep.forward_current, "region": list(sweep.region),
                    "in_window": sweep.in_window, "stored_charge": sweep.stored_charge},
        "reverse": {"V": sweep.reverse_bias, "I": sweep.reverse_current},
        "capacitance": {"V": sweep.cv_bias, "C": sweep.capacitance},
        "components": {k: np.asarray(v) for k, v in sweep.components.items()},
        "card_error": {"closed": dict(fitted.closed_errors), "fitted": dict(fitted.errors)},
        "cards": {"closed": dict(fitted.closed_card), "fitted": dict(fitted.card)},
        "leakage": fitted.leakage,
        "units": {"V": "V", "I": "A", "C": "F", "stored_charge": "C", "components": "A", "card_error": "1",
                  "leakage": "A"},
    }


def solve_table(sweep, fitted):
    """``modelgen solve``'s text table: bias, region, physics, the closed-form and the fitted card, errors."""
    t = comparison(sweep, {"closed": fitted.closed_card, "fitted": fitted.card}, fitted.dialect)
    head = ("V [V]", "region", "physics [A]", "closed card [A]", "error", "fitted card [A]", "error")
    rows = [head] + [(f"{r[0]:.4f}", r[1], f"{r[2]:.4e}", f"{r[3]:.4e}", f"{100 * r[4]:.2f} %", f"{r[5]:.4e}",
                      f"{100 * r[6]:.2f} %") for r in t.rows]
    widths = [max(len(r[k]) for r in rows) for k in range(len(head))]
    lines = ["  ".join(c.rjust(widths[k]) if k != 1 else c.ljust(widths[k]) for k, c in enumerate(r)).rstrip()
             for r in rows]
    order = [r for r in (*FORWARD_REGIONS, "reverse", "capacitance") if r in fitted.errors]
    lines.append("")
    lines.append("worst error by region: " + "; ".join(
        f"{r}: closed {100 * fitted.closed_errors[r]:.3g} %, fitted {100 * fitted.errors[r]:.3g} %" for r in order))
    return "\n".join(lines) + "\n"

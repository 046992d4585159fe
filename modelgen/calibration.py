"""Calibrating the physics of a description to measured I-V and C-V curves.

The free parameters are the description's own flat keys (``n.doping``,
``p.lifetime``, ``recombination_lifetime``, ``contact_resistance``, ...), not
card parameters: the fitted description still goes through
:func:`modelgen.extraction.derive` to make a card, with every other key as
the user gave it.

The forward model is the closed forms of :mod:`modelgen.extraction`,
evaluated point by point over numpy arrays:

* I-V: the diffusion current IS (exp(Vj/Vt) - 1), reduced at high injection
  as 2 I / (1 + sqrt(1 + 4 I/IKF)) (the edge density from p (p + N) =
  ni^2 exp(Vj/Vt), with the high-level limit of
  :func:`modelgen.physics.injection.knee_current`), plus the Sah-Noyce-Shockley
  depletion-region current (:func:`modelgen.physics.recombination.sns_current_density`)
  at forward and small reverse junction voltage, or the generation current
  (:func:`modelgen.physics.generation.generation_current_density`) below -3 Vt,
  times the junction area. The junction voltage Vj solves V = Vj + I(Vj) RS
  with RS the derived card's series resistance (neutral regions plus
  ``contact_resistance``), by bisection on all points at once.
* C-V: the depletion capacitance eps A / W(V) at the card's VJ, plus the
  diffusion capacitance TT IS exp(V/Vt) / Vt where forward.

The residuals are ln|I_model| - ln|I_measured| for every used I-V point
(forward and reverse) and (C_model - C_measured) / C_measured for every used
C-V point; each kind is weighted by the inverse of its own rms residual after
a first unweighted pass, so that an I-V and a C-V of different noise share the
fit fairly. Parameters are fitted as logarithms (all are positive). One
:func:`~modelgen.extraction.derive` call evaluates every parameter set the
Jacobian needs (rows: parameter sets x measurement conditions).

With ``solver=True`` the numerical solver (:mod:`modelgen.physics.driftdiffusion`)
corrects the closed forms by defect correction: the data are divided by the
solver's ratio to the closed forms at the fitted values and fitted again, until
the values settle, so that the solver reproduces the data at the fitted values
(one solver solution per round; the closed forms give the steps, the Jacobian
and the standard errors). Without it, where the closed forms do not hold within
the data's range (strong high injection, the solver's band-gap narrowing) the
residuals per region show it. Profiles the closed forms only approximate
(erfc, gaussian, table) are refused.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field

import numpy as np

from . import description
from .constants import EPS0, thermal_voltage
from .device import CLOSED_FORM_PROFILES, Device
from .errors import InputError
from .extraction import derive
from .physics import generation, junction, recombination
from .units import unit_factor

#: The roles the default free parameters play, resolved per device by :func:`default_free`.
FREE_DEFAULT = ("light side's doping (with C-V)", "dominant side's lifetime (with forward I-V)",
                "recombination_lifetime (low-bias ideality above RECOMBINATION_IDEALITY)",
                "contact_resistance (top-current ideality above BEND_IDEALITY)")
#: The keys that may be fitted, with their units kind for the written description.
FITTABLE = {"p.doping": "concentration", "n.doping": "concentration", "p.lifetime": "time",
            "n.lifetime": "time", "recombination_lifetime": "time", "contact_resistance": "resistance",
            "area": "area", "grading": "grading", "lifetime_temperature_exponent": "number",
            "junction_depth": "length"}
#: Keys that may be zero or negative, fitted as ln(value + offset): the offset keeps the log-space fit.
_OFFSET = {"lifetime_temperature_exponent": 20.0}
#: Local ideality factor of the lowest forward points above which recombination is taken as seen.
RECOMBINATION_IDEALITY = 1.3
#: Local ideality factor of the top forward points above which series resistance is taken as seen.
BEND_IDEALITY = 3.0
#: Correlation beyond which two parameters are reported as trading off.
CORRELATION_LIMIT = 0.95
#: Regions of the residuals, in report order.
REGIONS = ("recombination", "ideal", "high injection", "reverse", "capacitance")
#: Bisection steps for the junction voltage (interval below 2^-44 of the bias).
_BISECTION = 44
#: Step of the finite-difference Jacobian in ln(parameter).
_STEP = 1e-4
#: Smallest contact resistance fitted [ohm] (a log-space parameter needs a floor).
_RC_FLOOR = 1e-6
_UNIT = {"concentration": "cm^-3", "resistance": "ohm", "area": "mm^2", "grading": "cm^-4", "length": "um"}


@dataclass
class Calibration:
    """The result of :func:`calibrate` (SI throughout).

    Attributes
    ----------
    fitted : {key: {"value": float, "stderr": float}}
    correlation : {"keys": [key, ...], "matrix": [[float]]}
    residuals : {region: {"points": int, "rms": float, "worst": float}} (relative errors); with I-V at several
        temperatures also "ideal by temperature": {"300.15 K": median relative residual, ...}, the check of
        IS(T) (the band-gap, ni and lifetime laws) after the fit.
    warnings, notes : lists of plain sentences.
    iterations : function evaluations of the least-squares solver (both passes).
    device : the calibrated Device (length 1).
    """

    fitted: dict
    correlation: dict
    residuals: dict
    warnings: list = field(default_factory=list)
    notes: list = field(default_factory=list)
    iterations: int = 0
    device: Device | None = None

    def document(self):
        """The result as plain data: fitted values and standard errors (SI, description keys), correlation,
        residuals per region, warnings, notes, iterations."""
        return {"fitted": {k: dict(v) for k, v in self.fitted.items()},
                "correlation": {"keys": list(self.correlation["keys"]),
                                "matrix": [list(map(float, r)) for r in self.correlation["matrix"]]},
                "residuals": {k: dict(v) for k, v in self.residuals.items()},
                "warnings": list(self.warnings), "notes": list(self.notes), "iterations": self.iterations}

    def description_text(self, original, source_files):
        """A new description TOML: ``original`` (TOML text) with the fitted values replaced.

        Each fitted value is written as a quantity string in the unit the
        original used for that key (else a customary one), preceded by a
        comment giving its standard error; a side given by resistivity is
        written as doping. A header comment names the measurement files and
        the residuals per region.
        """
        return _rewrite(original, self, source_files)


def _clean(text):
    """``text`` with control characters replaced, safe inside a TOML comment."""
    return re.sub(r"[\x00-\x1f\x7f]", "?", str(text))


# --------------------------------------------------------------------------- conditions and rows

def _conditions(curves):
    """Distinct (temperature, area, perimeter) of the curves' used points, and each curve's index into them.

    A value the curve leaves NaN (the description's) is kept as -1, so that a fitted area stands for it.
    """
    cols, index = [], []
    for c, u in curves:
        if u is None:
            index.append(None)
            continue
        at = np.stack([np.nan_to_num(np.asarray(getattr(c, k), float)[u], nan=-1.0)
                       for k in ("temperature", "area", "perimeter")], axis=1)
        cols.append(at)
        index.append(len(cols) - 1)
    conds, inverse = np.unique(np.concatenate(cols), axis=0, return_inverse=True)
    inverse = np.asarray(inverse).ravel()
    out, start = [], 0
    for k in index:
        if k is None:
            out.append(None)
        else:
            out.append(inverse[start:start + len(cols[k])])
            start += len(cols[k])
    return conds, out


def _set(dev, key, values):
    """Put ``values`` (one per row) into ``key`` of ``dev`` (a Device made by take: its arrays are its own)."""
    if key in ("p.doping", "n.doping"):
        side = getattr(dev, key[0])
        side.doping[:] = values
        side.resistivity[:] = np.nan
    elif key in ("p.lifetime", "n.lifetime"):
        side = getattr(dev, key[0])
        side.lifetime[:] = values
        side.diffusion_length[:] = np.nan
    elif key == "lifetime_temperature_exponent":
        dev.lifetime_exponent[:] = np.asarray(values) - _OFFSET[key]
    else:
        getattr(dev, key)[:] = values


def _rows(base, keys, theta, conds):
    """A Device of len(theta) x len(conds) rows: parameter set s (values, SI) under condition c at s*nc + c.

    A condition's -1 (the description's value) takes the row's own: the base device's, or the fitted area.
    """
    s, nc = len(theta), len(conds)
    dev = base.take(np.zeros(s * nc, int))
    for j, key in enumerate(keys):
        _set(dev, key, np.repeat(theta[:, j], nc))
    for j, name in enumerate(("temperature", "area", "perimeter")):
        col = getattr(dev, name)
        given = np.tile(conds[:, j], s)
        col[:] = np.where(given >= 0, given, col)
    return dev


# --------------------------------------------------------------------------- forward model

def junction_current(res, rows, vd, parts=False):
    """Current [A] of result rows ``rows`` at junction voltages ``vd`` [V] (flat arrays of one length).

    Diffusion IS (exp(vd/Vt) - 1), forward reduced at high injection as 2 I / (1 + sqrt(1 + 4 I/IKF)) (the
    minority density at the lighter side's edge from p (p + N) = ni^2 exp(vd/Vt), Sze & Ng 2007, ch. 2, with the
    high-level limit sqrt(IKF IS) exp(vd/2Vt) that IKF stands for); plus the junction
    area times the Sah-Noyce-Shockley depletion-region current at vd >= -3 Vt, or the generation current
    below. Valid below VJ and short of breakdown; the closed forms of :mod:`modelgen.extraction`.

    References
    ----------
    Sah, Noyce & Shockley, Proc. IRE 45, 1228 (1957); ngspice manual, diode model (IKF).
    """
    p, d, dv = res.params, res.derived, res.device
    t = d["temperature"][rows]
    vt = thermal_voltage(t)
    vj = p["VJ"][rows]
    na, nd = d["p"]["doping"][rows], d["n"]["doping"][rows]
    lin = np.asarray(dv.linear)[rows]
    grad = np.where(lin, np.asarray(dv.grading)[rows], 1.0)
    ni, eps, tau = d["ni"][rows], (dv.relative_permittivity * EPS0)[rows], d["recombination_lifetime"][rows]
    idiff = p["IS"][rows] * np.expm1(vd / vt)
    # high injection at the lighter side's edge: p (p + N) = ni^2 exp(V/Vt) gives p/N = (sqrt(1 + 4 x) - 1)/2
    # with x the low-level p/N; scaled so that the high-level limit is the card's sqrt(IKF IS) exp(V/2Vt)
    knee = np.where(idiff > 0, 2.0 * idiff / (1.0 + np.sqrt(1.0 + 4.0 * np.maximum(idiff, 0.0) / p["IKF"][rows])),
                    idiff)
    small = vd >= -3.0 * vt
    j = np.empty_like(vd)
    if small.any():
        s = small
        j[s] = recombination.sns_current_density(vd[s], vj[s], na[s], nd[s], grad[s], lin[s], ni[s], eps[s],
                                                 tau[s], tau[s], t[s])
    if (~small).any():
        s = ~small
        j[s] = generation.generation_current_density(vd[s], vj[s], na[s], nd[s], grad[s], lin[s], ni[s], eps[s],
                                                     tau[s], tau[s], t[s])
    rec = d["junction_area"][rows] * j
    return (knee + rec, knee, rec) if parts else knee + rec


def terminal_current(res, rows, v):
    """Current [A] at terminal voltages ``v`` [V]: V = Vj + I(Vj) RS solved for Vj (vectorised).

    Forward points by bisection on Vj in [0, min(V, VJ - 1 mV)]; reverse points (|I| RS far below Vt) by two
    fixed-point steps Vj = V - I(Vj) RS from Vj = V. Returns (current, junction voltage).
    """
    rs = res.params["RS"][rows]
    fwd = v > 0
    vd = np.array(v, float)
    if fwd.any():
        f = np.flatnonzero(fwd)
        rf, vf = rows[f], v[f]
        lo = np.zeros(len(f))
        hi = np.minimum(vf, res.params["VJ"][rf] - 1e-3)
        for _ in range(_BISECTION):
            mid = 0.5 * (lo + hi)
            over = mid + junction_current(res, rf, mid) * rs[f] > vf
            hi = np.where(over, mid, hi)
            lo = np.where(over, lo, mid)
        vd[f] = 0.5 * (lo + hi)
    if (~fwd).any():
        r = np.flatnonzero(~fwd)
        for _ in range(2):
            vd[r] = v[r] - junction_current(res, rows[r], vd[r]) * rs[r]
    return junction_current(res, rows, vd), vd


def capacitance(res, rows, v):
    """Small-signal capacitance [F] at bias ``v`` [V]: eps A / W(V) plus TT IS exp(V/Vt) / Vt where forward.

    Depletion approximation at the card's VJ (Sze & Ng 2007, ch. 2); valid below VJ.
    """
    p, d, dv = res.params, res.derived, res.device
    eps = (dv.relative_permittivity * EPS0)[rows]
    w, _, _ = junction.depletion_width(p["VJ"][rows], np.minimum(v, p["VJ"][rows] - 1e-3), d["p"]["doping"][rows],
                                       d["n"]["doping"][rows], np.asarray(dv.grading)[rows],
                                       np.asarray(dv.linear)[rows], eps)
    vt = thermal_voltage(d["temperature"][rows])
    diff = np.where(v > 0, p["TT"][rows] * p["IS"][rows] * np.exp(np.maximum(v, 0.0) / vt) / vt, 0.0)
    return d["junction_area"][rows] * junction.depletion_capacitance(w, eps) + diff


# --------------------------------------------------------------------------- defaults

def _used(curve):
    if curve is None:
        return None
    u = np.asarray(curve.use, bool) & np.isfinite(curve.v) & np.isfinite(curve.y)
    return u if u.any() else None


def _ideality(v, i, t):
    """Least-squares local ideality factor (dV / d ln I) / Vt of points (v, i) at temperature t."""
    x = np.log(i) - np.mean(np.log(i))
    var = float(x @ x)
    if not var > 0:
        return math.nan
    return float(x @ (v - np.mean(v))) / var / float(np.mean(thermal_voltage(t)))


def default_free(device, iv=None, cv=None):
    """The keys the data can determine (see :data:`FREE_DEFAULT`).

    With C-V: the lighter side's doping (a side given by resistivity is fitted as doping). With forward I-V:
    the lifetime of the side whose lifetime moves IS most, and with forward curves at two or more
    temperatures ``lifetime_temperature_exponent``; with curves of two or more perimeter-to-area ratios,
    ``junction_depth`` (the sidewall's height, which splits the perimeter's share from the area's); with eight or more distinct forward biases,
    ``recombination_lifetime`` where the lowest third of them (at least four) have a local ideality above
    :data:`RECOMBINATION_IDEALITY`, ``contact_resistance`` where the top four have one above
    :data:`BEND_IDEALITY` (repeated biases count once, ln I averaged).
    """
    device = _device(device)
    res = derive(device)
    free = []
    light = "p" if res.derived["p"]["doping"][0] <= res.derived["n"]["doping"][0] else "n"
    if _used(cv) is not None:
        free.append(f"{light}.doping")
    if _geometries(iv, cv) >= 2:  # several perimeter-to-area ratios: the sidewall height splits them
        free.append("junction_depth")
    u = _used(iv)
    if u is not None:
        fwd = u & (iv.v > 0) & (iv.y > 0)
        # one point per distinct bias (ln I averaged over repeats), in increasing bias
        v, inverse = np.unique(iv.v[fwd], return_inverse=True)
        inverse = np.asarray(inverse).ravel()
        if len(v) >= 3:
            i = np.exp(np.bincount(inverse, np.log(iv.y[fwd])) / np.bincount(inverse))
            temps = np.where(np.isfinite(iv.temperature[fwd]), iv.temperature[fwd], device.temperature[0])
            t = np.bincount(inverse, temps) / np.bincount(inverse)
            free.append(f"{_dominant_side(device)}.lifetime")
            if len(np.unique(np.round(temps, 6))) >= 2:  # curves at several temperatures: the lifetime's law
                free.append("lifetime_temperature_exponent")
            if len(v) >= 8:
                low = slice(0, max(4, len(v) // 3))
                if _ideality(v[low], i[low], t[low]) > RECOMBINATION_IDEALITY:
                    free.append("recombination_lifetime")
                if _ideality(v[-4:], i[-4:], t[-4:]) > BEND_IDEALITY:
                    free.append("contact_resistance")
    return free


def _geometries(*curves):
    """How many distinct perimeter-to-area ratios the curves' used points were measured at."""
    ratios = []
    for c in curves:
        u = _used(c)
        if u is None:
            continue
        r = np.asarray(c.perimeter, float)[u] / np.asarray(c.area, float)[u]
        ratios.append(r[np.isfinite(r) & (r > 0)])
    return len(np.unique(np.round(np.concatenate(ratios), 6))) if ratios else 0


def _dominant_side(device):
    """The side whose lifetime moves IS most: |d ln IS / d ln tau| of each side, from one derive of three rows
    (the device, and each side's lifetime 10 % longer)."""
    res = derive(device)
    rows = device.take(np.zeros(3, int))
    for j, s in enumerate(("p", "n")):
        _set(rows, f"{s}.lifetime", np.where(np.arange(3) == j + 1, 1.1, 1.0) * res.derived[s]["lifetime"][0])
    is_ = derive(rows).params["IS"]
    return "p" if abs(math.log(is_[1] / is_[0])) >= abs(math.log(is_[2] / is_[0])) else "n"


def _device(device):
    if isinstance(device, Device):
        return device
    return description.from_mapping(device)


# --------------------------------------------------------------------------- the fit

class _Problem:
    """The data, the conditions and the forward model of one calibration."""

    def __init__(self, device, keys, iv, cv):
        self.base, self.keys = device, keys
        self.iv, self.cv = iv, cv
        self.ivu, self.cvu = _used(iv), _used(cv)
        self.conds, (ic, cc) = _conditions(((iv, self.ivu), (cv, self.cvu)))
        self.iv_cond, self.cv_cond = ic, cc
        if self.ivu is not None:
            self.iv_v = np.asarray(iv.v, float)[self.ivu]
            self.iv_y = np.asarray(iv.y, float)[self.ivu]
            keep = self.iv_y != 0
            self.iv_v, self.iv_y, self.iv_cond = self.iv_v[keep], self.iv_y[keep], self.iv_cond[keep]
        if self.cvu is not None:
            self.cv_v = np.asarray(cv.v, float)[self.cvu]
            self.cv_y = np.asarray(cv.y, float)[self.cvu]
            bad = np.flatnonzero(~(self.cv_y > 0))
            if len(bad):
                line = np.asarray(cv.line)[self.cvu][bad[0]]
                raise InputError(f"capacitance {self.cv_y[bad[0]]:.4g} F is not positive: a capacitance to fit must "
                                 f"be above zero (or the point marked unused)", file=getattr(cv, "file", None),
                                 row=int(line), key="capacitance")
        self.n_iv = 0 if self.ivu is None else len(self.iv_v)
        self.n_cv = 0 if self.cvu is None else len(self.cv_v)
        self.weights = np.ones(2)
        self.evaluations = 0

    def model(self, thetas):
        """Residuals (sets, points), unweighted, and the Result, for parameter sets ``thetas`` (SI values)."""
        self.evaluations += 1
        s, nc = len(thetas), len(self.conds)
        res = derive(_rows(self.base, self.keys, thetas, self.conds))
        out = []
        with np.errstate(all="ignore"):
            if self.n_iv:
                rows = (np.arange(s)[:, None] * nc + self.iv_cond[None, :]).ravel()
                cur, _ = terminal_current(res, rows, np.tile(self.iv_v, s))
                out.append((np.log(np.abs(cur)) - np.tile(np.log(np.abs(self.iv_y)), s)).reshape(s, -1))
            if self.n_cv:
                rows = (np.arange(s)[:, None] * nc + self.cv_cond[None, :]).ravel()
                c = capacitance(res, rows, np.tile(self.cv_v, s))
                out.append((c / np.tile(self.cv_y, s) - 1.0).reshape(s, -1))
        r = np.concatenate(out, axis=1)
        return np.where(np.isfinite(r), r, 1e3), res

    def weighted(self, r):
        w = np.concatenate([np.full(self.n_iv, self.weights[0]), np.full(self.n_cv, self.weights[1])])
        return r * w


def calibrate(device, iv=None, cv=None, free=None, solver=False):
    """Fit the description's keys ``free`` to a measured I-V and/or C-V curve.

    Parameters
    ----------
    device : Device (length 1) or dict
        The description (a dict as TOML gives it, or a Device from :func:`modelgen.description.load`);
        abrupt or linear profile.
    iv, cv : Curve or None
        Measured curves (see :mod:`modelgen.measurements`): bias [V] and current [A] or capacitance [F]
        with, per point, temperature, area, perimeter (NaN: the description's) and a use flag.
    free : list of str, optional
        Keys of :data:`FITTABLE`; default :func:`default_free`.
    solver : bool
        Correct the closed forms by the numerical solver (:func:`_solver_rounds`): for data where they do not
        hold (high injection, the solver's band-gap narrowing); a solver solution per round.

    Returns
    -------
    Calibration

    Raises
    ------
    InputError
        No usable data, an unknown or unfittable key, more keys than points, or a profile the closed forms
        only approximate.

    Notes
    -----
    Weighted least squares (scipy.optimize.least_squares, trust region reflective, bounds from the
    description's plausible ranges) in ln(parameter); standard errors s^2 (J^T J)^-1 of the weighted
    residuals with s^2 their variance (N - k degrees of freedom), mapped to values by the delta method.
    """
    from scipy.optimize import least_squares

    device = _device(device)
    if len(device) != 1:
        raise InputError("calibration takes one device", key="name")
    if str(device.profile[0]) not in CLOSED_FORM_PROFILES:
        raise InputError(f"calibration takes abrupt and linear profiles (the closed forms' own); got "
                         f"{device.profile[0]!r}", file=_at(device.source), key="profile")
    if _used(iv) is None and _used(cv) is None:
        files = [c.file for c in (iv, cv) if c is not None and getattr(c, "file", None)]
        raise InputError("no usable measured points (I-V or C-V)", file=", ".join(files) or _at(device.source))
    keys = list(default_free(device, iv, cv) if free is None else free)
    for k in keys:
        if k not in FITTABLE:
            raise InputError(f"cannot be fitted; fittable keys: {', '.join(FITTABLE)}", key=k)
        if k == "grading" and not bool(device.linear[0]):
            raise InputError("grading is fitted only for a linear profile", key=k)
    if len(set(keys)) != len(keys):
        raise InputError("a key is named twice", key=",".join(keys))
    prob = _Problem(device, keys, iv, cv)
    if prob.n_iv + prob.n_cv <= len(keys):
        raise InputError(f"{prob.n_iv + prob.n_cv} usable points cannot determine {len(keys)} parameters")
    res0 = derive(device)
    start = np.array([_start(device, res0, k) for k in keys])
    lo = np.array([math.log(max(_bounds(k)[0], _RC_FLOOR if k == "contact_resistance" else 0.0) or 1e-300)
                   for k in keys])
    hi = np.array([math.log(_bounds(k)[1]) for k in keys])
    x0 = np.clip(np.log(start), lo + 1e-9, hi - 1e-9)
    cache = {}

    def sets(x):
        steps = np.vstack([x, x + _STEP * np.eye(len(x))])
        return np.exp(steps)

    def evaluate(x):
        key = x.tobytes()
        if key not in cache:
            r, _ = prob.model(sets(x))
            cache.clear()
            cache[key] = r
        return cache[key]

    def fun(x):
        return prob.weighted(evaluate(x)[0])

    def jac(x):
        r = evaluate(x)
        return prob.weighted((r[1:] - r[0]) / _STEP).T

    if not keys:
        raise InputError("nothing to fit: give free keys, or data that determine some (see default_free)")
    fits = []

    def run(x):
        fits.append(least_squares(fun, x, jac=jac, bounds=(lo, hi), method="trf", x_scale=1.0, ftol=1e-12,
                                  xtol=1e-12, gtol=1e-12, max_nfev=200))
        return fits[-1]

    sol = run(x0)
    r = evaluate(sol.x)[0]
    for j, (a, b) in enumerate(((0, prob.n_iv), (prob.n_iv, prob.n_iv + prob.n_cv))):
        if b > a:
            prob.weights[j] = 1.0 / max(float(np.sqrt(np.mean(r[a:b] ** 2))), 1e-6)
    if prob.n_iv and prob.n_cv:
        sol = run(sol.x)
    notes = []
    if solver:
        sol = _solver_rounds(prob, sol, run, cache, notes)
    return _report(prob, keys, sol, jac, fits, device, notes)


#: Most rounds of the solver correction.
SOLVER_ROUNDS = 4


def _solver_rounds(prob, sol, run, cache, notes):
    """Defect correction by the numerical solver: the data divided by the solver's ratio to the closed forms at
    the fitted values, then fitted again by the closed forms, until the values move less than 0.01 %.

    At the fixed point the solver, not the closed forms, reproduces the measured data at the fitted values;
    the closed forms serve only for the steps and the Jacobian (where they differ from the solver by a ratio
    that changes slowly with the parameters). One condition only (the description's temperature, area and
    perimeter for every point).
    """
    from .physics.driftdiffusion import SolverError

    if _distinct_conditions(prob) != 1:
        notes.append("solver correction skipped: the points are at several temperatures, areas or perimeters")
        return sol
    y_iv = prob.iv_y.copy() if prob.n_iv else None
    y_cv = prob.cv_y.copy() if prob.n_cv else None
    worst = (0.0, 0.0)
    for rounds in range(1, SOLVER_ROUNDS + 1):
        try:
            r_iv, r_cv = _solver_ratio(prob, np.exp(sol.x))
        except SolverError as e:
            notes.append(f"solver correction stopped: {_clean(e)}")
            return sol
        worst = (float(np.max(np.abs(r_iv - 1))) if prob.n_iv else 0.0,
                 float(np.max(np.abs(r_cv - 1))) if prob.n_cv else 0.0)
        if prob.n_iv:
            prob.iv_y = y_iv / r_iv
        if prob.n_cv:
            prob.cv_y = y_cv / r_cv
        cache.clear()
        before = sol.x
        sol = run(sol.x)
        if np.max(np.abs(sol.x - before)) < 1e-4:
            break
    notes.append(f"solver correction: {rounds} rounds; the solver departs from the closed forms at the fitted "
                 f"values by up to {100 * worst[0]:.3g} % in the I-V and {100 * worst[1]:.3g} % in the C-V "
                 f"(residuals are against the data so corrected)")
    return sol


def _distinct_conditions(prob):
    """How many distinct (temperature, area, perimeter) the points stand for, a curve's "the description's"
    (NaN) counted as the description's own value (unless that value is itself fitted)."""
    eff = np.array(prob.conds, float)
    base = prob.base
    own = (float(base.temperature[0]), float(base.area[0]), float(np.nan_to_num(base.perimeter[0], nan=-1.0)))
    for j, (key, value) in enumerate(zip(("temperature", "area", "perimeter"), own)):
        if key not in prob.keys:
            eff[eff[:, j] < 0, j] = value
    return len(np.unique(np.round(eff, 12), axis=0))


def _solver_ratio(prob, theta):
    """The solver's current and capacitance over the closed forms', at the data's biases, for values ``theta``.

    Forward points are solved at V - I RC (I the closed forms' current, RC the contact resistance, outside
    the solver's 1-D device) and carried from the solver's terminal bias to the data's along the closed forms'
    slope. Reverse and C-V points are solved at their biases.
    """
    from .physics import driftdiffusion
    from .structures import structure_for

    res = derive(_rows(prob.base, prob.keys, theta[None, :], prob.conds))
    s = structure_for(res, 0)
    zi, zc = np.zeros(prob.n_iv, int), np.zeros(prob.n_cv, int)
    with np.errstate(all="ignore"):
        i_cf = terminal_current(res, zi, prob.iv_v)[0] if prob.n_iv else np.empty(0)
        c_cf = capacitance(res, zc, prob.cv_v) if prob.n_cv else np.empty(0)
    v_iv = prob.iv_v if prob.n_iv else np.empty(0)
    rc = float(res.device.contact_resistance[0])
    vb = np.where(v_iv > 0, v_iv - i_cf * rc, v_iv)
    v_cv = prob.cv_v if prob.n_cv else np.empty(0)
    out = driftdiffusion.solve(s, np.concatenate([vb, v_cv]),
                               capacitance=np.concatenate([np.zeros(len(vb), bool), np.ones(len(v_cv), bool)]))
    term, cur = out.terminal_bias[:len(vb)], out.current[:len(vb)]
    # the solver's point lies at its terminal bias, a little off the data's: carried to the data's bias along
    # the closed forms' own slope d ln I / dV there (a step of about I RC times their relative difference)
    with np.errstate(all="ignore"):
        step = 1e-4
        slope = (np.log(np.abs(terminal_current(res, zi, v_iv + step)[0])) - np.log(np.abs(i_cf))) / step
    i_s = np.where(v_iv > 0, cur * np.exp((v_iv - term) * slope), cur)
    return i_s / i_cf, out.capacitance[len(vb):] / c_cf


def _at(seq):
    return seq[0] if len(seq) else None


def _bounds(key):
    spec = description.KEYS[key]
    lo, hi = spec.plausible
    shift = _OFFSET.get(key, 0.0)
    return lo + shift, hi + shift


def _start(device, res, key):
    """The starting value of ``key``: the description's (derived) value."""
    if key in ("p.doping", "n.doping"):
        return float(res.derived[key[0]]["doping"][0])
    if key in ("p.lifetime", "n.lifetime"):
        side = getattr(device, key[0])
        given = side.lifetime[0]
        return float(given if np.isfinite(given) else res.derived[key[0]]["lifetime"][0])
    if key == "recombination_lifetime":
        given = device.recombination_lifetime[0]
        return float(given if np.isfinite(given) else res.derived["recombination_lifetime"][0])
    if key == "contact_resistance":
        rc = float(device.contact_resistance[0])
        return rc if rc > 0 else max(float(res.params["RS"][0]), 1e-2)
    if key == "lifetime_temperature_exponent":
        return float(np.nan_to_num(device.lifetime_exponent[0])) + _OFFSET[key]
    return float(getattr(device, key)[0])


def _report(prob, keys, sol, jac, fits, device, notes):
    """The Calibration: values, standard errors, correlation, warnings, residuals per region."""
    k = len(keys)
    jw = jac(sol.x)
    rw = sol.fun
    dof = max(len(rw) - k, 1)
    s2 = float(rw @ rw) / dof
    warnings = []
    try:
        cov = s2 * np.linalg.inv(jw.T @ jw)
    except np.linalg.LinAlgError:
        cov = np.full((k, k), np.inf)
        warnings.append("the Jacobian is singular: the free parameters are not determined by these data together")
    sd_log = np.sqrt(np.abs(np.diag(cov)))
    shifted = np.exp(sol.x)
    stderr = shifted * sd_log  # delta method: d value = (value + offset) d ln(value + offset)
    values = shifted - np.array([_OFFSET.get(key, 0.0) for key in keys])
    with np.errstate(all="ignore"):
        corr = cov / np.outer(sd_log, sd_log)
    corr = np.where(np.isfinite(corr), corr, np.nan)
    fitted = {key: {"value": float(v), "stderr": float(e)} for key, v, e in zip(keys, values, stderr)}
    for a in range(k):
        for b in range(a + 1, k):
            if abs(corr[a, b]) > CORRELATION_LIMIT:
                warnings.append(f"{keys[a]} and {keys[b]} trade off (correlation {corr[a, b]:+.3f}): these data "
                                f"do not separate them; fix one of them or add data that do")
    for key, v, e in zip(keys, values, stderr):
        if key in _OFFSET:
            if not e <= 1.0:
                warnings.append(f"{key}: the standard error ({e:.3g}) exceeds 1: not determined by these data")
            continue
        if not e <= v:
            warnings.append(f"{key}: the standard error ({e:.3g}) exceeds the value ({v:.3g}): not determined by "
                            f"these data")
    for key in np.asarray(keys)[sol.active_mask != 0]:
        warnings.append(f"{key} stopped at the edge of its plausible range")
    r, res = prob.model(np.exp(sol.x)[None, :])
    residuals = _regions(prob, r[0], res)
    notes.append("weights: I-V residuals in ln|I| x {:.3g}, C-V relative x {:.3g} (each the inverse of its rms after "
                 "a first pass)".format(*prob.weights))
    notes.append("the fitted values are physics estimates from these measurements: check them on further devices")
    calibrated = _rows(device, keys, np.exp(sol.x)[None, :], np.full((1, 3), -1.0))
    return Calibration(fitted=fitted, correlation={"keys": list(keys), "matrix": corr.tolist()},
                       residuals=residuals, warnings=warnings, notes=notes,
                       iterations=sum(int(f.nfev) for f in fits), device=calibrated)


def _regions(prob, r, res):
    """Residuals per region, relative errors: rms and worst (signed), with the points' count.

    A reverse I-V point (V < 0) is 'reverse'; a forward one is 'recombination' where the depletion-region
    current is at least half the fitted current, 'high injection' where the diffusion current is above a tenth
    of IKF or the series drop I RS exceeds Vt, else 'ideal'; every C-V point is 'capacitance'.
    """
    out = {}
    rel = np.empty(0)
    region = np.empty(0, dtype=object)
    if prob.n_iv:
        rows = prob.iv_cond
        cur, vd = terminal_current(res, rows, prob.iv_v)
        total, diff, rec = junction_current(res, rows, vd, parts=True)
        vt = thermal_voltage(res.derived["temperature"][rows])
        reg = np.where(prob.iv_v < 0, "reverse",
                       np.where((diff > 0.1 * res.params["IKF"][rows]) | (cur * res.params["RS"][rows] > vt),
                                "high injection", np.where(rec >= 0.5 * total, "recombination", "ideal")))
        rel = np.expm1(r[:prob.n_iv])  # model / measured - 1
        region = reg.astype(object)
    if prob.n_cv:
        rel = np.concatenate([rel, r[prob.n_iv:]])
        region = np.concatenate([region, np.full(prob.n_cv, "capacitance", dtype=object)])
    for name in REGIONS:
        m = region == name
        if m.any():
            e = rel[m]
            out[name] = {"points": int(m.sum()), "rms": float(np.sqrt(np.mean(e ** 2))),
                         "worst": float(e[np.argmax(np.abs(e))])}
    if prob.n_iv:
        # the saturation current's temperature law, checked: the ideal region's median residual per temperature
        # (the band-gap and ni models carry IS(T); a trend here says they, or the lifetime law, miss the data)
        t = np.asarray(prob.conds, float)[prob.iv_cond, 0]
        t = np.where(t < 0, float(prob.base.temperature[0]), t)
        ideal = region[:prob.n_iv] == "ideal"
        temps = np.unique(t[ideal])
        if len(temps) >= 2:
            out["ideal by temperature"] = {f"{x:.2f} K": float(np.median(rel[:prob.n_iv][ideal & (t == x)]))
                                           for x in temps}
    return out


# --------------------------------------------------------------------------- the written description

_HEAD = re.compile(r"\s*\[\s*([A-Za-z0-9_.\-]+)\s*\]\s*(#.*)?$")
_ASSIGN = re.compile(r"\s*([A-Za-z0-9_\-]+(?:\s*\.\s*[A-Za-z0-9_\-]+)*)\s*=\s*(.*)$")
_QUANTITY = re.compile(r"""^(["'])\s*[-+0-9.eE]+\s*(.*?)\s*\1""")


def _unit_of(value_text, kind):
    m = _QUANTITY.match(value_text.strip())
    if m and m.group(2):
        try:
            unit_factor(m.group(2), kind)
            return m.group(2)
        except ValueError:
            pass
    return None


def _default_unit(kind, si):
    if kind == "time":
        return "ns" if si < 1e-6 else "us"
    return _UNIT[kind]


def _quantity(si, unit, kind):
    scale, offset = unit_factor(unit, kind)
    return f'"{(si - offset) / scale:.6g} {unit}"'


def _inline_comment(value_text):
    """The comment after a TOML value on its line (``  # ...``), or "": the first # outside quotes."""
    quote, k = None, 0
    while k < len(value_text):
        ch = value_text[k]
        if quote:
            if ch == "\\" and quote == '"':
                k += 1  # an escaped character of a basic string
            elif ch == quote:
                quote = None
        elif ch in "\"'":
            quote = ch
        elif ch == "#":
            return "  " + value_text[k:].rstrip()
        k += 1
    return ""


def _rewrite(original, cal, files):
    lines = original.splitlines()
    table = None
    where, heads, first_head = {}, {}, None
    for i, line in enumerate(lines):
        m = _HEAD.match(line)
        if m:
            table = m.group(1)
            heads.setdefault(table, i)
            first_head = i if first_head is None else first_head
            continue
        m = _ASSIGN.match(line)
        if m and not line.lstrip().startswith("#"):
            name = re.sub(r"\s+", "", m.group(1))
            where[f"{table}.{name}" if table else name] = (i, m.group(2))
    edits, inserts = {}, {}
    for key, fit in cal.fitted.items():
        kind = FITTABLE[key]
        spot = where.get(key)
        if kind == "number":  # a plain number, its standard error beside it
            text = f"{key.split('.', 1)[-1]} = {fit['value']:.6g}"
            comment = f"# calibrated: standard error {fit['stderr']:.2g}"
            if spot is not None:
                lead = lines[spot[0]][:len(lines[spot[0]]) - len(lines[spot[0]].lstrip())]
                edits[spot[0]] = [lead + comment, lead + text + _inline_comment(spot[1])]
            else:
                at = first_head if first_head is not None else len(lines)
                inserts.setdefault(at, []).extend([comment, text])
            continue
        alt = None
        if spot is None and key.endswith(".doping"):
            alt = where.get(key[0] + ".resistivity")
        if spot is None and key.endswith(".lifetime"):
            alt = where.get(key[0] + ".diffusion_length")
        unit = _unit_of(spot[1], kind) if spot else None
        unit = unit or _default_unit(kind, fit["value"])
        short = key.split(".", 1)[1] if "." in key else key
        text = f"{short} = {_quantity(fit['value'], unit, kind)}"
        rel = fit["stderr"] / fit["value"] if fit["value"] else math.inf
        comment = (f"# calibrated: standard error {_quantity(fit['stderr'], unit, kind).strip(chr(34))} "
                   f"({100 * rel:.2g} %)")
        target = spot or alt
        if target is not None:
            i = target[0]
            lead = lines[i][:len(lines[i]) - len(lines[i].lstrip())]
            if "." in key and not (key.split(".")[0] in heads and heads[key.split(".")[0]] < i):
                text = f"{key} = {_quantity(fit['value'], unit, kind)}"  # a dotted key at the top level
            edits[i] = [lead + comment, lead + text + _inline_comment(target[1])]  # the user's comment kept
        elif "." in key:
            side = key.split(".")[0]
            if side not in heads:
                raise InputError(f"no [{side}] table to write {key} into", key=key)
            inserts.setdefault(heads[side] + 1, []).extend([comment, text])
        else:
            at = first_head if first_head is not None else len(lines)
            inserts.setdefault(at, []).extend([comment, text])
    out = [f"# Calibrated by modelgen against: {', '.join(_clean(f) for f in files)}",
           "# residuals (model against measured, relative): " + "; ".join(
               f"{k} {v['points']} points rms {100 * v['rms']:.2g} % worst {100 * v['worst']:+.2g} %"
               for k, v in cal.residuals.items() if "points" in v),
           *([("# IS(T) check, the ideal region's median residual per temperature: " + "; ".join(
               f"{t} {100 * r:+.2g} %" for t, r in cal.residuals["ideal by temperature"].items()))]
             if "ideal by temperature" in cal.residuals else []),
           "# the calibrated values are physics estimates from these measurements: check them on further devices"]
    out += [f"# note: {_clean(n)}" for n in cal.notes if n.startswith("solver correction")]
    out += [f"# warning: {_clean(w)}" for w in cal.warnings]
    for i, line in enumerate(lines + [""]):
        out.extend(inserts.get(i, []))
        if i < len(lines):
            out.extend(edits.get(i, [line]))
    return "\n".join(out) + "\n"

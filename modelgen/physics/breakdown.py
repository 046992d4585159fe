"""Avalanche breakdown from the ionization integral.

Avalanche multiplication diverges when

    integral_0^W alpha_p(y) exp(-integral_0^y (alpha_p - alpha_n) dy') dy = 1,

with y measured from the n-side edge of the depletion region (where holes
enter it) towards the p side (Sze & Ng, *Physics of Semiconductor Devices*,
3rd ed. 2007, sec. 2.4.3). The field is the depletion-approximation field.

The field profile is parameterised by its peak value E0 at the metallurgical
junction, which makes reach-through simple: in an abrupt junction each side
depletes over d = min(eps E0 / (q N), t), t being the distance from the
junction to that side's contact (a heavily doped contact ends the depletion
region there), and the field falls linearly from E0 over that distance. The
reverse voltage follows from the field:

    Vbi + VR = sum over sides of (E0 d - q N d^2 / (2 eps)).

A linearly graded junction has E(x) = (q a / 2 eps)(W^2/4 - x^2) and
Vbi + VR = q a W^3 / (12 eps); reach-through is not modelled for it.

Breakdown figures are physics estimates: derate them and confirm on measured
devices.
"""

from __future__ import annotations

import numpy as np

from ..materials.silicon import Q

#: Nodes per side of the junction in the ionization-integral quadrature.
NODES_PER_SIDE = 256
#: Bracket for the peak field at breakdown [V/m] (5e4-2e6 V/cm).
FIELD_BRACKET = (5e6, 2e8)


def field_profile(e0, na, nd, tp, tn, grading, linear, permittivity, nodes=NODES_PER_SIDE):
    """Depletion-approximation field on a grid from the n edge to the p edge.

    Parameters
    ----------
    e0 : array_like
        Peak field magnitude at the junction [V/m], shape (n,).
    na, nd : array_like
        [m^-3].
    tp, tn : array_like
        Distance from the junction to the p and n contacts [m] (inf: no limit).
    grading : array_like
        a [m^-4], used where ``linear``.
    linear : array_like of bool
    permittivity : array_like
        [F/m].
    nodes : int
        Nodes per side.

    Returns
    -------
    y : numpy.ndarray
        Positions from the n edge [m], shape (n, 2 nodes - 1).
    field : numpy.ndarray
        Field magnitude there [V/m], same shape.
    potential : numpy.ndarray
        Total potential across the region, Vbi + VR [V], shape (n,).
    reach_p, reach_n : numpy.ndarray of bool
        Whether the depletion region reaches the p or n contact.
    """
    e0 = np.asarray(e0, float)
    eps = np.asarray(permittivity, float)
    na = np.asarray(na, float)
    nd = np.asarray(nd, float)
    lin = np.asarray(linear, bool)
    a = np.where(lin, grading, 1.0)
    # abrupt: free extents, clipped at the contacts
    dp_free = eps * e0 / (Q * na)
    dn_free = eps * e0 / (Q * nd)
    dp = np.where(lin, np.sqrt(2.0 * eps * e0 / (Q * a)), np.minimum(dp_free, tp))
    dn = np.where(lin, np.sqrt(2.0 * eps * e0 / (Q * a)), np.minimum(dn_free, tn))
    reach_p = ~lin & (dp_free >= tp)
    reach_n = ~lin & (dn_free >= tn)
    v_abrupt = e0 * dp - Q * na * dp**2 / (2 * eps) + e0 * dn - Q * nd * dn**2 / (2 * eps)
    w_lin = dp + dn
    v_linear = Q * a * w_lin**3 / (12 * eps)
    potential = np.where(lin, v_linear, v_abrupt)

    u = np.linspace(0.0, 1.0, nodes)[None, :]
    # distance from the junction on each side, n side first (from its edge)
    sn = (1.0 - u) * dn[:, None]          # n edge -> junction
    sp = u[:, 1:] * dp[:, None]           # junction -> p edge (skip duplicate 0)
    y = np.concatenate([dn[:, None] - sn, dn[:, None] + sp], axis=1)
    fn_ab = e0[:, None] - Q * nd[:, None] * sn / eps[:, None]
    fp_ab = e0[:, None] - Q * na[:, None] * sp / eps[:, None]
    x_lin = np.concatenate([-sn, sp], axis=1)  # position from the junction
    f_lin = Q * a[:, None] / (2 * eps[:, None]) * (w_lin[:, None] ** 2 / 4.0 - x_lin**2)
    field = np.where(lin[:, None], f_lin, np.concatenate([fn_ab, fp_ab], axis=1))
    return y, np.maximum(field, 0.0), potential, reach_p, reach_n


def _cumtrapz(f, y):
    inc = 0.5 * (f[:, 1:] + f[:, :-1]) * np.diff(y, axis=1)
    return np.concatenate([np.zeros((f.shape[0], 1)), np.cumsum(inc, axis=1)], axis=1)


def ionization_integral(y, field, temperature, coefficients):
    """Hole-initiated ionization integral over a field profile [-].

    I = integral alpha_p exp(-integral_0^y (alpha_p - alpha_n)) dy, y from the
    n edge; avalanche breakdown at I = 1 (Sze & Ng 2007, sec. 2.4.3).
    Trapezoidal rule on the given grid.

    Parameters
    ----------
    y, field : numpy.ndarray
        Grid [m] and field magnitude [V/m], shape (n, m).
    temperature : array_like
        [K], shape (n,).
    coefficients : callable
        ``coefficients(field, temperature) -> (alpha_n, alpha_p)`` [1/m].
    """
    with np.errstate(over="ignore"):
        return _integral(y, field, temperature, coefficients)


def _integral(y, field, temperature, coefficients):
    an, ap = coefficients(field, np.asarray(temperature, float)[:, None])
    k = _cumtrapz(ap - an, y)
    g = ap * np.exp(np.minimum(-k, 700.0))  # past e^700 the integral is >> 1 anyway
    return _cumtrapz(g, y)[:, -1]


def breakdown_voltage(vbi, na, nd, tp, tn, grading, linear, permittivity, temperature,
                      coefficients, iterations=40):
    """Avalanche breakdown voltage, solved for all devices at once.

    Bisection on ln(E0) within :data:`FIELD_BRACKET` for I(E0) = 1, then
    BV = V(E0) - Vbi. Valid for avalanche breakdown (BV above about 6 Eg/q);
    below 4 Eg/q tunnelling dominates (Sze & Ng 2007, sec. 2.4.3) and this
    estimate no longer applies.

    Parameters
    ----------
    vbi : array_like
        Built-in potential (Vbi abrupt, Vgr graded) [V].
    na, nd, tp, tn, grading, linear, permittivity :
        As in :func:`field_profile`.
    temperature : array_like
        [K].
    coefficients : callable
        Impact-ionization model, e.g.
        :func:`modelgen.materials.silicon.ionization_coefficients`.
    iterations : int
        Bisection steps; 40 give a relative field accuracy near 1e-11.

    Returns
    -------
    bv : numpy.ndarray
        [V]; NaN where no breakdown lies within the field bracket.
    peak_field : numpy.ndarray
        E0 at breakdown [V/m].
    reach_p, reach_n : numpy.ndarray of bool
        Depletion region at breakdown reaches the p / n contact.

    References
    ----------
    Sze & Ng (2007), sec. 2.4.3; ionization coefficients as supplied.
    """
    shape = np.shape(vbi)
    args = [np.broadcast_to(np.asarray(x, float), shape) for x in (na, nd, tp, tn, grading, permittivity, temperature)]
    na, nd, tp, tn, grading, eps, temp = args
    lin = np.broadcast_to(np.asarray(linear, bool), shape)

    def integral(e0):
        y, f, _, _, _ = field_profile(e0, na, nd, tp, tn, grading, lin, eps)
        return ionization_integral(y, f, temp, coefficients)

    lo = np.full(shape, np.log(FIELD_BRACKET[0]))
    hi = np.full(shape, np.log(FIELD_BRACKET[1]))
    found = (integral(np.exp(lo)) < 1.0) & (integral(np.exp(hi)) > 1.0)
    for _ in range(iterations):
        mid = 0.5 * (lo + hi)
        under = integral(np.exp(mid)) < 1.0
        lo = np.where(under, mid, lo)
        hi = np.where(under, hi, mid)
    e0 = np.exp(0.5 * (lo + hi))
    _, _, potential, reach_p, reach_n = field_profile(e0, na, nd, tp, tn, grading, lin, eps, nodes=2)
    bv = np.where(found, potential - np.asarray(vbi, float), np.nan)
    return bv, e0, reach_p & found, reach_n & found

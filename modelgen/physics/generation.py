"""Depletion-region generation current in reverse bias (Sah-Noyce-Shockley integral).

J = q * integral of R dx over the depletion region, R the Shockley-Read-Hall
rate of a single trap at mid-gap,

    R = ni (exp(V/Vt) - 1) / (tau_p (n/ni + 1) + tau_n (p/ni + 1)),

with flat quasi-Fermi levels (n p = ni^2 exp(V/Vt)) and the potential of the
depletion approximation (Sah, Noyce & Shockley, Proc. IRE 45, 1228 (1957);
Sze & Ng, *Physics of Semiconductor Devices*, 3rd ed. 2007, sec. 2.2-2.3.3).
In reverse bias R is the plateau -ni / (tau_n + tau_p) wherever both carriers
are far below ni, which is nearly the whole depletion region: J approaches
-q ni W / (tau_n + tau_p), the textbook q ni W / (2 tau) for equal lifetimes,
less the edge slices where a carrier density rises towards the doping.

The integral is taken in the normalised potential u = psi / Vt (n = ni
exp(u + V/2Vt), p = ni exp(V/2Vt - u)), in which dx = Vt du / E(u). It is
split where the integrand changes character: the depletion edges (where E
vanishes as a square root), the metallurgical junction (the kink of the
field), and the two places a carrier density crosses ni (where the rate
leaves its plateau, about one unit of u wide). Each piece takes
Gauss-Legendre nodes after the cubic map t^2 (3 - 2t), whose zero slope at
both ends removes the inverse square root of the field at the edges.
Vectorised: arguments broadcast (devices down, biases across); the loops are
over the fixed pieces and nodes.

:func:`modelgen.physics.recombination.sns_current_density` computes the same
integral in a form built for forward bias (its nodes sit where n = p); this
one is for reverse bias, where the whole depletion width generates.
"""

from __future__ import annotations

import numpy as np

from ..constants import Q
from .recombination import _arrays, _field_linear, _nodes

#: Gauss-Legendre nodes per piece: 16 gives 1e-4 against adaptive quadrature (tests).
NODES = 16
#: Half-width, in units of u, of the pieces around each place a density crosses ni.
TRANSITION = 6.0


def generation_current_density(bias, vj, na, nd, grading, linear, ni, permittivity, tau_n, tau_p, temperature,
                               nodes=NODES, edge=1.0):
    """SRH generation current density of the depletion region at a reverse bias [A/m^2] (negative).

    Parameters
    ----------
    bias : array_like
        Applied bias V [V], at most -3 Vt (reverse).
    vj : array_like
        Junction potential [V]: Vbi - 2Vt (abrupt) or the gradient voltage
        (linear), as :func:`modelgen.physics.junction.junction_potential`
        gives it; the depletion region spans a potential vj - V.
    na, nd : array_like
        Acceptor and donor densities of an abrupt junction [m^-3] (unused where linear).
    grading : array_like
        Impurity gradient [m^-4] (used where linear).
    linear : array_like of bool
    ni : array_like
        Intrinsic density [m^-3] (the same ni the forward integral uses).
    permittivity : array_like
        [F/m].
    tau_n, tau_p : array_like
        Trap lifetimes for electrons and holes [s].
    temperature : array_like
        [K].
    nodes : int
        Gauss-Legendre nodes per piece.
    edge : float
        Where an abrupt junction's depletion charge ends, in thermal voltages
        inside the doped side: 1 with vj = Vbi - 2 Vt (the forward
        integral's convention, which counts the majority-carrier tails), 0
        with vj = Vbi for the bare depletion approximation.

    Returns
    -------
    numpy.ndarray
        J [A/m^2], negative; NaN where the bias is not below -3 Vt.

    Notes
    -----
    Valid short of breakdown, for Boltzmann statistics and a mid-gap trap,
    with the depletion approximation's abrupt edges (an abrupt junction's
    edges are placed a thermal voltage inside the doped sides, as in the
    forward integral). Field-enhanced generation (trap-assisted tunnelling,
    Poole-Frenkel) is not included: at fields above about 3e5 V/cm it
    underestimates the leakage.
    """
    v, vt, linear, na, nd, eps, ni, tau_n, tau_p = _arrays(bias, temperature, linear, na, nd, permittivity, ni,
                                                          tau_n, tau_p)
    ok = v <= -3.0 * vt
    vd = np.asarray(vj, float) - v
    h = v / (2.0 * vt)
    span = vd / vt
    # the p edge of the depletion charge in u; an abrupt edge a thermal voltage inside the p side
    u_lo = np.where(linear, -0.5 * span, np.log(ni / np.where(linear, 1.0, na)) + h + edge)
    u_hi = u_lo + span
    phi_k = np.where(linear, 0.5 * vd, vd * nd / (na + nd))
    u_k = u_lo + phi_k / vt
    k = 2.0 * Q * vt / eps
    shape = np.broadcast(v, u_lo, u_k, k, tau_n, tau_p).shape
    cuts = [np.broadcast_to(c, shape) for c in (u_lo, h - TRANSITION, h + TRANSITION, u_k,
                                                 -h - TRANSITION, -h + TRANSITION, u_hi)]
    cuts = np.sort(np.clip(np.stack(cuts), np.broadcast_to(u_lo, shape), np.broadcast_to(u_hi, shape)), axis=0)
    lin = np.broadcast_to(linear, shape)
    a_l = np.broadcast_to(np.where(linear, grading, 1.0), shape)
    eps_b = np.broadcast_to(eps, shape)
    vd_b = np.broadcast_to(vd, shape)
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        w_l = np.cbrt(12.0 * eps_b * vd_b / (Q * a_l))
        emax_l = Q * a_l * w_l * w_l / (8.0 * eps_b)
    rows = lin if lin.any() else None
    u_lo_b = np.broadcast_to(u_lo, shape)
    vt_b = np.broadcast_to(vt, shape)
    t_nodes, t_weights = _nodes(nodes)
    total = np.zeros(shape)
    with np.errstate(invalid="ignore", divide="ignore", over="ignore", under="ignore"):
        for a, b in zip(cuts[:-1], cuts[1:]):
            du = b - a
            for t, wt in zip(t_nodes, t_weights):
                u = a + du * (t * t * (3.0 - 2.0 * t))
                e = np.array(np.sqrt(np.abs(np.where(u <= u_k, k * na * (u - u_lo), k * nd * (u_hi - u)))), ndmin=1)
                if rows is not None:  # the graded rows only (the field law costs a sine and an arcsine)
                    sel = np.array(rows, ndmin=1)
                    e[sel] = _field_linear(np.array((u - u_lo_b) * vt_b, ndmin=1)[sel], np.array(vd_b, ndmin=1)[sel],
                                           np.array(emax_l, ndmin=1)[sel])
                e = e.reshape(shape)
                den = tau_p * (np.exp(u + h) + 1.0) + tau_n * (np.exp(h - u) + 1.0)
                total += du * (6.0 * t * (1.0 - t) * wt) / (den * e)
    j = Q * ni * np.expm1(2.0 * h) * vt * total
    return np.where(ok, j, np.nan)

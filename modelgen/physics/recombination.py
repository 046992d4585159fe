"""Generation-recombination current of the depletion region (Sah, Noyce & Shockley 1957).

The current is the Shockley-Read-Hall rate of a mid-gap trap integrated over
the depletion region,

    J_rec(V) = q * integral (n p - ni^2) / (tau_p (n + ni) + tau_n (p + ni)) dx,

with flat quasi-Fermi levels across the region, so n p = ni^2 exp(V/Vt)
everywhere in it. Writing n = ni exp(V/2Vt) e^u and p = ni exp(V/2Vt) e^-u, u is
the electrostatic potential (in units of Vt) measured from the midpoint of
the quasi-Fermi levels, and dx = Vt du / E(u): the integral runs over the
potential, weighted by the inverse field. The rate peaks where
tau_p n = tau_n p (u* = ln(tau_n/tau_p)/2, n = p for equal lifetimes) and falls
as e^-|u - u*| on either side, so almost all of the current comes from a slice
about pi Vt / E(u*) thick: the Sah-Noyce-Shockley effective width, much
thinner than the depletion width at any forward bias.

The field is that of the depletion approximation at the bias
(:mod:`modelgen.physics.junction`): abrupt (E = sqrt(2 q N phi / eps) from
each edge of the depletion charge, whose potential drop is VJ - V with VJ =
Vbi - 2Vt; the carriers span Vbi - V, a thermal voltage of majority tail on
each side) or linearly graded (E = Emax (1 - s^2), s = 2x/W; the drop is
Vgr - V, centred on the metallurgical junction).

:func:`sns_current_density` evaluates the integral for arrays of devices and
biases with fixed Gauss-Legendre nodes, vectorised; :func:`fit_recombination`
fits the SPICE recombination term ISR, NR to it over a forward window in one
least-squares solve for all rows.

References
----------
C.-T. Sah, R. N. Noyce, W. Shockley, "Carrier generation and recombination in
p-n junctions and p-n junction characteristics", Proc. IRE 45, 1228 (1957).
W. Shockley, W. T. Read, "Statistics of the recombinations of holes and
electrons", Phys. Rev. 87, 835 (1952). Sze & Ng, *Physics of Semiconductor
Devices*, 3rd ed. (2007), sec. 2.3 (generation-recombination current).
"""

from __future__ import annotations

import numpy as np

from ..constants import Q, thermal_voltage

#: Gauss-Legendre nodes per half of the depletion region (each side of the field's kink).
NODES = 8
#: Number of biases in the fit window.
FIT_POINTS = 6
#: Fit window: from FIT_LOW_VT thermal voltages up to the lowest of FIT_HIGH [V] and VJ - FIT_EDGE_VT Vt.
FIT_LOW_VT = 4.0
FIT_HIGH = 0.6
FIT_EDGE_VT = 4.0
#: Range of the fitted NR [-].
NR_RANGE = (1.0, 2.0)


def _nodes(m):
    """Gauss-Legendre nodes and weights on [0, 1]."""
    x, w = np.polynomial.legendre.leggauss(m)
    return 0.5 * (x + 1.0), 0.5 * w


def _field_linear(phi, vd, emax):
    """E of a linearly graded junction at potential phi from the p edge of the depletion charge [V/m].

    E = Emax (1 - s^2) with s = 2x/W; phi - vd/2 = (vd/4)(3s - s^3) is solved by
    s = 2 sin(arcsin(y)/3), y = 2 phi/vd - 1 (Sze & Ng 2007, sec. 2.2.3, for the field).
    """
    y = np.clip(2.0 * phi / vd - 1.0, -1.0, 1.0)
    s = 2.0 * np.sin(np.arcsin(y) / 3.0)
    return emax * (1.0 - s * s)


def _arrays(bias, temperature, linear, na, nd, permittivity, ni, tau_n, tau_p):
    """The depletion-region integrals' arguments as float arrays (``linear`` bool), with Vt [V] from the temperature."""
    f = lambda a: np.asarray(a, float)  # noqa: E731
    return (f(bias), thermal_voltage(temperature), np.asarray(linear, bool), f(na), f(nd), f(permittivity), f(ni),
            f(tau_n), f(tau_p))


def sns_current_density(bias, vj, na, nd, grading, linear, ni, permittivity, tau_n, tau_p, temperature,
                        nodes=NODES):
    """Sah-Noyce-Shockley recombination current density over the depletion region.

    J_rec = q * integral of (n p - ni^2) / (tau_p (n + ni) + tau_n (p + ni)) dx
    with n p = ni^2 exp(V/Vt) and the potential of the depletion
    approximation at the bias (module docstring). The integral is taken in
    the potential: z = tanh((u - u*)/2) turns the rate, times du/dz, into a
    rational function; z is mapped by a cubic with zero slope at both ends, which
    removes the inverse-square-root of the field at the depletion edges; the
    depletion region is split at the kink of the field (the metallurgical
    junction) and each part takes ``nodes`` Gauss-Legendre nodes. Vectorised:
    the arguments broadcast together (devices down, biases across), and the
    only loop is over the fixed nodes.

    Parameters
    ----------
    bias : array_like
        Forward bias V across the junction [V], below ``vj``.
    vj : array_like
        Junction potential [V]: Vbi - 2Vt (abrupt) or Vgr (linear), as from
        :func:`modelgen.physics.junction.junction_potential`.
    na, nd : array_like
        Acceptor and donor densities of the abrupt junction [m^-3] (unused where linear).
    grading : array_like
        Impurity gradient a [m^-4] (used only where linear).
    linear : array_like of bool
        True for a linearly graded junction.
    ni : array_like
        Intrinsic density [m^-3].
    permittivity : array_like
        [F/m].
    tau_n, tau_p : array_like
        SRH lifetimes of the trap for electrons and holes [s].
    temperature : array_like
        [K].
    nodes : int, optional
        Gauss-Legendre nodes per part; 8 gives 0.1 % against adaptive
        quadrature for the devices modelgen describes (tests).

    Returns
    -------
    numpy.ndarray
        J_rec [A/m^2]; NaN where V >= VJ.

    Notes
    -----
    Valid at low injection (the depletion region's carriers far below the
    doping at its edges), for forward and reverse bias below VJ; in reverse
    bias it gives the generation current (negative) within the depletion
    approximation. Boltzmann statistics, one mid-gap trap level (Shockley &
    Read 1952). Where the field is constant near the peak and V >> Vt it
    approaches q ni exp(V/2Vt) pi Vt / (2 sqrt(tau_n tau_p) E) (Sah, Noyce &
    Shockley 1957; Sze & Ng 2007, sec. 2.3).

    References
    ----------
    Sah, Noyce & Shockley, Proc. IRE 45, 1228 (1957); Shockley & Read,
    Phys. Rev. 87, 835 (1952); Sze & Ng (2007), sec. 2.2 (depletion fields) and 2.3.
    """
    v, vt, linear, na, nd, eps, ni, tau_n, tau_p = _arrays(bias, temperature, linear, na, nd, permittivity, ni,
                                                          tau_n, tau_p)
    vd = np.asarray(vj, float) - v
    vd = np.where(vd > 0, vd, np.nan)
    span = vd / vt
    half = v / (2.0 * vt)
    # u at the p edge of the depletion charge: abrupt, a thermal voltage inside the p edge (p = NA there);
    # linear, centred on the junction
    u_lo = np.where(linear, -0.5 * span, np.log(ni / np.where(linear, 1.0, na)) + half + 1.0)
    phi_k = np.where(linear, 0.5 * vd, vd * nd / (na + nd))  # the field's kink (the junction)
    u_star = 0.5 * np.log(tau_n / tau_p)
    c_lo = u_star - u_lo  # u - u_lo = ln(zp/zm) + c_lo
    c_hi = u_lo + span - u_star  # u_hi - u = c_hi - ln(zp/zm)
    z0 = np.tanh(-0.5 * c_lo)
    zk = np.tanh(0.5 * (phi_k / vt - c_lo))
    z1 = np.tanh(0.5 * c_hi)
    # the rate times du/dz, without its factor ni (a^2 - 1), is 2 / (A zp^2 + B zm^2 + C zp zm),
    # zp = 1 + z, zm = 1 - z: a quadratic c0 + c1 z + c2 z^2 in z
    big_a = tau_p * np.exp(half + u_star)
    big_b = tau_n * np.exp(half - u_star)
    big_c = tau_p + tau_n
    c0 = big_a + big_b + big_c
    c1 = 2.0 * (big_a - big_b)
    c2 = big_a + big_b - big_c
    k = 2.0 * Q * vt / eps
    shape = np.broadcast(vd, z0, c0, k).shape
    lin = np.broadcast_to(linear, shape)
    rows = np.nonzero(lin) if lin.any() else None
    if rows is not None:
        vd_l, a_l, eps_l, c_l, vt_l = [np.broadcast_to(x, shape)[rows]
                                       for x in (vd, np.where(linear, grading, 1.0), eps, c_lo, vt)]
        w_l = np.cbrt(12.0 * eps_l * vd_l / (Q * a_l))
        emax_l = Q * a_l * w_l * w_l / (8.0 * eps_l)
    t_nodes, t_weights = _nodes(nodes)
    total = np.zeros(shape)
    z = np.empty(shape)
    den = np.empty(shape)
    half_log = np.empty(shape)  # ln(zp/zm) / 2 = artanh z
    e2 = np.empty(shape)
    for za, zb, side in ((z0, zk, 0), (zk, z1, 1)):
        dz = zb - za
        # E^2 = k N (u - u_lo) on the p part, k N (u_hi - u) on the n part, linear in artanh z
        slope = (2.0 * k * na) if side == 0 else (-2.0 * k * nd)
        offset = (k * na * c_lo) if side == 0 else (k * nd * c_hi)
        for t, wt in zip(t_nodes, t_weights):
            np.multiply(dz, t * t * (3.0 - 2.0 * t), out=z)
            z += za
            np.multiply(c2, z, out=den)
            den += c1
            den *= z
            den += c0
            np.arctanh(z, out=half_log)
            np.multiply(slope, half_log, out=e2)
            e2 += offset
            np.abs(e2, out=e2)
            np.sqrt(e2, out=e2)
            if rows is not None:
                e2[rows] = _field_linear((2.0 * half_log[rows] + c_l) * vt_l, vd_l, emax_l)
            den *= e2
            np.divide(dz * (12.0 * t * (1.0 - t) * wt), den, out=den)
            total += den
    return Q * ni * np.expm1(2.0 * half) * vt * total


def effective_width_limit(bias, field, tau_n, tau_p, ni, temperature):
    """Sah-Noyce-Shockley limit of the recombination current for a constant field at the peak.

    J = q ni exp(V/2Vt) (pi Vt / E) / (2 sqrt(tau_n tau_p)): the maximum
    rate ni exp(V/2Vt) / (2 sqrt(tau_n tau_p)) times the effective width
    pi Vt / E.

    Parameters
    ----------
    bias : array_like
        Forward bias [V], many Vt.
    field : array_like
        Field where the rate peaks (n = p for equal lifetimes) [V/m].
    tau_n, tau_p : array_like
        [s].
    ni : array_like
        [m^-3].
    temperature : array_like
        [K].

    Returns
    -------
    numpy.ndarray
        [A/m^2]. Valid for V >> Vt and a field that changes little over pi Vt / E.

    References
    ----------
    Sah, Noyce & Shockley, Proc. IRE 45, 1228 (1957); Sze & Ng (2007), sec. 2.3.
    """
    vt = thermal_voltage(temperature)
    return (Q * np.asarray(ni, float) * np.exp(np.asarray(bias, float) / (2 * vt)) * np.pi * vt
            / (2.0 * np.sqrt(np.asarray(tau_n, float) * np.asarray(tau_p, float)) * np.asarray(field, float)))


def fit_window(vj, na, nd, linear, ni, temperature, points=FIT_POINTS):
    """Biases of the recombination fit window for each device [V], shape (devices, points).

    From FIT_LOW_VT Vt (about 0.1 V at 300 K: below a few Vt the SNS form's
    (exp(V/Vt) - 1) and the card's (exp(V/(NR Vt)) - 1) differ in shape by
    design, and the current there is tiny) up to the lowest of

    - FIT_HIGH, 0.6 V: above it a silicon diode's current is diffusion or
      high injection, and the recombination term's share is small;
    - VJ - FIT_EDGE_VT Vt: closer to VJ the depletion approximation behind
      both forms fails;
    - the bias at which the rate's peak (n = p) comes within FIT_EDGE_VT Vt of
      a depletion edge: 2 Vt (ln(N/ni) - 1 - FIT_EDGE_VT) for the lighter side
      of an abrupt junction, VJ - 2 FIT_EDGE_VT Vt for a linear one. Beyond it
      the carriers in the depletion region approach the doping (the onset of
      high injection in a lightly doped side) and the low-injection integral
      no longer holds.

    The window is at least 2 Vt wide (a lightly doped side near intrinsic at
    a hot corner leaves no low-injection window; the fit then keeps NR within
    its physical range). The fit weights each bias by the recombination share
    of the current, so the upper end matters only where recombination still
    counts.

    Parameters
    ----------
    vj : array_like
        Junction potential [V].
    na, nd : array_like
        Dopings [m^-3].
    linear : array_like of bool
    ni : array_like
        [m^-3].
    temperature : array_like
        [K].
    points : int

    Returns
    -------
    numpy.ndarray
        [V].
    """
    vt = thermal_voltage(temperature)
    lo = FIT_LOW_VT * vt
    light = np.log(np.minimum(na, nd) / ni) - 1.0 - FIT_EDGE_VT
    peak = np.where(linear, np.asarray(vj, float) - 2.0 * FIT_EDGE_VT * vt, 2.0 * vt * light)
    hi = np.minimum(np.minimum(FIT_HIGH, np.asarray(vj, float) - FIT_EDGE_VT * vt), peak)
    hi = np.maximum(hi, lo + 2.0 * vt)
    return lo[:, None] + (hi - lo)[:, None] * np.linspace(0.0, 1.0, points)[None, :]


def fit_recombination(bias, j_rec, weight, vj, m, temperature, iterations=4):
    """ISR and NR of the SPICE recombination term fitted to a recombination current.

    The target form (ngspice's diode, the ISR term) is
    ISR (exp(V/(NR Vt)) - 1) ((1 - V/VJ)^2 + 0.005)^(M/2). On log current it
    is linear in ln ISR and 1/NR once the -1 is known, so the fit is weighted
    linear least squares with ln(1 - exp(-V/(NR Vt))) taken from the previous
    iterate (NR = 2 first); a fixed number of iterations, closed-form 2x2
    solves, all rows at once.

    Parameters
    ----------
    bias : numpy.ndarray
        (devices, points) forward biases [V], a few Vt and above.
    j_rec : numpy.ndarray
        Recombination current (density) at those biases, positive [A/m^2 or A].
    weight : numpy.ndarray
        Weight of each point (the recombination share of the total current).
    vj, m : array_like
        The card's VJ [V] and M [-] for each device.
    temperature : array_like
        [K].
    iterations : int
        Fixed-point passes for the -1 term.

    Returns
    -------
    (isr, nr) : tuple of numpy.ndarray
        ISR in the unit of ``j_rec``; NR [-].

    References
    ----------
    ngspice manual (diode model, recombination current ISR, NR); the form as
    implemented in :mod:`modelgen.spice.evaluator`.
    """
    v = np.asarray(bias, float)
    vt = thermal_voltage(temperature)[:, None]
    vj = np.asarray(vj, float)[:, None]
    m = np.asarray(m, float)[:, None]
    u = 1.0 - v / vj
    y0 = np.log(j_rec) - 0.5 * m * np.log(u * u + 0.005)
    w2 = np.asarray(weight, float) ** 2
    x = v / vt
    s0 = w2.sum(axis=1, keepdims=True)
    s1 = (w2 * x).sum(axis=1, keepdims=True)
    s2 = (w2 * x * x).sum(axis=1, keepdims=True)
    det = s0 * s2 - s1 * s1
    slope = np.full_like(s0, 0.5)
    for _ in range(iterations):
        y = y0 - np.log(-np.expm1(-x * slope))
        t0 = (w2 * y).sum(axis=1, keepdims=True)
        t1 = (w2 * x * y).sum(axis=1, keepdims=True)
        slope = (s0 * t1 - s1 * t0) / det
        intercept = (s2 * t0 - s1 * t1) / det
    # NR within the range of the SNS form's local ideality (1 at the edge of high injection, 2 at its
    # peak); where the fit leaves it (a window with almost no recombination), ISR is refitted at the bound
    slope = np.clip(slope, 1.0 / NR_RANGE[1], 1.0 / NR_RANGE[0])
    y = y0 - np.log(-np.expm1(-x * slope))
    intercept = (w2 * (y - slope * x)).sum(axis=1, keepdims=True) / s0
    return np.exp(intercept[:, 0]), 1.0 / slope[:, 0]

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

from ..constants import EPS0, Q

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


def _gauss_rule(order):
    """Gauss-Legendre nodes x and weights w on [0, 1], and the integration matrix S.

    (S f)_j approximates the integral of f from 0 to x_j from the values of
    f at the nodes (the indefinite integral of the interpolating polynomial),
    so cumulative integrals cost one small matrix product.
    """
    from numpy.polynomial import legendre as leg

    t, w = leg.leggauss(order)
    x = 0.5 * (t + 1.0)
    vander = leg.legvander(t, order - 1)
    integ = np.empty((order, order))
    for m in range(order):
        c = np.zeros(order)
        c[m] = 1.0
        integ[:, m] = 0.5 * leg.legval(t, leg.legint(c, lbnd=-1.0))
    return x, 0.5 * w, integ @ np.linalg.inv(vander)


#: Permittivity at which the starting guess's critical-field law holds (silicon, 11.9: Sze & Ng 2007);
#: it only turns field slopes back into a doping for the first bracket, never enters a result.
_GUESS_PERMITTIVITY = 11.9 * EPS0

#: Table of the critical field of thick abrupt junctions: log10 of the field slopes
#: q N / eps [V/m^2] from 8 to 20 (doping from ~1e11 to ~1e23 cm^-3), 8 points a decade.
TABLE_LOG_SLOPES = np.linspace(8.0, 20.0, 97)
#: Its temperature axis [K], 5 K apart; rows whose temperature lies outside (beyond the cubic stencil:
#: below 45 K or above 710 K) are solved directly. Every temperature takes the same path, so a device
#: gives the same BV alone and in a table with any mix of temperatures.
TABLE_TEMPERATURES = np.arange(40.0, 720.0 + 2.5, 5.0)
_TABLES: dict = {}


def _critical_field_table(coefficients, breakpoint, ix, iy, it):
    """ln E0 at breakdown of thick abrupt junctions on the (slope, slope, temperature) grid (cached).

    Only the grid points that interpolation at cells ``(ix, iy, it)`` needs
    (their 4 x 4 x 4 neighbourhoods) are solved, once each; a point's value
    never depends on which others were asked for.
    """
    key = (coefficients, breakpoint)
    m, nt = len(TABLE_LOG_SLOPES), len(TABLE_TEMPERATURES)
    if key not in _TABLES:
        _TABLES[key] = (np.full((m, m, nt), np.nan), np.zeros((m, m, nt), bool))
    table, done = _TABLES[key]
    need = np.zeros((m, m, nt), bool)
    cells = np.unique((np.asarray(ix) * m + np.asarray(iy)) * nt + np.asarray(it))
    cx, rest = np.divmod(cells, m * nt)
    cy, ct = np.divmod(rest, nt)
    for a in range(-1, 3):
        for b in range(-1, 3):
            for c in range(-1, 3):
                need[cx + a, cy + b, ct + c] = True
    todo = np.argwhere(need & ~done)
    if len(todo):
        g = 10.0 ** TABLE_LOG_SLOPES
        sn, sp = g[todo[:, 0]], g[todo[:, 1]]
        inf = np.full(len(todo), np.inf)
        x, found = _solve_abrupt(sn, sp, inf, inf, TABLE_TEMPERATURES[todo[:, 2]], coefficients, breakpoint)
        table[todo[:, 0], todo[:, 1], todo[:, 2]] = np.where(found, x, np.nan)
        done[todo[:, 0], todo[:, 1], todo[:, 2]] = True
    return table


#: Table of the critical field of linearly graded junctions: log10 of a / eps [m^-4 / (F/m)],
#: 16 points a decade, covering gradients from about 1e13 to 1e24 cm^-4 in silicon; its temperature
#: axis is :data:`TABLE_TEMPERATURES`.
GRADED_LOG_A = np.linspace(31.0, 42.0, 177)
_GRADED: dict = {}


def _graded_solve(g, temp, coefficients, iterations):
    """ln E0 at breakdown of linearly graded junctions with a / eps = ``g`` at ``temp``, by bisection.

    The field and potential depend on a and eps only through a / eps. NaN where the root lies outside
    :data:`FIELD_BRACKET`. Each entry depends on its own ``g`` and ``temp`` alone.
    """
    m = len(g)
    one = np.ones(m)
    lo = np.full(m, np.log(FIELD_BRACKET[0]))
    hi = np.full(m, np.log(FIELD_BRACKET[1]))

    def integral(e0):
        y, f, _, _, _ = field_profile(e0, one, one, np.inf * one, np.inf * one, g, np.ones(m, bool), one)
        return ionization_integral(y, f, temp, coefficients)

    ok = (integral(np.exp(lo)) < 1.0) & (integral(np.exp(hi)) > 1.0)
    for _ in range(iterations):
        mid = 0.5 * (lo + hi)
        under = integral(np.exp(mid)) < 1.0
        lo = np.where(under, mid, lo)
        hi = np.where(under, hi, mid)
    return np.where(ok, 0.5 * (lo + hi), np.nan)


def _graded_table(coefficients, iterations, ia, it):
    """ln E0 at breakdown of graded junctions on the (log a/eps, temperature) grid (cached).

    Only the 4 x 4 neighbourhoods of cells ``(ia, it)`` are solved, once each.
    """
    key = (coefficients, iterations)
    m, nt = len(GRADED_LOG_A), len(TABLE_TEMPERATURES)
    if key not in _GRADED:
        _GRADED[key] = (np.full((m, nt), np.nan), np.zeros((m, nt), bool))
    table, done = _GRADED[key]
    need = np.zeros((m, nt), bool)
    ca, ct = np.divmod(np.unique(np.asarray(ia) * nt + np.asarray(it)), nt)
    for a in range(-1, 3):
        for c in range(-1, 3):
            need[ca + a, ct + c] = True
    todo = np.argwhere(need & ~done)
    if len(todo):
        table[todo[:, 0], todo[:, 1]] = _graded_solve(10.0 ** GRADED_LOG_A[todo[:, 0]],
                                                      TABLE_TEMPERATURES[todo[:, 1]], coefficients, iterations)
        done[todo[:, 0], todo[:, 1]] = True
    return table


def _graded_critical_field(log_a, eps, temp, coefficients, iterations):
    """ln E0 at breakdown for graded junctions.

    Cubic (Catmull-Rom) in log a/eps and cubic (Lagrange) in temperature from the table; rows
    outside the table's temperature range are solved directly. Whether a row takes the table depends
    on that row alone.
    """
    g, tg = GRADED_LOG_A, TABLE_TEMPERATURES
    log_g = log_a - np.log10(eps)
    f = (log_g - g[0]) / (g[1] - g[0])
    ft = (temp - tg[0]) / (tg[1] - tg[0])
    with np.errstate(invalid="ignore"):  # NaN (a row already rejected) casts to some int; it is outside
        i, it = np.floor(f).astype(int), np.floor(ft).astype(int)
    in_a = (i >= 1) & (i <= len(g) - 3)
    in_t = (it >= 1) & (it <= len(tg) - 3)
    inside = in_a & in_t
    x = np.full(len(log_a), np.nan)
    if inside.any():
        table = _graded_table(coefficients, iterations, i[inside], it[inside])
        j = np.flatnonzero(inside)
        w, wt = _cubic_weights(f[j] - i[j]), _lagrange_weights(ft[j] - it[j])
        out = np.zeros(len(j))
        for a in range(4):
            inner = sum(wt[:, c] * table[i[j] - 1 + a, it[j] - 1 + c] for c in range(4))
            out += w[:, a] * inner
        x[j] = out
    direct = np.flatnonzero(in_a & ~in_t)
    if len(direct):
        x[direct] = _graded_solve(10.0 ** log_g[direct], temp[direct], coefficients, iterations)
    found = in_a & np.isfinite(x)
    return np.where(found, x, np.nan), found


def _cubic_weights(t):
    """Catmull-Rom weights of the four neighbours for a fraction t in [0, 1)."""
    t2, t3 = t * t, t * t * t
    return (np.stack([-0.5 * t3 + t2 - 0.5 * t, 1.5 * t3 - 2.5 * t2 + 1.0,
                      -1.5 * t3 + 2.0 * t2 + 0.5 * t, 0.5 * t3 - 0.5 * t2], axis=-1))


def _lagrange_weights(t):
    """Cubic Lagrange weights of the nodes -1, 0, 1, 2 for a fraction t in [0, 1)."""
    return np.stack([-t * (t - 1) * (t - 2) / 6, (t + 1) * (t - 1) * (t - 2) / 2,
                     -(t + 1) * t * (t - 2) / 2, (t + 1) * t * (t - 1) / 6], axis=-1)


def _table_cells(log_sn, log_sp, temp):
    """Grid cells of the points, their fractions, and whether the 4 x 4 x 4 stencil fits the grid."""
    g, tg = TABLE_LOG_SLOPES, TABLE_TEMPERATURES
    h = g[1] - g[0]
    fx, fy, ft = (log_sn - g[0]) / h, (log_sp - g[0]) / h, (temp - tg[0]) / (tg[1] - tg[0])
    with np.errstate(invalid="ignore"):  # NaN (a row already rejected) casts to some int; it is outside
        ix, iy, it = np.floor(fx).astype(int), np.floor(fy).astype(int), np.floor(ft).astype(int)
    inside = ((ix >= 1) & (ix <= len(g) - 3) & (iy >= 1) & (iy <= len(g) - 3)
              & (it >= 1) & (it <= len(tg) - 3))
    return np.where(inside, ix, 1), np.where(inside, iy, 1), np.where(inside, it, 1), fx, fy, ft, inside


def _interpolate_table(table, cells):
    """Bicubic (Catmull-Rom) in log slope and cubic (Lagrange) in temperature; NaN outside or next to a gap."""
    ix, iy, it, fx, fy, ft, inside = cells
    m, nt = table.shape[1], table.shape[2]
    wx, wy, wt = _cubic_weights(fx - ix), _cubic_weights(fy - iy), _lagrange_weights(ft - it)
    flat = table.ravel()
    out = np.zeros(len(ix))
    for a in range(4):
        for b in range(4):
            base = ((ix - 1 + a) * m + (iy - 1 + b)) * nt + (it - 1)
            inner = (wt[:, 0] * flat[base] + wt[:, 1] * flat[base + 1] + wt[:, 2] * flat[base + 2]
                     + wt[:, 3] * flat[base + 3])
            out += wx[:, a] * wy[:, b] * inner
    return np.where(inside, out, np.nan)


#: Gauss-Legendre order of each piece of the abrupt-junction ionization integral.
GAUSS_ORDER = 12
_X, _W, _S = _gauss_rule(GAUSS_ORDER)


def _pieces(e_lo, e0, breakpoint):
    """Field nodes covering [e_lo, e0] in two Gauss pieces split at ``breakpoint``.

    A piecewise ionization law (van Overstraeten & de Man's hole coefficients
    change at 4e5 V/cm) has a kink there; splitting keeps each piece smooth,
    so the quadrature stays spectrally accurate. A piece of zero width adds
    nothing.
    """
    c = np.clip(breakpoint, e_lo, e0) if breakpoint is not None else e0
    spans = (c - e_lo, e0 - c)
    starts = (e_lo, c)
    field = np.concatenate([st[:, None] + _X[None, :] * sp[:, None] for st, sp in zip(starts, spans)], axis=1)
    return field, spans


def _side_integrals(e_lo, e0, slope, temp, coefficients, breakpoint):
    """Rates at the nodes of one side, the cumulative and total inner integrals, weights (dy)."""
    field, (s1, s2) = _pieces(e_lo, e0, breakpoint)
    an, ap = coefficients(field, temp[:, None])
    phi = ap - an
    g = GAUSS_ORDER
    w1, w2 = (s1 / slope)[:, None] * _W, (s2 / slope)[:, None] * _W  # dy = dE / slope
    c1 = (s1 / slope)[:, None] * (phi[:, :g] @ _S.T)
    t1 = (phi[:, :g] * w1).sum(axis=1)
    c2 = t1[:, None] + (s2 / slope)[:, None] * (phi[:, g:] @ _S.T)
    tot = t1 + (phi[:, g:] * w2).sum(axis=1)
    return ap, np.concatenate([c1, c2], axis=1), tot, np.concatenate([w1, w2], axis=1)


def abrupt_ionization_integral(e0, sn, sp, tn, tp, temp, coefficients, breakpoint=None):
    """Hole-initiated ionization integral of an abrupt junction, in field space [-].

    Each side's field is linear in position (slope s = qN/eps), so
    dy = dE/s and every integral runs over the field from the side's far
    edge (0, or the field left at a contact it reaches) to the peak E0,
    with Gauss-Legendre quadrature (:data:`GAUSS_ORDER` nodes on each side
    of the coefficients' ``breakpoint``) and the cumulative inner integral
    from the spectral integration matrix. Agrees with a 2048-node grid
    solution to about 1e-6 (tests).

    Parameters
    ----------
    e0 : numpy.ndarray
        Peak field [V/m], shape (n,).
    sn, sp : numpy.ndarray
        Field slopes q ND/eps and q NA/eps [V/m^2].
    tn, tp : numpy.ndarray
        Distance from the junction to each contact [m] (inf: none).
    temp : numpy.ndarray
        [K].
    coefficients : callable
        ``coefficients(field, temperature) -> (alpha_n, alpha_p)`` [1/m].
    breakpoint : float, optional
        Field where the coefficients' law changes [V/m].
    """
    ecn = np.maximum(e0 - sn * tn, 0.0)
    ecp = np.maximum(e0 - sp * tp, 0.0)
    with np.errstate(over="ignore", invalid="ignore"):
        ap_n, cum_n, tot_n, w_n = _side_integrals(ecn, e0, sn, temp, coefficients, breakpoint)
        i_n = (ap_n * np.exp(np.minimum(-cum_n, 700.0)) * w_n).sum(axis=1)
        ap_p, cum_p, tot_p, w_p = _side_integrals(ecp, e0, sp, temp, coefficients, breakpoint)
        # on the p side the inner integral runs from the n edge: all of the n side, then E0 down to E
        k_p = tot_n[:, None] + (tot_p[:, None] - cum_p)
        i_p = (ap_p * np.exp(np.minimum(-k_p, 700.0)) * w_p).sum(axis=1)
    return i_n + i_p


def _solve_abrupt(sn, sp, tn, tp, temp, coefficients, breakpoint):
    """ln E0 at breakdown for abrupt junctions: regula falsi (Illinois) on ln I(ln E0).

    ``sn``, ``sp``: field slopes q N / eps of the n and p sides [V/m^2].
    """
    n = len(sn)

    def f(x, idx):
        return np.log(abrupt_ionization_integral(np.exp(x), sn[idx], sp[idx], tn[idx], tp[idx], temp[idx],
                                                 coefficients, breakpoint))

    # starting bracket around the one-sided critical field 4010 N^(1/8) V/cm (Baliga 2008, from memory)
    n_eff = _GUESS_PERMITTIVITY / Q * sn * sp / (sn + sp) / 1e6  # effective doping [cm^-3] at silicon's permittivity
    guess = np.log(np.clip(4.01e5 * n_eff ** 0.125, *FIELD_BRACKET))
    lo_lim, hi_lim = np.log(FIELD_BRACKET[0]), np.log(FIELD_BRACKET[1])
    a, b = np.maximum(guess - 0.3, lo_lim), np.minimum(guess + 0.3, hi_lim)
    idx = np.arange(n)
    fa, fb = f(a, idx), f(b, idx)
    for _ in range(12):  # widen until the root is bracketed or the bracket limits are reached
        low = (fa > 0) & (a > lo_lim)
        high = (fb < 0) & (b < hi_lim)
        if not (low.any() or high.any()):
            break
        if low.any():
            j = np.flatnonzero(low)
            b[j], fb[j] = a[j], fa[j]
            a[j] = np.maximum(a[j] - 0.6, lo_lim)
            fa[j] = f(a[j], j)
        if high.any():
            j = np.flatnonzero(high)
            a[j], fa[j] = b[j], fb[j]
            b[j] = np.minimum(b[j] + 0.6, hi_lim)
            fb[j] = f(b[j], j)
    found = (fa <= 0) & (fb >= 0) & np.isfinite(fa) & np.isfinite(fb)
    x = np.where(found, a, np.nan)
    active = np.flatnonzero(found)
    side = np.zeros(n, int)
    for _ in range(60):
        if not len(active):
            break
        j = active
        denom = fb[j] - fa[j]
        c = np.where(denom != 0, b[j] - fb[j] * (b[j] - a[j]) / np.where(denom != 0, denom, 1.0), 0.5 * (a[j] + b[j]))
        fc = f(c, j)
        x[j] = c
        left = fc < 0  # root in [c, b]
        # Illinois: halve the stale end's value when the same end is kept twice
        keep_b = left
        fa_new = np.where(left, fc, fa[j])
        fb_new = np.where(left, fb[j], fc)
        a[j] = np.where(left, c, a[j])
        b[j] = np.where(left, b[j], c)
        fb_new = np.where(left & (side[j] == 1), 0.5 * fb_new, fb_new)
        fa_new = np.where(~left & (side[j] == -1), 0.5 * fa_new, fa_new)
        side[j] = np.where(keep_b, 1, -1)
        fa[j], fb[j] = fa_new, fb_new
        done = (np.abs(fc) < 1e-10) | (b[j] - a[j] < 1e-12)  # ln I to 1e-10: E0 to ~1e-11
        active = j[~done]
    return x, found


def breakdown_voltage(vbi, na, nd, tp, tn, grading, linear, permittivity, temperature,
                      coefficients, iterations=40, breakpoint=None, use_table=True):
    """Avalanche breakdown voltage, solved for all devices at once.

    Abrupt junctions: regula falsi (Illinois) on ln I(ln E0) with the
    field-space quadrature of :func:`abrupt_ionization_integral`, from a
    bracket around the one-sided critical field. Linearly graded junctions:
    bisection on ln E0 within :data:`FIELD_BRACKET` with the grid quadrature
    of :func:`ionization_integral`. Then BV = V(E0) - Vbi. Valid for
    avalanche breakdown (BV above about 6 Eg/q); below 4 Eg/q tunnelling
    dominates (Sze & Ng 2007, sec. 2.4.3) and this estimate no longer applies.

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
        Bisection steps for graded junctions; 40 give a relative field
        accuracy near 1e-11.
    breakpoint : float, optional
        Field where the ionization law changes [V/m] (quadrature splits there).
    use_table : bool
        Take thick abrupt junctions' critical field from a cached table of
        direct solutions (bicubic in log slope: within 1e-6 of the direct
        solution for most junctions; where the peak field lies near the
        4e5 V/cm change of the hole coefficients the interpolation smooths
        the change: within 1e-4 at 300 K, where the two laws meet with a
        kink, and up to about 6e-3 at 600-700 K, where the temperature factor
        makes them jump), cubic in temperature on a 5 K grid (adding about
        1e-6); rows that reach through, or lie outside the
        table's doping or temperature range, are solved directly. Whether a
        row takes the table depends on that row alone, so one device and a
        table with any mix of temperatures give the same numbers.

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
    x = np.full(shape, np.nan)
    found = np.zeros(shape, bool)
    ab = np.flatnonzero(~lin)
    if len(ab):
        sn, sp = Q * nd[ab] / eps[ab], Q * na[ab] / eps[ab]
        direct = np.ones(len(ab), bool)
        if use_table:
            # thick junctions: the critical field from a table of direct solutions over slope, slope and
            # temperature; a row whose depletion region would reach a contact is solved directly
            lsn, lsp = np.log10(sn), np.log10(sp)
            cells = _table_cells(lsn, lsp, temp[ab])
            inside = cells[-1]
            if inside.any():
                table = _critical_field_table(coefficients, breakpoint, cells[0][inside], cells[1][inside],
                                              cells[2][inside])
                xt = _interpolate_table(table, cells)
                e0t = np.exp(xt)
                with np.errstate(invalid="ignore"):
                    thick = np.isfinite(xt) & (e0t / sn < tn[ab]) & (e0t / sp < tp[ab])
                x[ab[thick]] = xt[thick]
                found[ab[thick]] = True
                direct[thick] = False
        d = np.flatnonzero(direct)
        if len(d):
            x[ab[d]], found[ab[d]] = _solve_abrupt(sn[d], sp[d], tn[ab][d], tp[ab][d], temp[ab][d], coefficients,
                                                   breakpoint)
    linear_rows = np.flatnonzero(lin)
    if len(linear_rows):
        # the graded field depends on a / eps alone (reach-through is not modelled for it): the
        # critical field comes from a table over log10 a/eps and temperature, solved lazily
        x[linear_rows], found[linear_rows] = _graded_critical_field(
            np.log10(grading[linear_rows]), eps[linear_rows], temp[linear_rows], coefficients, iterations)
    e0 = np.exp(np.where(found, x, np.log(FIELD_BRACKET[1])))
    _, _, potential, reach_p, reach_n = field_profile(e0, na, nd, tp, tn, grading, lin, eps, nodes=2)
    bv = np.where(found, potential - np.asarray(vbi, float), np.nan)
    return bv, e0, reach_p & found, reach_n & found

"""External checks of modelgen.physics.diffusion.

The closed forms are checked against an independent numerical solution of the
boundary-value problem

    D u'' = u / tau,   u(0) = 1,   -D u'(W) = S u(W)

with scipy.integrate.solve_bvp, and against the long- and short-region limits
of Shockley, Bell Syst. Tech. J. 28, 435 (1949) (facts of the trade).
"""

import functools

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st
from scipy import constants as sc
from scipy import integrate

from modelgen.physics import diffusion as df

W_OVER_L = [0.05, 0.3, 1.0, 2.5, 6.0]
S_NORM = [0.0, 0.01, 1.0, 30.0, np.inf]


@functools.lru_cache(maxsize=None)
def solve_region(width, diff_len, diffusivity, velocity):
    """Numerical solution of D u'' = u/tau, u(0) = 1, -D u'(W) = S u(W).

    velocity = inf is the Dirichlet condition u(W) = 0. Returns the
    scipy.integrate.solve_bvp result (first-order system y = [u, u']).
    """
    ell2 = diff_len**2

    def fun(x, y):
        return np.vstack([y[1], y[0] / ell2])

    def bc(ya, yb):
        if np.isinf(velocity):
            far = yb[0]
        else:
            far = diffusivity * yb[1] + velocity * yb[0]
        return np.array([ya[0] - 1.0, far])

    x = np.linspace(0.0, width, 401)
    # crude linear initial guess, far from the exact profile on purpose
    y0 = np.vstack([1.0 - 0.5 * x / width, np.full_like(x, -0.5 / width)])
    sol = integrate.solve_bvp(fun, bc, x, y0, tol=1e-10, bc_tol=1e-13, max_nodes=200000)
    assert sol.success, sol.message
    return sol


def current_and_charge(width, diff_len, diffusivity, velocity):
    sol = solve_region(width, diff_len, diffusivity, velocity)
    j = -diffusivity * sol.sol(0.0)[1]
    q, _ = integrate.quad(lambda x: sol.sol(x)[0], 0.0, width, epsabs=0.0, epsrel=1e-12, limit=200)
    return j, q


# --------------------------------------------------------------------------
# Closed forms against the numerical boundary-value problem
# --------------------------------------------------------------------------

@pytest.mark.parametrize("w", W_OVER_L)
@pytest.mark.parametrize("s", S_NORM)
def test_factor_and_transit_time_vs_bvp(w, s):
    # Normalised units: L = 1, D = 1, tau = 1, u0 = 1.
    j, q = current_and_charge(w, 1.0, 1.0, s)
    f = df.finite_width_factor(w, s)
    assert f == pytest.approx(j, rel=1e-6)  # J = (D/L) F
    assert df.transit_time(1.0, w, s) * j == pytest.approx(q, rel=1e-6)  # Q = tau_t J


def test_saturation_current_si_units_vs_bvp():
    # n-type region, 1e16 cm^-3, minority holes; magnitudes typical of silicon
    n = 1e22  # m^-3
    ni = 9.65e15  # m^-3, Altermatt et al., J. Appl. Phys. 93, 1598 (2003)
    d = 11.6e-4  # m^2/s
    tau = 1e-6  # s
    ell = np.sqrt(d * tau)
    width = 20e-6  # m
    s_vel = 100.0  # m/s (1e4 cm/s)
    sol = solve_region(width, ell, d, s_vel)
    j_num = sc.e * ni**2 / n * (-d * sol.sol(0.0)[1])
    j0 = df.saturation_current_density(ni, n, d, ell, width, s_vel)
    assert j0 == pytest.approx(j_num, rel=1e-6)
    # stored charge per area over current = transit time
    q_num = sc.e * ni**2 / n * integrate.quad(lambda x: sol.sol(x)[0], 0.0, width,
                                              epsabs=0.0, epsrel=1e-12)[0]
    tt = df.transit_time(tau, width / ell, s_vel * ell / d)
    assert tt * j_num == pytest.approx(q_num, rel=1e-6)


@pytest.mark.parametrize("w, s", [(0.3, 0.0), (1.0, 1.0), (2.5, 30.0), (6.0, np.inf), (0.05, np.inf)])
def test_excess_profile_vs_bvp(w, s):
    sol = solve_region(w, 1.0, 1.0, s)
    x = np.array([0.0, 0.25, 0.5, 0.75, 1.0]) * w
    u_num = sol.sol(x)[0]
    u = df.excess_profile(x, w, 1.0, 1.0, s)
    np.testing.assert_allclose(u, u_num, rtol=1e-6, atol=1e-9)


def test_excess_profile_vs_bvp_si_units():
    d, tau = 30e-4, 2e-6
    ell = np.sqrt(d * tau)
    width = 60e-6
    s_vel = 1e3
    sol = solve_region(width, ell, d, s_vel)
    x = np.linspace(0.0, width, 7)
    np.testing.assert_allclose(df.excess_profile(x, width, ell, d, s_vel), sol.sol(x)[0],
                               rtol=1e-6, atol=1e-9)


def test_excess_profile_finite_for_wide_region():
    # A region much longer than L: u(x)/u0 -> exp(-x/L) (Shockley 1949, long diode),
    # for any contact. W/L = 1000 must not overflow into NaN.
    x = np.array([0.0, 1.0, 5.0])
    for s in (0.0, 1.0, np.inf):
        u = df.excess_profile(x, 1000.0, 1.0, 1.0, s)
        np.testing.assert_allclose(u, np.exp(-x), rtol=1e-12)


# --------------------------------------------------------------------------
# Long- and short-region limits (Shockley 1949; fact of the trade)
# --------------------------------------------------------------------------

NI, N, D, TAU = 1e16, 1e23, 1e-3, 1e-6  # SI
L = np.sqrt(D * TAU)


def test_short_ohmic_limit():
    # W << L, ideal ohmic contact: J0 = q ni^2 D / (N W)
    width = 1e-4 * L
    j0 = df.saturation_current_density(NI, N, D, L, width, np.inf)
    assert j0 == pytest.approx(sc.e * NI**2 * D / (N * width), rel=1e-6)


def test_long_limit():
    # W >> L: J0 = q ni^2 D / (N L), whatever the contact
    for s_vel in (0.0, 1.0, np.inf):
        j0 = df.saturation_current_density(NI, N, D, L, 40 * L, s_vel)
        assert j0 == pytest.approx(sc.e * NI**2 * D / (N * L), rel=1e-6)


def test_short_reflecting_limit():
    # W << L, reflecting contact: all injected carriers recombine in the volume,
    # J0 = q ni^2 W / (N tau)
    width = 1e-4 * L
    j0 = df.saturation_current_density(NI, N, D, L, width, 0.0)
    assert j0 == pytest.approx(sc.e * NI**2 * width / (N * TAU), rel=1e-6)


def test_transit_time_limits():
    # ohmic short region: W^2 / (2 D) (base transit time, common practice)
    width = 1e-4 * L
    assert df.transit_time(TAU, width / L, np.inf) == pytest.approx(width**2 / (2 * D), rel=1e-6)
    # long region: the lifetime
    assert df.transit_time(TAU, 40.0, np.inf) == pytest.approx(TAU, rel=1e-6)
    assert df.transit_time(TAU, 40.0, 1.0) == pytest.approx(TAU, rel=1e-6)
    # reflecting contact: nothing leaves, so Q/J = tau for any width
    for w in (1e-4, 0.3, 3.0):
        assert df.transit_time(TAU, w, 0.0) == pytest.approx(TAU, rel=1e-12)


def test_contact_velocity_equal_to_diffusion_velocity():
    # S = D/L (s = 1): the contact looks like an infinitely long region, F = 1 exactly
    w = np.array([0.01, 0.5, 2.0, 20.0])
    np.testing.assert_allclose(df.finite_width_factor(w, 1.0), 1.0, rtol=1e-14)


def test_reflecting_and_ohmic_closed_forms():
    # S = 0: tanh w; S -> inf: coth w (Sze & Ng 2007, ch. 2)
    w = np.array([0.01, 0.5, 2.0, 20.0])
    np.testing.assert_allclose(df.finite_width_factor(w, 0.0), np.tanh(w), rtol=1e-14)
    np.testing.assert_allclose(df.finite_width_factor(w, np.inf), 1 / np.tanh(w), rtol=1e-14)


# --------------------------------------------------------------------------
# Robustness
# --------------------------------------------------------------------------

@pytest.mark.parametrize("w", [1e-4, 1.0, 30.0, 710.0, 1e3, 1e4])
@pytest.mark.parametrize("s", [0.0, 1e-300, 1.0, 1e300, np.inf])
def test_no_overflow_or_nan(w, s):
    with np.errstate(over="raise", invalid="raise", divide="raise", under="ignore"):
        f = df.finite_width_factor(w, s)
        tt = df.transit_time(1.0, w, s)
    assert np.isfinite(f) and f > 0
    assert np.isfinite(tt) and 0 < tt <= 1.0
    # F lies between the reflecting and ohmic limits
    t = np.tanh(w)
    assert t * (1 - 1e-12) <= f <= (1 / t) * (1 + 1e-12)


def test_array_broadcasting_mixed_contacts():
    w = np.array([[0.1], [1.0], [5.0]])
    s = np.array([0.0, 0.5, 2.0, np.inf])
    f = df.finite_width_factor(w, s)
    assert f.shape == (3, 4)
    expected = np.where(np.isinf(s), 1 / np.tanh(w),
                        (np.where(np.isinf(s), 0, s) * np.cosh(w) + np.sinh(w))
                        / (np.where(np.isinf(s), 0, s) * np.sinh(w) + np.cosh(w)))
    np.testing.assert_allclose(f, expected, rtol=1e-13)


@settings(max_examples=300, deadline=None)
@given(w=st.floats(1e-4, 50.0), s=st.floats(0.0, 1e6))
def test_factor_bounds_and_transit_time(w, s):
    # F = (s + t)/(1 + s t), t = tanh w in (0, 1):
    #   F - t = s (1 - t^2)/(1 + s t) >= 0,  1/t - F = (1 - t^2)/(t (1 + s t)) > 0,
    #   F - 1 = (s - 1)(1 - t)/(1 + s t): F <= 1 for s <= 1 and F >= 1 for s >= 1.
    f = float(df.finite_width_factor(w, s))
    t = np.tanh(w)
    slack = 1e-12
    assert t * (1 - slack) <= f <= (1 / t) * (1 + slack)
    if s <= 1.0:
        assert f <= 1.0 + slack
    if s >= 1.0:
        assert f >= 1.0 - slack
    tau = 3e-6
    tt = float(df.transit_time(tau, w, s))
    assert 0.0 < tt <= tau * (1 + slack)

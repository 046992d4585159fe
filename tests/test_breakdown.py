"""External checks of modelgen.physics.breakdown with the silicon ionization model.

The reference breakdown voltages are computed here independently: the
van Overstraeten & de Man (1970) coefficients are written out again in cm
units, the depletion-approximation field is written out for each profile, and
the avalanche condition is the *electron-initiated* form of the ionization
integral (Sze & Ng, Physics of Semiconductor Devices, 3rd ed. 2007,
sec. 2.4.3), measured from the p edge of the depletion region x = 0:

    integral_0^W alpha_n(x) exp(-integral_0^x (alpha_n - alpha_p) dx') dx = 1,

evaluated with nested scipy.integrate.quad and solved with scipy.optimize.brentq.
The package uses the hole-initiated form from the n edge (Gauss-Legendre in
field space and regula falsi for abrupt junctions, a grid quadrature and a
table for graded ones); both forms vanish 1/M at the same field.
"""

import functools
import math

import numpy as np
import pytest
from scipy import constants as sc
from scipy import integrate, optimize

from modelgen.materials import silicon as si
from modelgen.physics import breakdown as bd

CM3 = 1e6  # cm^-3 -> m^-3
EPS = 11.9 * sc.epsilon_0  # Sze & Ng (2007), App. G: eps_r = 11.9
QE = sc.e
NI = 9.65e9 * CM3  # Altermatt et al., J. Appl. Phys. 93, 1598 (2003)
NA_PLUS = 1e20 * CM3  # p+ side of the one-sided junctions
UNUSED_N = 1e22  # na, nd placeholders: not used where the junction is linearly graded
E_SWITCH = 4e5 * 100.0  # V/m: hole-coefficient switch of van Overstraeten & de Man


def gamma_vodm(t):
    # van Overstraeten & de Man (1970) temperature law, hw = 0.063 eV (from memory)
    kt = lambda tt: sc.k * tt / sc.e
    return math.tanh(0.063 / (2 * kt(300.0))) / math.tanh(0.063 / (2 * kt(t)))


def alpha_vodm(e_vm, g=1.0):
    """van Overstraeten & de Man, Solid-State Electron. 13, 583 (1970), in cm
    units (from memory, via REFERENCES.md); field in V/m, result in 1/m."""
    e = e_vm / 100.0
    if e <= 0.0:
        return 0.0, 0.0
    an = g * 7.03e5 * math.exp(-g * 1.231e6 / e)
    if e >= 4e5:
        ap = g * 6.71e5 * math.exp(-g * 1.693e6 / e)
    else:
        ap = g * 1.582e6 * math.exp(-g * 2.036e6 / e)
    return an * 100.0, ap * 100.0


def electron_integral(field, width, breaks, g=1.0):
    """Electron-initiated ionization integral for field(x), 0 <= x <= width
    (x = 0 at the p edge). ``breaks``: points where the field has a kink or
    crosses the hole-coefficient switch."""
    breaks = sorted(b for b in breaks if 0.0 < b < width)

    def diff(x):
        an, ap = alpha_vodm(field(x), g)
        return an - ap

    def k_of(x):
        pts = [b for b in breaks if b < x]
        return integrate.quad(diff, 0.0, x, points=pts or None, epsabs=0.0, epsrel=1e-12, limit=200)[0]

    def integrand(x):
        return alpha_vodm(field(x), g)[0] * math.exp(-k_of(x))

    return integrate.quad(integrand, 0.0, width, points=breaks or None,
                          epsabs=0.0, epsrel=1e-10, limit=200)[0]


def abrupt_profile(e0, na, nd, tn=math.inf):
    """Field of an abrupt junction with peak e0, p side then n side (n side
    clipped at the n+ contact at distance tn from the junction)."""
    dp = EPS * e0 / (QE * na)
    dn = min(EPS * e0 / (QE * nd), tn)

    def field(x):
        if x <= dp:
            return QE * na * x / EPS  # rises from 0 at the p edge to e0
        return e0 - QE * nd * (x - dp) / EPS

    breaks = [dp]
    if e0 > E_SWITCH:
        breaks += [(E_SWITCH * EPS) / (QE * na), dp + (e0 - E_SWITCH) * EPS / (QE * nd)]
    volts = e0 * dp - QE * na * dp**2 / (2 * EPS) + e0 * dn - QE * nd * dn**2 / (2 * EPS)
    return field, dp + dn, breaks, volts, dn


@functools.lru_cache(maxsize=None)
def reference_abrupt(nd, tn=math.inf, temperature=300.0):
    """Independent breakdown of a p+n junction: (total potential Vbi + BV, E0, dn)."""
    g = gamma_vodm(temperature)

    def excess(e0):
        field, width, breaks, _, _ = abrupt_profile(e0, NA_PLUS, nd, tn)
        return electron_integral(field, width, breaks, g) - 1.0

    e0 = optimize.brentq(excess, 1e7, 1.5e8, xtol=1e-9, rtol=1e-12)
    _, _, _, volts, dn = abrupt_profile(e0, NA_PLUS, nd, tn)
    return volts, e0, dn


@functools.lru_cache(maxsize=None)
def reference_linear(a, temperature=300.0):
    """Independent breakdown of a linearly graded junction, parameterised by the
    depletion width W: E(x) = q a/(2 eps) (W^2/4 - xc^2), xc from the junction."""
    g = gamma_vodm(temperature)

    def setup(w):
        field = lambda x: QE * a / (2 * EPS) * (w * w / 4 - (x - w / 2) ** 2)
        e0 = QE * a * w * w / (8 * EPS)
        breaks = [w / 2]
        if e0 > E_SWITCH:
            h = math.sqrt(w * w / 4 - 2 * EPS * E_SWITCH / (QE * a))
            breaks += [w / 2 - h, w / 2 + h]
        return field, breaks, e0

    def excess(w):
        field, breaks, _ = setup(w)
        return electron_integral(field, w, breaks, g) - 1.0

    # bracket in W from peak fields 1e5 and 1.5e6 V/cm
    w_lo = math.sqrt(8 * EPS * 1e7 / (QE * a))
    w_hi = math.sqrt(8 * EPS * 1.5e8 / (QE * a))
    w = optimize.brentq(excess, w_lo, w_hi, xtol=1e-16, rtol=1e-12)
    return QE * a * w**3 / (12 * EPS), setup(w)[2]


def vbi_abrupt(na, nd, t=300.0):
    # Sze & Ng (2007), sec. 2.2.1: kT/q ln(NA ND / ni^2)
    return sc.k * t / sc.e * math.log(na * nd / NI**2)


def package_abrupt(nd, tn=np.inf, temperature=300.0):
    nd = np.atleast_1d(np.asarray(nd, float))
    vbi = np.array([vbi_abrupt(NA_PLUS, x) for x in nd])
    return vbi, bd.breakdown_voltage(vbi, NA_PLUS, nd, np.inf, tn, 1.0, False, EPS,
                                     temperature, si.ionization_coefficients)


# --------------------------------------------------------------------------
# Independent ionization-integral solution
# --------------------------------------------------------------------------

@pytest.mark.parametrize("nd_cm", [1e15, 1e16, 1e17])
def test_abrupt_one_sided_vs_independent(nd_cm):
    nd = nd_cm * CM3
    vbi, (bv, e0, reach_p, reach_n) = package_abrupt(nd)
    volts_ref, e0_ref, _ = reference_abrupt(nd)
    # thick junctions come from the critical-field table: within 1e-5 of the independent solution,
    # and about 1.5e-4 at 1e16 cm^-3, whose peak field sits at the 4e5 V/cm change of the hole law
    # that the table's interpolation smooths (documented in breakdown_voltage)
    assert bv[0] == pytest.approx(volts_ref - vbi[0], rel=3e-4)
    assert e0[0] == pytest.approx(e0_ref, rel=3e-4)
    assert not reach_p[0] and not reach_n[0]


def test_abrupt_400k_vs_independent():
    nd = 1e16 * CM3
    vbi = vbi_abrupt(NA_PLUS, nd, 400.0)
    bv, *_ = bd.breakdown_voltage(np.array([vbi]), NA_PLUS, nd, np.inf, np.inf, 1.0, False,
                                  EPS, 400.0, si.ionization_coefficients)
    volts_ref, _, _ = reference_abrupt(nd, temperature=400.0)
    # at 400 K this junction's peak field sits at the 4e5 V/cm change of the hole law, where the
    # temperature factor makes the two fits jump; the table smooths the jump: 1.5e-3 here (documented)
    assert bv[0] == pytest.approx(volts_ref - vbi, rel=2e-3)


# --------------------------------------------------------------------------
# Published trends
# --------------------------------------------------------------------------

@pytest.mark.parametrize("nd_cm, lo, hi", [
    (1e15, 0.7, 1.1), (3e15, 0.7, 1.1), (1e16, 0.7, 1.1), (3e16, 0.7, 1.1),
    # At 1e17 cm^-3 the van Overstraeten-de Man coefficients (solved independently
    # above: about 14 V) lie some 25-30 % above the Sze-Gibbons trend (11 V);
    # the trend formula is itself only an approximation of their curve.
    (1e17, 0.7, 1.35),
])
def test_sze_gibbons_trend(nd_cm, lo, hi):
    # Sze & Gibbons, Appl. Phys. Lett. 8, 111 (1966): BV ~ 60 (Eg/1.1)^1.5 (N/1e16)^-0.75 V
    # (from memory), Eg = 1.1245 eV at 300 K (Thurmond 1975).
    _, (bv, *_) = package_abrupt(nd_cm * CM3)
    sg = 60.0 * (1.1245 / 1.1) ** 1.5 * (nd_cm / 1e16) ** -0.75
    assert lo * sg <= bv[0] <= hi * sg


@pytest.mark.parametrize("nd_cm", [1e15, 3e15, 1e16, 3e16])
def test_baliga_power_law(nd_cm):
    # Baliga, Fundamentals of Power Semiconductor Devices (2008):
    # BV = 5.34e13 N^-3/4 V, N in cm^-3 (from memory). A single power law fitted to a curved
    # log-log dependence (and to other ionization coefficients): the package lies 15 % below it at
    # 1e15 and 14 % above at 3e16 cm^-3, hence 20 %.
    _, (bv, *_) = package_abrupt(nd_cm * CM3)
    assert bv[0] == pytest.approx(5.34e13 * nd_cm**-0.75, rel=0.20)


def test_bv_falls_with_doping():
    _, (bv, *_) = package_abrupt(np.logspace(15, 17, 7) * CM3)
    assert np.all(np.diff(bv) < 0)


def test_bv_rises_with_temperature():
    # Avalanche breakdown has a positive temperature coefficient (common practice)
    nd = np.array([1e15, 1e16, 1e17]) * CM3
    _, (bv300, *_) = package_abrupt(nd, temperature=300.0)
    _, (bv400, *_) = package_abrupt(nd, temperature=400.0)
    assert np.all(bv400 > bv300)


# --------------------------------------------------------------------------
# Reach-through (punch-through to the n+ contact)
# --------------------------------------------------------------------------

@pytest.mark.parametrize("nd_cm", [1e15, 1e16, 1e17])
def test_reach_through(nd_cm):
    nd = nd_cm * CM3
    _, _, dn_thick = reference_abrupt(nd)
    tn = 0.5 * dn_thick
    vbi, (bv_thick, *_) = package_abrupt(nd)
    _, (bv, e0, reach_p, reach_n) = package_abrupt(nd, tn=tn)
    assert bv[0] < bv_thick[0]
    assert reach_n[0] and not reach_p[0]
    # independent trapezoidal-field solution
    volts_ref, e0_ref, dn_ref = reference_abrupt(nd, tn=tn)
    assert dn_ref == tn
    # rows that reach through are solved directly: two quadratures of the same integral agree to ~3e-6
    assert bv[0] == pytest.approx(volts_ref - vbi[0], rel=2e-5)
    assert e0[0] == pytest.approx(e0_ref, rel=2e-5)


# --------------------------------------------------------------------------
# Linearly graded junction
# --------------------------------------------------------------------------

@pytest.mark.parametrize("a_cm4", [1e20, 1e21, 1e22])
def test_linear_graded_vs_independent(a_cm4):
    a = a_cm4 * 1e8  # cm^-4 -> m^-4
    vt = sc.k * 300.0 / sc.e
    # Sze & Ng (2007), sec. 2.2.3: Vgr = (2kT/3q) ln(a^2 eps (kT/q) / (8 q ni^3)). Only a
    # constant subtracted from the same total potential on both sides of the check.
    vgr = 2 * vt / 3 * math.log(a * a * EPS * vt / (8 * QE * NI**3))
    bv, e0, reach_p, reach_n = bd.breakdown_voltage(np.array([vgr]), UNUSED_N, UNUSED_N, np.inf, np.inf, a,
                                                    True, EPS, 300.0, si.ionization_coefficients)
    volts_ref, e0_ref = reference_linear(a)
    # the graded table's grid quadrature (511 nodes, trapezoidal) agrees to ~1e-5 with the adaptive one
    assert bv[0] == pytest.approx(volts_ref - vgr, rel=3e-5)
    assert e0[0] == pytest.approx(e0_ref, rel=3e-5)
    assert not reach_p[0] and not reach_n[0]


def test_linear_graded_bv_falls_with_gradient():
    # Sze & Gibbons (1966): BV of a linearly graded junction falls roughly as a^-0.4 (from memory)
    a = np.array([1e20, 1e21, 1e22]) * 1e8
    bv, *_ = bd.breakdown_voltage(np.zeros(3), UNUSED_N, UNUSED_N, np.inf, np.inf, a, True, EPS, 300.0,
                                  si.ionization_coefficients)
    assert np.all(np.diff(bv) < 0)
    slope = np.diff(np.log(bv)) / np.diff(np.log(a))
    assert np.all((slope > -0.5) & (slope < -0.3))


@pytest.mark.parametrize("a_cm4", [1e20, 1e21, 1e22])
def test_linear_graded_sze_gibbons_trend(a_cm4):
    # Sze & Gibbons (1966), linearly graded junction:
    # BV ~ 60 (Eg/1.1)^1.2 (a / 3e20 cm^-4)^-0.4 V (from memory). The independent
    # van Overstraeten-de Man solution above lies about 10 % below this trend at
    # 1e20 cm^-4 and about 20 % above it at 1e22 cm^-4, hence 0.75-1.25.
    a = a_cm4 * 1e8
    bv, *_ = bd.breakdown_voltage(np.zeros(1), UNUSED_N, UNUSED_N, np.inf, np.inf, a, True, EPS,
                                  300.0, si.ionization_coefficients)
    sg = 60.0 * (1.1245 / 1.1) ** 1.2 * (a_cm4 / 3e20) ** -0.4
    assert 0.75 * sg <= bv[0] <= 1.25 * sg


@pytest.mark.parametrize("temperature", [233.15, 300.15, 312.4, 398.15])
def test_table_of_thick_junctions_matches_the_direct_solution(temperature):
    # The cached critical-field table (bicubic in log slope, cubic in temperature) against the direct
    # solver on the same devices; both are modelgen's, so this checks the interpolation only. The
    # independent checks above go through the table for thick junctions.
    rng = np.random.default_rng(7)
    n = 400
    na, nd = 10 ** rng.uniform(21, 26, n), 10 ** rng.uniform(20, 23.5, n)
    inf = np.full(n, np.inf)
    args = (np.full(n, 0.7), na, nd, inf, inf, np.zeros(n), np.zeros(n, bool), np.full(n, EPS),
            np.full(n, temperature), si.ionization_coefficients)
    bv_t, *_ = bd.breakdown_voltage(*args, breakpoint=si.IONIZATION_BREAKPOINT)
    bv_d, *_ = bd.breakdown_voltage(*args, breakpoint=si.IONIZATION_BREAKPOINT, use_table=False)
    ok = np.isfinite(bv_d)
    assert ok.sum() > 0.9 * n and np.array_equal(ok, np.isfinite(bv_t))
    err = np.abs(bv_t[ok] / bv_d[ok] - 1)
    # most junctions: the interpolation's own accuracy
    assert np.median(err) < 1e-5
    # near the 4e5 V/cm change of the hole coefficients the interpolation smooths the change: a kink
    # at 300 K (measured up to 1.3e-4), a jump elsewhere since the temperature factor scales the two
    # laws differently (measured up to 1.7e-3 at 398 K): the bound is the documented one
    assert err.max() < (2e-4 if temperature == 300.15 else 2e-3)


@pytest.mark.parametrize("temperature", [233.15, 300.15, 398.15])
def test_graded_table_matches_direct_bisection(temperature):
    # graded junctions take their critical field from a table over a/eps and temperature; here
    # against a direct bisection with the same grid quadrature (both modelgen's: this checks the
    # interpolation)
    from modelgen.physics import breakdown as b
    from modelgen.materials import silicon as s
    rng = np.random.default_rng(11)
    n = 60
    a = 10 ** rng.uniform(26, 30, n)  # 1e18-1e22 cm^-4
    eps = np.full(n, 11.9 * s.EPS0)
    one, inf, t = np.ones(n), np.full(n, np.inf), np.full(n, temperature)
    bv, e0, _, _ = b.breakdown_voltage(np.full(n, 0.6), one, one, inf, inf, a, np.ones(n, bool), eps, t,
                                       s.ionization_coefficients, breakpoint=s.IONIZATION_BREAKPOINT)
    lo, hi = np.full(n, np.log(b.FIELD_BRACKET[0])), np.full(n, np.log(b.FIELD_BRACKET[1]))
    for _ in range(45):
        mid = 0.5 * (lo + hi)
        y, f, _, _, _ = b.field_profile(np.exp(mid), one, one, inf, inf, a, np.ones(n, bool), eps)
        under = b.ionization_integral(y, f, t, s.ionization_coefficients) < 1.0
        lo, hi = np.where(under, mid, lo), np.where(under, hi, mid)
    # 1e-5 at 300 K; elsewhere the fields near the 4e5 V/cm change of the hole law, where the
    # temperature factor makes the two fits jump, are smoothed by the interpolation (measured 1.2e-4
    # at 233 K; the per-temperature table before gave 8e-5 there)
    np.testing.assert_allclose(e0, np.exp(0.5 * (lo + hi)), rtol=1e-5 if temperature == 300.15 else 2e-4)

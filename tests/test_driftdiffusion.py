"""External checks of the drift-diffusion solver (modelgen.physics.driftdiffusion).

- Equilibrium: the zero-bias potential against an independent Poisson-Boltzmann
  solution from scipy.integrate.solve_bvp.
- Low injection: against modelgen's closed forms (modelgen.extraction.derive on the
  same device), themselves checked against Shockley (1949) and solve_bvp in
  test_diffusion.py; the finite-width, finite-S factor is the textbook one
  (Sze & Ng 2007, ch. 2; Pierret 1996, ch. 6).
- Mesh refinement on nested meshes.
- High-level injection: a flooded base's recombination of ideality 2 (Ghandhi 1977;
  Sze & Ng 2007, ch. 2; from memory).
- The depletion recombination current of ideality near 2, and the reverse generation
  current against the SRH integral over the depletion approximation (Sah, Noyce &
  Shockley, Proc. IRE 45, 1228 (1957)).
- C-V profiling of a diffused one-sided junction: 1/C^2 slope 2/(q eps N A^2)
  (Sze & Ng 2007, ch. 2; Schroder 2006, ch. 2, from memory).

How IS is taken from the solver: the closed forms' IS is the diffusion current of
the two quasi-neutral regions (recombination in them plus at the contacts). The
solver splits its terminal current by mechanism into integrated recombination rates;
its 'diffusion' component is the terminal current less the SRH recombination inside
the depletion region (majority density below half the doping). At 0.3 V forward both
are of the same size in these devices, so the split matters; the neutral widths of
the closed forms are taken at that same bias (reference_bias = 0.3 V), so that both
see the same quasi-neutral regions.
"""

import dataclasses

import numpy as np
import pytest
from scipy import constants as sc
from scipy import integrate
from support import ROOT

from modelgen import description, extraction
from modelgen.physics import driftdiffusion as dd
from modelgen.physics import profiles

V_LOW = 0.3  # low-injection forward bias for IS [V]


def derive(wp_um, wn_um, tau_us, velocity=None, na="1e17 cm^-3", nd="1e16 cm^-3", v=V_LOW, temperature="300 K"):
    table = {"name": "DTEST", "area": "1e-4 cm^2", "temperature": temperature, "reference_bias": f"{v} V",
             "p": {"doping": na, "thickness": f"{wp_um} um", "lifetime": f"{tau_us} us"},
             "n": {"doping": nd, "thickness": f"{wn_um} um", "lifetime": f"{tau_us} us"}}
    if velocity is not None:
        table["p"]["surface_recombination"] = velocity
        table["n"]["surface_recombination"] = velocity
    return extraction.derive(description.from_mapping(table))


def closed_c(result, v):
    """Depletion capacitance of the closed forms at bias v: CJO (1 - V/VJ)^-M."""
    p = result.params
    return p["CJO"][0] * (1.0 - v / p["VJ"][0]) ** -p["M"][0]


# ----------------------------------------------------------------------------- equilibrium


def test_equilibrium_potential_matches_poisson_boltzmann():
    """Zero-bias potential of a graded junction against solve_bvp to 0.1 % of the built-in swing.

    Independent equation: psi'' = -(q/eps)(p - n + C), n = ni_eff exp(psi/Vt + ...) in
    Boltzmann equilibrium with the same band-gap narrowing split, psi fixed to charge
    neutrality at both contacts (Sze & Ng 2007, ch. 2: the Poisson-Boltzmann equation).
    """
    prof = profiles.linear(1e24 * 1e6, 1e16 * 1e6, 5e16 * 1e6, 4e-6)  # 1e20 cm^-4, plateaus 1e16 / 5e16 cm^-3
    s = dd.structure_from_profile(prof, area=1e-8, temperature=300.0, lifetimes=(1e-6, 1e-6))
    sol = dd.solve(s, [0.0], capacitance=False)
    x = sol.mesh.x
    vt = sol.mesh.vt
    ni, eps = s.ni, s.permittivity
    theta = lambda xx: 0.5 * s.bandgap_narrowing(xx) / vt  # noqa: E731
    scale = 1e-6  # um

    def neutral(xx):
        c = prof(np.atleast_1d(xx))
        nie = ni * np.exp(theta(np.atleast_1d(xx)))
        n = 0.5 * c + np.sqrt(0.25 * c * c + nie * nie)
        return np.log(n / ni) - theta(np.atleast_1d(xx))

    def fun(xu, y):
        xx = xu * scale
        th = theta(xx)
        rho = ni * np.exp(th - y[0]) - ni * np.exp(th + y[0]) + prof(xx)
        return np.vstack([y[1], -sc.e * rho / (eps * vt) * scale**2])

    def bc(ya, yb):
        return np.array([ya[0] - neutral(0.0)[0], yb[0] - neutral(prof.length)[0]])

    xu = np.linspace(0.0, prof.length / scale, 2001)
    y0 = np.vstack([neutral(xu * scale), np.zeros_like(xu)])
    # residual tolerance 1e-4 (relative); tighter runs (1e-5, 1e-6) moved the reference by under 1e-8 of the swing
    ref = integrate.solve_bvp(fun, bc, xu, y0, tol=1e-4, bc_tol=1e-8, max_nodes=100000)
    assert ref.success, ref.message
    psi_ref = ref.sol(x / scale)[0] * vt
    swing = psi_ref.max() - psi_ref.min()
    assert np.max(np.abs(sol.psi[0] - psi_ref)) / swing < 1e-3


# ----------------------------------------------------------------------------- low injection


CASES = {
    # name: (p thickness um, n thickness um, lifetime us, velocity, expected regimes[, temperature])
    "short": (20, 20, 100, None, ("short", "short")),
    "medium_400K": (20, 50, 1, "1e4 cm/s", ("medium", "medium"), "400 K"),
    "medium": (20, 50, 1, None, ("medium", "medium")),
    "long": (200, 200, 1, None, ("long", "long")),
    "medium_S100cm/s": (20, 50, 1, "100 cm/s", ("medium", "medium")),
    "medium_S1e4cm/s": (20, 50, 1, "1e4 cm/s", ("medium", "medium")),
    "short_S100cm/s": (20, 20, 100, "100 cm/s", ("short", "short")),
}


@pytest.fixture(scope="module", params=sorted(CASES))
def low_injection(request):
    wp, wn, tau, vel, regimes, *temperature = CASES[request.param]
    r = derive(wp, wn, tau, vel, temperature=temperature[0] if temperature else "300 K")
    assert (r.derived["p"]["regime"][0], r.derived["n"]["regime"][0]) == regimes
    s = dd.structure_from_result(r, 0)
    return r, s, dd.solve(s, [V_LOW, -1.0])


def test_saturation_current_matches_closed_forms(low_injection):
    """IS from the solver's neutral-region and contact recombination within 0.5 % (closed forms:
    Shockley 1949 with the finite-width, finite-S factor, Sze & Ng 2007 ch. 2)."""
    r, s, sol = low_injection
    is_solver = sol.components["diffusion"][0] / np.expm1(V_LOW / sol.mesh.vt) * s.area
    assert is_solver == pytest.approx(r.params["IS"][0], rel=5e-3)


def test_reverse_capacitance_matches_depletion_approximation(low_injection):
    """C at -1 V within 1 % of eps A / W with W = sqrt(2 eps (Vbi - 2kT/q - V)(NA+ND)/(q NA ND))
    (Sze & Ng 2007, sec. 2.2-2.3)."""
    r, s, sol = low_injection
    assert sol.capacitance[1] == pytest.approx(closed_c(r, -1.0), rel=1e-2)


def test_peak_field_matches_depletion_approximation(low_injection):
    """Peak field at -1 V within 1 % of 2 (VJ - V) / W, W the depletion width at -1 V
    (abrupt junction, Sze & Ng 2007, sec. 2.2)."""
    r, s, sol = low_injection
    w = s.permittivity * s.area / closed_c(r, -1.0)
    assert sol.peak_field[1] == pytest.approx(2.0 * (r.params["VJ"][0] + 1.0) / w, rel=1e-2)


def test_transit_time_matches_charge_control(low_injection):
    """Stored minority charge over diffusion current within 2 % of the charge-control TT."""
    r, s, sol = low_injection
    tt = sol.stored_charge[0] / sol.components["diffusion"][0]
    assert tt == pytest.approx(r.params["TT"][0], rel=2e-2)


def test_current_split_adds_up_to_the_current_at_the_junction(low_injection):
    """Current continuity (steady state, common practice): the terminal current, the sum of the
    integrated recombination and contact currents, equals Jn + Jp at the junction. There drift and
    diffusion cancel to 1e-7 of each term and less, so the flux there is good to about 1e-3 only."""
    r, s, sol = low_injection
    np.testing.assert_allclose(sol.current_density, sol.junction_current_density, rtol=2e-3)
    assert sol.current_density[1] < 0 < sol.current_density[0]


def test_heavy_side_with_modelled_lifetime_matches_closed_forms():
    """A 1e18 cm^-3 p side with the modelled lifetime (SRH and Auger, Dziewior & Schmid 1977) and
    band-gap narrowing (29 meV): IS within 0.5 % and C(-1 V) within 1 % of the closed forms.

    Checks the Auger split of the lifetime, the band-gap narrowing's ni_eff and that the
    capacitance counts the charge each contact delivers (the p side's hole tail spills a few nm
    across the metallurgical junction and carries some 6 % of the depletion charge)."""
    table = {"name": "DHEAVY", "area": "1e-4 cm^2", "temperature": "300 K", "reference_bias": f"{V_LOW} V",
             "p": {"doping": "1e18 cm^-3", "thickness": "5 um"},
             "n": {"doping": "1e16 cm^-3", "thickness": "50 um", "lifetime": "1 us"}}
    r = extraction.derive(description.from_mapping(table))
    s = dd.structure_from_result(r, 0)
    sol = dd.solve(s, [V_LOW, -1.0])
    is_solver = sol.components["diffusion"][0] / np.expm1(V_LOW / sol.mesh.vt) * s.area
    assert is_solver == pytest.approx(r.params["IS"][0], rel=5e-3)
    assert sol.capacitance[1] == pytest.approx(closed_c(r, -1.0), rel=1e-2)


# ----------------------------------------------------------------------------- mesh refinement


def test_mesh_refinement_converges():
    """Nested meshes 1x, 2x, 4x: changes from the working mesh below 0.1 %, total current and
    capacitance of second order (the order of the SG scheme on smooth meshes, Selberherr 1984, from memory)."""
    r = derive(20, 50, 1, "1e4 cm/s")
    s = dd.structure_from_result(r, 0)
    vals = []
    for k in (1, 2, 4):
        sol = dd.solve(s, [V_LOW, -1.0], mesh=dd.make_mesh(s, reverse_to=-1.0, subdivide=k))
        vals.append([sol.current_density[0], sol.components["diffusion"][0], sol.capacitance[1],
                     sol.stored_charge[0]])
    vals = np.array(vals)
    change = np.abs(vals[1] - vals[0]) / np.abs(vals[1])
    assert np.all(change < 1e-3), change
    for col in (0, 2):  # terminal current and capacitance: second order
        d1, d2 = abs(vals[1, col] - vals[0, col]), abs(vals[2, col] - vals[1, col])
        assert np.log2(d1 / d2) > 1.7


# ----------------------------------------------------------------------------- depletion recombination


def test_flooded_base_recombination_has_ideality_two():
    """High-level injection: a p+ n diode whose 50 um, 1e14 cm^-3 base ends in a reflecting contact
    (S = 0, like an n+ back surface) floods with carriers (p > 10 N_D up to the contact); the base
    recombination, q W n / (2 tau) with n ~ ni exp(qV/2kT), then has ideality 2 (Ghandhi,
    *Semiconductor Power Devices*, Wiley 1977, PiN diode; Sze & Ng 2007, ch. 2, high-level
    injection; both from memory). Only the base component is checked: the p+ side's own current
    keeps ideality 1 and takes over at higher bias."""
    table = {"name": "DFLOOD", "area": "1e-4 cm^2", "temperature": "300 K",
             "p": {"doping": "1e18 cm^-3", "thickness": "2 um", "lifetime": "1 us"},
             "n": {"doping": "1e14 cm^-3", "thickness": "50 um", "lifetime": "10 us",
                   "surface_recombination": "0 cm/s"}}
    r = extraction.derive(description.from_mapping(table))
    s = dd.structure_from_result(r, 0)
    v = np.array([0.55, 0.60, 0.65])
    sol = dd.solve(s, v, capacitance=False)
    assert np.all(sol.p[:, -1] > 10 * 1e14 * 1e6)  # flooded to the contact
    base = sol.components["srh_neutral"]
    ideality = np.diff(v) / (sol.mesh.vt * np.diff(np.log(base)))
    assert np.all((ideality > 1.9) & (ideality < 2.15)), ideality


def test_long_base_current_approaches_the_ambipolar_high_level_limit():
    """High injection in a long base (800 um of 1e13 cm^-3, La about 60 um at tau_HL = 2 tau): the current
    tends to the ambipolar high-level limit J = 2 q Dp ni exp(qVj/2kT) / La, proportional to exp(qV/2kT)
    (Webster, Proc. IRE 42, 914 (1954), the field-aided factor 2; ambipolar length: Sze & Ng 2007, ch. 2,
    high-level injection; from memory), with Vj the quasi-Fermi split at the junction (the base's own drop
    excluded). The solver's ratio to the limit rises towards 1 as the injection grows (0.79 to 0.86 here,
    where p at the depletion edge is 13-15 N_D: the low-level corrections go as N_D / p), and the local
    ideality against Vj climbs towards 2. Auger is off on both sides of the comparison."""
    table = {"name": "DLONG", "area": "1e-4 cm^2", "temperature": "300 K",
             "p": {"doping": "1e19 cm^-3", "thickness": "1 um", "lifetime": "1 ns"},
             "n": {"doping": "1e13 cm^-3", "thickness": "800 um", "lifetime": "1 us"}}
    r = extraction.derive(description.from_mapping(table))
    s = dd.structure_from_result(r, 0, auger=False)
    v = np.array([0.9, 1.0, 1.1, 1.2, 1.3])
    sol = dd.solve(s, v, capacitance=False)
    n = r.derived["n"]
    dp, dn = n["diffusivity"][0], n["majority_mobility"][0] * sol.mesh.vt
    la = np.sqrt(2 * dp * dn / (dp + dn) * 2e-6)  # ambipolar Da, tau_HL = 2 tau (Shockley & Read 1952)
    limit = 2 * sc.e * dp * n["ni_eff"][0] / la * np.exp(sol.junction_voltage / (2 * sol.mesh.vt))
    ratio = sol.current_density / limit
    assert np.all(np.diff(ratio) > 0) and 0.75 < ratio[0] and ratio[-1] < 1.0, ratio
    ideality = np.diff(sol.junction_voltage) / (sol.mesh.vt * np.diff(np.log(sol.current_density)))
    assert np.all(np.diff(ideality) > 0) and 1.6 < ideality[0] and ideality[-1] < 2.0, ideality


def test_depletion_recombination_ideality_near_two():
    """Where SRH in the depletion region dominates, its ideality is near 2 (Sah, Noyce & Shockley 1957)."""
    r = derive(20, 50, 0.01, v=0.0)
    s = dd.structure_from_result(r, 0)
    v = np.array([0.20, 0.25])
    sol = dd.solve(s, v, capacitance=False)
    assert np.all(sol.components["srh_depletion"] > 3 * sol.components["diffusion"])
    jr = sol.components["srh_depletion"]
    ideality = (v[1] - v[0]) / (sol.mesh.vt * np.log(jr[1] / jr[0]))
    assert 1.7 < ideality < 2.05


@pytest.mark.parametrize("bias", [-5.0, -10.0])
def test_reverse_generation_matches_sah_noyce_shockley_integral(bias):
    """Reverse generation current against the SRH rate integrated (scipy quad) over the depletion
    approximation's potential with flat quasi-Fermi levels (Sah, Noyce & Shockley, Proc. IRE 45,
    1228 (1957); potential of Sze & Ng 2007, sec. 2.2), within 2 %. Band-gap narrowing is left out
    on both sides of the comparison; the depletion approximation's edges are what differ."""
    na, nd, tau = 1e23, 1e22, 1e-6
    s = dd.structure_from_profile(profiles.abrupt(na, nd, 20e-6, 70e-6), area=1e-8, lifetimes=(tau, tau))
    s = dataclasses.replace(s, bandgap_narrowing=lambda x: 0.0 * np.asarray(x))
    sol = dd.solve(s, [bias], capacitance=False)
    j = sns_quad(na, nd, s.ni, s.permittivity, sol.mesh.vt, tau, bias)
    assert sol.components["srh_depletion"][0] == pytest.approx(j, rel=2e-2)
    assert sol.current_density[0] == pytest.approx(j, rel=2e-2)


def sns_quad(na, nd, ni, eps, vt, tau, bias):
    """q times the SRH rate (mid-gap trap, tau_n = tau_p = tau) integrated with scipy quad over the
    depletion approximation of an abrupt junction with flat quasi-Fermi levels, phi_p - phi_n = bias
    (Sah, Noyce & Shockley, Proc. IRE 45, 1228 (1957); potential of Sze & Ng 2007, sec. 2.2) [A/m^2]."""
    vbi = vt * np.log(na * nd / ni**2)
    w = np.sqrt(2 * eps * (vbi - bias) * (na + nd) / (sc.e * na * nd))
    xp, xn = w * nd / (na + nd), w * na / (na + nd)
    psi_n, psi_p = vt * np.log(nd / ni), bias - vt * np.log(na / ni)

    def rate(x):  # x from the junction; phi_p = bias, phi_n = 0
        psi = psi_p + sc.e * na / (2 * eps) * (x + xp) ** 2 if x < 0 else psi_n - sc.e * nd / (2 * eps) * (xn - x) ** 2
        n, p = ni * np.exp(psi / vt), ni * np.exp((bias - psi) / vt)
        return (n * p - ni**2) / (tau * (n + ni) + tau * (p + ni))

    g, _ = integrate.quad(rate, -xp, xn, points=[0.0], limit=200, epsrel=1e-10)
    return sc.e * g


def recombination_device(tau_rec):
    """A 1e17 / 1e16 cm^-3 diode, 1 us on both sides, with its own depletion-region lifetime."""
    table = {"name": "DREC", "area": "1e-4 cm^2", "temperature": "300 K", "reference_bias": f"{V_LOW} V",
             "recombination_lifetime": tau_rec,
             "p": {"doping": "1e17 cm^-3", "thickness": "20 um", "lifetime": "1 us"},
             "n": {"doping": "1e16 cm^-3", "thickness": "50 um", "lifetime": "1 us"}}
    return extraction.derive(description.from_mapping(table))


def test_depletion_region_takes_the_recombination_lifetime():
    """With recombination_lifetime = 200 ns (sides 1 us) the solver's depletion-region SRH current
    at 0.15-0.25 V is within 10 % of the Sah-Noyce-Shockley integral with 200 ns (Sah, Noyce &
    Shockley 1957; scipy quad over the depletion approximation), and the neutral regions keep their
    1 us: IS within 0.5 % of the closed forms (Shockley 1949; Sze & Ng 2007, ch. 2). With the 1 us of
    the neutral regions the current would be 5 times smaller. The integral leaves out the majority
    tails (its field at the rate's peak is some 4 % high: Sze & Ng 2007, sec. 2.2, the 2kT/q of W)
    and band-gap narrowing (1e17 cm^-3: 3.4 meV); the solver comes out 5-8 % above it."""
    r = recombination_device("200 ns")
    s = dd.structure_from_result(r, 0)
    v = np.array([0.15, 0.2, 0.25, V_LOW])
    sol = dd.solve(s, v, capacitance=False)
    for k in range(3):
        j = sns_quad(1e23, 1e22, s.ni, s.permittivity, sol.mesh.vt, 200e-9, v[k])
        assert sol.components["srh_depletion"][k] == pytest.approx(j, rel=0.1)
    is_solver = sol.components["diffusion"][-1] / np.expm1(V_LOW / sol.mesh.vt) * s.area
    assert is_solver == pytest.approx(r.params["IS"][0], rel=5e-3)


def test_contact_resistance_adds_its_drop_to_the_terminal_bias():
    """Ohm's law for the contacts outside the 1-D device (common practice): terminal bias = bias + I Rc;
    with no contact resistance given the two are the same."""
    table = {"name": "DRC", "area": "1e-4 cm^2", "contact_resistance": "2.5 ohm",
             "p": {"doping": "1e17 cm^-3", "thickness": "20 um", "lifetime": "1 us"},
             "n": {"doping": "1e16 cm^-3", "thickness": "50 um", "lifetime": "1 us"}}
    s = dd.structure_from_result(extraction.derive(description.from_mapping(table)), 0)
    assert s.contact_resistance == 2.5
    sol = dd.solve(s, [0.6, -1.0], capacitance=False)
    np.testing.assert_allclose(sol.terminal_bias, sol.bias + 2.5 * sol.current, rtol=1e-15)
    assert sol.terminal_bias[0] > 0.6 and sol.terminal_bias[1] < -1.0  # forward current adds, reverse subtracts
    plain = dd.structure_from_result(recombination_device("1 us"), 0)
    assert plain.contact_resistance == 0.0


# ----------------------------------------------------------------------------- cards against the solver

EXAMPLES = ("graded_varactor", "photodiode", "switching_diode", "thin_epi_rectifier")


@pytest.mark.parametrize("example", EXAMPLES)
def test_default_card_low_forward_current_matches_solver(example):
    """The low-forward current of each example's default ngspice card (its ISR/NR recombination term
    fitted to the Sah-Noyce-Shockley integral, Proc. IRE 45, 1228 (1957), evaluated with ngspice's
    diode equations) within 20 % of the solver, at the bias where the solver's depletion-region SRH
    share of the current is largest (and at every bias where it is at least half).

    Biases from 4 Vt (where the card's recombination term is fitted from: below it the card's
    exp(V / (NR Vt)) - 1 and the integral's exp(V / Vt) - 1 differ in shape by design) to 0.6 V."""
    from modelgen.cards.render import card_values
    from modelgen.spice import evaluator
    from modelgen.structures import structure_for

    r = extraction.derive(description.load(ROOT / "examples" / f"{example}.toml"))
    card = dict(card_values(r, 0, "ngspice")[0])
    sol = dd.solve(structure_for(r, 0), np.arange(4.0 * 0.025852, 0.6, 0.02), capacitance=False)
    share = sol.components["srh_depletion"] / sol.current_density
    assert share.max() >= 0.5
    ratio = evaluator.dc_current(card, sol.bias)[0] / sol.current
    assert ratio[np.argmax(share)] == pytest.approx(1.0, rel=0.2)
    assert np.all(np.abs(ratio[share >= 0.5] - 1.0) < 0.2), ratio[share >= 0.5]


# ----------------------------------------------------------------------------- profiles


def test_tabulated_step_profile_matches_closed_forms():
    """A table describing an abrupt junction, with node-wise silicon models, gives the closed forms'
    IS within 0.5 % and C(-1 V) within 1 % (the same material models on both paths)."""
    na, nd, xj, length = 1e23, 1e22, 20e-6, 70e-6
    d = 1e-12
    prof = profiles.table([0.0, xj - d, xj + d, length], [-na, -na, nd, nd])
    s = dd.structure_from_profile(prof, area=1e-8, temperature=300.0, lifetimes=(1e-6, 1e-6))
    sol = dd.solve(s, [V_LOW, -1.0])
    r = derive(20, 50, 1)
    is_solver = sol.components["diffusion"][0] / np.expm1(V_LOW / sol.mesh.vt) * s.area
    assert is_solver == pytest.approx(r.params["IS"][0], rel=5e-3)
    assert sol.capacitance[1] == pytest.approx(closed_c(r, -1.0), rel=1e-2)


def test_erfc_emitter_cv_profile_gives_substrate_doping():
    """A shallow steep erfc emitter (Cs 1e20 cm^-3, 0.05 um) in a 1e15 cm^-3 substrate is one-sided:
    the slope of 1/C^2 against V gives the substrate doping, N = 2 / (q eps A^2 |d(1/C^2)/dV|),
    within 2 % (Sze & Ng 2007, ch. 2; Schroder 2006, ch. 2, from memory). The emitter must be steep
    and the bias large for the one-sided approximation: the depletion edge's excursion into the
    emitter's graded tail is then a small part of W."""
    nbg = 1e15 * 1e6
    prof = profiles.erfc_emitter(1e20 * 1e6, 0.05e-6, nbg, 30e-6)
    assert 0.1e-6 < prof.junctions[0] < 0.2e-6
    s = dd.structure_from_profile(prof, area=1e-8, temperature=300.0, lifetimes=(1e-7, 1e-6))
    v = np.array([-5.0, -10.0])
    sol = dd.solve(s, v)
    inv_c2 = 1.0 / sol.capacitance**2
    slope = np.diff(inv_c2)[0] / np.diff(v)[0]
    n_cv = 2.0 / (sc.e * s.permittivity * s.area**2 * abs(slope))
    assert n_cv == pytest.approx(nbg, rel=2e-2)


def test_diffused_profiles_put_the_junction_where_the_closed_forms_do():
    """erfc: Cs erfc(xj/d) = N_bg, Gaussian: xj = d sqrt(ln(Q / (sqrt(pi) d N_bg)))
    (Plummer, Deal & Griffin 2000, ch. 7), here with scipy.special.erfcinv."""
    from scipy.special import erfcinv

    e = profiles.erfc_emitter(1e25, 0.2e-6, 1e21, 30e-6)
    assert e.junctions[0] == pytest.approx(0.2e-6 * erfcinv(1e21 / 1e25), rel=1e-9)
    g = profiles.gaussian_emitter(1e19, 0.3e-6, 1e21, 30e-6)
    assert g.junctions[0] == pytest.approx(0.3e-6 * np.sqrt(np.log(1e19 / (np.sqrt(np.pi) * 0.3e-6 * 1e21))), rel=1e-9)
    assert g(np.array([g.junctions[0]]))[0] == pytest.approx(0.0, abs=1e21 * 1e-9)


def test_solve_refuses_a_bias_that_is_not_a_number():
    """A NaN or infinite bias is one clear error, not an endless continuation (common practice)."""
    r = derive(20, 50, 1)
    s = dd.structure_from_result(r, 0)
    with pytest.raises(ValueError, match="finite"):
        dd.solve(s, [0.1, float("nan")])


def test_profile_table_rejects_bad_input():
    """A table that does not start at the p contact or does not run from p to n is refused."""
    with pytest.raises(ValueError, match="depths"):
        profiles.table([1e-6, 2e-6], [-1e22, 1e22])
    with pytest.raises(ValueError, match="negative"):
        profiles.table([0.0, 2e-6], [1e22, 1e22])


# ----------------------------------------------------------------------------- degeneracy


def test_fermi_dirac_integral_and_degeneracy_limit_against_quadrature():
    """F_1/2 against its defining integral (2/sqrt(pi)) int sqrt(e)/(1 + exp(e - eta)) de by scipy
    quad (Blakemore, Solid-State Electron. 25, 1067 (1982)); the limit density, where Boltzmann's
    exp(eta) exceeds F_1/2 by 5 %, against the same quadrature and scipy brentq; and the first-order
    form exp(eta*) ~ 2^(3/2) * 0.05 (the leading term of the series, Blakemore 1982) within 5 %."""
    from scipy import optimize, special

    def f_half(eta):
        val, _ = integrate.quad(lambda e: np.sqrt(e) * special.expit(eta - e), 0.0, np.inf, epsabs=0, epsrel=1e-12)
        return 2.0 / np.sqrt(np.pi) * val

    for eta in (-8.0, -3.0, -1.0):
        assert dd.fermi_dirac_half(eta) == pytest.approx(f_half(eta), rel=1e-8)
    eta_star = optimize.brentq(lambda e: np.exp(e) / f_half(e) - 1.05, -10.0, 0.0, xtol=1e-12)
    assert dd.degeneracy_limit(1.0) == pytest.approx(f_half(eta_star), rel=1e-6)
    assert np.exp(eta_star) == pytest.approx(2**1.5 * 0.05, rel=5e-2)


@pytest.mark.parametrize("na_cm3, warns", [(1e20, True), (1e17, False)])
def test_degenerate_side_is_reported(na_cm3, warns):
    """A 1e20 cm^-3 p side is degenerate (Sze & Ng 2007, sec. 1.4.1: silicon degenerates above a few
    1e18 to 1e19 cm^-3; Nv = 3.1e19 cm^-3, Green 1990, from memory): the solution says so in one line
    naming the holes; a 1e17 cm^-3 side is not."""
    s = dd.structure_from_profile(profiles.abrupt(na_cm3 * 1e6, 1e22, 2e-6, 20e-6), area=1e-8,
                                  lifetimes=(1e-8, 1e-6))
    text = dd.solve(s, [0.0], capacitance=False).degenerate
    if warns:
        assert text.startswith("degenerate:") and "hole density reaches 1e+20 cm^-3" in text
        assert "electron" not in text and "\n" not in text
    else:
        assert text == ""


# ----------------------------------------------------------------------------- avalanche breakdown


def one_sided(nd_cm3, tn_um):
    table = {"name": "DBV", "area": "1e-4 cm^2",
             "p": {"doping": "1e19 cm^-3", "thickness": "1 um", "lifetime": "10 ns"},
             "n": {"doping": f"{nd_cm3:g} cm^-3", "thickness": f"{tn_um} um", "lifetime": "1 us"}}
    return extraction.derive(description.from_mapping(table))


@pytest.mark.parametrize("nd_cm3, tn_um", [(1e16, 15), (1e17, 5)])
def test_breakdown_over_the_solver_field_matches_the_depletion_approximation(nd_cm3, tn_um):
    """A p+ n abrupt junction (1e19 on 1e16 or 1e17 cm^-3, the n side thicker than its depletion region at
    breakdown): the reverse bias where the ionization integral over the solver's field reaches 1
    within 2 % of the closed form's BV, the same integral over the depletion approximation's field
    (Sze & Ng 2007, sec. 2.4.3; same coefficients, van Overstraeten & de Man 1970), and the
    integral there is 1. Measured when written: the solver 0.1 % (1e16) and 0.6 % (1e17) higher."""
    r = one_sided(nd_cm3, tn_um)
    assert not r.derived["reach_through"][0]
    b = dd.breakdown_bias(dd.structure_from_result(r, 0))
    assert b.integral == pytest.approx(1.0, rel=1e-4)
    assert -b.bias == pytest.approx(r.params["BV"][0], rel=2e-2)
    assert dd.ionization_integrals(b.solution)[0] == pytest.approx(b.integral, rel=1e-12)


def test_breakdown_of_a_one_sided_junction_against_published_values():
    """1e16 cm^-3 one-sided abrupt silicon junction: about 60 V in Sze & Ng 2007, ch. 2 (figure of
    BV against background doping, and BV = 60 (Eg/1.1)^1.5 (N/1e16)^-3/4 V), 53 V from Baliga's
    BV = 5.34e13 N^-3/4 (*Fundamentals of Power Semiconductor Devices*, 2008, ch. 3); both from
    memory. Allowed: 15 % of the first (a figure's reading, older ionization coefficients) and 10 %
    of the second."""
    b = dd.breakdown_bias(dd.structure_from_result(one_sided(1e16, 15), 0))
    assert -b.bias == pytest.approx(60.0, rel=0.15)
    assert -b.bias == pytest.approx(53.4, rel=0.10)
    assert 2.5e7 < b.peak_field < 5e7  # about 4e5 V/cm at 1e16 cm^-3 (Sze & Ng 2007, critical-field figure)


def test_breakdown_refuses_a_forward_start():
    """The search starts in reverse bias (common practice)."""
    r = one_sided(1e16, 15)
    with pytest.raises(ValueError, match="reverse"):
        dd.breakdown_bias(dd.structure_from_result(r, 0), start=0.5)


def singular_once(monkeypatch, when):
    """Make LAPACK report a singular matrix (info > 0, as ?gbsv does) at the first call for which
    ``when(ab)`` holds; returns the list of such reports."""
    real = dd._gbsv
    reported = []

    def gbsv(kl, ku, ab, b, **kw):
        if not reported and when(ab):
            reported.append(ab.shape)
            return ab, None, b, 1
        return real(kl, ku, ab, b, **kw)

    monkeypatch.setattr(dd, "_gbsv", gbsv)
    return reported


def test_a_singular_newton_step_is_a_failed_step(monkeypatch):
    """A singular Jacobian at an early iterate (met by a p+ n 1e17 cm^-3 junction on its way to -2 V,
    where LAPACK's error escaped; here made to happen by reporting the third solve singular) is a
    failed step that is halved, and the depletion capacitance at -2 V is then the abrupt junction's
    eps A / W within 1 % (Sze & Ng 2007, sec. 2.2-2.3)."""
    r = one_sided(1e17, 5)
    s = dd.structure_from_result(r, 0)
    calls = []
    reported = singular_once(monkeypatch, lambda ab: calls.append(1) or len(calls) == 3)
    sol = dd.solve(s, [-2.0])
    assert reported
    assert sol.capacitance[0] == pytest.approx(closed_c(r, -2.0), rel=1e-2)


# ----------------------------------------------------------------------------- batched solver


def test_solve_many_gives_the_bytes_of_solve_for_each_device():
    """Five devices of different mesh sizes (the four examples and a tabulated erfc emitter) solved
    together equal each solved alone, array for array, in either order and with at most two in the
    stack at a time (the contract of solve_many:
    one code path for one device and many, the same bytes; common practice)."""
    structures = [dd.structure_from_result(extraction.derive(description.load(ROOT / "examples" / f"{e}.toml")), 0)
                  for e in EXAMPLES]
    prof = profiles.erfc_emitter(1e20 * 1e6, 0.05e-6, 1e15 * 1e6, 30e-6)
    structures.append(dd.structure_from_profile(prof, area=1e-8, lifetimes=(1e-7, 1e-6)))
    v = np.concatenate([np.linspace(0.0, 0.8, 9), [-0.5, -3.0, -8.0]])
    want_c = v < 0.2
    alone = [dd.solve(s, v, capacitance=want_c) for s in structures]
    assert len({len(s.mesh.x) for s in alone}) > 1
    for order, stack in ((slice(None), dd.STACK), (slice(None, None, -1), 2)):  # 2: devices join as others end
        many = dd.solve_many(structures[order], v, capacitance=want_c, stack=stack)
        for a, b in zip(alone[order], many):
            for key in ("current", "current_density", "capacitance", "peak_field", "stored_charge",
                        "depletion_charge", "junction_voltage", "psi", "n", "p", "iterations", "terminal_bias"):
                assert np.array_equal(getattr(a, key), getattr(b, key), equal_nan=True), key
            for key in a.components:
                assert np.array_equal(a.components[key], b.components[key]), key


def test_solve_many_takes_a_bias_list_per_device():
    """Per-device bias lists: each device gets its own biases, in its own order (common practice)."""
    r = derive(20, 50, 1)
    s = dd.structure_from_result(r, 0)
    a, b = dd.solve_many([s, s], [[0.3, -1.0], [0.1]], capacitance=False)
    assert np.array_equal(a.bias, [0.3, -1.0]) and np.array_equal(b.bias, [0.1])
    assert np.array_equal(a.current, dd.solve(s, [0.3, -1.0], capacitance=False).current)
    assert np.array_equal(b.current, dd.solve(s, [0.1], capacitance=False).current)


def test_solve_many_redoes_a_singular_stack_device_by_device(monkeypatch):
    """When LAPACK finds the stacked matrix singular (one device's trouble), each device of the stack
    is redone alone, and both devices still equal their single solves byte for byte (common practice:
    one device's trouble stays its own)."""
    first = dd.structure_from_result(one_sided(1e17, 5), 0)
    second = dd.structure_from_result(derive(20, 50, 1), 0)
    singles = [dd.solve(s, [-2.0]) for s in (first, second)]
    single_width = 3 * len(singles[0].mesh.x) + 2 * dd._SPACER
    reported = singular_once(monkeypatch, lambda ab: ab.shape[1] > single_width + 3 * len(singles[1].mesh.x))
    both = dd.solve_many([first, second], [-2.0])
    assert reported
    for a, b in zip(singles, both):
        assert np.array_equal(a.psi, b.psi) and np.array_equal(a.n, b.n) and np.array_equal(a.p, b.p)
        assert np.array_equal(a.current, b.current) and np.array_equal(a.capacitance, b.capacitance)


def test_solve_many_keeps_a_failed_device_in_its_place(monkeypatch):
    """errors='keep': a device that cannot be solved (here: one Newton iteration allowed per step, so
    that no step away from 0 V converges and the steps halve below 1e-4 V) gives its SolverError in
    its place, the other its Solution; errors='raise' names the device (common practice)."""
    s = dd.structure_from_result(derive(20, 50, 1), 0)
    monkeypatch.setattr(dd, "_STEP_ITERATIONS", 1)
    out = dd.solve_many([s, s], [[0.0], [0.3]], capacitance=False, errors="keep")
    assert isinstance(out[0], dd.Solution) and isinstance(out[1], dd.SolverError)
    with pytest.raises(dd.SolverError, match="device 1"):
        dd.solve_many([s, s], [[0.0], [0.3]], capacitance=False)

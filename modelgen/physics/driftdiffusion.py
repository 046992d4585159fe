"""Steady-state 1-D drift-diffusion solver for a pn junction.

The p-side contact is at x = 0 and carries the applied bias V; the n-side
contact is at x = L and is grounded. The equations, in SI units,

    d/dx (eps dpsi/dx) = -q (p - n + N_D - N_A)             (Poisson)
    dJn/dx = q R,    dJp/dx = -q R                          (continuity)
    Jn = -q mu_n n d(psi + theta_n)/dx + q D_n dn/dx
    Jp = -q mu_p p d(psi - theta_p)/dx - q D_p dp/dx

with Boltzmann statistics n = ni exp((psi + theta_n - phi_n)/Vt),
p = ni exp((phi_p - psi + theta_p)/Vt). Band-gap narrowing dEg is split
evenly between the band edges, theta_n = theta_p = dEg / 2 [V], so that
n p = ni^2 exp(dEg/Vt) = ni_eff^2 in equilibrium, as the closed forms of
:mod:`modelgen.physics.diffusion` use; the carriers drift in their own
effective potentials psi + theta_n and psi - theta_p.

Discretisation: box integration on a non-uniform mesh with the
Scharfetter-Gummel exponentially fitted fluxes (Scharfetter & Gummel 1969).
Unknowns are psi/Vt and the logarithms of the scaled densities (so the
densities stay positive); lengths are scaled by the extrinsic Debye length
of the largest doping, densities by that doping, mobilities by the largest
mobility (Selberherr 1984, ch. 5 scaling, with a density scale of max|C|).
The coupled system is solved by Newton's method on the banded Jacobian
(bandwidth 5 in the interleaved ordering), updates larger than one unit
(Vt for psi, a factor e for the densities) damped logarithmically, with bias
continuation from equilibrium (linear predictor, step halving on failure).
:func:`solve_many` solves many devices at once: each follows its own
continuation, and their Newton steps run as one band matrix (the blocks
stacked along the diagonal, no coupling); :func:`solve` is the same code for
one device, and gives the same bytes.

From a structure made by :func:`structure_from_result` the solver sees the
closed forms' parameters: each side's minority lifetime in its neutral region
and the recombination lifetime in the depletion region at the reference bias,
and the contact resistance (:attr:`Solution.terminal_bias`).
:attr:`Solution.degenerate` warns where Boltzmann statistics no longer hold;
:func:`breakdown_bias` finds avalanche breakdown from the ionization integral
over the solver's field.

Recombination: Shockley-Read-Hall with a midgap trap (n1 = p1 = ni_eff),
R = (n p - ni_eff^2) / (tau_p (n + ni_eff) + tau_n (p + ni_eff)), plus
Auger (Cn n + Cp p)(n p - ni_eff^2) with the coefficients of Dziewior &
Schmid (1977).

Contacts: ohmic, majority carriers at their equilibrium density, the
potential at its equilibrium value plus the applied bias; the minority
carrier recombines at the contact with velocity S, Jn(0) = q S (n - n0) at the
p contact and Jp(L) = q S (p - p0) at the n contact (S = inf: n = n0,
S = 0: reflecting).

References
----------
D. L. Scharfetter and H. K. Gummel, "Large-signal analysis of a silicon Read
diode oscillator", IEEE Trans. Electron Devices 16, 64 (1969).
S. Selberherr, *Analysis and Simulation of Semiconductor Devices*, Springer
1984 (scaling, Newton iteration, contacts).
W. Shockley and W. T. Read, Phys. Rev. 87, 835 (1952); R. N. Hall, Phys.
Rev. 87, 387 (1952) (SRH recombination).
J. Dziewior and W. Schmid, Appl. Phys. Lett. 31, 346 (1977) (Auger).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy.linalg.lapack import dgbsv as _gbsv

from ..constants import EPS0, Q, thermal_voltage
from ..materials import silicon
from . import breakdown as _breakdown
from . import profiles as _profiles

_BAND = 5  # half-bandwidth of the interleaved (psi, ln n, ln p) Jacobian
_DIAG = 2 * _BAND  # row of the diagonal in LAPACK's band storage for ?gbsv (kl rows for the fill-in on top)
_LDAB = 3 * _BAND + 1


class SolverError(RuntimeError):
    """Newton's method failed to converge at a bias, even with the smallest continuation step."""


@dataclass
class Structure:
    """A 1-D pn diode for the solver: profile, material fields and contacts (SI).

    Attributes
    ----------
    profile : modelgen.physics.profiles.Profile
        Net doping N_D - N_A [m^-3] over 0..L, p contact at x = 0.
    temperature : float
        [K].
    ni : float
        Intrinsic density without band-gap narrowing [m^-3].
    permittivity : float
        [F/m].
    area : float
        Junction area [m^2] (currents and capacitance scale with it).
    electron_mobility, hole_mobility : callable
        x [m] -> mobility [m^2/(V s)], evaluated at the mesh's edge midpoints.
    electron_lifetime, hole_lifetime : callable
        x [m] -> SRH lifetime [s] at the nodes.
    bandgap_narrowing : callable
        x [m] -> dEg [V] (the eV value), split evenly between the band edges.
    velocity_p, velocity_n : float
        Minority-carrier recombination velocity at the p contact (electrons)
        and n contact (holes) [m/s]; inf = ideal ohmic, 0 = reflecting.
    auger_n, auger_p : float
        Auger coefficients Cn, Cp [m^6/s]; Dziewior & Schmid (1977) by default.
    features : tuple of float
        Positions where the mesh is graded finely besides the junctions
        (depletion edges) [m].
    contact_resistance : float
        Series resistance of the contacts and leads outside the 1-D device
        [ohm] (default 0); enters only :attr:`Solution.terminal_bias`. The
        neutral regions' own resistance, conductivity modulation included, is
        already in the solution.
    """

    profile: _profiles.Profile
    temperature: float
    ni: float
    permittivity: float
    area: float
    electron_mobility: object
    hole_mobility: object
    electron_lifetime: object
    hole_lifetime: object
    bandgap_narrowing: object
    velocity_p: float = np.inf
    velocity_n: float = np.inf
    auger_n: float = silicon.AUGER_CN
    auger_p: float = silicon.AUGER_CP
    features: tuple = ()
    contact_resistance: float = 0.0


def _piecewise(xj, left, right):
    """x -> left for x < xj, right beyond (scalars)."""
    left, right = float(left), float(right)
    return lambda x: np.where(np.asarray(x) < xj, left, right)


def _three_regions(x0, x1, left, middle, right):
    """x -> left for x < x0, middle for x0 <= x <= x1, right beyond (scalars)."""
    left, middle, right = float(left), float(middle), float(right)

    def f(x):
        x = np.asarray(x)
        return np.where(x < x0, left, np.where(x <= x1, middle, right))
    return f


def _srh_part(tau, auger, majority):
    """The SRH lifetime that with Auger at the majority density gives the total lifetime ``tau`` [s].

    1/tau_SRH = 1/tau - C N^2; where Auger alone is already faster than ``tau``,
    SRH is switched off (inf) and the total lifetime is Auger's.
    """
    rate = 1.0 / tau - auger * majority * majority
    return 1.0 / rate if rate > 0 else np.inf


def structure_from_result(result, i, auger=True):
    """The abrupt or linearly graded diode of row ``i`` of a closed-form Result, as a Structure.

    Solver and closed forms then see identical parameters: each side's doping
    and thickness (neutral width plus depletion extent at the reference bias),
    the closed forms' mobilities (electrons in the p side with the p side's
    minority mobility, in the n side with the n side's majority mobility;
    holes alike), ni, each side's band-gap narrowing, temperature, junction
    area (bottom plus sidewall), contact velocities and the contact resistance
    (``contact_resistance``, NaN or absent = 0). Each side's neutral region
    has the closed forms' minority-carrier lifetime: with ``auger`` the SRH
    lifetime is reduced so that SRH and Auger together give it at low
    injection (1/tau_SRH = 1/tau - C N^2), the same lifetime used for both
    carriers on that side.

    The depletion region has the closed forms' recombination lifetime
    (``derived["recombination_lifetime"]``: the user's
    ``recombination_lifetime``, default the lighter side's lifetime) as the
    SRH lifetime of both carriers, the lifetime of their Sah-Noyce-Shockley
    current. Its extent is the one the closed forms use to separate depletion
    from neutral regions: the depletion extents at the reference bias on each
    side (thickness less neutral width), so that every point of the device
    has the lifetime the closed forms give it. Auger is not taken out of it
    (the carriers there are far below the doping).

    Parameters
    ----------
    result : modelgen.extraction.Result
    i : int
        Row.
    auger : bool
        Include Auger recombination.

    Returns
    -------
    Structure

    Notes
    -----
    A linear profile is the gradient clipped at the plateau dopings,
    centred at the junction, the junction at the p side's thickness.
    """
    dev = result.device
    p, n, d = result.derived["p"], result.derived["n"], result.derived
    na, nd = float(p["doping"][i]), float(n["doping"][i])
    tp, tn = float(p["thickness"][i]), float(n["thickness"][i])
    xj, length = tp, tp + tn
    if bool(dev.linear[i]):
        prof = _profiles.linear(float(dev.grading[i]), na, nd, length, xj)
        prof = _profiles.Profile(prof.net, length, (xj,), (xj,))  # material parameters jump at xj
    else:
        prof = _profiles.abrupt(na, nd, xj, length)
    cn, cp = (silicon.AUGER_CN, silicon.AUGER_CP) if auger else (0.0, 0.0)
    tau_p_side = _srh_part(float(p["lifetime"][i]), cp, na)
    tau_n_side = _srh_part(float(n["lifetime"][i]), cn, nd)
    # the depletion region at the reference bias: the closed forms' neutral regions begin at its edges
    x_lo = xj - (tp - float(p["neutral_width"][i]))
    x_hi = xj + (tn - float(n["neutral_width"][i]))
    tau = _three_regions(x_lo, x_hi, tau_p_side, float(d["recombination_lifetime"][i]), tau_n_side)
    features = (xj - float(p["depletion_extent"][i]), xj + float(n["depletion_extent"][i]), x_lo, x_hi)
    rc = float(getattr(dev, "contact_resistance", np.full(i + 1, np.nan))[i])
    return Structure(
        profile=prof, temperature=float(d["temperature"][i]), ni=float(d["ni"][i]),
        permittivity=float(dev.relative_permittivity[i]) * EPS0, area=float(d["junction_area"][i]),
        electron_mobility=_piecewise(xj, p["minority_mobility"][i], n["majority_mobility"][i]),
        hole_mobility=_piecewise(xj, p["majority_mobility"][i], n["minority_mobility"][i]),
        electron_lifetime=tau, hole_lifetime=tau,
        bandgap_narrowing=_piecewise(xj, p["bandgap_narrowing"][i], n["bandgap_narrowing"][i]),
        velocity_p=float(p["contact_velocity"][i]), velocity_n=float(n["contact_velocity"][i]),
        auger_n=cn, auger_p=cp, features=tuple(sorted(set(features))),
        contact_resistance=rc if np.isfinite(rc) else 0.0)


def structure_from_profile(profile, area, temperature=300.0, lifetimes=None, velocities=(np.inf, np.inf),
                           material=silicon, relative_permittivity=None, ni=None, mobilities=None):
    """A Structure for any profile with node-wise material models.

    At each point the local net doping |N_D - N_A| sets the mobilities
    (minority or majority by the local type: :func:`material.minority_mobility`
    and :func:`material.majority_mobility`), the band-gap narrowing
    (:func:`material.bandgap_narrowing`) and, unless ``lifetimes`` are given,
    the lifetime (:func:`material.minority_lifetime`, whose Auger part is
    then taken out of the SRH lifetime since the solver adds Auger itself).

    Parameters
    ----------
    profile : Profile
    area : float
        [m^2].
    temperature : float
        [K], within the material's temperature range.
    lifetimes : (float, float), optional
        Minority lifetimes of the p-type and n-type regions [s] (SRH, both
        carriers); default the material's doping-dependent model.
    velocities : (float, float)
        Contact recombination velocities at the p and n contacts [m/s].
    material : module
        A :mod:`modelgen.materials` module.
    relative_permittivity : float, optional
    ni : float, optional
        Intrinsic density [m^-3] replacing the material's (a description's
        ``material.ni``, or the one its ``material.bandgap`` gives).
    mobilities : dict, optional
        Constant mobilities [m^2/(V s)] replacing the model on one side:
        keys ``(side, role)`` with side ``"p"`` (net acceptors) or ``"n"``
        and role ``"minority"`` or ``"majority"`` (a description's
        ``p.minority_mobility`` and the like); NaN or absent keeps the model.

    Returns
    -------
    Structure

    Notes
    -----
    Only the net doping is known, so compensated regions get the mobility of
    the net doping (higher than the true one). Valid for non-degenerate doping
    (Boltzmann statistics).
    """
    t = float(temperature)

    def absn(x):
        return np.maximum(np.abs(profile(x)), 1e6)

    given = {k: float(v) for k, v in (mobilities or {}).items() if np.isfinite(v)}

    def mobility(carrier):
        def f(x):
            c, a = profile(x), absn(x)
            major = (c > 0) if carrier == "electron" else (c < 0)
            mu = np.where(major, material.majority_mobility(a, carrier, t), material.minority_mobility(a, carrier, t))
            for (side, role), value in given.items():  # a side's given constant where its carrier plays that role
                on_side = (c < 0) if side == "p" else (c >= 0)
                plays = major if role == "majority" else ~major
                mu = np.where(on_side & plays, value, mu)
            return mu
        return f

    if lifetimes is None:
        def tau(x):
            c, a = profile(x), absn(x)
            tp = 1.0 / np.maximum(1.0 / material.minority_lifetime(a, "p") - silicon.AUGER_CP * a * a, 1e-300)
            tn = 1.0 / np.maximum(1.0 / material.minority_lifetime(a, "n") - silicon.AUGER_CN * a * a, 1e-300)
            return np.where(c < 0, tp, tn)
    else:
        lp, ln = map(float, lifetimes)

        def tau(x):
            return np.where(profile(x) < 0, lp, ln)

    eps_r = material.RELATIVE_PERMITTIVITY if relative_permittivity is None else relative_permittivity
    return Structure(profile=profile, temperature=t, ni=float(material.intrinsic_density(t) if ni is None else ni),
                     permittivity=float(eps_r) * EPS0, area=float(area),
                     electron_mobility=mobility("electron"), hole_mobility=mobility("hole"),
                     electron_lifetime=tau, hole_lifetime=tau,
                     bandgap_narrowing=lambda x: material.bandgap_narrowing(absn(x)),
                     velocity_p=float(velocities[0]), velocity_n=float(velocities[1]))


# --------------------------------------------------------------------------- mesh


@dataclass
class Mesh:
    """Nodes and the material values on them, scaled for the solver.

    Node quantities are averaged over the two halves of each node's box (a
    jump at a node is integrated exactly; lifetimes through their rates 1/tau,
    harmonically, an infinite SRH lifetime being a zero rate); edge
    quantities are taken at the edge midpoints. Scaled units: lengths by ``lref``, densities by ``c0``,
    potentials by ``vt``, diffusivities by ``d0``.
    """

    structure: Structure
    x: np.ndarray
    vt: float
    c0: float
    lref: float
    d0: float
    h: np.ndarray  # scaled edge lengths (N-1,)
    box: np.ndarray  # scaled box sizes (N,)
    c: np.ndarray  # scaled net doping (N,)
    nie: np.ndarray  # scaled ni_eff (N,)
    theta: np.ndarray  # dEg/2 / Vt (N,)
    an: np.ndarray  # scaled Dn / h on edges (N-1,)
    ap: np.ndarray
    tau_n: np.ndarray  # scaled lifetimes (N,)
    tau_p: np.ndarray
    cn: float
    cp: float
    sn: float  # scaled contact velocities
    sp: float
    ln_ni: float  # ln(ni / c0)
    junction: int  # node index of the (first) junction
    equilibrium: np.ndarray | None = field(default=None, repr=False)

    @property
    def lo(self):
        """Node index at the left end of each edge."""
        return np.arange(len(self.x) - 1)

    @property
    def hi(self):
        """Node index at the right end of each edge."""
        return np.arange(1, len(self.x))


def _spacing(x, features, refine, grading, hmax):
    """Target spacing h(x) = min over features of (h_f + g |x - f|), capped at hmax [m]."""
    h = np.full_like(x, hmax)
    for f, hf in features:
        h = np.minimum(h, (hf + grading * np.abs(x - f)) / refine)
    return h


def make_mesh(structure, refine=1.0, grading=0.08, points=30, reverse_to=0.0, subdivide=1):
    """A non-uniform mesh graded at the junctions and the depletion edges.

    The spacing grows geometrically (by the factor 1 + ``grading``) away from
    each feature, from a fraction of the local Debye length, and is at most
    L / ``points``; ``refine`` = 2 halves it everywhere (twice the nodes). The
    junctions and any jumps of the profile are nodes.

    Parameters
    ----------
    structure : Structure
    refine : float
        Mesh density multiplier [-] (1 = the working mesh).
    grading : float
        Growth of the spacing per node away from a feature [-].
    points : int
        The coarsest spacing is L / points.
    reverse_to : float
        Most reverse bias to be solved [V] (<= 0): the depletion edges at
        that bias, estimated by the depletion approximation, are graded too.
    subdivide : int
        Split every interval of the mesh so made into this many equal parts
        (nested meshes, for convergence studies).

    Returns
    -------
    Mesh
    """
    s = structure
    prof = s.profile
    length = prof.length
    vt = float(thermal_voltage(s.temperature))
    probe = np.linspace(0.0, length, 4001)
    cabs = np.abs(prof(probe))
    c0 = float(cabs.max())

    def debye(n):
        return np.sqrt(s.permittivity * vt / (Q * max(float(n), 1.0)))

    # depletion edges by the abrupt depletion approximation with the contact dopings
    na, nd = abs(float(prof(np.array([0.0]))[0])), abs(float(prof(np.array([length]))[0]))
    vbi = vt * np.log(na * nd / s.ni**2)
    feats = []
    for xj in prof.junctions:
        feats.append((xj, 0.25 * debye(max(na, nd))))
        for v in {0.0, min(float(reverse_to), 0.0)}:
            w = np.sqrt(2 * s.permittivity * max(vbi - v, vt) * (na + nd) / (Q * na * nd))
            feats.append((max(xj - w * nd / (na + nd), 0.0), 0.25 * debye(na)))
            feats.append((min(xj + w * na / (na + nd), length), 0.25 * debye(nd)))
    for f in s.features:
        local = abs(float(prof(np.array([f]))[0]))
        feats.append((float(f), 0.25 * debye(local)))
    hmax = length / points
    # fine sampling of h(x): geometric around each feature, plus uniform
    samples = [np.linspace(0.0, length, 2001)]
    for f, hf in feats:
        off = hf * np.geomspace(1e-2, max(length / hf, 1.0), 300)
        samples += [f - off, f + off, [f]]
    xs = np.unique(np.clip(np.concatenate(samples), 0.0, length))
    density = 1.0 / _spacing(xs, feats, refine, grading, hmax / refine)
    xi = np.concatenate([[0.0], np.cumsum(0.5 * (density[1:] + density[:-1]) * np.diff(xs))])
    stops = sorted({0.0, length, *prof.junctions, *prof.breaks})
    nodes = []
    for a, b in zip(stops[:-1], stops[1:]):
        xa, xb = np.interp([a, b], xs, xi)
        k = max(int(np.ceil(xb - xa)), 2)
        nodes.append(np.interp(np.linspace(xa, xb, k + 1), xi, xs)[:-1])
    x = np.concatenate(nodes + [[length]])
    x[0] = 0.0
    if subdivide > 1:
        frac = np.arange(subdivide) / subdivide
        x = np.concatenate([(x[:-1, None] + np.diff(x)[:, None] * frac).ravel(), [length]])
    return _discretise(s, x, vt, c0)


#: The SRH lifetime standing for none [s] (a rate of 1e-20 /s: nothing at any bias).
_NO_SRH = 1e20


def _discretise(s, x, vt, c0):
    """Material values on the nodes and edges of ``x``, scaled (see :class:`Mesh`)."""
    prof = s.profile
    h = np.diff(x)
    left = np.concatenate([[0.0], 0.5 * h])
    right = np.concatenate([0.5 * h, [0.0]])
    box = left + right
    delta = 1e-9 * h.min()

    def node(f):
        return (left * f(x - delta) + right * f(x + delta)) / box

    def node_lifetime(f):
        # the rate 1/tau is what the box integrates; inf (no SRH: Auger alone gives the lifetime) has rate 0,
        # and is kept finite (1e20 s) so that the SRH derivatives stay numbers
        with np.errstate(divide="ignore"):
            return np.minimum(box / (left / f(x - delta) + right / f(x + delta)), _NO_SRH)

    mid = 0.5 * (x[1:] + x[:-1])
    mu_n, mu_p = s.electron_mobility(mid), s.hole_mobility(mid)
    mumax = float(max(mu_n.max(), mu_p.max()))
    d0 = mumax * vt
    lref = float(np.sqrt(s.permittivity * vt / (Q * c0)))
    dbgn = node(s.bandgap_narrowing)
    theta = 0.5 * dbgn / vt
    nie = s.ni * np.exp(theta) / c0
    t_scale = d0 / lref**2
    jn = int(np.argmin(np.abs(x - s.profile.junctions[0])))
    with np.errstate(divide="ignore"):
        sn, sp = s.velocity_p * lref / d0, s.velocity_n * lref / d0
    return Mesh(structure=s, x=x, vt=vt, c0=c0, lref=lref, d0=d0, h=h / lref, box=box / lref,
                c=node(prof) / c0, nie=nie, theta=theta, an=(mu_n / mumax) / (h / lref),
                ap=(mu_p / mumax) / (h / lref), tau_n=node_lifetime(s.electron_lifetime) * t_scale,
                tau_p=node_lifetime(s.hole_lifetime) * t_scale, cn=s.auger_n * c0**2 * lref**2 / d0,
                cp=s.auger_p * c0**2 * lref**2 / d0, sn=sn, sp=sp, ln_ni=float(np.log(s.ni / c0)),
                junction=jn)


# --------------------------------------------------------------------------- equations


def bernoulli(x):
    """The Bernoulli function B(x) = x / (exp(x) - 1) and its derivative.

    Parameters
    ----------
    x : numpy.ndarray
        [-], any real value (no overflow: B -> 0 for large x, -x for large -x).

    Returns
    -------
    (B, dB/dx) : tuple of numpy.ndarray

    References
    ----------
    Scharfetter & Gummel (1969): the flux weights of their discretisation.
    """
    small = np.abs(x) < 1e-5
    xs = np.where(small, 1.0, x)
    with np.errstate(over="ignore"):
        b = np.where(small, 1.0 - 0.5 * x + x * x / 12.0, xs / np.expm1(np.minimum(xs, 700.0)))
    b = np.where(xs > 700.0, 0.0, b)
    db = np.where(small, -0.5 + x / 6.0, (b / xs) * (1.0 - b - xs))
    return b, db


def _bernoulli_both(x):
    """B(x), B'(x), B(-x), B'(-x) from one evaluation at |x| (B(-a) = B(a) + a, B'(-a) = -1 - B'(a)).

    For a >= 0 both identities add numbers of one sign (B(a) in (0, 1], B'(a) in
    [-1/2, 0)), so nothing cancels; see :func:`bernoulli`.
    """
    a = np.abs(x)
    b, db = bernoulli(a)
    b_neg, db_neg = b + a, -1.0 - db
    pos = x >= 0
    return (np.where(pos, b, b_neg), np.where(pos, db, db_neg),
            np.where(pos, b_neg, b), np.where(pos, db_neg, db))


def _recombination(m, n, p):
    """Net recombination rates and their derivatives, in the mesh's scaled units.

    SRH with a midgap trap, R = (n p - nie^2) / (tau_p (n + nie) + tau_n (p + nie)),
    and Auger, R = (Cn n + Cp p)(n p - nie^2); nie includes band-gap narrowing.

    Parameters
    ----------
    m : Mesh
    n, p : numpy.ndarray
        Scaled densities at the nodes (n / c0, p / c0) [-].

    Returns
    -------
    (srh, auger, dR/dn, dR/dp) : tuple of numpy.ndarray
        Rates scaled by d0 c0 / lref^2 [-]; positive for net recombination,
        negative for generation. Valid for non-degenerate silicon.

    References
    ----------
    W. Shockley and W. T. Read, Phys. Rev. 87, 835 (1952); R. N. Hall, Phys. Rev. 87, 387
    (1952); J. Dziewior and W. Schmid, Appl. Phys. Lett. 31, 346 (1977).
    """
    nie2 = m.nie * m.nie
    u = n * p - nie2
    den = m.tau_p * (n + m.nie) + m.tau_n * (p + m.nie)
    srh = u / den
    dsrh_n = p / den - u * m.tau_p / den**2
    dsrh_p = n / den - u * m.tau_n / den**2
    cc = m.cn * n + m.cp * p
    aug = cc * u
    daug_n = m.cn * u + cc * p
    daug_p = m.cp * u + cc * n
    return srh, aug, dsrh_n + daug_n, dsrh_p + daug_p


def _fluxes(m, psi, n, p):
    """Scharfetter-Gummel electron and hole current densities on the edges, with derivatives.

    Jn = (Dn/h) [n_{i+1} B(d) - n_i B(-d)], d the step of psi + theta_n over Vt;
    Jp = -(Dp/h) [p_{i+1} B(-d) - p_i B(d)], d the step of psi - theta_p over Vt.
    Exact for a constant current and field along the edge.

    Parameters
    ----------
    m : Mesh or _Stack
        Edge ``k`` joins the nodes ``m.lo[k]`` and ``m.hi[k]``.
    psi, n, p : numpy.ndarray
        psi / Vt and the scaled densities at the nodes [-] (nodes along the
        last axis; states of several biases as rows).

    Returns
    -------
    dict
        'jn', 'jp' scaled by q d0 c0 / lref [-] and their derivatives in psi
        and in ln n, ln p at both ends of each edge.

    References
    ----------
    Scharfetter & Gummel, IEEE TED 16, 64 (1969); Selberherr (1984), ch. 6.
    """
    lo, hi = m.lo, m.hi
    pn, pp = psi + m.theta, psi - m.theta
    dn = pn[..., hi] - pn[..., lo]
    dp = pp[..., hi] - pp[..., lo]
    bn, dbn, bnm, dbnm = _bernoulli_both(dn)
    bp, dbp, bpm, dbpm = _bernoulli_both(dp)
    n0, n1, p0, p1 = n[..., lo], n[..., hi], p[..., lo], p[..., hi]
    jn = m.an * (n1 * bn - n0 * bnm)
    jp = -m.ap * (p1 * bpm - p0 * bp)
    return dict(jn=jn, jp=jp,
                jn_psi=m.an * (n1 * dbn + n0 * dbnm), jn_n1=m.an * bn * n1, jn_n0=-m.an * bnm * n0,
                jp_psi=m.ap * (p1 * dbpm + p0 * dbp), jp_p1=-m.ap * bpm * p1, jp_p0=m.ap * bp * p0)


#: Identity rows around every device's block in the stacked band matrix: at least kl + ku, so that
#: LAPACK's elimination and substitution steps have the same lengths for a device alone and in a stack.
_SPACER = 2 * _BAND


class _Stack:
    """Several meshes as one system: node and edge arrays end to end, rows with spacers.

    Device k's unknowns (psi, ln n, ln p per node) are the rows
    ``pos[node] + (0, 1, 2)`` of one banded matrix, its block preceded and the
    last block followed by :data:`_SPACER` identity rows with zero coupling, so
    that every block is factorised with operations of the same lengths
    whatever its neighbours: one device alone is a stack of one.
    """

    def __init__(self, meshes):
        self.meshes = list(meshes)
        ms = self.meshes
        sizes = np.array([len(m.x) for m in ms])
        start = np.concatenate([[0], np.cumsum(sizes)[:-1]])
        cat = np.concatenate
        self.sizes, self.start, self.last = sizes, start, start + sizes - 1
        for name in ("box", "c", "nie", "theta", "tau_n", "tau_p"):
            setattr(self, name, cat([getattr(m, name) for m in ms]))
        for name in ("h", "an", "ap"):
            setattr(self, name, cat([getattr(m, name) for m in ms]))
        self.cn = cat([np.full(len(m.x), m.cn) for m in ms])
        self.cp = cat([np.full(len(m.x), m.cp) for m in ms])
        self.lo = cat([np.arange(len(m.x) - 1) + s for m, s in zip(ms, start)])
        self.hi = self.lo + 1
        for name in ("vt", "ln_ni", "sn", "sp"):
            setattr(self, name, np.array([getattr(m, name) for m in ms], float))
        total = int(sizes.sum())
        device = np.repeat(np.arange(len(ms)), sizes)
        self.pos = 3 * np.arange(total) + _SPACER * (device + 1)
        self.width = 3 * total + _SPACER * (len(ms) + 1)
        self.rows = (self.pos[:, None] + np.arange(3)).ravel()
        spacer = np.ones(self.width, bool)
        spacer[self.rows] = False
        self.spacer = np.flatnonzero(spacer)
        self.flat = None  # band positions of the Jacobian entries, made at the first assembly
        self.contact = None  # contact values without the bias (_boundary)
        self.bc = None  # positions of the contact conditions (_contact_rows)


_STACKS = {}


def _stack_of(meshes):
    """The :class:`_Stack` of these meshes (kept for reuse: active sets repeat from step to step)."""
    key = tuple(id(m) for m in meshes)
    st = _STACKS.get(key)
    if st is None or any(a is not b for a, b in zip(st.meshes, meshes)):
        if len(_STACKS) > 16:  # compositions recur from one iteration to the next, rarely later
            _STACKS.clear()
        st = _STACKS[key] = _Stack(meshes)
    return st


def _boundary(st, bias):
    """Scaled contact values per device: psi/Vt, ln n, ln p at x = 0 (bias V) and x = L (grounded)."""
    if st.contact is None:
        st.contact = []
        for k in (st.start, st.last):
            c, nie = st.c[k], st.nie[k]
            half = 0.5 * np.abs(c)
            maj = half + np.sqrt(half * half + nie * nie)
            mnr = nie * nie / maj
            n, p = np.where(c > 0, maj, mnr), np.where(c > 0, mnr, maj)
            st.contact.append((np.log(n) - st.ln_ni - st.theta[k], np.log(n), np.log(p)))
    (b0, n0, p0), (bl, nl, pl) = st.contact
    return (b0 + bias / st.vt, n0, p0), (bl + 0.0 / st.vt, nl, pl)


def _contact_rows(st):
    """Row and band positions of the contact conditions of a stack, made once.

    Dirichlet rows: psi and ln p at x = 0, psi and ln n at x = L, and the minority
    rows of ideal contacts (S = inf); Robin rows: the minority rows of the others.
    """
    if st.bc is None:
        offsets = np.arange(-_BAND, _BAND + 1)
        ideal_0, ideal_l = np.isinf(st.sn), np.isinf(st.sp)
        dir_nodes = [st.start, st.start, st.last, st.last, st.start[ideal_0], st.last[ideal_l]]
        dir_comps = [0, 2, 0, 1, 1, 2]
        nodes = np.concatenate(dir_nodes)
        comps = np.concatenate([np.full(len(x), c) for x, c in zip(dir_nodes, dir_comps)])
        r = st.pos[nodes] + comps
        band = (_DIAG - offsets[None, :] + 0 * r[:, None]).ravel(), (r[:, None] + offsets[None, :]).ravel()
        rob = []
        for node, comp, s, sign, keep in ((st.start, 1, st.sn, -1.0, ~ideal_0), (st.last, 2, st.sp, 1.0, ~ideal_l)):
            nk, sk = node[keep], s[keep]
            rr = st.pos[nk] + comp
            rob.append({"node": nk, "comp": comp, "rows": rr, "a": 1.0 / (1.0 + sk), "b": sk / (1.0 + sk),
                        "sign": sign, "keep": keep,
                        "band": ((_DIAG - offsets[None, :] + 0 * rr[:, None]).ravel(),
                                 (rr[:, None] + offsets[None, :]).ravel())})
        st.bc = {"rows": r, "nodes": nodes, "comps": comps, "band": band, "robin": rob}
    return st.bc


def _system(st, u, bias):
    """Residual F (width,) and banded Jacobian (LAPACK ?gbsv layout, kl = ku = 5) of a stack at the state ``u``.

    ``u`` is (nodes of all devices, 3); ``bias`` one value per device.
    """
    psi, ln_n, ln_p = u[:, 0], u[:, 1], u[:, 2]
    n, p = np.exp(ln_n), np.exp(ln_p)
    N = len(psi)
    f = _fluxes(st, psi, n, p)
    srh, aug, dr_n, dr_p = _recombination(st, n, p)
    r = srh + aug
    lo, hi = st.lo, st.hi
    F = np.zeros((N, 3))
    inv_h = 1.0 / st.h
    e = (psi[hi] - psi[lo]) * inv_h
    F[:, 0] = st.box * (p - n + st.c)
    F[lo, 0] += e
    F[hi, 0] -= e
    F[:, 1] = -st.box * r
    F[lo, 1] += f["jn"]
    F[hi, 1] -= f["jn"]
    F[:, 2] = st.box * r
    F[lo, 2] += f["jp"]
    F[hi, 2] -= f["jp"]

    # Jacobian entries as (row node, row eq, col node, col var, value), summed into the band layout by
    # one bincount over flat indices made once per stack; entries of one kind for all devices in turn,
    # so that each band position sums its parts in the same order for a device alone and in a stack
    idx = np.arange(N)
    jn_psi, jp_psi = f["jn_psi"], f["jp_psi"]
    entries = [
        # Poisson
        (idx, 0, idx, 1, -st.box * n), (idx, 0, idx, 2, st.box * p),
        (lo, 0, lo, 0, -inv_h), (lo, 0, hi, 0, inv_h), (hi, 0, hi, 0, -inv_h), (hi, 0, lo, 0, inv_h),
        # electrons: row i gets +jn(edge i) - jn(edge i-1) - box R
        (idx, 1, idx, 1, -st.box * dr_n * n), (idx, 1, idx, 2, -st.box * dr_p * p),
        # holes: row i gets +jp(edge i) - jp(edge i-1) + box R
        (idx, 2, idx, 1, st.box * dr_n * n), (idx, 2, idx, 2, st.box * dr_p * p),
    ]
    for sign, rows in ((1.0, lo), (-1.0, hi)):
        entries += [(rows, 1, hi, 0, sign * jn_psi), (rows, 1, lo, 0, -sign * jn_psi),
                    (rows, 1, hi, 1, sign * f["jn_n1"]), (rows, 1, lo, 1, sign * f["jn_n0"]),
                    (rows, 2, hi, 0, sign * jp_psi), (rows, 2, lo, 0, -sign * jp_psi),
                    (rows, 2, hi, 2, sign * f["jp_p1"]), (rows, 2, lo, 2, sign * f["jp_p0"])]
    width = st.width
    if st.flat is None:
        parts = []
        for rn, rc, cn, cc, _ in entries:
            rr, col = st.pos[rn] + rc, st.pos[cn] + cc
            parts.append(col * _LDAB + _DIAG + rr - col)  # column-major: LAPACK's own layout, no copies
        st.flat = np.concatenate(parts)
    vals = np.concatenate([e[4] for e in entries])
    ab = np.bincount(st.flat, weights=vals, minlength=_LDAB * width).reshape(width, _LDAB).T
    ab[_DIAG, st.spacer] = 1.0
    b = np.zeros(width)
    b[st.rows] = F.ravel()

    (psi0, lnn0, lnp0), (psil, lnnl, lnpl) = _boundary(st, np.asarray(bias, float))
    bc = _contact_rows(st)
    ideal_0, ideal_l = np.isinf(st.sn), np.isinf(st.sp)
    values = np.concatenate([psi0, lnp0, psil, lnnl, lnn0[ideal_0], lnpl[ideal_l]])
    r = bc["rows"]
    ab[bc["band"]] = 0.0
    ab[_DIAG, r] = 1.0
    b[r] = u[bc["nodes"], bc["comps"]] - values
    # Robin rows: a * (flux balance of the half box) + sign * b * (density - equilibrium);
    # Jn(1/2) - box R - S (n - n0) = 0 at x = 0, -Jp(N-3/2) + box R + S (p - p0) = 0 at x = L
    for rb, ln_eq in zip(bc["robin"], (lnn0, lnpl)):
        if not len(rb["rows"]):
            continue
        rr, a = rb["rows"], rb["a"]
        ab[rb["band"]] *= np.repeat(a, 2 * _BAND + 1)
        dens = np.exp(u[rb["node"], rb["comp"]])
        ab[_DIAG, rr] += rb["sign"] * rb["b"] * dens
        b[rr] = a * b[rr] + rb["sign"] * rb["b"] * (dens - np.exp(ln_eq[rb["keep"]]))
    return b, ab


def _banded(ab, rhs):
    """LAPACK ?gbsv on a stack's band matrix (consumed: overwritten by its factors); None if singular."""
    _, _, x, info = _gbsv(_BAND, _BAND, ab, rhs, overwrite_ab=1, overwrite_b=1)
    if info > 0:
        return None
    if info < 0:
        raise ValueError(f"gbsv: argument {-info} invalid")
    return x


#: Devices solved together at most: beyond a few dozen the stacked band matrix outgrows the caches
#: and each unknown costs more (measured with benchmarks/batch_benchmark.py).
STACK = 32


def _drive(meshes, tasks, tol=1e-9, stack=STACK):
    """Run devices' tasks to the end, all their Newton iterations in stacked banded solves.

    ``tasks[k]`` is a generator for ``meshes[k]`` that yields Newton requests
    (starting state (N_k, 3), bias [V], iteration limit) and is sent back
    (state or None, iterations) for each. At every iteration all devices with a
    request run together as one band matrix; a device whose Newton solve ends
    (converged or failed) is handed its result at once and joins the next
    iteration with its next request, so the stack stays full until devices
    finish; at most ``stack`` devices run at once, the next one starting when
    one finishes. Each device converges, is damped and stops on its own
    numbers alone, and a singular or non-finite stacked solve is redone device
    by device: a device's iterates are the same alone and in any company.

    Converged when the largest update (psi/Vt, ln n, ln p) is below ``tol``, or
    below 100 tol twice running: in a heavily doped region the minority
    density's logarithm carries rounding noise of about 1e-9 that no iteration
    removes (its carriers are 1e-40 of the majority), harmless to every result.

    Returns
    -------
    list
        Per device, ('done', the generator's return value) or ('error', the
        SolverError it raised).
    """
    out = [None] * len(meshes)
    jobs = {}  # device -> [state, bias, iteration limit, iterations, last update size]
    waiting = iter(range(len(meshes)))

    def advance(k, value):
        try:
            guess, bias, maxit = tasks[k].send(value)
        except StopIteration as stop:
            jobs.pop(k, None)
            out[k] = ("done", stop.value)
        except SolverError as exc:
            jobs.pop(k, None)
            out[k] = ("error", exc)
        else:
            jobs[k] = [np.array(guess, float, copy=True), float(bias), int(maxit), 0, np.inf]

    def fill():
        while len(jobs) < max(int(stack), 1):
            k = next(waiting, None)
            if k is None:
                return
            advance(k, None)

    fill()
    while jobs:
        ks = list(jobs)
        st = _stack_of([meshes[k] for k in ks])
        F, ab = _system(st, np.concatenate([jobs[k][0] for k in ks]), np.array([jobs[k][1] for k in ks]))
        du = _banded(ab, -F)
        if du is None or not np.all(np.isfinite(du)):
            # one device's trouble must not touch the others: each solved alone (the same operations)
            du = np.concatenate([_alone(meshes[k], jobs[k][0], jobs[k][1]) for k in ks])
        else:
            du = du[st.rows].reshape(-1, 3)
        big = np.abs(du) > 1.0
        du = np.where(big, np.sign(du) * (1.0 + np.log(np.where(big, np.abs(du), 1.0))), du)
        # each device's largest update (NaN or inf where it is not finite)
        sizes = np.maximum.reduceat(np.abs(du).max(axis=1), st.start)
        for j, k in enumerate(ks):
            job = jobs[k]
            job[3] += 1
            it = job[3]
            size = sizes[j]
            if not np.isfinite(size):
                advance(k, (None, it))
                continue
            job[0] += du[st.start[j]:st.last[j] + 1]
            if size < tol or max(size, job[4]) < 100 * tol:
                advance(k, (job[0], it))
            elif it >= job[2]:
                advance(k, (None, it))
            else:
                job[4] = size
        fill()
    return out


def _newton_many(meshes, requests, tol=1e-9):
    """Damped Newton solves of several devices at once (see :func:`_drive`): one request
    (starting state, bias [V], iteration limit) per mesh; returns (state or None, iterations) each."""
    def one(request):
        return (yield request)

    return [r[1] for r in _drive(meshes, [one(r) for r in requests], tol)]


def _alone(m, u, bias):
    """One device's Newton update as a stack of one (NaN where singular)."""
    st = _stack_of([m])
    F, ab = _system(st, u, [bias])
    du = _banded(ab, -F)
    if du is None:
        return np.full((len(m.x), 3), np.nan)
    return du[st.rows].reshape(-1, 3)


def _neutral_guess(m):
    """Charge-neutral equilibrium state: the starting point of the equilibrium solve."""
    half = 0.5 * np.abs(m.c)
    maj = half + np.sqrt(half * half + m.nie**2)
    mnr = m.nie**2 / maj
    n = np.where(m.c > 0, maj, mnr)
    p = np.where(m.c > 0, mnr, maj)
    psi = np.log(n) - m.ln_ni - m.theta
    return np.column_stack([psi, np.log(n), np.log(p)])


#: Newton iterations allowed for the equilibrium solve and for each continuation step.
_EQUILIBRIUM_ITERATIONS = 200
_STEP_ITERATIONS = 40


def equilibrium(mesh):
    """Thermal equilibrium (zero bias) of the discrete equations, by damped Newton from charge neutrality.

    Parameters
    ----------
    mesh : Mesh

    Returns
    -------
    numpy.ndarray
        The state (N, 3): psi / Vt, ln(n / c0), ln(p / c0); also kept as
        ``mesh.equilibrium`` (the reference for the stored excess charge).

    Raises
    ------
    SolverError
        No convergence in 200 iterations.
    """
    u, _ = _newton_many([mesh], [(_neutral_guess(mesh), 0.0, _EQUILIBRIUM_ITERATIONS)])[0]
    if u is None:
        raise SolverError("no convergence at equilibrium")
    mesh.equilibrium = u
    return u


# --------------------------------------------------------------------------- results


@dataclass
class Solution:
    """Results of :func:`solve` over a bias list (arrays in the order of the biases given; SI units).

    Attributes
    ----------
    bias : applied bias, p contact against n contact [V].
    current_density, current : terminal current [A/m^2], [A] (positive forward), the sum of
        the components below (free of the cancellation of the large majority-carrier fluxes).
    components : dict of [A/m^2] per bias, each an integrated recombination
        rate times q: 'srh_depletion', 'srh_neutral', 'auger', 'surface_p'
        (electrons recombining at the p contact), 'surface_n' (holes at the n
        contact); they sum to the terminal current. 'diffusion' is all but
        'srh_depletion'.
    peak_field : largest |E| [V/m].
    stored_charge : excess minority charge in the quasi-neutral regions per
        area [C/m^2] (electrons on the p side plus holes on the n side).
    depletion_charge : positive space charge per area, eps |E|max [C/m^2].
    capacitance : quasi-static small-signal capacitance [F]: q d/dV of the
        number of electrons in the device (the charge the n contact delivers),
        times the area; the depletion capacitance in reverse bias, depletion
        plus diffusion capacitance in forward bias. It is the exact derivative
        of the discrete solution (the converged Jacobian solved against the
        bias derivative of the contact condition); NaN where not asked for.
        Not eps dE/dV at the junction: the majority tail of a heavily doped
        side spills across the metallurgical junction, and its charge comes
        from the other contact.
    junction_current_density : Jn + Jp on the mesh edge at the junction [A/m^2]; equal
        to current_density by current continuity.
    junction_voltage : quasi-Fermi level split at the junction, Vt ln(n p / ni_eff^2) [V]:
        the applied bias less the ohmic drops of the neutral regions.
    psi, n, p : potential [V] and densities [m^-3] on the mesh, (biases, nodes).
    iterations : Newton iterations spent per bias (continuation steps included).
    mesh : the Mesh.
    terminal_bias : bias at the device's leads [V], bias + current * contact_resistance
        (:attr:`Structure.contact_resistance`; the neutral regions' resistance, conductivity
        modulation included, is already inside ``bias``): the voltage to set against a
        measured or simulated I-V whose series resistance includes the contacts.
    """

    bias: np.ndarray
    current_density: np.ndarray
    current: np.ndarray
    components: dict
    peak_field: np.ndarray
    stored_charge: np.ndarray
    depletion_charge: np.ndarray
    capacitance: np.ndarray
    junction_current_density: np.ndarray
    junction_voltage: np.ndarray
    psi: np.ndarray
    n: np.ndarray
    p: np.ndarray
    iterations: np.ndarray
    mesh: Mesh
    terminal_bias: np.ndarray | None = None

    @property
    def degenerate(self):
        """Plain-text warning where the equilibrium densities are degenerate, else '' (see
        :func:`degeneracy_warning`; silicon's effective densities of states)."""
        return degeneracy_warning(self.mesh)


def _observe(m, states, biases, capacitance):
    """Terminal current, mechanism split, field, charges (and dQ/dV) of converged states (SI).

    ``states`` (biases, nodes, 3) at ``biases`` [V]; ``capacitance`` a mask over
    them. All biases at once: row by row the same numbers as one at a time.
    """
    psi, n, p = states[..., 0], np.exp(states[..., 1]), np.exp(states[..., 2])
    f = _fluxes(m, psi, n, p)
    srh, aug, _, _ = _recombination(m, n, p)
    jscale = Q * m.d0 * m.c0 / m.lref  # scaled flux -> A/m^2
    rscale = Q * m.c0 * m.d0 / m.lref  # box (scaled) * R (scaled) -> A/m^2
    c = m.c
    dep = ((c < 0) & (p < 0.5 * np.abs(c))) | ((c > 0) & (n < 0.5 * c))
    dep[:, m.junction] = True
    out = {
        "srh_depletion": rscale * np.sum(m.box * srh * dep, axis=-1),
        "srh_neutral": rscale * np.sum(m.box * srh * ~dep, axis=-1),
        "auger": rscale * np.sum(m.box * aug, axis=-1),
        "surface_p": jscale * (f["jn"][:, 0] - m.box[0] * (srh[:, 0] + aug[:, 0])),
        "surface_n": jscale * (f["jp"][:, -1] - m.box[-1] * (srh[:, -1] + aug[:, -1])),
    }
    # the terminal current as the sum of its parts: no cancellation of large majority fluxes
    j = sum(out.values())
    k = m.junction
    j_junction = jscale * (f["jn"][:, k] + f["jp"][:, k])
    vj = m.vt * (np.log(n[:, k] * p[:, k]) - 2.0 * np.log(m.nie[k]))
    slope = np.abs(np.diff(psi, axis=-1) / m.h)
    peak = slope[np.arange(len(slope)), np.argmax(slope, axis=-1)]
    field = peak * m.vt / m.lref
    eq = m.equilibrium
    ne, pe = np.exp(eq[:, 1]), np.exp(eq[:, 2])
    excess = np.where(c < 0, n - ne, p - pe) * ~dep
    stored = Q * m.c0 * m.lref * np.sum(m.box * excess, axis=-1)
    qdep = m.structure.permittivity * m.vt / m.lref * peak
    cap = np.full(len(states), np.nan)
    want = np.flatnonzero(capacitance)
    if len(want):
        # one stacked solve: the converged Jacobian of each state against d(psi0/Vt)/dV, the only
        # bias-dependent equation
        st = _stack_of([m] * len(want))
        _, ab = _system(st, states[want].reshape(-1, 3), np.asarray(biases, float)[want])
        rhs = np.zeros(st.width)
        rhs[st.pos[st.start]] = 1.0 / m.vt
        du = _banded(ab, rhs)
        if du is not None:  # (a converged state's Jacobian is not singular; if it were, C stays NaN)
            du = du[st.rows].reshape(len(want), -1, 3)
            # the charge the n contact delivers: every electron in the device [C/m^2 per V]
            cap[want] = Q * m.c0 * m.lref * np.sum(m.box * n[want] * du[:, :, 1], axis=-1) * m.structure.area
    return j, out, field, stored, qdep, cap, j_junction, vj


def _continuation(m, v, want_c, max_step):
    """One device's bias continuation, as a generator of Newton requests.

    Yields (state, bias, iteration limit) and receives (state or None,
    iterations) for each; returns the raw results. Every decision (step size,
    halving, predictor) depends on this device's own numbers only, so the
    device gives the same bytes solved alone (:func:`solve`) or among others
    (:func:`solve_many`).
    """
    if m.equilibrium is None:
        u, _ = yield (_neutral_guess(m), 0.0, _EQUILIBRIUM_ITERATIONS)
        if u is None:
            raise SolverError("no convergence at equilibrium")
        m.equilibrium = u
    nb, N = len(v), len(m.x)
    states = np.zeros((nb, N, 3))
    res = {"it": np.zeros(nb, int)}
    for direction in (1.0, -1.0):
        sel = np.flatnonzero(v >= 0) if direction > 0 else np.flatnonzero(v < 0)
        order = sel[np.argsort(direction * v[sel], kind="stable")]
        step_max = (max_step or (4.0 if direction > 0 else 20.0) * m.vt)
        hist = [(0.0, m.equilibrium)]
        for k in order:
            target = v[k]
            its = 0
            step = step_max
            while hist[-1][0] != target:
                v0, u0 = hist[-1]
                vn = v0 + np.clip(target - v0, -step, step)
                if abs(vn - target) < 1e-12:
                    vn = target
                guess = u0
                if len(hist) > 1:
                    v1, u1 = hist[-2]
                    if v0 != v1:
                        guess = u0 + (u0 - u1) * (vn - v0) / (v0 - v1)
                u, it = yield (guess, vn, _STEP_ITERATIONS)
                its += it
                if u is None:
                    step *= 0.5
                    if step < 1e-4:
                        raise SolverError(f"no convergence at {vn:.4g} V")
                    continue
                hist.append((vn, u))
                hist = hist[-2:]
                # in reverse bias the solution changes smoothly with |V|: steps may grow to a fifth of it
                cap = step_max if direction > 0 or max_step else max(step_max, 0.2 * abs(vn))
                step = min(step * 1.5, cap)
            states[k] = hist[-1][1]
            res["it"][k] = its
    j, out, fld, st, qd, cp, jj, vj = _observe(m, states, v, want_c)
    res.update(j=j, field=fld, stored=st, qdep=qd, cap=cp, jj=jj, vj=vj, psi=states[..., 0] * m.vt,
               n=np.exp(states[..., 1]) * m.c0, p=np.exp(states[..., 2]) * m.c0)
    return res, out


def _solution(structure, m, v, want_c, res, comps):
    comps["diffusion"] = res["j"] - comps["srh_depletion"]
    area = structure.area
    return Solution(bias=v, current_density=res["j"], current=res["j"] * area, components=comps,
                    peak_field=res["field"], stored_charge=res["stored"], depletion_charge=res["qdep"],
                    capacitance=np.where(want_c, res["cap"], np.nan),
                    junction_current_density=res["jj"], junction_voltage=res["vj"], psi=res["psi"], n=res["n"],
                    p=res["p"], iterations=res["it"], mesh=m,
                    terminal_bias=v + res["j"] * area * float(structure.contact_resistance))


def _biases(biases, who):
    v = np.asarray(biases, dtype=float).ravel()
    if not np.all(np.isfinite(v)):
        raise ValueError(f"{who}: every bias must be a finite number of volts")
    return v


def solve(structure, biases, mesh=None, capacitance=True, max_step=None, refine=1.0):
    """Solve the diode at each bias by continuation from equilibrium.

    Parameters
    ----------
    structure : Structure
    biases : array_like
        Applied biases [V] (p contact against n contact), any order; forward
        biases are reached by stepping up from 0, reverse ones by stepping
        down.
    mesh : Mesh, optional
        Default :func:`make_mesh` (graded for the most reverse bias).
    capacitance : bool or array_like of bool
        Compute the depletion capacitance at each bias, or at the biases where
        this mask (one entry per bias) is True (one extra banded solve each).
    max_step : float, optional
        Largest continuation step [V]; default 4 Vt forward, in reverse 20 Vt
        or a fifth of the bias reached, whichever is larger.
    refine : float
        Mesh density multiplier when ``mesh`` is not given.

    Returns
    -------
    Solution

    Raises
    ------
    SolverError
        Newton's method failed at a bias even with steps of 1e-4 V.
    ValueError
        A bias is not finite.

    Notes
    -----
    Valid for non-degenerate silicon (Boltzmann statistics: see
    :attr:`Solution.degenerate`), no impact ionisation or tunnelling
    (reverse biases short of breakdown: see :func:`breakdown_bias`), steady
    state. The same code as :func:`solve_many` with one device: the same
    bytes as that device among others.
    """
    return solve_many([structure], [np.atleast_1d(np.asarray(biases, dtype=float))],
                      meshes=None if mesh is None else [mesh], capacitance=capacitance, max_step=max_step,
                      refine=refine)[0]


def solve_many(structures, biases, meshes=None, capacitance=True, max_step=None, refine=1.0, errors="raise",
               stack=STACK):
    """Solve several diodes at once: one stacked banded system per Newton step for all of them.

    Each device follows its own bias continuation (:func:`solve`'s schedule:
    fixed steps in volts, halved on failure, decided by that device's numbers
    alone); at every round the devices still running each ask for one Newton
    solve, and these run together, the per-device Jacobians stacked along the
    diagonal of one band matrix with zero coupling (and identity spacer rows,
    so that LAPACK treats every block alike) and solved by one call of
    LAPACK's ?gbsv (:func:`scipy.linalg.lapack.dgbsv`). A device that has
    converged leaves the stack. The result for each device is byte for byte what :func:`solve`
    gives for it alone. Meshes may differ in size.

    Parameters
    ----------
    structures : sequence of Structure
    biases : array_like or sequence of array_like
        One bias list for all devices, or one per device [V].
    meshes : sequence of Mesh or None, optional
        One per device (None entries: :func:`make_mesh` with ``refine``, graded
        for the device's most reverse bias).
    capacitance : bool, array_like of bool, or a list of arrays of bool (one per device)
        As in :func:`solve`: one choice, or one mask over the biases, for all
        devices; or a list of ``len(structures)`` masks (arrays, each over that
        device's biases).
    max_step : float, optional
        As in :func:`solve`.
    refine : float
        Mesh density multiplier where no mesh is given.
    errors : {'raise', 'keep'}
        On a device that fails: raise its SolverError (naming the device), or
        keep the exception object in its place in the returned list.
    stack : int
        Devices running together at most (:data:`STACK`); the next starts as
        one finishes. Any value gives the same bytes.

    Returns
    -------
    list of Solution
        In the order of ``structures``.

    Raises
    ------
    SolverError
        A device failed (``errors='raise'``).
    ValueError
        A bias is not finite, or the lists differ in length.
    """
    structures = list(structures)
    nd = len(structures)
    per_device = (isinstance(biases, (list, tuple, np.ndarray)) and len(biases) == nd and nd > 0
                  and all(np.ndim(b) >= 1 for b in biases))
    vs = [_biases(b, "solve") for b in biases] if per_device else [_biases(biases, "solve")] * nd
    per_device = (isinstance(capacitance, (list, tuple)) and len(capacitance) == nd
                  and all(np.ndim(c) >= 1 for c in capacitance))
    caps = list(capacitance) if per_device else [capacitance] * nd
    meshes = list(meshes) if meshes is not None else [None] * nd
    if len(meshes) != nd or len(caps) != nd:
        raise ValueError("solve_many: one mesh and one capacitance choice per structure")
    ms, want, gens = [], [], []
    for s, v, mesh, c in zip(structures, vs, meshes, caps):
        m = mesh if mesh is not None else make_mesh(s, refine=refine, reverse_to=min(v.min(initial=0.0), 0.0))
        w = np.broadcast_to(np.asarray(c, dtype=bool), v.shape)
        ms.append(m)
        want.append(w)
        gens.append(_continuation(m, v, w, max_step))
    results = []
    for k, (kind, value) in enumerate(_drive(ms, gens, stack=stack)):
        if kind == "error":
            if errors == "raise":
                raise SolverError(f"device {k}: {value}" if nd > 1 else str(value)) from None
            results.append(value)
        else:
            results.append(_solution(structures[k], ms[k], vs[k], want[k], *value))
    return results


# --------------------------------------------------------------------------- degeneracy

#: Largest overstatement of the density by Boltzmann statistics the solver's results accept [-].
DEGENERACY_ERROR = 0.05


def fermi_dirac_half(eta, terms=60):
    """The Fermi-Dirac integral F_1/2(eta) for eta <= 0, normalised so that n = Nc F_1/2(eta_F).

    F_1/2(eta) = (2/sqrt(pi)) integral_0^inf sqrt(e) / (1 + exp(e - eta)) de
    = sum_k (-1)^(k+1) exp(k eta) / k^(3/2), the alternating series, which
    converges for eta <= 0 (and tends to exp(eta), Boltzmann, for eta -> -inf).

    Parameters
    ----------
    eta : array_like
        Reduced Fermi level (E_F - E_c) / kT [-], at most -1 (non-degenerate to
        weakly degenerate); larger values are clipped to -1 (the series slows
        down towards 0).
    terms : int
        Terms of the series; 60 gives the sum to 1e-12 at eta = -1 and better below.

    Returns
    -------
    numpy.ndarray
        F_1/2(eta) [-].

    References
    ----------
    J. S. Blakemore, "Approximations for Fermi-Dirac integrals, especially the
    function F_1/2(eta) used to describe electron density in a semiconductor",
    Solid-State Electron. 25, 1067 (1982).
    """
    x = np.exp(np.minimum(np.asarray(eta, float), -1.0))[..., None]
    k = np.arange(1, terms + 1)
    return np.sum((-1.0) ** (k + 1) * x**k / k**1.5, axis=-1)


def degeneracy_limit(effective_density, error=DEGENERACY_ERROR):
    """The carrier density above which Boltzmann statistics overstate it by more than ``error``.

    At a Fermi level eta, Boltzmann gives Nc exp(eta) where Fermi-Dirac
    gives Nc F_1/2(eta); the limit is Nc F_1/2(eta*) with
    exp(eta*) / F_1/2(eta*) = 1 + error (found by bisection; for 5 % it is
    0.138 Nc, eta* = -1.93; to first order exp(eta*) = 2^(3/2) error).

    Parameters
    ----------
    effective_density : array_like
        Nc or Nv [m^-3].
    error : float
        Accepted relative overstatement [-], between 1e-6 and 0.1 (eta* below -1).

    Returns
    -------
    numpy.ndarray
        [m^-3].

    References
    ----------
    Blakemore, Solid-State Electron. 25, 1067 (1982) (F_1/2 and its series);
    Sze & Ng, *Physics of Semiconductor Devices*, 3rd ed. (2007), sec. 1.4.1
    (n = Nc F_1/2, Boltzmann's limit).
    """
    lo, hi = -20.0, -1.0
    for _ in range(80):
        mid = 0.5 * (lo + hi)
        if np.exp(mid) / fermi_dirac_half(mid) > 1.0 + error:
            hi = mid
        else:
            lo = mid
    return np.asarray(effective_density, float) * fermi_dirac_half(lo)


def degeneracy_warning(mesh, material=silicon, error=DEGENERACY_ERROR):
    """A plain-text warning where the equilibrium electron or hole density is degenerate, else ''.

    The solver uses Boltzmann statistics. Where the equilibrium density of a
    carrier exceeds :func:`degeneracy_limit` of the band's effective density
    of states (``material.effective_density_of_states`` at the structure's
    temperature), Boltzmann overstates the density at a given Fermi level by
    more than ``error`` (5 %: 0.138 Nc, 3.95e18 cm^-3 for electrons and
    4.29e18 cm^-3 for holes in silicon at 300 K with Green's (1990) Nc, Nv).
    The apparent band-gap narrowing the solver uses carries part of the
    effect on n p; the currents and the charge of such a region remain
    estimates.

    Parameters
    ----------
    mesh : Mesh
        With its equilibrium solved (:func:`equilibrium`; :func:`solve` does it).
    material : module
        A :mod:`modelgen.materials` module.
    error : float
        Accepted relative overstatement [-].

    Returns
    -------
    str
        '' when both densities stay below their limits.

    References
    ----------
    Blakemore, Solid-State Electron. 25, 1067 (1982); Sze & Ng (2007), sec. 1.4.1.
    """
    if mesh.equilibrium is None:
        equilibrium(mesh)
    u = mesh.equilibrium
    nc, nv = material.effective_density_of_states(mesh.structure.temperature)
    parts = []
    for name, col, dos in (("electron", 1, nc), ("hole", 2, nv)):
        dens = np.exp(u[:, col]) * mesh.c0
        limit = float(degeneracy_limit(dos, error))
        k = int(np.argmax(dens))
        if dens[k] > limit:
            parts.append(f"the equilibrium {name} density reaches {dens[k] / 1e6:.3g} cm^-3 "
                         f"(from {mesh.x[k] * 1e6:.4g} um), above {limit / 1e6:.3g} cm^-3")
    if not parts:
        return ""
    return ("degenerate: " + "; ".join(parts) + f", where Boltzmann statistics overstate the density by more "
            f"than {100 * error:g} % (Fermi-Dirac integral F_1/2); the solver's results for that region are "
            "estimates")


# --------------------------------------------------------------------------- avalanche breakdown


def ionization_integrals(solution, material=silicon):
    """Hole-initiated ionization integral over the solver's field, at each bias of a solution [-].

    The field is the electrostatic one, |d psi / dx| on each mesh edge (the
    Scharfetter-Gummel field is constant along an edge), placed at the edge
    midpoints and integrated from the n contact towards the p contact with
    :func:`modelgen.physics.breakdown.ionization_integral` (trapezoidal rule)
    and the material's ionization coefficients. Avalanche breakdown is where
    it reaches 1 (Sze & Ng 2007, sec. 2.4.3).

    Parameters
    ----------
    solution : Solution
    material : module
        A :mod:`modelgen.materials` module (``ionization_coefficients``).

    Returns
    -------
    numpy.ndarray
        The integral at each bias [-]; near 0 in forward bias.

    Notes
    -----
    The solver has no impact ionisation of its own: the integral is taken
    over the field of the solution without multiplication, as the closed
    form takes it over the depletion approximation's field. Breakdown figures
    are estimates to be derated and confirmed on measured devices.

    References
    ----------
    Sze & Ng, *Physics of Semiconductor Devices*, 3rd ed. (2007), sec. 2.4.3.
    """
    m = solution.mesh
    field = np.abs(np.diff(solution.psi, axis=1)) / np.diff(m.x)
    y = m.x[-1] - 0.5 * (m.x[1:] + m.x[:-1])  # from the n contact
    field = field[:, ::-1]
    y = np.broadcast_to(y[::-1], field.shape)
    with np.errstate(divide="ignore"):
        return _breakdown.ionization_integral(y, field, np.full(len(field), m.structure.temperature),
                                              material.ionization_coefficients)


@dataclass
class Breakdown:
    """The avalanche breakdown found by :func:`breakdown_bias`.

    Attributes
    ----------
    bias : applied bias at breakdown [V] (negative: reverse).
    integral : the ionization integral there [-] (1 within the tolerance).
    peak_field : largest |E| there [V/m].
    evaluations : solver runs spent.
    solution : the Solution at ``bias``.
    """

    bias: float
    integral: float
    peak_field: float
    evaluations: int
    solution: Solution


def breakdown_bias(structure, material=silicon, start=-1.0, limit=-1e4, rtol=1e-5, refine=1.0, maxiter=60):
    """The reverse bias where the ionization integral over the solver's field reaches 1.

    The bias is doubled from ``start`` until the integral passes 1; the
    bracket is then solved on one mesh (graded for its reverse end) by
    regula falsi (Illinois) on ln I against ln |V|, until ln I is within
    ``rtol`` of 0 or the bracket within ``rtol`` (relative).

    Parameters
    ----------
    structure : Structure
    material : module
        Supplies the ionization coefficients.
    start : float
        First reverse bias tried [V], < 0.
    limit : float
        Most reverse bias tried [V].
    rtol : float
        Tolerance on ln I and on the bracket [-].
    refine : float
        Mesh density multiplier (see :func:`make_mesh`).
    maxiter : int
        Regula-falsi steps at most.

    Returns
    -------
    Breakdown

    Raises
    ------
    SolverError
        No breakdown up to ``limit``, or the solver failed.

    Notes
    -----
    Avalanche breakdown only (above about 6 Eg/q; tunnelling dominates below
    4 Eg/q, Sze & Ng 2007, sec. 2.4.3); the field is the steady-state field
    without multiplication or self-heating. An estimate: derate it and confirm
    it on measured devices.

    References
    ----------
    Sze & Ng (2007), sec. 2.4.3; ionization coefficients of the material.
    """
    runs = 0

    def evaluate(v, mesh):
        nonlocal runs
        runs += 1
        sol = solve(structure, [v], mesh=mesh, capacitance=False)
        return float(ionization_integrals(sol, material)[0]), sol

    v_lo, v = None, float(start)
    if not v < 0:
        raise ValueError("breakdown_bias: start must be a reverse (negative) bias")
    while True:
        i, _ = evaluate(v, make_mesh(structure, refine=refine, reverse_to=v))
        if i >= 1.0:
            break
        v_lo = v
        if v <= limit:
            raise SolverError(f"no avalanche breakdown up to {limit:g} V")
        v = max(2.0 * v, limit)
    mesh = make_mesh(structure, refine=refine, reverse_to=v)
    v_hi = v
    v_lo = v_hi / 2.0 if v_lo is None else v_lo

    def g(v):
        i, sol = evaluate(v, mesh)
        return np.log(max(i, 1e-300)), i, sol

    g_lo, g_hi = g(v_lo)[0], g(v_hi)[0]
    if not g_lo < 0 <= g_hi:  # the finer mesh moved the root out of the bracket: widen once
        v_lo, v_hi = v_lo / 2.0, max(2.0 * v_hi, limit)
        g_lo, g_hi = g(v_lo)[0], g(v_hi)[0]
        if not g_lo < 0 <= g_hi:
            raise SolverError("breakdown_bias: the ionization integral does not cross 1 monotonically")
    a, b = np.log(-v_lo), np.log(-v_hi)
    side = 0
    for _ in range(maxiter):
        c = b - g_hi * (b - a) / (g_hi - g_lo)
        gc, ic, sol = g(-np.exp(c))
        if abs(gc) < rtol or abs(b - a) < rtol:
            break
        if gc < 0:
            a, g_lo = c, gc
            if side == -1:
                g_hi *= 0.5
            side = -1
        else:
            b, g_hi = c, gc
            if side == 1:
                g_lo *= 0.5
            side = 1
    else:
        raise SolverError("breakdown_bias: no convergence of the breakdown bias")
    return Breakdown(bias=float(sol.bias[0]), integral=ic, peak_field=float(sol.peak_field[0]), evaluations=runs,
                     solution=sol)

"""Minority-carrier diffusion in a quasi-neutral region of finite width.

The boundary-value problem, for the excess minority density u(x) in a region
0 <= x <= W (x = 0 at the depletion edge, x = W at the contact), at low
injection:

    D u'' = u / tau,          L = sqrt(D tau),
    u(0) = u0 = n0 (exp(V/Vt) - 1)          (law of the junction),
    -D u'(W) = S u(W)                         (contact recombination velocity S).

Its exact solution, with w = W/L and s = S L / D, is

    u(x) = u0 [cosh((W-x)/L) + s sinh((W-x)/L)] / [cosh w + s sinh w].

The current density injected at x = 0 is J = q D u0 / L * F(w, s), with the
finite-width factor

    F = (s cosh w + sinh w) / (s sinh w + cosh w),

and the stored charge per area Q = q u0 L [sinh w + s (cosh w - 1)] / [cosh w + s sinh w].
S -> infinity (ideal ohmic contact) gives F = coth w; S = 0 (reflecting
contact) gives F = tanh w; w -> infinity gives F = 1 (long region) for any S.
These limits come out of the one formula; there is no separate code path.

References: W. Shockley, Bell Syst. Tech. J. 28, 435 (1949); Sze & Ng,
*Physics of Semiconductor Devices*, 3rd ed. (2007), ch. 2; R. F. Pierret,
*Semiconductor Device Fundamentals* (1996), ch. 6.
"""

from __future__ import annotations

import numpy as np

from ..constants import Q


def _split_contact(w, s):
    """tanh w, sech w and the contact parameter in a form stable for all s.

    For s <= 1 the formulas are written in s, for s > 1 in r = 1/s, so that
    s = 0 and s = inf are both ordinary numbers.
    """
    w = np.asarray(w, dtype=float)
    s = np.asarray(s, dtype=float)
    t = np.tanh(w)
    ew = np.exp(-w)
    sech = 2.0 * ew / (1.0 + ew * ew)
    # 1 - sech w without cancellation: 2 sinh^2(w/2) / cosh w
    one_minus_sech = 2.0 * np.sinh(0.5 * np.minimum(w, 700.0)) ** 2 * sech
    one_minus_sech = np.where(w > 700.0, 1.0, one_minus_sech)
    small = s <= 1.0
    with np.errstate(divide="ignore"):
        r = np.where(small, 0.0, 1.0 / np.where(small, 1.0, s))
    s_small = np.where(small, s, 0.0)
    return t, one_minus_sech, small, s_small, r


def finite_width_factor(w, s):
    """Finite-width factor F of the saturation current of one region.

    F = (s cosh w + sinh w) / (s sinh w + cosh w), evaluated as
    (s + tanh w)/(1 + s tanh w) for s <= 1 and (1 + r tanh w)/(tanh w + r),
    r = 1/s, for s > 1: exact, and free of overflow for any w and s.

    Parameters
    ----------
    w : array_like
        Neutral width over diffusion length, W/L [-], > 0.
    s : array_like
        Normalised contact recombination velocity S L / D [-], 0..inf
        (inf = ideal ohmic contact, 0 = reflecting contact).

    Returns
    -------
    numpy.ndarray
        F [-]: coth w for an ohmic contact, tanh w for a reflecting one, 1 for
        w >> 1.

    References
    ----------
    Sze & Ng (2007), ch. 2; Pierret (1996), ch. 6 (narrow-base diode).
    """
    t, _, small, s_small, r = _split_contact(w, s)
    with np.errstate(divide="ignore", invalid="ignore"):
        f_small = (s_small + t) / (1.0 + s_small * t)
        f_large = (1.0 + r * t) / (t + r)
    return np.where(small, f_small, f_large)


def saturation_current_density(ni_eff, doping, diffusivity, diffusion_length, width, velocity):
    """Saturation current density of one quasi-neutral region.

    J0 = q ni_eff^2 D / (N L) * F(W/L, S L/D).

    Parameters
    ----------
    ni_eff : array_like
        Effective intrinsic density of the region, band-gap narrowing
        included [m^-3].
    doping : array_like
        Majority-carrier (dopant) density of the region [m^-3].
    diffusivity : array_like
        Minority-carrier diffusivity D [m^2/s].
    diffusion_length : array_like
        Minority-carrier diffusion length L [m].
    width : array_like
        Quasi-neutral width W, depletion edge to contact [m].
    velocity : array_like
        Contact recombination velocity S [m/s]; inf for an ideal ohmic
        contact, 0 for a reflecting one.

    Returns
    -------
    numpy.ndarray
        J0 [A/m^2]. Valid at low injection in a non-degenerate region.

    References
    ----------
    W. Shockley, Bell Syst. Tech. J. 28, 435 (1949); Sze & Ng (2007), ch. 2.
    """
    d = np.asarray(diffusivity, dtype=float)
    ell = np.asarray(diffusion_length, dtype=float)
    w = np.asarray(width, dtype=float) / ell
    s = np.asarray(velocity, dtype=float) * ell / d
    return Q * np.asarray(ni_eff, dtype=float) ** 2 * d / (np.asarray(doping, dtype=float) * ell) * finite_width_factor(w, s)


def transit_time(lifetime, w, s):
    """Charge-control transit time of one region: stored charge over current.

    tau_t = Q / J = tau [tanh w + s (1 - sech w)] / [tanh w + s] for s <= 1,
    written with r = 1/s for s > 1. Limits: tau for a long region or a
    reflecting contact; tau (1 - sech w) -> W^2 / (2 D) for a short region
    with an ohmic contact.

    This is the quasi-static (charge-control) value, the one that sets
    switching delay and reverse-recovery charge, and the one SPICE's TT
    means. A small-signal admittance view gives a smaller low-frequency
    diffusion capacitance: one half of g * tau_t for a long region, two
    thirds for a short one (Sze & Ng 2007, ch. 2; Pierret 1996, ch. 7). That
    factor belongs to small-signal AC analysis, not to TT.

    Parameters
    ----------
    lifetime : array_like
        Minority-carrier lifetime tau [s].
    w : array_like
        W / L [-].
    s : array_like
        S L / D [-], 0..inf.

    Returns
    -------
    numpy.ndarray
        [s].

    References
    ----------
    Charge-control model: R. Beaufoy and J. J. Sparkes, ATE J. 13, 310 (1957) (from memory);
    the profile as in :func:`finite_width_factor`.
    """
    t, oms, small, s_small, r = _split_contact(w, s)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio_small = (t + s_small * oms) / (t + s_small)
        ratio_large = (r * t + oms) / (r * t + 1.0)
    return np.asarray(lifetime, dtype=float) * np.where(small, ratio_small, ratio_large)


def excess_profile(x, width, diffusion_length, diffusivity, velocity):
    """Excess minority density u(x)/u(0) of the exact solution [-].

    Parameters
    ----------
    x : array_like
        Distance from the depletion edge [m], 0..W.
    width, diffusion_length : array_like
        W and L [m].
    diffusivity : array_like
        D [m^2/s].
    velocity : array_like
        S [m/s]; inf allowed.

    Returns
    -------
    numpy.ndarray
        u(x)/u0. Used by the tests and for plots; not on the card path.
    """
    ell = np.asarray(diffusion_length, dtype=float)
    w = np.asarray(width, dtype=float) / ell
    s = np.asarray(velocity, dtype=float) * ell / np.asarray(diffusivity, dtype=float)
    y = (np.asarray(width, dtype=float) - np.asarray(x, dtype=float)) / ell
    # cosh and sinh written with decaying exponentials: no overflow for any W/L;
    # s <= 1 in s, s > 1 in r = 1/s, so that s = 0 and s = inf are ordinary numbers
    ey, ew = np.exp(-2.0 * y), np.exp(-2.0 * w)
    small = s <= 1.0
    with np.errstate(divide="ignore"):
        r = np.where(small, 0.0, 1.0 / np.where(small, 1.0, s))
    s_small = np.where(small, s, 0.0)
    ratio_small = ((1 + ey) + s_small * (1 - ey)) / ((1 + ew) + s_small * (1 - ew))
    ratio_large = (r * (1 + ey) + (1 - ey)) / (r * (1 + ew) + (1 - ew))
    return np.exp(y - w) * np.where(small, ratio_small, ratio_large)


def regime(w):
    """Label each region by W/L: 'short' below 0.1, 'long' above 3, else 'medium'.

    At W/L = 0.1 the ohmic-contact factor coth w differs from the short-diode
    1/w by 0.3 %; at W/L = 3 it differs from the long-diode 1 by 0.5 %
    (common practice thresholds, chosen here so each shortcut is within 1 %).
    """
    w = np.asarray(w, dtype=float)
    return np.where(w < 0.1, "short", np.where(w > 3.0, "long", "medium"))

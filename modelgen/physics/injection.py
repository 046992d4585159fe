"""High-level injection in the lighter side of a one-sided junction, and the SPICE knee IKF.

At high injection the injected minority density at the depletion edge of the
lighter side exceeds its doping; quasi-neutrality makes the majority density
follow it (n = p + N), so the law of the junction n p = ni^2 exp(V/Vt) gives
p(0) = ni exp(V/2Vt). The electrons (majority carriers of an n side, taken
here as the lighter side; the p side is the same with the roles swapped) carry
no current into the heavy side, so the field they need to stay put doubles the
minority diffusion current at the edge, J = -2 q Dp dp/dx (Webster 1954), and
the excess density obeys the ambipolar diffusion equation with
Da = 2 Dn Dp / (Dn + Dp) and the high-level lifetime (Shockley & Read 1952:
tau_n0 + tau_p0 for a single trap level), La = sqrt(Da tau_HL). Solving it
over a neutral width W with a contact of recombination velocity S
(Jp(W) = q S dp(W), Jp = J/(1 + b) - q Da dp/dx, b = mu_maj/mu_min) gives

    J_HL = 2 q Dmin ni exp(V/2Vt) / La * (sigma cosh w + b sinh w) / (1 + b cosh w + sigma sinh w),

w = W/La, sigma = S La b / Da; it goes to coth w for an ohmic contact
(S -> inf), to 1 for a long side (w -> inf), and to La/W for a short side
with an ohmic contact: J_HL = 2 q Dmin ni exp(V/2Vt) / W, the Webster-effect
current of a thin base.

ngspice's knee I / (1 + sqrt(I/IKF)) has the low-level limit IS exp(V/Vt)
and the high-level limit sqrt(IKF IS) exp(V/2Vt); :func:`knee_current` puts
IKF where the second equals the physical J_HL, so both limits of the card are
the published ones and its asymptotes cross where the physical ones do.

References
----------
W. M. Webster, "On the variation of junction-transistor current-amplification
factor with emitter current", Proc. IRE 42, 914 (1954). W. van Roosbroeck,
"The transport of added current carriers in a homogeneous semiconductor",
Phys. Rev. 91, 282 (1953) (ambipolar transport). W. Shockley, W. T. Read,
Phys. Rev. 87, 835 (1952). Sze & Ng, *Physics of Semiconductor Devices*, 3rd
ed. (2007), ch. 2 (high-injection condition: p = ni exp(qV/2kT)); S. K.
Ghandhi, *Semiconductor Power Devices* (1977), ch. 3 (ambipolar Da, La).
All from memory.
"""

from __future__ import annotations

import numpy as np

from ..constants import Q


def ambipolar_diffusivity(d_minority, d_majority):
    """Ambipolar diffusivity at high injection, Da = 2 Dmin Dmaj / (Dmin + Dmaj) [m^2/s].

    Parameters
    ----------
    d_minority, d_majority : array_like
        Diffusivities of the two carriers in the side [m^2/s].

    Returns
    -------
    numpy.ndarray
        Da [m^2/s]; valid where the injected density far exceeds the doping.

    References
    ----------
    van Roosbroeck, Phys. Rev. 91, 282 (1953); Sze & Ng (2007), ch. 2 (from memory).
    """
    dm = np.asarray(d_minority, float)
    dj = np.asarray(d_majority, float)
    return 2.0 * dm * dj / (dm + dj)


def high_injection_factor(w, sigma, b):
    """Finite-width factor of the high-level injection current [-].

    (sigma cosh w + b sinh w) / (1 + b cosh w + sigma sinh w), from the
    ambipolar equation over a neutral width (module docstring); coth w for an
    ohmic contact (sigma -> inf), 1 for a long side, b w / (1 + b) for a
    short side with a reflecting contact (sigma = 0: all the current
    recombines in the side).

    Parameters
    ----------
    w : array_like
        W / La [-], > 0.
    sigma : array_like
        S La b / Da [-], 0..inf.
    b : array_like
        mu_majority / mu_minority of the side [-].

    Returns
    -------
    numpy.ndarray
    """
    w = np.minimum(np.asarray(w, float), 350.0)
    sigma = np.asarray(sigma, float)
    b = np.asarray(b, float)
    ch, sh = np.cosh(w), np.sinh(w)
    finite = np.isfinite(sigma)
    sg = np.where(finite, sigma, 0.0)
    general = (sg * ch + b * sh) / (1.0 + b * ch + sg * sh)
    return np.where(finite, general, ch / sh)


def high_injection_saturation(ni_eff, d_minority, d_majority, tau_high, width, contact_velocity):
    """Prefactor of the high-level injection current density of one side, J_HL = J_HL0 exp(V/2Vt).

    J_HL0 = 2 q Dmin ni_eff / La * F_HL(W/La, S La b / Da, b), with b =
    Dmaj/Dmin (the mobility ratio), La = sqrt(Da tau_HL).

    Parameters
    ----------
    ni_eff : array_like
        Effective intrinsic density of the side (band-gap narrowing included) [m^-3].
    d_minority, d_majority : array_like
        Minority and majority diffusivities of the side [m^2/s].
    tau_high : array_like
        High-level lifetime [s] (tau_n0 + tau_p0 for SRH).
    width : array_like
        Neutral width W [m].
    contact_velocity : array_like
        S [m/s]; inf for an ideal ohmic contact.

    Returns
    -------
    numpy.ndarray
        J_HL0 [A/m^2]. Valid where the side's injected density exceeds its
        doping many times, below Auger-dominated injection (about 1e18 cm^-3 in
        silicon, Dziewior & Schmid 1977) and with the voltage drop across the
        side small against Vt (no conductivity-modulation limit).

    References
    ----------
    Webster, Proc. IRE 42, 914 (1954); van Roosbroeck, Phys. Rev. 91, 282
    (1953); Sze & Ng (2007), ch. 2; Ghandhi (1977), ch. 3 (all from memory).
    """
    dm = np.asarray(d_minority, float)
    dj = np.asarray(d_majority, float)
    da = ambipolar_diffusivity(dm, dj)
    la = np.sqrt(da * np.asarray(tau_high, float))
    b = dj / dm
    return (2.0 * Q * dm * np.asarray(ni_eff, float) / la
            * high_injection_factor(np.asarray(width, float) / la, np.asarray(contact_velocity, float) * la * b / da, b))


def knee_current(saturation_current, high_injection_current):
    """SPICE knee current IKF whose high-level limit is the physical one [A].

    ngspice's knee gives I / (1 + sqrt(I/IKF)) -> sqrt(IKF IS) exp(V/2Vt) for
    I >> IKF; equating it with I_HL0 exp(V/2Vt) gives IKF = I_HL0^2 / IS.

    Parameters
    ----------
    saturation_current : array_like
        The card's IS [A].
    high_injection_current : array_like
        I_HL0 = area * J_HL0 [A].

    Returns
    -------
    numpy.ndarray
        IKF [A].

    References
    ----------
    ngspice manual, diode model (IKF); the knee as in :mod:`modelgen.spice.evaluator`.
    """
    return np.asarray(high_injection_current, float) ** 2 / np.asarray(saturation_current, float)


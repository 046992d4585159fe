"""Electrostatics of the pn junction: built-in voltage, depletion, capacitance.

Depletion approximation, Sze & Ng, *Physics of Semiconductor Devices*, 3rd
ed. (2007), sec. 2.2-2.3. For the abrupt junction the majority-carrier tails
reduce the potential across the depletion charge by 2kT/q (Sze & Ng 2007,
sec. 2.2.2, after Kennedy, Murley & Kleinfelder, IBM J. Res. Dev. 12, 399
(1968), from memory); this module keeps that term, so the
SPICE junction potential VJ = Vbi - 2kT/q makes C(V) = CJO (1 - V/VJ)^-1/2
exact within the depletion approximation.
"""

from __future__ import annotations

import numpy as np

from ..constants import Q, thermal_voltage


def builtin_voltage(na, nd, ni, temperature):
    """Built-in potential of an abrupt junction, Vbi = kT/q ln(NA ND / ni^2).

    Parameters
    ----------
    na, nd : array_like
        Acceptor density of the p side and donor density of the n side [m^-3].
    ni : array_like
        Intrinsic density [m^-3].
    temperature : array_like
        [K].

    Returns
    -------
    numpy.ndarray
        Vbi [V]. Boltzmann statistics: it overestimates Vbi where a side is
        degenerate.

    References
    ----------
    Sze & Ng (2007), sec. 2.2.1.
    """
    return thermal_voltage(temperature) * np.log(np.asarray(na, float) * np.asarray(nd, float) / np.asarray(ni, float) ** 2)


def gradient_voltage(grading, ni, permittivity, temperature):
    """Built-in potential of a linearly graded junction.

    Vgr = (2kT/3q) ln(a^2 eps kT / (8 q^2 ni^3)).

    Parameters
    ----------
    grading : array_like
        Impurity gradient a [m^-4] (1e20 cm^-4 = 1e28 m^-4).
    ni : array_like
        [m^-3].
    permittivity : array_like
        eps = eps_r eps0 [F/m].
    temperature : array_like
        [K].

    Returns
    -------
    numpy.ndarray
        [V].

    References
    ----------
    Sze & Ng (2007), sec. 2.2.3 (linearly graded junction).
    """
    vt = thermal_voltage(temperature)
    a = np.asarray(grading, float)
    return (2.0 * vt / 3.0) * np.log(a * a * np.asarray(permittivity, float) * vt / (8.0 * Q * np.asarray(ni, float) ** 3))


def junction_potential(vbi, linear, temperature):
    """SPICE junction potential VJ: Vbi - 2kT/q (abrupt) or Vgr (graded) [V].

    Parameters
    ----------
    vbi : array_like
        Built-in voltage: Vbi for abrupt, Vgr for linear junctions [V].
    linear : array_like of bool
        True for linearly graded junctions.
    temperature : array_like
        [K].
    """
    return np.where(linear, vbi, np.asarray(vbi, float) - 2.0 * thermal_voltage(temperature))


def depletion_width(vj, bias, na, nd, grading, linear, permittivity):
    """Depletion width and its extent into each side.

    Abrupt: W = sqrt(2 eps (VJ - V) (NA + ND) / (q NA ND)),
    xp = W ND/(NA + ND), xn = W NA/(NA + ND).
    Linear: W = (12 eps (VJ - V) / (q a))^(1/3), xp = xn = W/2.

    Parameters
    ----------
    vj : array_like
        Junction potential from :func:`junction_potential` [V].
    bias : array_like
        Applied forward bias V [V]; must be below VJ.
    na, nd : array_like
        [m^-3].
    grading : array_like
        a [m^-4] (ignored where ``linear`` is False).
    linear : array_like of bool
    permittivity : array_like
        [F/m].

    Returns
    -------
    (W, xp, xn) : tuple of numpy.ndarray
        [m]; NaN where V >= VJ.

    References
    ----------
    Sze & Ng (2007), sec. 2.2.
    """
    na = np.asarray(na, float)
    nd = np.asarray(nd, float)
    eps = np.asarray(permittivity, float)
    drop = np.asarray(vj, float) - np.asarray(bias, float)
    drop = np.where(drop > 0, drop, np.nan)
    w_abrupt = np.sqrt(2.0 * eps * drop * (na + nd) / (Q * na * nd))
    a = np.where(linear, grading, 1.0)
    w_linear = np.cbrt(12.0 * eps * drop / (Q * a))
    w = np.where(linear, w_linear, w_abrupt)
    xp = np.where(linear, 0.5 * w, w * nd / (na + nd))
    xn = np.where(linear, 0.5 * w, w * na / (na + nd))
    return w, xp, xn


def depletion_capacitance(width, permittivity):
    """Depletion capacitance per area, C = eps / W [F/m^2].

    Exact for any one-dimensional profile within the depletion approximation
    (the small-signal charge moves at the depletion edges). Sze & Ng (2007),
    sec. 2.3.
    """
    return np.asarray(permittivity, float) / np.asarray(width, float)


def grading_coefficient(linear):
    """SPICE grading coefficient M: 1/2 abrupt, 1/3 linearly graded [-]."""
    return np.where(linear, 1.0 / 3.0, 0.5)

"""Net doping profiles of a 1-D pn junction for the drift-diffusion solver.

Every profile is a function of depth ``x`` [m] measured from the p-side
contact (x = 0) and returns the net doping N_D - N_A [m^-3]: negative in the
p region, positive in the n region. Profiles are plain callables over numpy
arrays (:class:`Profile`), with the positions where they jump (``breaks``)
and where they change sign (``junctions``), so the mesh can put a node there.

References
----------
Sze & Ng, *Physics of Semiconductor Devices*, 3rd ed., Wiley 2007, ch. 2
(abrupt and linearly graded junctions); J. D. Plummer, M. D. Deal and
P. B. Griffin, *Silicon VLSI Technology*, Prentice Hall 2000, ch. 7 (a
constant-source diffusion is an erfc profile, a limited-source one Gaussian).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np


@dataclass(frozen=True)
class Profile:
    """A net doping profile over 0 <= x <= length.

    Attributes
    ----------
    net : callable
        x [m] -> N_D - N_A [m^-3] (numpy in, numpy out).
    length : float
        Device length, p-side contact to n-side contact [m].
    junctions : tuple of float
        Metallurgical junctions (sign changes of ``net``) [m].
    breaks : tuple of float
        Positions where ``net`` or a material parameter jumps [m]; the
        mesh places a node on each.
    """

    net: object
    length: float
    junctions: tuple
    breaks: tuple = field(default=())

    def __call__(self, x):
        return self.net(np.asarray(x, dtype=float))


def abrupt(na, nd, xj, length):
    """Abrupt (step) junction: -NA for x < xj, +ND beyond.

    Parameters
    ----------
    na, nd : float
        Acceptor density of the p side and donor density of the n side [m^-3], > 0.
    xj : float
        Junction depth from the p-side contact [m], 0 < xj < length.
    length : float
        Total length [m].

    Returns
    -------
    Profile

    References
    ----------
    Sze & Ng (2007), sec. 2.2 (abrupt junction).
    """
    na, nd, xj, length = float(na), float(nd), float(xj), float(length)
    return Profile(lambda x: np.where(x < xj, -na, nd), length, (xj,), (xj,))


def linear(grading, na, nd, length, xj=None):
    """Linearly graded junction clipped at the plateau dopings of each side.

    N_D - N_A = a (x - xj), clipped to [-NA, ND].

    Parameters
    ----------
    grading : float
        Impurity gradient a [m^-4], > 0.
    na, nd : float
        Plateau dopings [m^-3] (the grade is clipped there).
    length : float
        [m].
    xj : float, optional
        Junction position [m]; default the middle.

    Returns
    -------
    Profile

    References
    ----------
    Sze & Ng (2007), sec. 2.2.3 (linearly graded junction).
    """
    xj = 0.5 * length if xj is None else float(xj)
    a, na, nd = float(grading), float(na), float(nd)
    return Profile(lambda x: np.clip(a * (x - xj), -na, nd), float(length), (xj,))


def _background_junction(shape, surface, background, depth):
    """Where surface * shape(x / depth) equals the background (shape decreasing from 1)."""
    from scipy.optimize import brentq

    return depth * brentq(lambda u: surface * shape(u) - background, 0.0, 60.0, xtol=1e-14, rtol=1e-14)


def erfc_emitter(surface, depth, background, length):
    """Constant-source (erfc) p diffusion into a uniform n substrate.

    N_D - N_A = ND_bg - Cs erfc(x / depth), x from the p-side surface contact.

    Parameters
    ----------
    surface : float
        Surface acceptor concentration Cs [m^-3] (> background).
    depth : float
        Characteristic length 2 sqrt(D t) [m].
    background : float
        Uniform substrate donor density [m^-3].
    length : float
        [m].

    Returns
    -------
    Profile
        The junction lies where Cs erfc(xj / depth) = background.

    References
    ----------
    Plummer, Deal & Griffin (2000), ch. 7 (constant-source diffusion);
    Sze & Ng (2007), ch. 2.
    """
    cs, d, bg = float(surface), float(depth), float(background)
    from scipy.special import erfc  # here, not at import: scipy.special costs a closed-form card 50 ms

    xj = _background_junction(erfc, cs, bg, d)
    return Profile(lambda x: bg - cs * erfc(x / d), float(length), (xj,))


def gaussian_emitter(dose, depth, background, length):
    """Limited-source (Gaussian) p diffusion into a uniform n substrate.

    N_D - N_A = ND_bg - Q / (sqrt(pi) depth) exp(-(x / depth)^2).

    Parameters
    ----------
    dose : float
        Acceptor dose Q [m^-2].
    depth : float
        Characteristic length 2 sqrt(D t) [m].
    background : float
        [m^-3].
    length : float
        [m].

    Returns
    -------
    Profile

    References
    ----------
    Plummer, Deal & Griffin (2000), ch. 7 (limited-source diffusion).
    """
    q, d, bg = float(dose), float(depth), float(background)
    peak = q / (np.sqrt(np.pi) * d)
    xj = _background_junction(lambda u: np.exp(-u * u), peak, bg, d)
    return Profile(lambda x: bg - peak * np.exp(-(x / d) ** 2), float(length), (xj,))


def table(depth, net_doping):
    """A tabulated profile: depth from the p-side contact [m], net doping N_D - N_A [m^-3].

    Interpolated linearly in sign(N) log10(|N| + 1) between points (doping
    tables span decades), held flat outside. The length is the last depth.

    Parameters
    ----------
    depth : array_like
        Strictly increasing, first value 0 (the p-side contact) [m].
    net_doping : array_like
        N_D - N_A at each depth [m^-3]; negative at the first point (p side)
        and positive at the last (n side).

    Returns
    -------
    Profile

    Raises
    ------
    ValueError
        Depths not increasing, or the table does not go from p to n type.
    """
    x = np.asarray(depth, dtype=float)
    c = np.asarray(net_doping, dtype=float)
    if x.ndim != 1 or len(x) < 2 or len(x) != len(c) or x[0] != 0 or not np.all(np.diff(x) > 0):
        raise ValueError("profile table: depths must start at 0 and increase strictly, one net doping per depth")
    if not (c[0] < 0 < c[-1]):
        raise ValueError("profile table: the net doping must be negative (p) at the first depth and positive (n) at the last")
    g = np.sign(c) * np.log10(np.abs(c) + 1.0)
    k = np.flatnonzero(np.diff(np.sign(c)) != 0)
    junctions = tuple(float(x[i] - g[i] * (x[i + 1] - x[i]) / (g[i + 1] - g[i])) for i in k)

    def net(xx):
        v = np.interp(xx, x, g)
        return np.sign(v) * (10.0 ** np.abs(v) - 1.0)

    return Profile(net, float(x[-1]), junctions)

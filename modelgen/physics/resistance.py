"""Series resistance of the quasi-neutral regions."""

from __future__ import annotations

import numpy as np

from ..constants import Q


def neutral_region_resistance(width, doping, majority_mobility, area):
    """Ohmic resistance of a uniformly doped slab, R = W / (q N mu A).

    One-dimensional current flow straight through the region, full
    ionization, low injection (no conductivity modulation). Spreading and
    crowding in real layouts add to it.

    Parameters
    ----------
    width : array_like
        Neutral width along the current [m].
    doping : array_like
        [m^-3].
    majority_mobility : array_like
        [m^2/(V s)].
    area : array_like
        Cross-section [m^2].

    Returns
    -------
    numpy.ndarray
        [ohm].

    References
    ----------
    Ohm's law with sigma = q N mu (Sze & Ng 2007, sec. 1.5).
    """
    return np.asarray(width, float) / (Q * np.asarray(doping, float) * np.asarray(majority_mobility, float) * np.asarray(area, float))

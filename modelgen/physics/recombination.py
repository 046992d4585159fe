"""Generation-recombination current of the depletion region."""

from __future__ import annotations

import numpy as np

from ..constants import Q


def recombination_saturation_density(ni, depletion_width, lifetime):
    """Saturation density of the depletion-region recombination current.

    J_rec = q ni W / (2 tau) exp(V / 2Vt): the Sah-Noyce-Shockley estimate
    with a single trap level at mid-gap, the SRH rate taken at its maximum
    ni exp(V/2Vt) / (2 tau) over the whole depletion width (an upper
    estimate), ideality factor 2. For unequal lifetimes tau = sqrt(tau_n tau_p)
    is the value that gives the maximum rate.

    Parameters
    ----------
    ni : array_like
        Intrinsic density [m^-3] (no band-gap narrowing: the depletion region
        lies mostly in the lighter side).
    depletion_width : array_like
        W [m]; modelgen passes W at zero bias, which overestimates the
        current somewhat since W shrinks under forward bias.
    lifetime : array_like
        SRH lifetime in the depletion region [s].

    Returns
    -------
    numpy.ndarray
        J_rec,0 [A/m^2]; the SPICE ISR per area, with NR = 2.

    References
    ----------
    C.-T. Sah, R. N. Noyce, W. Shockley, "Carrier generation and
    recombination in p-n junctions and p-n junction characteristics",
    Proc. IRE 45, 1228 (1957); Sze & Ng (2007), sec. 2.3.
    """
    return Q * np.asarray(ni, float) * np.asarray(depletion_width, float) / (2.0 * np.asarray(lifetime, float))

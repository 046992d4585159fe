"""From a derived device (a row of :class:`modelgen.extraction.Result`) to a solver Structure.

One place decides how a description becomes the 1-D device the numerical
solver (:mod:`modelgen.physics.driftdiffusion`) solves: the abrupt and linear
profiles the closed forms also take go through
:func:`~modelgen.physics.driftdiffusion.structure_from_result`, so that the
solver and the closed forms see identical parameters.
"""

from __future__ import annotations

from .physics import driftdiffusion


def structure_for(result, i):
    """The solver Structure of row ``i`` of a closed-form Result.

    Parameters
    ----------
    result : modelgen.extraction.Result
    i : int
        Row.

    Returns
    -------
    modelgen.physics.driftdiffusion.Structure
    """
    return driftdiffusion.structure_from_result(result, int(i))

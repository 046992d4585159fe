"""From a derived device (a row of :class:`modelgen.extraction.Result`) to a solver Structure.

One place decides how a description becomes the 1-D device the numerical
solver (:mod:`modelgen.physics.driftdiffusion`) solves: the abrupt and linear
profiles the closed forms also take go through
:func:`~modelgen.physics.driftdiffusion.structure_from_result`, so that the
solver and the closed forms see identical parameters; the erfc, gaussian and
tabulated profiles, which the closed forms only approximate by an equivalent
abrupt junction, go to the solver as they are, through
:func:`~modelgen.physics.driftdiffusion.structure_from_profile`.
"""

from __future__ import annotations

import numpy as np

from . import materials
from .device import CLOSED_FORM_PROFILES
from .extraction import profile_of


def closed_form_holds(result):
    """Whether the closed forms take each row's profile as it is (abrupt and linear rows).

    Parameters
    ----------
    result : modelgen.extraction.Result

    Returns
    -------
    numpy.ndarray of bool
        One entry per row; False for erfc, gaussian and table profiles (their
        closed-form values come from an equivalent abrupt junction).
    """
    return np.isin(np.asarray(result.device.profile, dtype=object), CLOSED_FORM_PROFILES)


def _solver():
    """The solver module, imported when a Structure is made (it pulls in scipy.linalg: a tenth of a
    second that a closed-form card does not need)."""
    from .physics import driftdiffusion

    return driftdiffusion


def structure_for(result, i):
    """The solver Structure of row ``i`` of a Result.

    Abrupt and linear rows: :func:`~modelgen.physics.driftdiffusion.structure_from_result`
    (the closed forms' own parameters). Erfc, gaussian and table rows: the true
    profile through :func:`~modelgen.physics.driftdiffusion.structure_from_profile`
    with node-wise material models, the junction area (bottom plus sidewall),
    the temperature, the closed forms' intrinsic density (so ``material.ni`` and
    ``material.bandgap`` hold), a side's given mobilities, the contact recombination velocities and, where either side's
    lifetime or diffusion length was given, both sides' lifetimes as the
    Result has them (taken as SRH lifetimes: the solver adds Auger itself);
    where neither was given, the material's doping-dependent lifetime at each point.
    An erfc or gaussian device reaches from the p contact to the n contact:
    the junction depth plus the n side's thickness.

    Parameters
    ----------
    result : modelgen.extraction.Result
    i : int
        Row.

    Returns
    -------
    modelgen.physics.driftdiffusion.Structure
    """
    i = int(i)
    dev = result.device
    if closed_form_holds(result)[i]:
        return _solver().structure_from_result(result, i)
    mat = materials.get(dev.material[i])
    one = dev.row(i)
    p, n, d = result.derived["p"], result.derived["n"], result.derived
    # contact to contact: the p side's derived thickness is the junction depth, the n side's is derived
    # also where a neutral width was given (a table keeps its own length)
    prof = profile_of(dev, i, mat, length=float(p["thickness"][i]) + float(n["thickness"][i]))
    given = [not (np.isnan(getattr(one, s).lifetime[0]) and np.isnan(getattr(one, s).diffusion_length[0]))
             for s in ("p", "n")]
    lifetimes = (float(p["lifetime"][i]), float(n["lifetime"][i])) if any(given) else None
    mobilities = {(s, role): float(getattr(getattr(one, s), f"{role}_mobility")[0])
                  for s in ("p", "n") for role in ("minority", "majority")}
    return _solver().structure_from_profile(
        prof, float(d["junction_area"][i]), temperature=float(d["temperature"][i]), lifetimes=lifetimes,
        velocities=(float(p["contact_velocity"][i]), float(n["contact_velocity"][i])), material=mat,
        relative_permittivity=float(dev.relative_permittivity[i]), ni=float(d["ni"][i]), mobilities=mobilities)

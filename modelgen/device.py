"""The device: plain SI numbers in numpy arrays, one element per device.

A single device is arrays of length 1; a lot table is the same arrays,
longer. Unset optional values are NaN (or inf for an ideal ohmic contact), so
one code path serves both.
"""

from __future__ import annotations

from dataclasses import dataclass, field, fields
from operator import itemgetter
from itertools import chain

import numpy as np

#: Profiles the closed forms take as they are; the others (erfc, gaussian, table) they approximate.
CLOSED_FORM_PROFILES = ("abrupt", "linear")


@dataclass(frozen=True, eq=False)
class ProfileTable:
    """A tabulated net doping profile read from a file (``profile = "table"``).

    Attributes
    ----------
    depth : numpy.ndarray
        Depth from the p-side contact [m], strictly increasing from 0.
    net_doping : numpy.ndarray
        N_D - N_A at each depth [m^-3]: negative (p) first, positive (n) last, one sign change.
    file : str
        The file it was read from, for messages and card headers.
    """

    depth: np.ndarray
    net_doping: np.ndarray
    file: str


@dataclass
class Side:
    """One quasi-neutral side of the junction (all arrays of shape (n,)).

    Attributes
    ----------
    doping : dopant density [m^-3]; NaN when given as resistivity.
    resistivity : [ohm m]; NaN when doping is given.
    thickness : metallurgical junction to contact [m]; NaN when neutral_width given.
    neutral_width : quasi-neutral width [m]; NaN when thickness given.
    lifetime : minority-carrier lifetime [s]; NaN = not given.
    diffusion_length : [m]; NaN = not given.
    minority_mobility, majority_mobility : [m^2/(V s)]; NaN = use the model.
    surface_recombination : contact recombination velocity [m/s]; inf = ohmic.
    """

    doping: np.ndarray
    resistivity: np.ndarray
    thickness: np.ndarray
    neutral_width: np.ndarray
    lifetime: np.ndarray
    diffusion_length: np.ndarray
    minority_mobility: np.ndarray
    majority_mobility: np.ndarray
    surface_recombination: np.ndarray


@dataclass
class Device:
    """A table of pn-junction diodes in SI units.

    Attributes
    ----------
    name : model names, one per device.
    material : material names (keys of :data:`modelgen.materials.MATERIALS`).
    temperature : temperature at which the physics is evaluated, the card's TNOM [K].
    reference_temperature : where the given ni, bandgap, lifetime, diffusion length and
        resistivity hold: the description's nominal temperature [K].
    lifetime_exponent : lifetimes scale as (T / reference_temperature)^exponent [-].
    area : junction area [m^2].
    perimeter : junction perimeter [m] (0 = none).
    junction_depth : depth of the junction for the sidewall [m] (0 = none).
    reference_bias : bias fixing the depletion edges for the neutral widths [V].
    contact_resistance : added to RS [ohm].
    linear : True for a linearly graded junction.
    grading : impurity gradient [m^-4] (NaN for abrupt).
    profile : the junction profile of each device: "abrupt", "linear", "erfc", "gaussian" or "table".
    surface_concentration : surface acceptor density of a diffused p side (erfc, gaussian) [m^-3] (NaN = none).
    characteristic_length : characteristic length 2 sqrt(D t) of a diffused p side [m] (NaN = from
        junction_depth, or none).
    profile_table : a :class:`ProfileTable` for "table" rows, None elsewhere (object array).
    fit_current_low, fit_current_high : forward-current range for fitting the card to the solver [A]
        (NaN = not given).
    fit_reverse_bias : reverse bias for the fit [V], negative (NaN = not given).
    fit_capacitance_low, fit_capacitance_high : bias range for the C-V fit [V] (NaN = not given).
    relative_permittivity : [-].
    ni : intrinsic density override at the nominal temperature [m^-3] (NaN = model).
    bandgap : band-gap override at the nominal temperature [eV] (NaN = model).
    fc : SPICE FC [-].
    breakdown_current : current at which BV is quoted, SPICE IBV [A].
    recombination_lifetime : lifetime for the depletion-region current [s] (NaN = lighter side's).
    p, n : the two sides.
    source : where each device came from (file name), for messages and headers.
    line : the line number of each device in its file (tables), for messages.
    """

    name: tuple
    material: tuple
    temperature: np.ndarray
    area: np.ndarray
    perimeter: np.ndarray
    junction_depth: np.ndarray
    reference_bias: np.ndarray
    contact_resistance: np.ndarray
    linear: np.ndarray
    grading: np.ndarray
    profile: np.ndarray
    surface_concentration: np.ndarray
    characteristic_length: np.ndarray
    profile_table: np.ndarray
    fit_current_low: np.ndarray
    fit_current_high: np.ndarray
    fit_reverse_bias: np.ndarray
    fit_capacitance_low: np.ndarray
    fit_capacitance_high: np.ndarray
    relative_permittivity: np.ndarray
    ni: np.ndarray
    bandgap: np.ndarray
    fc: np.ndarray
    breakdown_current: np.ndarray
    recombination_lifetime: np.ndarray
    reference_temperature: np.ndarray
    lifetime_exponent: np.ndarray
    p: Side
    n: Side
    source: tuple = field(default=())
    line: tuple = field(default=())

    def __len__(self):
        return len(self.name)

    def row(self, i):
        """Device ``i`` alone, as a Device of length 1."""
        return self.take(slice(i, i + 1))

    def take(self, sl):
        """The devices selected by ``sl`` (a slice, index array or bool mask)."""

        def take(obj, cls):
            kw = {}
            for f in fields(cls):
                v = getattr(obj, f.name)
                if isinstance(v, Side):
                    kw[f.name] = take(v, Side)
                elif isinstance(v, tuple):
                    if not len(v):
                        kw[f.name] = v
                    elif isinstance(sl, slice):
                        kw[f.name] = v[sl]
                    else:
                        idx = np.flatnonzero(sl) if np.asarray(sl).dtype == bool else np.asarray(sl)
                        picked = itemgetter(*idx.tolist())(v) if len(idx) else ()
                        kw[f.name] = picked if len(idx) != 1 else (picked,)
                else:
                    kw[f.name] = v[sl]
            return cls(**kw)

        return take(self, Device)


def concatenate(devices):
    """One Device holding the devices of each table in ``devices``, in order."""

    def cat(objs, cls):
        kw = {}
        for f in fields(cls):
            vals = [getattr(o, f.name) for o in objs]
            if isinstance(vals[0], Side):
                kw[f.name] = cat(vals, Side)
            elif isinstance(vals[0], tuple):
                kw[f.name] = tuple(chain.from_iterable(vals))
            else:
                kw[f.name] = np.concatenate(vals)
        return cls(**kw)

    return cat(list(devices), Device)

"""Material models: one module per material, each providing :class:`Material`.

A material is a module (or any object) with the functions and constants
that :class:`Material` lists: pure functions of numpy arrays in SI units,
each with a numpydoc docstring naming its published source. To add one,
write a module beside :mod:`modelgen.materials.silicon` with the same names
and :func:`register` it (the built-in ones are listed in :data:`MATERIALS`);
:func:`missing` says what a candidate module still lacks.
:func:`modelgen.extraction.derive` groups the devices of a table by their
material and evaluates each group with its own module.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Protocol, runtime_checkable

from . import silicon


@runtime_checkable
class Material(Protocol):
    """What a material module must provide (all SI: m, s, K, V, m^-3; energies in eV).

    Constants
    ---------
    NAME : the name a device description uses (``material = "silicon"``).
    SOURCES : ``{model: citation}`` for every model, written into card headers.
    RELATIVE_PERMITTIVITY : default relative permittivity [-].
    IONIZATION_BREAKPOINT : field where the ionization law changes [V/m], or None.
    DOPING_RANGE : (lowest, highest) doping the mobility and lifetime models cover [m^-3].
    TEMPERATURE_RANGE : (lowest, highest) temperature the models are used over [K].
    LIFETIME_MODEL : short description of the lifetime model, for the warning that it was used.

    Functions
    ---------
    bandgap(T) [eV]; bandgap_slope(T) [eV/K]; intrinsic_density(T) [m^-3];
    effective_density_of_states(T) -> (Nc, Nv) [m^-3];
    majority_mobility(N, carrier, T), minority_mobility(N, carrier, T) [m^2/(V s)]
    with carrier 'electron' or 'hole';
    doping_from_resistivity(rho, carrier, T) [m^-3], NaN outside DOPING_RANGE;
    minority_lifetime(N, host) [s] with host 'p' or 'n';
    bandgap_narrowing(N) [eV];
    ionization_coefficients(E, T) -> (alpha_n, alpha_p) [1/m].
    """

    NAME: str
    SOURCES: dict
    RELATIVE_PERMITTIVITY: float
    IONIZATION_BREAKPOINT: float | None
    DOPING_RANGE: tuple
    TEMPERATURE_RANGE: tuple
    LIFETIME_MODEL: str
    bandgap: Callable
    bandgap_slope: Callable
    intrinsic_density: Callable
    effective_density_of_states: Callable
    majority_mobility: Callable
    minority_mobility: Callable
    doping_from_resistivity: Callable
    minority_lifetime: Callable
    bandgap_narrowing: Callable
    ionization_coefficients: Callable


#: The names :class:`Material` requires, constants first.
REQUIRED = ("NAME", "SOURCES", "RELATIVE_PERMITTIVITY", "IONIZATION_BREAKPOINT", "DOPING_RANGE",
            "TEMPERATURE_RANGE", "LIFETIME_MODEL", "bandgap", "bandgap_slope", "intrinsic_density",
            "effective_density_of_states", "majority_mobility", "minority_mobility",
            "doping_from_resistivity", "minority_lifetime", "bandgap_narrowing", "ionization_coefficients")

#: Known materials by the name a device description uses.
MATERIALS = {silicon.NAME: silicon}


def missing(module):
    """The names of :data:`REQUIRED` that ``module`` lacks (functions must be callable)."""
    out = []
    for name in REQUIRED:
        if not hasattr(module, name) or (name[0].islower() and not callable(getattr(module, name))):
            out.append(name)
    return out


def register(module):
    """Add a material module to :data:`MATERIALS` under its ``NAME``; TypeError if it lacks a name."""
    lacking = missing(module)
    if lacking:
        raise TypeError(f"material {getattr(module, 'NAME', module)!r} lacks: {', '.join(lacking)}")
    MATERIALS[module.NAME] = module
    return module


def get(name) -> Material:
    """The material module called ``name``; KeyError if unknown."""
    return MATERIALS[name]

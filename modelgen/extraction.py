"""From a :class:`~modelgen.device.Device` to SPICE diode parameters.

:func:`derive` evaluates the physics for every device at once over numpy
arrays and returns a :class:`Result`: the card parameters, the derived
quantities an engineer checks, and the warnings. It raises
:class:`~modelgen.errors.InputError` for devices the physics cannot describe
(a side depleted through, a bias beyond the junction potential).
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import NamedTuple

import numpy as np

from . import materials
from .constants import EPS0, Q, thermal_voltage
from .device import Device
from .errors import InputError, Problems
from .physics import breakdown, diffusion, injection, junction, profiles, recombination, resistance

#: Order of the card parameters.
PARAMETERS = ("IS", "N", "RS", "CJO", "VJ", "M", "FC", "TT", "BV", "IBV", "EG", "XTI",
              "ISR", "NR", "IKF")

#: Units of the card parameters in the JSON output (SI; EG in eV).
UNITS = {"IS": "A", "N": "1", "RS": "ohm", "CJO": "F", "VJ": "V", "M": "1", "FC": "1",
         "TT": "s", "BV": "V", "IBV": "A", "EG": "eV", "XTI": "1", "ISR": "A", "NR": "1",
         "IKF": "A"}

SIDE_QUANTITIES = ("doping", "thickness", "neutral_width", "minority_mobility",
                   "majority_mobility", "diffusivity", "lifetime", "diffusion_length",
                   "w_over_l", "regime", "contact_velocity", "finite_width_factor",
                   "bandgap_narrowing", "ni_eff", "saturation_current_density",
                   "transit_time", "resistance")


#: Severities of findings, mildest first. A note informs (each side's regime); a warning says an
#: estimate is less sure for this device (a modelled lifetime, reach-through); a caution is a
#: standing reminder that holds for every card of its kind (breakdown is an estimate).
SEVERITIES = ("note", "warning", "caution")
#: The prefix each severity had in the warning texts; :meth:`Finding.message` keeps it.
_PREFIX = {"note": "note: ", "warning": "", "caution": "caution: "}

#: Short stable ids of the findings and a label each, for counts ("312 rows: lifetime modelled, not given").
KINDS = {
    "lifetime_modelled": "lifetime modelled, not given",
    "degenerate_doping": "doping near degeneracy (Boltzmann statistics strained)",
    "regime": "side regime by W/L",
    "graded_plateau": "linear grade above a side's plateau doping",
    "reach_through": "reach-through before avalanche",
    "no_breakdown": "no avalanche breakdown in range (BV left off)",
    "tunnelling": "BV in the tunnelling range",
    "graded_reach_through": "graded depletion wider than a side at breakdown (BV an upper estimate)",
    "breakdown_estimate": "breakdown is an estimate",
    "profile": "diffused or tabulated profile (closed forms approximate it)",
    # a card fitted to the numerical solver (modelgen.numeric)
    "leakage": "reverse leakage beyond what a level-1 card carries",
    "numeric-fit": "card fitted to the numerical solver",
    "numeric-kept": "closed-form values kept where the window could not fit them",
    "numeric-window": "the forward sweep stopped short of the window",
    "numeric-sidewall": "fitted totals split into bottom and sidewall",
    "numeric-region": "a bias region the target's equations cannot follow",
    "numeric-capacitance": "C-V departs from the physics",
    "numeric-resistance": "series resistance departs from a constant RS (conductivity modulation)",
    "numeric-breakdown": "fit window near breakdown",
    "numeric-leakage": "reverse leakage the card cannot carry",
}


#: Kind of each finding template seen, so that a finding rebuilt from its text alone keeps its kind.
_KIND_OF: dict = {}


class Finding:
    """A note, warning or caution that applies to the devices where ``mask`` is True.

    Parameters
    ----------
    mask : numpy.ndarray of bool
        The devices it applies to.
    text : str
        Format string filled, per device, from ``values`` (arrays of the
        device table's length, or plain values shared by all).
    values : dict, optional
    severity : {'note', 'warning', 'caution'}, optional
        When omitted, read from a ``note:`` / ``caution:`` prefix of ``text``
        (the older form), else 'warning'.
    kind : str, optional
        Short stable id (a key of :data:`KINDS`).

    ``text`` gives the format string with the severity's old prefix, and
    :meth:`message` the filled text with it, as before; :attr:`template` and
    :meth:`detail` give them without.
    """

    __slots__ = ("mask", "template", "values", "severity", "kind")

    def __init__(self, mask, text, values=None, *, severity=None, kind=""):
        if severity is None:
            severity = "warning"
            for sev in ("note", "caution"):
                if text.startswith(_PREFIX[sev]):
                    severity, text = sev, text[len(_PREFIX[sev]):]
                    break
        if severity not in _PREFIX:
            raise ValueError(f"severity must be one of {', '.join(SEVERITIES)}, not {severity!r}")
        if kind:
            _KIND_OF.setdefault(text, kind)
        else:  # the older three-argument form (a copy of a finding): its kind from the template
            kind = _KIND_OF.get(text, "")
        self.mask = mask
        self.template = text
        self.values = {} if values is None else values
        self.severity = severity
        self.kind = kind

    @property
    def text(self):
        """The format string with the severity's prefix (``note: ...``), as the older code reads it."""
        return _PREFIX[self.severity] + self.template

    def detail(self, i):
        """The filled text for device ``i``, without a severity prefix."""
        return self.template.format(**{k: (v[i] if isinstance(v, np.ndarray) else v) for k, v in self.values.items()})

    def message(self, i):
        """The filled text for device ``i`` with the severity's prefix (the form of :meth:`Result.warnings`)."""
        return _PREFIX[self.severity] + self.detail(i)

    def take(self, rows):
        """The same finding for the devices selected by ``rows``."""
        return Finding(self.mask[rows], self.template,
                       {k: (v[rows] if isinstance(v, np.ndarray) else v) for k, v in self.values.items()},
                       severity=self.severity, kind=self.kind)

    def __repr__(self):
        return f"Finding({self.severity}, {self.kind!r}, {self.template!r}, {int(np.sum(self.mask))} devices)"


class Message(NamedTuple):
    """One finding for one device: its severity, kind and text (without prefix)."""

    severity: str
    kind: str
    text: str


@dataclass
class Result:
    """Parameters, derived quantities and findings for a table of devices.

    ``params[name]`` and ``derived[...]`` are arrays with one entry per
    device; ``derived['p']`` and ``derived['n']`` hold the per-side
    quantities. Use :meth:`row` for one device as plain Python numbers.
    """

    device: Device
    params: dict
    derived: dict
    findings: list
    sources: dict

    def __len__(self):
        return len(self.device)

    def warnings(self, i):
        """Messages that apply to device ``i``, in a fixed order, each with its severity prefix."""
        return [f.message(i) for f in self.findings if f.mask[i]]

    def findings_for(self, i):
        """The findings that apply to device ``i`` as :class:`Message` (severity, kind, text), in a fixed order."""
        return [Message(f.severity, f.kind, f.detail(i)) for f in self.findings if f.mask[i]]

    def rows_by_kind(self, severities=("warning",)):
        """``{kind: number of devices with at least one finding of that kind}`` for the given severities.

        Kinds in the order the findings come; kinds that apply to no device are left out.
        """
        masks = {}
        for f in self.findings:
            if f.severity in severities:
                masks[f.kind] = masks[f.kind] | f.mask if f.kind in masks else np.asarray(f.mask, bool)
        return {k: int(m.sum()) for k, m in masks.items() if m.any()}

    def take(self, rows):
        """The devices selected by ``rows`` (slice, index array or bool mask) as a Result."""
        def pick(v):
            return {k: pick(x) for k, x in v.items()} if isinstance(v, dict) else np.asarray(v)[rows]
        return Result(device=self.device.take(rows), params=pick(self.params), derived=pick(self.derived),
                      findings=[f.take(rows) for f in self.findings], sources=self.sources)

    def row(self, i):
        """Device ``i`` as ``{'name', 'params', 'derived', 'warnings'}`` of plain numbers."""
        def plain(v):
            x = v[i]
            if isinstance(x, (np.bool_, bool)):
                return bool(x)
            if isinstance(x, (np.str_, str)):
                return str(x)
            return float(x)

        derived = {}
        for k, v in self.derived.items():
            derived[k] = {kk: plain(vv) for kk, vv in v.items()} if isinstance(v, dict) else plain(v)
        return {"name": self.device.name[i],
                "params": {k: plain(self.params[k]) for k in PARAMETERS},
                "derived": derived,
                "warnings": self.warnings(i)}


def concatenate(results, order=None):
    """One Result from several with the same findings structure (e.g. chunks of a table).

    ``order``, when given, is the original row of each concatenated row
    (the result comes back in original order). Findings keep their
    severity and kind.
    """
    from .device import concatenate as cat_devices

    def cat(get):
        arr = np.concatenate([np.asarray(get(r)) for r in results])
        return arr if order is None else arr[inverse]

    def cat_list(arrays):
        arr = np.concatenate(arrays)
        return arr if order is None else arr[inverse]

    if order is not None:
        inverse = np.empty(len(order), int)
        inverse[np.asarray(order)] = np.arange(len(order))
    first = results[0]
    params = {k: cat(lambda r, k=k: r.params[k]) for k in first.params}
    derived = {}
    for k, v in first.derived.items():
        if isinstance(v, dict):
            derived[k] = {kk: cat(lambda r, k=k, kk=kk: r.derived[k][kk]) for kk in v}
        else:
            derived[k] = cat(lambda r, k=k: r.derived[k])
    findings = []
    for i, f0 in enumerate(first.findings):
        values = {}
        for k, v in f0.values.items():
            here = [r.findings[i].values[k] for r in results]
            if isinstance(v, np.ndarray) or any(x != v for x in here):
                values[k] = cat_list([x if isinstance(x, np.ndarray) else np.full(len(r), x, dtype=object)
                                      for x, r in zip(here, results)])
            else:
                values[k] = v
        findings.append(Finding(cat_list([r.findings[i].mask for r in results]), f0.template, values,
                                severity=f0.severity, kind=f0.kind))
    device = cat_devices([r.device for r in results])
    if order is not None:
        device = device.take(inverse)
    sources = {}
    for r in results:
        for k, v in r.sources.items():
            if sources.get(k, v) != v:
                k = f"{r.device.material[0]} {k}"
            sources[k] = v
    return Result(device=device, params=params, derived=derived, findings=findings, sources=sources)


def _given(x):
    return ~np.isnan(x)


def _cm3(x):
    """A density [m^-3] as the messages write it in cm^-3, e.g. '1e12'."""
    return f"{x / 1e6:.0e}".replace("e+", "e")


def derive(device: Device, problems: Problems | None = None) -> Result:
    """Evaluate the physics of every device and return the card parameters.

    Devices are grouped by material; each group is evaluated with its
    material module (:mod:`modelgen.materials`) through the stages below,
    and the groups are put back in the table's order. A device gives the
    same numbers alone and in any table.

    Parameters
    ----------
    device : Device
        Devices in SI units (see :mod:`modelgen.device`).
    problems : modelgen.errors.Problems, optional
        Collects devices the physics cannot describe, row by row (for
        tables); their parameters come out NaN or meaningless and must be
        dropped. Without it the first such device raises.

    Returns
    -------
    Result

    Raises
    ------
    InputError
        A side depleted through to its contact at the reference bias, a
        reference bias at or beyond the junction potential, a resistivity
        outside the range of the mobility model, or inputs that make a card
        parameter non-finite or non-positive (the error names the input).
    """
    unknown = sorted(set(device.material) - set(materials.MATERIALS))
    if unknown:
        raise InputError(f"unknown material {unknown[0]!r}; known: {', '.join(sorted(materials.MATERIALS))}",
                         key="material")
    if problems is None:
        problems = Problems(len(device), sources=device.source, rows=device.line)
    names = list(dict.fromkeys(device.material)) or ["silicon"]
    if len(names) == 1:
        return _derive_material(device, materials.get(names[0]), problems)
    material = np.asarray(device.material, dtype=object)
    parts, order = [], []
    for name in names:
        rows = np.flatnonzero(material == name)
        sub = device.take(rows)
        local = Problems(len(rows), sources=sub.source, rows=sub.line, collect=problems.collect)
        parts.append(_derive_material(sub, materials.get(name), local))
        order.append(rows)
        _forward(local, problems, rows)
    return concatenate(parts, order=np.concatenate(order))


def _forward(local, problems, rows):
    """Record the problems found on the sub-table ``rows`` (collected in ``local``) in ``problems``."""
    for mask, key, message, values in local.found:
        full = np.zeros(problems.n, bool)
        full[rows[mask]] = True
        vals = None
        if values:
            vals = {}
            for k, v in values.items():
                arr = np.empty(problems.n, dtype=object)
                arr[rows] = list(v) if isinstance(v, np.ndarray) else v
                vals[k] = arr
        problems.add(full, key, message, vals)


def _derive_material(device: Device, mat, problems: Problems) -> Result:
    """:func:`derive` for devices of one material ``mat``, stage by stage.

    Floating-point overflow and the like raise no numpy warnings here: the guards (stage 3 for the
    junction potential and depletion widths, stage 9 for the card) turn a non-finite or non-positive
    result into an error naming the input that caused it.
    """
    with np.errstate(all="ignore"):
        return _stages(device, mat, problems)


def _stages(device, mat, problems):
    """The stages in order; each takes what the earlier ones computed.

    1 conditions (temperature, ni, band gap, permittivity, area); 2 side materials (doping, mobilities,
    lifetime, diffusion length, BGN); 3 electrostatics (Vbi, VJ, depletion); 4 neutral regions (width,
    W/L, J0, transit time, resistance); 5 currents (IS, TT, ISR, IKF, RS); 6 capacitance; 7 breakdown;
    8 findings; 9 guard on the card parameters.
    """
    given = device
    device, profile = _equivalent_abrupt(device, mat, _conditions(device, mat), problems)
    env = _conditions(device, mat)
    _model_ranges(device, mat, problems)
    sides = {"p": _side_material(device, device.p, "p", mat, env, problems),
             "n": _side_material(device, device.n, "n", mat, env, problems)}
    el = _electrostatics(device, sides, env, problems)
    for name in ("p", "n"):
        _neutral_region(device, getattr(device, name), name, sides[name], el, problems)
    cur = _currents(device, sides, env, el)
    cap = _capacitance(env, el)
    bd = _breakdown(mat, sides, env, el)
    findings = _findings(device, mat, sides, env, el, bd, profile)
    leak = _leakage(device, sides, env, el, cur)
    findings.insert(-1, leak["finding"])  # before the standing caution
    ones = np.ones(len(device))
    p, n = sides["p"], sides["n"]
    params = {
        "IS": cur["IS"], "N": ones, "RS": cur["RS"], "CJO": cap["CJO"], "VJ": el["vj"], "M": cap["M"],
        "FC": device.fc, "TT": cur["TT"], "BV": bd["bv"], "IBV": device.breakdown_current,
        "EG": env["eg"] - env["t"] * mat.bandgap_slope(env["t"]), "XTI": 3.0 * ones,
        "ISR": cur["ISR"], "NR": cur["NR"], "IKF": cur["IKF"],
    }
    derived = {
        "temperature": env["t"], "ni": env["ni"], "bandgap": env["eg"], "builtin_voltage": el["vbi"],
        "depletion_width": el["w0"], "depletion_width_reference": el["w_ref"],
        "reference_bias": device.reference_bias, "junction_area": env["area_total"], "bottom_area": device.area,
        "recombination_lifetime": cur["tau_rec"], "breakdown_peak_field": bd["e_peak"],
        "reach_through": bd["reach_p"] | bd["reach_n"],
        "leakage_bias": leak["bias"], "leakage": leak["current"],
        "p": {k: p[k] for k in SIDE_QUANTITIES}, "n": {k: n[k] for k in SIDE_QUANTITIES},
    }
    derived["p"]["depletion_extent"] = el["xp0"]
    derived["n"]["depletion_extent"] = el["xn0"]
    _guard(device, params, problems)
    return Result(device=given, params=params, derived=derived, findings=findings, sources=dict(mat.SOURCES))


#: Where no [fit] reverse_bias is given, the reverse leakage is reported at this bias [V].
LEAKAGE_BIAS = -5.0
#: The card's reverse current (about IS) is called short of the physics when this many times smaller.
LEAKAGE_FACTOR = 10.0
#: Nodes per piece of the generation integral here: 0.2 % against adaptive quadrature (8 of the module's 16).
LEAKAGE_NODES = 8
#: One text for every card it applies to (no per-card numbers: it is on nearly every silicon card of a lot, and
#: formatting numbers into each would cost a tenth of a lot's time); the value is the JSON's derived.leakage.
LEAKAGE_FINDING = ("reverse leakage: at the fit window's reverse bias the physics leaks over ten times IS, mostly "
                   "depletion-region generation (JSON: derived.leakage), which a level-1 card does not carry; "
                   "--form subckt adds it")


def _leakage(device, sides, env, el, cur):
    """Stage 8b: the physical reverse current at the fit window's reverse bias, and a warning where the card
    (whose reverse current is about IS) leaks far less.

    The current is the diffusion part IS plus the Sah-Noyce-Shockley generation current of the depletion
    region (:func:`modelgen.physics.generation.generation_current_density`, the closed forms' trap lifetime
    and depletion-approximation field) over the junction area, magnitude [A], at ``fit_reverse_bias``
    (default :data:`LEAKAGE_BIAS`); NaN where that bias is not below -3 Vt.
    """
    from .physics import generation

    vr = np.where(np.isfinite(device.fit_reverse_bias), device.fit_reverse_bias, LEAKAGE_BIAS)
    with np.errstate(all="ignore"):
        j = generation.generation_current_density(vr, el["vj"], sides["p"]["doping"], sides["n"]["doping"],
                                                  np.where(el["linear"], el["grading"], 1.0), el["linear"],
                                                  env["ni"], env["eps"], cur["tau_rec"], cur["tau_rec"], env["t"],
                                                  nodes=LEAKAGE_NODES)
        leak = cur["IS"] - env["area_total"] * j
        short = leak > LEAKAGE_FACTOR * cur["IS"]
    finding = Finding(short, LEAKAGE_FINDING, {}, severity="warning", kind="leakage")
    return {"bias": vr, "current": leak, "finding": finding}


def _rule(problems, mask, key, message, values=None):
    """``problems.add`` for the rows that have no problem yet (the first reason is the one to report)."""
    problems.add(mask & ~problems.bad, key, message, values)


def _conditions(device, mat):
    """Stage 1: temperature, permittivity, ni and band gap at the evaluation temperature, junction area."""
    t = device.temperature
    t_ref = device.reference_temperature  # where the user's values (ni, bandgap, lifetime, resistivity) hold
    # a given ni or band gap holds at the reference temperature; the model carries it to t
    ni = np.where(_given(device.ni), device.ni * mat.intrinsic_density(t) / mat.intrinsic_density(t_ref),
                  mat.intrinsic_density(t))
    eg = np.where(_given(device.bandgap), device.bandgap + mat.bandgap(t) - mat.bandgap(t_ref), mat.bandgap(t))
    return {"t": t, "t_ref": t_ref, "vt": thermal_voltage(t), "eps": device.relative_permittivity * EPS0,
            "ni": ni, "eg": eg, "tau_scale": (t / t_ref) ** device.lifetime_exponent,
            "area_total": device.area + device.perimeter * device.junction_depth}


def _model_ranges(device, mat, problems):
    """Inputs outside the range the material's models cover (the description's bounds are generic)."""
    t_lo, t_hi = mat.TEMPERATURE_RANGE
    for key, t in (("temperature", device.temperature), ("temperature", device.reference_temperature)):
        _rule(problems, ~((t >= t_lo) & (t <= t_hi)), key,
              f"{{t:.6g}} K is outside the {t_lo:g}-{t_hi:g} K the {mat.NAME} models cover", {"t": t})
    lo, hi = mat.DOPING_RANGE
    for name in ("p", "n"):
        n = getattr(device, name).doping
        _side_rule(problems, device, _given(n) & ~((n >= lo) & (n <= hi)), name, "doping",
                   f"{{n:.3g}} cm^-3 is outside the {_cm3(lo)}-{_cm3(hi)} cm^-3 the {mat.NAME} models cover",
                   {"n": n / 1e6})


#: The key that gives a side's doping or thickness where a diffused profile gives the p side.
_DIFFUSED_P_KEY = {"doping": "surface_concentration", "thickness": "junction_depth"}


def _side_rule(problems, device, mask, name, what, message, values=None):
    """:func:`_rule` on side ``name``'s ``what`` (doping or thickness), naming the key the user gave for it.

    Where a profile gives the side (a table: both sides; erfc or gaussian: the p side), the key is the
    profile's (``profile_table``; ``surface_concentration`` or ``junction_depth``) and the message says it
    is the equivalent abrupt junction's side.
    """
    kinds = np.asarray(device.profile, dtype=object)
    table = kinds == "table"
    diffused = ((kinds == "erfc") | (kinds == "gaussian")) if name == "p" else np.zeros(len(kinds), bool)
    said = f"the {name} side of the equivalent abrupt junction: " + message
    _rule(problems, mask & ~table & ~diffused, f"{name}.{what}", message, values)
    _rule(problems, mask & table, "profile_table", said, values)
    _rule(problems, mask & diffused, _DIFFUSED_P_KEY[what], said, values)


def _side_material(device, side, name, mat, env, problems):
    """Stage 2, one side: doping (from resistivity where given), mobilities, lifetime, diffusion length, BGN."""
    majority, minority = ("hole", "electron") if name == "p" else ("electron", "hole")
    t, t_ref, vt = env["t"], env["t_ref"], env["vt"]
    mu_override = side.majority_mobility
    from_rho = np.isnan(side.doping)
    doping = _side_doping(side, name, mat, t_ref)
    lo, hi = mat.DOPING_RANGE
    problems.add(from_rho & ~np.isfinite(doping), f"{name}.resistivity",
                 f"outside the range of the mobility model (doping {_cm3(lo)}-{_cm3(hi)} cm^-3)")
    mu_maj = np.where(_given(mu_override), mu_override, mat.majority_mobility(doping, majority, t))
    mu_min = np.where(_given(side.minority_mobility), side.minority_mobility,
                      mat.minority_mobility(doping, minority, t))
    with np.errstate(over="ignore", invalid="ignore"):
        diff = mu_min * vt
        # a diffusion length is given at the reference temperature: tau = L^2 / D there
        d_ref = vt * np.where(_given(side.minority_mobility), side.minority_mobility,
                              mat.minority_mobility(doping, minority, t_ref)) * (t_ref / t)
        tau = env["tau_scale"] * np.where(_given(side.lifetime), side.lifetime,
                                          np.where(_given(side.diffusion_length), side.diffusion_length**2 / d_ref,
                                                   mat.minority_lifetime(doping, name)))
        dbgn = mat.bandgap_narrowing(doping)
        return dict(doping=doping, majority_mobility=mu_maj, minority_mobility=mu_min,
                    diffusivity=diff, lifetime=tau, diffusion_length=np.sqrt(diff * tau),
                    bandgap_narrowing=dbgn, ni_eff=env["ni"] * np.exp(dbgn / (2 * vt)),
                    contact_velocity=side.surface_recombination,
                    lifetime_modelled=np.isnan(side.lifetime) & np.isnan(side.diffusion_length))


def _side_doping(side, name, mat, t_ref):
    """A side's dopant density [m^-3]: as given, or from its resistivity (through the majority mobility given,
    else the material's mobility model at the reference temperature); NaN where the model cannot invert it."""
    majority = "hole" if name == "p" else "electron"
    mu_override = side.majority_mobility
    from_rho = np.isnan(side.doping)
    n_rho = np.full(len(side.doping), np.nan)
    modelled = np.flatnonzero(from_rho & ~_given(mu_override))  # invert the mobility model only there
    if len(modelled):
        n_rho[modelled] = mat.doping_from_resistivity(side.resistivity[modelled], majority, t_ref[modelled])
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        n_rho = np.where(_given(mu_override), 1.0 / (Q * side.resistivity * mu_override), n_rho)
    return np.where(from_rho, n_rho, side.doping)


#: Bisection steps that place the light side's depletion edge of the equivalent abrupt junction on a profile.
_EQUIVALENT_STEPS = 48


def diffused_junction(device, mat):
    """The diffused p side of erfc and gaussian rows: substrate doping, characteristic length, junction depth.

    The acceptors fall from the surface concentration Cs as Cs erfc(x/d)
    (constant-source diffusion) or Cs exp(-(x/d)^2) (limited source, Cs the
    surface value); the junction lies where they equal the substrate's
    donors, N_B: xj = d erfc^-1(N_B/Cs) or d sqrt(ln(Cs/N_B)). Given ``xj``
    (``junction_depth``), d follows from it; given d, xj.

    Parameters
    ----------
    device : Device
    mat : module
        The devices' material.

    Returns
    -------
    (background, characteristic_length, junction_depth) : numpy.ndarray
        N_B [m^-3], d [m] and xj [m]; NaN on other rows and where Cs <= N_B.

    Notes
    -----
    Valid where the diffused acceptors and the substrate donors are the
    only dopants (no compensation beyond N_B).

    References
    ----------
    Plummer, Deal & Griffin, *Silicon VLSI Technology* (2000), ch. 7;
    Sze & Ng, *Physics of Semiconductor Devices* (2007), ch. 2.
    """
    from scipy.special import erfcinv

    erfc_row = device.profile == "erfc"
    gauss = device.profile == "gaussian"
    bg = np.where(erfc_row | gauss, _side_doping(device.n, "n", mat, device.reference_temperature), np.nan)
    with np.errstate(all="ignore"):
        ratio = np.where(bg < device.surface_concentration, bg / device.surface_concentration, np.nan)
        u = np.where(erfc_row, erfcinv(ratio), np.sqrt(-np.log(ratio)))
        ell = np.where(_given(device.characteristic_length), device.characteristic_length, device.junction_depth / u)
        xj = np.where(_given(device.characteristic_length), device.characteristic_length * u, device.junction_depth)
    ok = erfc_row | gauss
    return np.where(ok, bg, np.nan), np.where(ok, ell, np.nan), np.where(ok, xj, np.nan)


def profile_of(device, i, mat=None, length=None):
    """The net doping profile of row ``i`` of an erfc, gaussian or table device (abrupt and linear: None).

    A table's length is its last depth. An erfc or gaussian device runs from
    the p contact to the n contact: ``length`` [m] when given (the junction
    depth plus the n side's thickness as derived), else the junction depth
    plus ``[n] thickness``.

    Returns
    -------
    modelgen.physics.profiles.Profile or None
    """
    kind = device.profile[i]
    if kind == "table":
        return _table_profile(device.profile_table[i])
    if kind not in ("erfc", "gaussian"):
        return None
    one = device.row(i)
    bg, ell, xj = (float(v[0]) for v in diffused_junction(one, mat or materials.get(one.material[0])))
    length = xj + float(one.n.thickness[0]) if length is None else float(length)
    cs = float(one.surface_concentration[0])
    if kind == "erfc":
        return profiles.erfc_emitter(cs, ell, bg, length)
    return profiles.gaussian_emitter(cs * np.sqrt(np.pi) * ell, ell, bg, length)  # peak Q/(sqrt(pi) d) = Cs


def _table_mean(profile, a, b):
    """Mean |N_D - N_A| [m^-3] of a tabulated ``profile`` over depths a < b [m] (trapezoids on a fine grid)."""
    x = np.linspace(a, b, 2001)
    y = np.abs(profile(x))
    return float(np.sum(0.5 * (y[1:] + y[:-1]) * np.diff(x)) / (b - a))


def _equivalent_abrupt(device, mat, env, problems):
    """Stage 0: for erfc, gaussian and table rows, the abrupt junction the closed forms take instead.

    Each side of the equivalent junction reaches from the metallurgical junction to its contact. The
    lighter side (by the mean net doping over the whole side) takes the profile's |N_D - N_A| at its
    depletion edge, the heavier side the mean over its neutral region, the edges being those of the
    equivalent junction itself at the reference bias: the light side's extent x is the root of
    x = x_abrupt(N(x)), increasing in x for a profile that rises away from the junction, found by
    bisection in :data:`_EQUIVALENT_STEPS` steps. The diffused forms use closed-form integrals (of erfc,
    i erfc; of the Gaussian, erf), so whole lots run as arrays; a table row is integrated numerically, one
    at a time (tables come only from descriptions). An erfc or gaussian device given an n neutral width
    instead of a thickness takes its n side, for these means, as that wide (its depletion edge lies in
    the uniform substrate).

    Returns
    -------
    (Device, dict or None)
        The devices with those rows' dopings and thicknesses replaced (and the sidewall height set to the
        junction depth), and what the finding reports (None when no row has such a profile).
    """
    kinds = np.asarray(device.profile, dtype=object)
    diffused = (kinds == "erfc") | (kinds == "gaussian")
    table = kinds == "table"
    if not (diffused.any() or table.any()):
        return device, None
    bg, ell, xj = diffused_junction(device, mat)
    cs = device.surface_concentration
    _rule(problems, diffused & _given(bg) & ~(cs > bg), "surface_concentration",
          "{cs:.4g} cm^-3 is not above the substrate doping {bg:.4g} cm^-3: the diffused p side makes no junction",
          {"cs": cs / 1e6, "bg": bg / 1e6})
    n_thick = np.where(table, np.nan, device.n.thickness)
    tabled = {}
    for i in np.flatnonzero(table).tolist():
        tabled[i] = _table_profile(device.profile_table[i])
        xj[i] = tabled[i].junctions[0]
        n_thick[i] = tabled[i].length - xj[i]
    mask = diffused | table
    rows = np.flatnonzero(mask)  # the work is done on these rows only
    na, nd = np.full(len(device), np.nan), np.full(len(device), np.nan)
    na[rows], nd[rows] = _equivalent_dopings(
        kinds[rows], bg[rows], cs[rows], ell[rows], xj[rows], n_thick[rows], device.n.neutral_width[rows],
        [tabled.get(i) for i in rows.tolist()] if tabled else None, env["ni"][rows], env["t"][rows],
        env["eps"][rows], device.reference_bias[rows])
    nan = np.full(len(device), np.nan)

    def side(s, doping, thickness, neutral_width):
        return replace(s, doping=np.where(mask, doping, s.doping), resistivity=np.where(mask, nan, s.resistivity),
                       thickness=np.where(mask, thickness, s.thickness),
                       neutral_width=np.where(mask, neutral_width, s.neutral_width))

    out = replace(device, p=side(device.p, na, xj, nan),
                  n=side(device.n, nd, n_thick, np.where(table, nan, device.n.neutral_width)),
                  junction_depth=np.where(mask, xj, device.junction_depth))
    return out, {"mask": mask}


def _equivalent_dopings(kinds, bg, cs, ell, xj, n_thick, n_width, tables, ni, t, eps, bias):
    """The equivalent abrupt junction's NA, ND [m^-3] of profile rows (see :func:`_equivalent_abrupt`).

    ``kinds`` "erfc", "gaussian" or "table"; ``bg``, ``cs``, ``ell`` the substrate doping, surface
    concentration and characteristic length of the diffused rows; ``xj`` the junction depth; ``n_thick``
    the n side's thickness (NaN: ``n_width``, its neutral width, was given); ``tables`` each row's
    tabulated Profile (None for the others, or None for all); ``ni``, ``t``, ``eps``, ``bias`` as in
    :mod:`modelgen.physics.junction`.

    Notes
    -----
    The equivalent junction is modelgen's own construction, made so the closed forms can give every card
    parameter; the solver takes the true profile. Its depletion extents are the abrupt junction's
    (Sze & Ng, *Physics of Semiconductor Devices*, 3rd ed., 2007, sec. 2.2). The erfc integral is
    int_0^u erfc = 1/sqrt(pi) - ierfc(u), ierfc(u) = exp(-u^2)/sqrt(pi) - u erfc(u) (Abramowitz & Stegun,
    *Handbook of Mathematical Functions*, 1964, 7.2.1 and 7.2.3, from memory).
    """
    from scipy.special import erf, erfc

    gauss, plain = kinds == "gaussian", kinds == "erfc"
    tabled = [(j, p) for j, p in enumerate(tables or ()) if p is not None]
    sqpi = np.sqrt(np.pi)

    def integral(u):  # integral of the acceptor shape from 0 to u (in units of d)
        out = np.full(len(u), np.nan)
        out[gauss] = 0.5 * sqpi * erf(u[gauss])
        v = u[plain]
        out[plain] = 1.0 / sqpi - (np.exp(-v * v) / sqpi - v * erfc(v))
        return out

    def at(x):  # |N| at depth x
        u = x / ell
        shape = np.full(len(x), np.nan)
        shape[gauss] = np.exp(-u[gauss] ** 2)
        shape[plain] = erfc(u[plain])
        out = np.abs(bg - cs * shape)
        for j, p in tabled:
            out[j] = abs(float(p(x[j])))
        return out

    def mean(a, b):  # mean |N| over [a, b]
        out = np.where(b > a, np.abs(bg - cs * ell * (integral(b / ell) - integral(a / ell)) / (b - a)), at(a))
        for j, p in tabled:
            out[j] = _table_mean(p, a[j], b[j]) if b[j] > a[j] else out[j]
        return out

    with np.errstate(all="ignore"):
        zero = np.zeros(len(kinds))
        length = xj + np.where(_given(n_thick), n_thick, n_width)
        p_side, n_side = mean(zero, xj), mean(xj, length)
        light_p = p_side < n_side
        heavy = np.where(light_p, n_side, p_side)
        lo, hi = zero, np.where(light_p, xj, length - xj)
        for _ in range(_EQUIVALENT_STEPS):
            x = 0.5 * (lo + hi)
            light = np.maximum(at(np.where(light_p, xj - x, xj + x)), 1.0)
            x_heavy = np.minimum(x * light / heavy, np.where(light_p, length - xj, xj))
            heavy = mean(np.where(light_p, xj + x_heavy, zero), np.where(light_p, length, xj - x_heavy))
            na, nd = np.where(light_p, light, heavy), np.where(light_p, heavy, light)
            vj = junction.junction_potential(junction.builtin_voltage(na, nd, ni, t), False, t)
            _, xp, xn = junction.depletion_width(vj, bias, na, nd, np.nan, False, eps)
            short = x < np.where(light_p, xp, xn)
            lo, hi = np.where(short, x, lo), np.where(short, hi, x)
    return na, nd


def _table_profile(table):
    """The :class:`~modelgen.physics.profiles.Profile` of a :class:`~modelgen.device.ProfileTable`."""
    return profiles.table(table.depth, table.net_doping)


def _electrostatics(device, sides, env, problems):
    """Stage 3: built-in and junction potential, depletion widths at zero and at the reference bias."""
    na, nd, eps = sides["p"]["doping"], sides["n"]["doping"], env["eps"]
    linear = device.linear
    grading = np.where(linear, device.grading, np.nan)
    vbi_abrupt = junction.builtin_voltage(na, nd, env["ni"], env["t"])
    with np.errstate(invalid="ignore"):
        vgr = junction.gradient_voltage(np.where(linear, grading, 1.0), env["ni"], eps, env["t"])
    vbi = np.where(linear, vgr, vbi_abrupt)
    vj = junction.junction_potential(vbi, linear, env["t"])
    _blame(device, ~np.isfinite(vj), "VJ", vj, DEPENDS["VJ"], problems)
    _rule(problems, ~(vj > 0), "profile", "the junction potential comes out non-positive ({vj:.3g} V): "
          "check the doping and grading", {"vj": vj})
    _rule(problems, device.reference_bias >= vj, "reference_bias",
          "{v:.4g} V is at or beyond the junction potential VJ = {vj:.4g} V",
          {"v": device.reference_bias, "vj": vj})
    w_ref, xp_ref, xn_ref = junction.depletion_width(vj, device.reference_bias, na, nd, grading, linear, eps)
    w0, xp0, xn0 = junction.depletion_width(vj, 0.0, na, nd, grading, linear, eps)
    for w in (w_ref, w0):
        _blame(device, (vj > 0) & (device.reference_bias < vj) & ~((w > 0) & np.isfinite(w)), "the depletion width",
               w, DEPENDS["depletion"], problems)
    return {"linear": linear, "grading": grading, "vbi": vbi, "vj": vj, "w_ref": w_ref, "w0": w0,
            "x_ref": {"p": xp_ref, "n": xn_ref}, "xp0": xp0, "xn0": xn0}


def _neutral_region(device, side, name, s, el, problems):
    """Stage 4, one side: neutral width, W/L, finite-width factor, J0, transit time, resistance (into ``s``)."""
    x_ref = el["x_ref"][name]
    thick = np.where(_given(side.thickness), side.thickness, side.neutral_width + x_ref)
    width = np.where(_given(side.thickness), side.thickness - x_ref, side.neutral_width)
    _side_rule(problems, device, ~(width > 0), name, "thickness",
               "this side is depleted through to its contact at the reference bias "
               "(depletion extent {x:.4g} um, thickness {t:.4g} um): no neutral region is left",
               {"x": x_ref * 1e6, "t": thick * 1e6})
    s.update(thickness=thick, neutral_width=width)
    with np.errstate(over="ignore", invalid="ignore", divide="ignore", under="ignore"):
        w_l = width / s["diffusion_length"]
        s_norm = s["contact_velocity"] * s["diffusion_length"] / s["diffusivity"]
        s["w_over_l"] = w_l
        s["regime"] = diffusion.regime(w_l)
        s["finite_width_factor"] = diffusion.finite_width_factor(w_l, s_norm)
        s["saturation_current_density"] = diffusion.saturation_current_density(
            s["ni_eff"], s["doping"], s["diffusivity"], s["diffusion_length"], width, s["contact_velocity"])
        s["transit_time"] = diffusion.transit_time(s["lifetime"], w_l, s_norm)
        s["resistance"] = resistance.neutral_region_resistance(width, s["doping"], s["majority_mobility"],
                                                               device.area)


def _currents(device, sides, env, el):
    """Stage 5: IS and TT from both sides, the recombination current ISR and NR, the knee IKF, and RS.

    ISR and NR are fitted to the Sah-Noyce-Shockley integral over the depletion-approximation field
    (:mod:`modelgen.physics.recombination`) in the fit window, weighted by the recombination share of the
    current; IKF puts the card's high-level limit on the lighter side's high-injection current
    (:mod:`modelgen.physics.injection`).
    """
    p, n = sides["p"], sides["n"]
    area_total = env["area_total"]
    lighter_p = p["doping"] <= n["doping"]
    with np.errstate(over="ignore", invalid="ignore", divide="ignore", under="ignore"):
        j0 = p["saturation_current_density"] + n["saturation_current_density"]
        is_ = area_total * j0
        tt = (p["saturation_current_density"] * p["transit_time"]
              + n["saturation_current_density"] * n["transit_time"]) / j0
        tau_light = np.where(lighter_p, p["lifetime"], n["lifetime"])
        tau_rec = np.where(_given(device.recombination_lifetime), device.recombination_lifetime * env["tau_scale"],
                           tau_light)
        vj, m = el["vj"], junction.grading_coefficient(el["linear"])
        bias = recombination.fit_window(vj, p["doping"], n["doping"], el["linear"], env["ni"], env["t"])
        j_rec = _sns(bias, vj, p["doping"], n["doping"], el["grading"], el["linear"], env["ni"], env["eps"],
                     tau_rec, env["t"])
        share = j_rec / (j_rec + j0[:, None] * np.expm1(bias / env["vt"][:, None]))
        jsr, nr = recombination.fit_recombination(bias, j_rec, share + 1e-3, vj, m, env["t"])
        isr = area_total * jsr
        light = {k: np.where(lighter_p, p[k], n[k]) for k in ("ni_eff", "diffusivity", "majority_mobility",
                                                               "lifetime", "neutral_width", "contact_velocity")}
        # SRH high-level lifetime tau_n0 + tau_p0 (Shockley & Read 1952), both taken as the side's lifetime
        j_hl = injection.high_injection_saturation(light["ni_eff"], light["diffusivity"],
                                                   light["majority_mobility"] * env["vt"], 2.0 * light["lifetime"],
                                                   light["neutral_width"], light["contact_velocity"])
        ikf = injection.knee_current(is_, area_total * j_hl)
        rs = p["resistance"] + n["resistance"] + device.contact_resistance
    return {"IS": is_, "TT": tt, "ISR": isr, "NR": nr, "IKF": ikf, "RS": rs, "tau_rec": tau_rec}


def _sns(bias, vj, na, nd, grading, linear, ni, eps, tau, t):
    """The Sah-Noyce-Shockley current density [A/m^2] of each device (rows) at ``bias`` (devices, biases)."""
    col = lambda a: np.asarray(a)[:, None]  # noqa: E731  (devices down, biases across)
    return recombination.sns_current_density(bias, col(vj), col(na), col(nd), col(grading), col(linear), col(ni),
                                             col(eps), col(tau), col(tau), col(t))


def _capacitance(env, el):
    """Stage 6: zero-bias depletion capacitance CJO and grading coefficient M (VJ comes from stage 3)."""
    with np.errstate(over="ignore", invalid="ignore", divide="ignore", under="ignore"):
        cjo = env["area_total"] * junction.depletion_capacitance(el["w0"], env["eps"])
    return {"CJO": cjo, "M": junction.grading_coefficient(el["linear"])}


def _breakdown(mat, sides, env, el):
    """Stage 7: avalanche breakdown voltage with reach-through (:mod:`modelgen.physics.breakdown`)."""
    linear, grading = el["linear"], el["grading"]
    p, n = sides["p"], sides["n"]
    bv, e_peak, reach_p, reach_n = breakdown.breakdown_voltage(
        el["vbi"], p["doping"], n["doping"], p["thickness"], n["thickness"], np.where(linear, grading, 0.0), linear,
        env["eps"], env["t"], mat.ionization_coefficients, breakpoint=mat.IONIZATION_BREAKPOINT)
    return {"bv": bv, "e_peak": e_peak, "reach_p": reach_p, "reach_n": reach_n}


#: The finding of a profile the closed forms approximate (kind "profile").
PROFILE_FINDING = ("the closed forms take this {kind} profile as an equivalent abrupt junction at {xj:.3g} um "
                   "(p {na:.3g} cm^-3, {tp:.3g} um; n {nd:.3g} cm^-3, {tn:.3g} um): their values only approximate "
                   "it, and the numerical solver on the true profile is used for the card")


def _findings(device, mat, sides, env, el, bd, profile=None):
    """Stage 8: the notes, warnings and cautions, in a fixed order."""
    p, n = sides["p"], sides["n"]
    mask = profile["mask"] if profile is not None else np.zeros(len(device), bool)
    found = [Finding(mask, PROFILE_FINDING,
                     {"kind": np.asarray(device.profile, dtype=object), "xj": device.junction_depth * 1e6,
                      "na": p["doping"] / 1e6, "tp": p["thickness"] * 1e6, "nd": n["doping"] / 1e6,
                      "tn": n["thickness"] * 1e6}, severity="warning", kind="profile")]
    for name in ("p", "n"):
        s = sides[name]
        found.append(Finding(s["lifetime_modelled"], f"{name} side: no lifetime given; using {{model}}, "
                             "tau = {tau:.3g} s. Lifetime is process dependent: give a measured value where you "
                             "have one", {"tau": s["lifetime"], "model": mat.LIFETIME_MODEL},
                             severity="warning", kind="lifetime_modelled"))
    # degenerate doping: Boltzmann Fermi level within 3 kT of the band edge
    # (Pierret 1996, sec. 2.5: the non-degenerate range)
    nc, nv = mat.effective_density_of_states(env["t"])
    for name, dos, band in (("p", nv, "valence"), ("n", nc, "conduction")):
        n_side = sides[name]["doping"]
        found.append(Finding(n_side > dos * np.exp(-3.0),
                             f"{name} side: doping {{N:.3g}} cm^-3 puts the Fermi level within 3 kT of the "
                             f"{band} band: Boltzmann statistics fail there. The band-gap narrowing model "
                             "is an apparent one fitted to such material, but Vbi and the mobility are less sure",
                             {"N": n_side / 1e6}, severity="warning", kind="degenerate_doping"))
    for name in ("p", "n"):
        s = sides[name]
        found.append(Finding(np.ones(len(device), bool),
                             f"{name} side is {{regime}} (W/L = {{wl:.3g}}); the exact finite-width "
                             "factor is used", {"regime": s["regime"], "wl": s["w_over_l"]},
                             severity="note", kind="regime"))
    linear, grading = el["linear"], el["grading"]
    na, nd = sides["p"]["doping"], sides["n"]["doping"]
    found.append(Finding(linear & (0.5 * grading * el["w0"] > np.minimum(na, nd)),
                         "the linear grade at the zero-bias depletion edge exceeds a side's plateau "
                         "doping: the graded-junction capacitance is only approximate", {},
                         severity="warning", kind="graded_plateau"))
    bv, reach_p, reach_n = bd["bv"], bd["reach_p"], bd["reach_n"]
    found.append(Finding(reach_p | reach_n,
                         "reach-through: the depletion region reaches the {side} contact before avalanche; "
                         "BV = {bv:.4g} V is lower than a thick junction's",
                         {"side": np.where(reach_p & reach_n, "p and n", np.where(reach_p, "p", "n")), "bv": bv},
                         severity="warning", kind="reach_through"))
    found.append(Finding(np.isnan(bv), f"no avalanche breakdown below a peak field of "
                         f"{breakdown.FIELD_BRACKET[1] / 100:.0e} V/cm; BV is left off the card".replace("e+0", "e"),
                         {}, severity="warning", kind="no_breakdown"))
    with np.errstate(invalid="ignore"):
        tunnel = bv < 4.0 * env["eg"]
    found.append(Finding(tunnel, "BV = {bv:.3g} V is below 4 Eg/q: tunnelling (Zener) breakdown dominates "
                         "there and the avalanche estimate does not apply", {"bv": bv},
                         severity="warning", kind="tunnelling"))
    p, n = sides["p"], sides["n"]
    with np.errstate(over="ignore", invalid="ignore"):
        graded_width = 0.5 * np.sqrt(2 * env["eps"] * bd["e_peak"] / (Q * np.where(linear, grading, 1.0)))
    found.append(Finding(linear & (graded_width > np.minimum(p["thickness"], n["thickness"])),
                         "the graded junction's depletion region at breakdown is wider than a side: "
                         "reach-through is not modelled for graded junctions, so BV is an upper estimate", {},
                         severity="warning", kind="graded_reach_through"))
    found.append(Finding(np.ones(len(device), bool),
                         "breakdown is a physics estimate; derate it and confirm on measured devices", {},
                         severity="caution", kind="breakdown_estimate"))
    return found


#: Broad ranges within which each input is plausible (SI), used only to name the input that made a
#: result non-finite or non-positive; they are not rules on inputs (those are the description's).
PLAUSIBLE = {
    "area": (1e-16, 1.0, "m^2"), "perimeter": (1e-9, 10.0, "m"), "junction_depth": (1e-10, 1e-2, "m"),
    "material.ni": (1.0, 1e30, "m^-3"), "material.bandgap": (0.05, 10.0, "eV"),
    "material.relative_permittivity": (1.0, 100.0, ""), "grading": (1e18, 1e42, "m^-4"),
    "recombination_lifetime": (1e-15, 1.0, "s"), "contact_resistance": (0.0, 1e9, "ohm"),
    "lifetime_temperature_exponent": (-20.0, 20.0, ""), "reference_bias": (-1e4, 10.0, "V"),
    "doping": (1e16, 1e29, "m^-3"), "resistivity": (1e-8, 1e6, "ohm m"), "thickness": (1e-10, 1.0, "m"),
    "neutral_width": (1e-10, 1.0, "m"), "lifetime": (1e-15, 1.0, "s"), "diffusion_length": (1e-10, 1.0, "m"),
    "minority_mobility": (1e-5, 10.0, "m^2/(V s)"), "majority_mobility": (1e-5, 10.0, "m^2/(V s)"),
    "surface_recombination": (0.0, 1e9, "m/s"),
}
#: Values that stand for "not given" besides NaN: no sidewall, an ideal ohmic contact.
_ABSENT = {"perimeter": 0.0, "junction_depth": 0.0, "surface_recombination": np.inf}
_SIDE_INPUTS = ("doping", "resistivity", "thickness", "neutral_width", "lifetime", "diffusion_length",
                "minority_mobility", "majority_mobility", "surface_recombination")
_DEVICE_INPUTS = {"area": "area", "perimeter": "perimeter", "junction_depth": "junction_depth",
                  "material.ni": "ni", "material.bandgap": "bandgap",
                  "material.relative_permittivity": "relative_permittivity", "grading": "grading",
                  "recombination_lifetime": "recombination_lifetime", "contact_resistance": "contact_resistance",
                  "lifetime_temperature_exponent": "lifetime_exponent", "reference_bias": "reference_bias"}
_SIDE_CURRENT = ("doping", "resistivity", "lifetime", "diffusion_length", "minority_mobility", "thickness",
                 "neutral_width", "surface_recombination")
#: The inputs each card parameter depends on, in the order they are named when none is implausible.
#: ``s.`` entries stand for both sides.
DEPENDS = {
    "IS": ("area", "perimeter", "junction_depth", "material.ni", "lifetime_temperature_exponent")
    + tuple("s." + k for k in _SIDE_CURRENT),
    "TT": ("lifetime_temperature_exponent",) + tuple("s." + k for k in _SIDE_CURRENT),
    "ISR": ("area", "perimeter", "junction_depth", "material.ni", "recombination_lifetime",
            "material.relative_permittivity", "lifetime_temperature_exponent", "s.lifetime", "s.diffusion_length",
            "s.minority_mobility", "s.doping", "s.resistivity"),
    "IKF": ("area", "perimeter", "junction_depth", "material.ni", "s.majority_mobility")
    + tuple("s." + k for k in _SIDE_CURRENT),
    "RS": ("area", "contact_resistance", "s.majority_mobility", "s.doping", "s.resistivity", "s.thickness",
           "s.neutral_width"),
    "CJO": ("area", "perimeter", "junction_depth", "material.relative_permittivity", "material.ni", "grading",
            "s.doping", "s.resistivity"),
    "VJ": ("material.ni", "grading", "material.relative_permittivity", "s.doping", "s.resistivity"),
    "EG": ("material.bandgap",),
    "BV": ("material.relative_permittivity", "grading", "s.doping", "s.resistivity", "s.thickness"),
    "depletion": ("material.relative_permittivity", "reference_bias", "grading", "material.ni", "s.doping",
                  "s.resistivity"),
}
#: Card parameters that must come out finite and within these bounds, SI (RS may be zero; BV may be
#: absent, warned). The bounds are far beyond any real diode (a 1 m^2 junction; 1e-200 A is far below
#: the saturation current of any wide-gap junction): a value outside comes from an absurd input.
RESULT_RANGE = {"IS": (1e-200, 1e3), "RS": (0.0, 1e15), "CJO": (1e-200, 1.0), "VJ": (1e-6, 100.0),
                "TT": (1e-200, 1e3), "BV": (1e-6, 1e7), "EG": (1e-3, 100.0), "ISR": (1e-200, 1e3),
                "IKF": (1e-200, 1e12)}


def _input_column(device, key):
    if key.startswith(("p.", "n.")):
        return getattr(getattr(device, key[0]), key[2:])
    return getattr(device, _DEVICE_INPUTS[key])


def _blame(device, bad, what, value, deps, problems, rule="which must be finite and positive"):
    """Record, for the rows in ``bad``, an error naming the input of ``deps`` most outside its plausible range.

    Rows that already have a problem (a side depleted through, say) are left alone: their numbers are
    meaningless and the first reason is the one to report.
    """
    if not bad.any():
        return
    bad = bad & ~problems.bad
    if not bad.any():
        return
    keys = [k2 for k in deps for k2 in ((f"p.{k[2:]}", f"n.{k[2:]}") if k.startswith("s.") else (k,))]
    rows = np.flatnonzero(bad)
    score = np.full((len(rows), len(keys)), -1.0)  # -1: not given; 0: given and plausible
    for j, k in enumerate(keys):
        x = np.asarray(_input_column(device, k), float)[rows]
        base = k.split(".", 1)[1] if k.startswith(("p.", "n.")) else k
        lo, hi, _ = PLAUSIBLE[base]
        with np.errstate(all="ignore"):
            if lo > 0:
                far = np.maximum(np.maximum(np.log10(lo / np.abs(x)), np.log10(np.abs(x) / hi)), 0.0)
            else:
                far = np.maximum(np.log10(np.maximum(np.abs(x), 1e-300) / hi), 0.0)
        absent = np.isnan(x) | (x == _ABSENT.get(base, np.nan))
        score[:, j] = np.where(absent, -1.0, np.where(np.isfinite(far), far, 400.0))
    pick = np.argmax(score, axis=1)  # first of the most implausible; the first given one when all are plausible
    best = score[np.arange(len(rows)), pick]
    shown = np.full(len(device), np.nan)
    shown[rows] = np.asarray(value, float)[rows]
    for j in np.unique(pick):
        key = keys[j]
        x = np.full(len(device), np.nan)
        x[rows] = np.asarray(_input_column(device, key), float)[rows]
        for outside in (True, False):
            mask = np.zeros(len(device), bool)
            mask[rows[(pick == j) & ((best > 0) == outside)]] = True
            unit = PLAUSIBLE[key.split(".", 1)[1] if key.startswith(("p.", "n.")) else key][2]
            given = f"{{x:.4g}}{' ' + unit if unit else ''}"
            if outside:
                text = f"{given} is far outside the range where the models hold: it gives {what} = {{v:.4g}}, {rule}"
            else:
                text = (f"{given} with the other inputs gives {what} = {{v:.4g}}, {rule}: check it and the "
                        "inputs it combines with")
            problems.add(mask, key, text, {"v": shown, "x": x})


def _guard(device, params, problems):
    """Stage 9: card parameters that must be finite and positive are; else an error naming the input.

    NaN BV is allowed (no avalanche within the field bracket: warned, left off the card); RS may be zero.
    """
    for name, (lo, hi) in RESULT_RANGE.items():
        v = params[name]
        ok = (v >= lo if name == "RS" else v > lo) & (v < hi)
        if name == "BV":
            ok |= np.isnan(v)
        _blame(device, ~ok, name, v, DEPENDS[name], problems,
               f"outside what any diode has ({lo:g} to {hi:g} {UNITS[name]})")

def _junction_width(result, bias):
    d = result.device
    eps = d.relative_permittivity * EPS0
    col = lambda a: np.asarray(a)[:, None]  # noqa: E731  (devices down, biases across)
    w, _, _ = junction.depletion_width(col(result.params["VJ"]), bias, col(result.derived["p"]["doping"]),
                                       col(result.derived["n"]["doping"]), col(d.grading), col(d.linear),
                                       col(eps))
    return w, eps


def predicted_current(result, vd):
    """The physics core's own low-injection current at junction voltage vd [A].

    Diffusion current IS (exp(vd/Vt) - 1) plus the Sah-Noyce-Shockley
    recombination integral over the depletion-approximation field at vd
    (:func:`modelgen.physics.recombination.sns_current_density`) times the
    junction area. Valid at low injection, below the knee IKF and away from
    breakdown; what the SPICE card's diffusion and recombination terms
    approximate. Arrays broadcast as (devices, biases).

    Parameters
    ----------
    result : Result
    vd : array_like
        Junction voltage [V], below VJ.
    """
    vd = np.asarray(vd, float)[None, :]
    t = result.derived["temperature"]
    d = result.device
    grading = np.where(d.linear, d.grading, np.nan)
    j_rec = _sns(np.broadcast_to(vd, (len(result), vd.shape[1])), result.params["VJ"],
                 result.derived["p"]["doping"], result.derived["n"]["doping"], grading, d.linear,
                 result.derived["ni"], d.relative_permittivity * EPS0, result.derived["recombination_lifetime"], t)
    return (result.params["IS"][:, None] * np.expm1(vd / thermal_voltage(t)[:, None])
            + result.derived["junction_area"][:, None] * j_rec)


def predicted_capacitance(result, bias):
    """The physics core's depletion capacitance at a bias [F], eps A / W(bias).

    Arrays broadcast as (devices, biases); bias below VJ.
    """
    bias = np.asarray(bias, float)[None, :]
    w, eps = _junction_width(result, bias)
    return result.derived["junction_area"][:, None] * junction.depletion_capacitance(w, eps[:, None])

"""From a :class:`~modelgen.device.Device` to SPICE diode parameters.

:func:`derive` evaluates the physics for every device at once over numpy
arrays and returns a :class:`Result`: the card parameters, the derived
quantities an engineer checks, and the warnings. It raises
:class:`~modelgen.errors.InputError` for devices the physics cannot describe
(a side depleted through, a bias beyond the junction potential).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from . import materials
from .device import Device
from .errors import InputError, Problems
from .physics import breakdown, diffusion, junction, recombination, resistance

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


@dataclass
class Finding:
    """A warning that applies to the devices where ``mask`` is True.

    ``text`` is a format string filled, per device, from ``values``
    (arrays of the same length as the device table).
    """

    mask: np.ndarray
    text: str
    values: dict = field(default_factory=dict)

    def message(self, i):
        return self.text.format(**{k: (v[i] if isinstance(v, np.ndarray) else v) for k, v in self.values.items()})


@dataclass
class Result:
    """Parameters, derived quantities and warnings for a table of devices.

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
        """Messages that apply to device ``i``, in a fixed order."""
        return [f.message(i) for f in self.findings if f.mask[i]]

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


def _given(x):
    return ~np.isnan(x)


def derive(device: Device, problems: Problems | None = None) -> Result:
    """Evaluate the physics of every device and return the card parameters.

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
        reference bias at or beyond the junction potential, or a resistivity
        outside the range of the mobility model.
    """
    unknown = sorted(set(device.material) - set(materials.MATERIALS))
    if unknown:
        raise InputError(f"unknown material {unknown[0]!r}; known: {', '.join(sorted(materials.MATERIALS))}",
                         key="material")
    mat = materials.get("silicon")  # only material so far
    if problems is None:
        problems = Problems(len(device), sources=device.source, rows=device.line)

    findings = []
    t = device.temperature
    t_ref = device.reference_temperature  # where the user's values (ni, bandgap, lifetime, resistivity) hold
    vt = mat.thermal_voltage(t)
    eps = device.relative_permittivity * mat.EPS0
    # a given ni or band gap holds at the reference temperature; the model carries it to t
    ni = np.where(_given(device.ni), device.ni * mat.intrinsic_density(t) / mat.intrinsic_density(t_ref),
                  mat.intrinsic_density(t))
    eg = np.where(_given(device.bandgap), device.bandgap + mat.bandgap(t) - mat.bandgap(t_ref), mat.bandgap(t))
    tau_scale = (t / t_ref) ** device.lifetime_exponent
    area_total = device.area + device.perimeter * device.junction_depth

    sides = {}
    for name, side, majority, minority in (("p", device.p, "hole", "electron"),
                                           ("n", device.n, "electron", "hole")):
        # doping, from resistivity where that was given
        mu_override = side.majority_mobility
        from_rho = np.isnan(side.doping)
        n_rho = np.full(len(device), np.nan)
        modelled = np.flatnonzero(from_rho & ~_given(mu_override))  # invert the mobility model only there
        if len(modelled):
            n_rho[modelled] = mat.doping_from_resistivity(side.resistivity[modelled], majority, t_ref[modelled])
        with np.errstate(invalid="ignore", divide="ignore"):
            n_rho = np.where(_given(mu_override), 1.0 / (mat.Q * side.resistivity * mu_override), n_rho)
        doping = np.where(from_rho, n_rho, side.doping)
        problems.add(from_rho & ~np.isfinite(doping), f"{name}.resistivity",
              "outside the range of the mobility model (doping 1e12-1e22 cm^-3)")
        mu_maj = np.where(_given(mu_override), mu_override, mat.majority_mobility(doping, majority, t))
        mu_min = np.where(_given(side.minority_mobility), side.minority_mobility,
                          mat.minority_mobility(doping, minority, t))
        diff = mu_min * vt
        modelled = np.isnan(side.lifetime) & np.isnan(side.diffusion_length)
        # a diffusion length is given at the reference temperature: tau = L^2 / D there
        d_ref = vt * np.where(_given(side.minority_mobility), side.minority_mobility,
                              mat.minority_mobility(doping, minority, t_ref)) * (t_ref / t)
        tau = tau_scale * np.where(_given(side.lifetime), side.lifetime,
                                   np.where(_given(side.diffusion_length), side.diffusion_length**2 / d_ref,
                                            mat.minority_lifetime(doping, name)))
        findings.append(Finding(modelled, f"{name} side: no lifetime given; using the doping-dependent "
                                "SRH + Auger model, tau = {tau:.3g} s. Lifetime is process dependent: "
                                "give a measured value where you have one", {"tau": tau}))
        dbgn = mat.bandgap_narrowing(doping)
        sides[name] = dict(doping=doping, majority_mobility=mu_maj, minority_mobility=mu_min,
                           diffusivity=diff, lifetime=tau, diffusion_length=np.sqrt(diff * tau),
                           bandgap_narrowing=dbgn, ni_eff=ni * np.exp(dbgn / (2 * vt)),
                           contact_velocity=side.surface_recombination)
    na, nd = sides["p"]["doping"], sides["n"]["doping"]

    # degenerate doping: Boltzmann Fermi level within 3 kT of the band edge
    # (Pierret 1996, sec. 2.5: the non-degenerate range)
    nc, nv = mat.effective_density_of_states(t)
    for name, dos, band in (("p", nv, "valence"), ("n", nc, "conduction")):
        n_side = sides[name]["doping"]
        findings.append(Finding(n_side > dos * np.exp(-3.0),
                                f"{name} side: doping {{N:.3g}} cm^-3 puts the Fermi level within 3 kT of the "
                                f"{band} band: Boltzmann statistics fail there. The band-gap narrowing model "
                                "is an apparent one fitted to such material, but Vbi and the mobility are less sure",
                                {"N": n_side / 1e6}))

    # electrostatics
    linear = device.linear
    grading = np.where(linear, device.grading, np.nan)
    vbi_abrupt = junction.builtin_voltage(na, nd, ni, t)
    with np.errstate(invalid="ignore"):
        vgr = junction.gradient_voltage(np.where(linear, grading, 1.0), ni, eps, t)
    vbi = np.where(linear, vgr, vbi_abrupt)
    vj = junction.junction_potential(vbi, linear, t)
    problems.add(~(vj > 0), "profile", "the junction potential comes out non-positive ({vj:.3g} V): "
          "check the doping and grading", {"vj": vj})
    problems.add(device.reference_bias >= vj, "reference_bias",
          "{v:.4g} V is at or beyond the junction potential VJ = {vj:.4g} V", {"v": device.reference_bias, "vj": vj})
    w_ref, xp_ref, xn_ref = junction.depletion_width(vj, device.reference_bias, na, nd, grading, linear, eps)
    w0, xp0, xn0 = junction.depletion_width(vj, 0.0, na, nd, grading, linear, eps)
    for name, side, x_ref in (("p", device.p, xp_ref), ("n", device.n, xn_ref)):
        thick = np.where(_given(side.thickness), side.thickness, side.neutral_width + x_ref)
        width = np.where(_given(side.thickness), side.thickness - x_ref, side.neutral_width)
        problems.add(~(width > 0), f"{name}.thickness",
              "this side is depleted through to its contact at the reference bias "
              "(depletion extent {x:.4g} um, thickness {t:.4g} um): no neutral region is left",
              {"x": x_ref * 1e6, "t": thick * 1e6})
        s = sides[name]
        s.update(thickness=thick, neutral_width=width)
        w_l = width / s["diffusion_length"]
        s_norm = s["contact_velocity"] * s["diffusion_length"] / s["diffusivity"]
        s["w_over_l"] = w_l
        s["regime"] = diffusion.regime(w_l)
        s["finite_width_factor"] = diffusion.finite_width_factor(w_l, s_norm)
        s["saturation_current_density"] = diffusion.saturation_current_density(
            s["ni_eff"], s["doping"], s["diffusivity"], s["diffusion_length"], width, s["contact_velocity"])
        s["transit_time"] = diffusion.transit_time(s["lifetime"], w_l, s_norm)
        s["resistance"] = resistance.neutral_region_resistance(width, s["doping"], s["majority_mobility"], device.area)
        findings.append(Finding(np.ones(len(device), bool),
                                f"note: {name} side is {{regime}} (W/L = {{wl:.3g}}); the exact finite-width "
                                "factor is used", {"regime": s["regime"], "wl": w_l}))

    lighter = np.where(na <= nd, "p", "n")
    findings.append(Finding(linear & (0.5 * grading * w0 > np.minimum(na, nd)),
                            "the linear grade at the zero-bias depletion edge exceeds a side's plateau "
                            "doping: the graded-junction capacitance is only approximate", {}))

    # currents
    p, n = sides["p"], sides["n"]
    j0 = p["saturation_current_density"] + n["saturation_current_density"]
    is_ = area_total * j0
    tt = (p["saturation_current_density"] * p["transit_time"]
          + n["saturation_current_density"] * n["transit_time"]) / j0
    tau_light = np.where(lighter == "p", p["lifetime"], n["lifetime"])
    tau_rec = np.where(_given(device.recombination_lifetime), device.recombination_lifetime * tau_scale, tau_light)
    isr = area_total * recombination.recombination_saturation_density(ni, w0, tau_rec)
    n_light = np.minimum(na, nd)
    ni_eff_light = np.where(lighter == "p", p["ni_eff"], n["ni_eff"])
    ikf = is_ * (n_light / ni_eff_light) ** 2
    cjo = area_total * junction.depletion_capacitance(w0, eps)
    rs = p["resistance"] + n["resistance"] + device.contact_resistance

    # breakdown
    bv, e_peak, reach_p, reach_n = breakdown.breakdown_voltage(
        vbi, na, nd, p["thickness"], n["thickness"], np.where(linear, grading, 0.0), linear, eps, t,
        mat.ionization_coefficients, breakpoint=mat.IONIZATION_BREAKPOINT)
    findings.append(Finding(reach_p | reach_n,
                            "reach-through: the depletion region reaches the {side} contact before avalanche; "
                            "BV = {bv:.4g} V is lower than a thick junction's",
                            {"side": np.where(reach_p & reach_n, "p and n", np.where(reach_p, "p", "n")), "bv": bv}))
    findings.append(Finding(np.isnan(bv), "no avalanche breakdown below a peak field of 2e6 V/cm; BV is left "
                            "off the card", {}))
    with np.errstate(invalid="ignore"):
        tunnel = bv < 4.0 * eg
        findings.append(Finding(tunnel, "BV = {bv:.3g} V is below 4 Eg/q: tunnelling (Zener) breakdown dominates "
                                "there and the avalanche estimate does not apply", {"bv": bv}))
    findings.append(Finding(linear & (0.5 * np.sqrt(2 * eps * e_peak / (mat.Q * np.where(linear, grading, 1.0)))
                                      > np.minimum(p["thickness"], n["thickness"])),
                            "the graded junction's depletion region at breakdown is wider than a side: "
                            "reach-through is not modelled for graded junctions, so BV is an upper estimate", {}))
    findings.append(Finding(np.ones(len(device), bool),
                            "caution: breakdown is a physics estimate; derate it and confirm on measured devices", {}))

    ones = np.ones(len(device))
    params = {
        "IS": is_, "N": ones, "RS": rs, "CJO": cjo, "VJ": vj, "M": junction.grading_coefficient(linear),
        "FC": device.fc, "TT": tt, "BV": bv, "IBV": device.breakdown_current,
        "EG": eg - t * mat.bandgap_slope(t), "XTI": 3.0 * ones,
        "ISR": isr, "NR": 2.0 * ones, "IKF": ikf,
    }
    derived = {
        "temperature": t, "ni": ni, "bandgap": eg, "builtin_voltage": vbi,
        "depletion_width": w0, "depletion_width_reference": w_ref, "reference_bias": device.reference_bias,
        "junction_area": area_total, "bottom_area": device.area, "recombination_lifetime": tau_rec,
        "breakdown_peak_field": e_peak, "reach_through": reach_p | reach_n,
        "p": {k: p[k] for k in SIDE_QUANTITIES}, "n": {k: n[k] for k in SIDE_QUANTITIES},
    }
    derived["p"]["depletion_extent"] = xp0
    derived["n"]["depletion_extent"] = xn0
    return Result(device=device, params=params, derived=derived, findings=findings, sources=dict(mat.SOURCES))


def _junction_width(result, bias):
    d = result.device
    eps = d.relative_permittivity * materials.get("silicon").EPS0
    col = lambda a: np.asarray(a)[:, None]  # noqa: E731  (devices down, biases across)
    w, _, _ = junction.depletion_width(col(result.params["VJ"]), bias, col(result.derived["p"]["doping"]),
                                       col(result.derived["n"]["doping"]), col(d.grading), col(d.linear),
                                       col(eps))
    return w, eps


def predicted_current(result, vd):
    """The physics core's own low-injection current at junction voltage vd [A].

    Diffusion current IS (exp(vd/Vt) - 1) plus the Sah-Noyce-Shockley
    recombination current with the depletion width at vd,
    q ni W(vd) A / (2 tau) (exp(vd/2Vt) - 1). Valid at low injection, below
    the knee IKF and away from breakdown; what the SPICE card's diffusion and
    recombination terms approximate. Arrays broadcast as (devices, biases).

    Parameters
    ----------
    result : Result
    vd : array_like
        Junction voltage [V], below VJ.
    """
    vd = np.asarray(vd, float)[None, :]
    t = result.derived["temperature"][:, None]
    vt = materials.get("silicon").thermal_voltage(t)
    w, _ = _junction_width(result, vd)
    j_rec = recombination.recombination_saturation_density(
        result.derived["ni"][:, None], w, result.derived["recombination_lifetime"][:, None])
    return (result.params["IS"][:, None] * np.expm1(vd / vt)
            + result.derived["junction_area"][:, None] * j_rec * np.expm1(vd / (2 * vt)))


def predicted_capacitance(result, bias):
    """The physics core's depletion capacitance at a bias [F], eps A / W(bias).

    Arrays broadcast as (devices, biases); bias below VJ.
    """
    bias = np.asarray(bias, float)[None, :]
    w, eps = _junction_width(result, bias)
    return result.derived["junction_area"][:, None] * junction.depletion_capacitance(w, eps[:, None])

"""Make the invented "measured" I-V and C-V files of examples/measured/ (deterministic).

An invented demo scenario, not real measurements: the test-chip diode of
``testchip.toml`` is solved with modelgen's drift-diffusion solver
(:func:`modelgen.physics.driftdiffusion.solve` on
:func:`modelgen.structures.structure_for`) at three geometries and three
temperatures, and a three-wafer lot at 27 degC; then an instrument is
imitated: multiplicative noise of 1.5 % (one standard deviation), an
additive current offset noise of 20 fA (the noise floor), a current
compliance of 10 mA (points past it read the compliance, and the sweep stops
three points later), and the capacitance with 1 % noise. The seed is fixed,
so the files are the same bytes on every run.

At -40 degC the solver does not converge at reverse bias for this device
(noticed, left alone), so the -40 degC I-V is forward only and its C-V is
the closed-form depletion capacitance CJO / (1 - V/VJ)^M of the same
description (said in the file header).

Run from the repository root::

    python examples/measured/make_measurements.py
"""

from __future__ import annotations

import os
from dataclasses import replace

import numpy as np

from modelgen import corners, description, extraction, structures
from modelgen.physics import driftdiffusion as dd

HERE = os.path.dirname(os.path.abspath(__file__))
SEED = 20261202
COMPLIANCE = 10e-3      # [A]
NOISE = 0.015           # multiplicative current noise, one sigma
OFFSET = 20e-15         # additive current noise, one sigma [A]: the instrument's floor
CV_NOISE = 0.01         # multiplicative capacitance noise, one sigma
TEMPERATURES_C = (-40.0, 27.0, 125.0)
#: (label, width [um], length [um]): area = w * l, perimeter = 2 (w + l)
GEOMETRIES = (("50x50", 50.0, 50.0), ("100x100", 100.0, 100.0), ("20x500", 20.0, 500.0))
#: wafer -> (n doping [cm^-3], n lifetime [s]); the light (n) side differs by a few per cent
WAFERS = {"W01": (5.0e16, 1.0e-6), "W02": (5.2e16, 0.95e-6), "W03": (4.85e16, 1.06e-6)}
STEP = 0.025            # terminal-voltage step of the forward I-V [V]
REVERSE = np.array([-5.0, -4.0, -3.0, -2.0, -1.5, -1.0, -0.7, -0.5, -0.3, -0.2, -0.1])
CV_BIAS = np.round(np.linspace(-5.0, 0.3, 13), 6)

COMMON = """\
# Invented demo scenario, made by make_measurements.py (not real measurements): the test-chip
# diode of testchip.toml (abrupt p+n, p 1e19 cm^-3 10 ns 0.5 um, n 5e16 cm^-3 1 us 5 um, junction
# depth 0.5 um, contact resistance 2 ohm) solved by modelgen's drift-diffusion solver, with noise
# ({noise}).
# Currents: a {comp:g} mA compliance (points past it read the compliance; the sweep stops three
# points later). Seed {seed}. True values: TRUE_VALUES.md.
"""


def _device(path, temperature_c, width_um, length_um, n_doping=None, n_lifetime=None):
    """The description at one geometry, evaluated at one temperature (corners.replicate: values hold at 27 degC)."""
    dev = description.load(path)
    area = width_um * length_um * 1e-12
    perimeter = 2.0 * (width_um + length_um) * 1e-6
    dev = replace(dev, area=np.array([area]), perimeter=np.array([perimeter]))
    if n_doping is not None:
        dev = replace(dev, n=replace(dev.n, doping=np.array([n_doping * 1e6]),
                                     lifetime=np.array([n_lifetime])))
    return corners.replicate(dev, [temperature_c + 273.15]), area, perimeter


def _iv(dev, rng, reverse=True):
    """Terminal V [V] and measured I [A] of one sweep: reverse points, then forward to compliance."""
    result = extraction.derive(dev)
    s = structures.structure_for(result, 0)
    junction = np.arange(1, 41) * STEP
    fw = dd.solve(s, junction, capacitance=False)
    vt, it = np.asarray(fw.terminal_bias, float), fw.current
    top = np.arange(1, int(vt[-1] / STEP) + 1) * STEP  # a regular grid of terminal voltages
    cur = np.exp(np.interp(top, vt, np.log(it)))
    past = np.flatnonzero(cur >= COMPLIANCE)
    if len(past):
        top, cur = top[:past[0] + 3], cur[:past[0] + 3]
    v, i = top, cur
    if reverse:
        rv = dd.solve(s, REVERSE, mesh=dd.make_mesh(s, reverse_to=REVERSE.min()), capacitance=False)
        v, i = np.concatenate([REVERSE, top]), np.concatenate([rv.current, cur])
    measured = i * (1 + NOISE * rng.standard_normal(len(i))) + OFFSET * rng.standard_normal(len(i))
    at = (np.abs(i) >= COMPLIANCE) | (np.abs(measured) >= COMPLIANCE)
    measured[at] = np.sign(measured[at]) * COMPLIANCE * (1 + 2e-5 * rng.standard_normal(at.sum()))
    return v, measured


def _cv(dev, rng, closed_form=False):
    """Bias [V] and measured capacitance [F] (solver, or the closed-form depletion capacitance)."""
    result = extraction.derive(dev)
    if closed_form:
        p = result.params
        c = p["CJO"][0] / (1 - CV_BIAS / p["VJ"][0]) ** p["M"][0]
    else:
        s = structures.structure_for(result, 0)
        c = dd.solve(s, CV_BIAS, mesh=dd.make_mesh(s, reverse_to=CV_BIAS.min()), capacitance=True).capacitance
    return CV_BIAS, c * (1 + CV_NOISE * rng.standard_normal(len(c)))


def _write(name, header, columns, rows):
    text = header + ", ".join(columns) + "\n" + "".join(", ".join(r) + "\n" for r in rows)
    with open(os.path.join(HERE, name), "w", encoding="utf-8", newline="\n") as fh:
        fh.write(text)


def main():
    rng = np.random.default_rng(SEED)
    toml = os.path.join(HERE, "testchip.toml")
    iv_rows, cv_rows = [], []
    for tc in TEMPERATURES_C:
        for label, w, ln in GEOMETRIES:
            dev, area, perim = _device(toml, tc, w, ln)
            cold = tc < 0
            v, i = _iv(dev, rng, reverse=not cold)
            iv_rows += [(f"{x:.4g}", f"{y:.5g}", f"{tc:g}", f"{area * 1e12:g}", f"{perim * 1e6:g}")
                        for x, y in zip(v, i)]
            vc, c = _cv(dev, rng, closed_form=cold)
            cv_rows += [(f"{x * 1e3:.5g}", f"{y * 1e12:.5g}", f"{tc + 273.15:.2f}", f"{area * 1e12:g}",
                         f"{perim * 1e6:g}") for x, y in zip(vc, c)]
    noise = "1.5 % and 20 fA on the current, 1 % on the capacitance"
    head = COMMON.format(noise=noise, comp=COMPLIANCE * 1e3, seed=SEED)
    _write("testchip_iv.csv", head + "# Three geometries (50x50, 100x100, 20x500 um) at -40, 27, 125 degC; at -40 degC\n"
           "# forward only (the solver does not converge at reverse bias there).\n",
           ("V [V]", "I [A]", "T [degC]", "area [um^2]", "perimeter [um]"), iv_rows)
    _write("testchip_cv.csv", head + "# C-V of the same geometries; at -40 degC (233.15 K) the closed-form depletion\n"
           "# capacitance CJO / (1 - V/VJ)^M of the description instead of the solver.\n",
           ("V [mV]", "C [pF]", "T [K]", "area [um^2]", "perimeter [um]"), cv_rows)
    lot_iv, lot_cv = [], []
    for wafer, (nd, tau) in WAFERS.items():
        dev, area, perim = _device(toml, 27.0, 100.0, 100.0, nd, tau)
        v, i = _iv(dev, rng)
        lot_iv += [(wafer, f"{x * 1e3:.5g}", f"{y * 1e3:.5g}", f"{area * 1e6:g}", f"{perim * 1e3:g}")
                   for x, y in zip(v, i)]
        vc, c = _cv(dev, rng)
        lot_cv += [(wafer, f"{x:.4g}", f"{y * 1e15:.5g}") for x, y in zip(vc, c)]
    lot_head = head + ("# Three wafers at 27 degC, geometry 100x100 um; light-side (n) doping and lifetime per wafer:\n"
                       + "".join(f"#   {w}: n doping {nd:g} cm^-3, n lifetime {tau * 1e6:g} us\n"
                                 for w, (nd, tau) in WAFERS.items()))
    _write("lot_iv.csv", lot_head, ("wafer", "V [mV]", "I [mA]", "area [mm^2]", "perimeter [mm]"), lot_iv)
    _write("lot_cv.csv", lot_head, ("wafer", "V [V]", "C [fF]"), lot_cv)
    _true_values(toml)


def _true_values(toml):
    """TRUE_VALUES.md: what the files were made from, and the closed forms' card values for comparison."""
    out = ["# True values of the measured-data examples (an invented demo scenario)", "",
           f"Made by `make_measurements.py` (deterministic, seed {SEED}) from `testchip.toml`, solved by",
           "modelgen's drift-diffusion solver; not real measurements.", "",
           "## Device (all files)", "",
           "| quantity | value |", "|---|---|",
           "| profile | abrupt p+n |",
           "| p side (heavy) | doping 1e19 cm^-3, lifetime 10 ns, thickness 0.5 um |",
           "| n side (light) | doping 5e16 cm^-3, lifetime 1 us, thickness 5 um |",
           "| junction depth (sidewall height) | 0.5 um |",
           "| contact resistance | 2 ohm |",
           ("| geometries | " + ", ".join(f"{g} um (area {w * ln:g} um^2, perimeter {2 * (w + ln):g} um)"
                                          for g, w, ln in GEOMETRIES) + " |"),
           "| temperatures | " + ", ".join(f"{t:g} degC" for t in TEMPERATURES_C) + " |",
           (f"| current noise | {NOISE * 100:g} % (one sigma, multiplicative) and {OFFSET * 1e15:g} fA "
           "(one sigma, additive) |"),
           f"| capacitance noise | {CV_NOISE * 100:g} % (one sigma) |",
           f"| compliance | {COMPLIANCE * 1e3:g} mA |", "",
           "At -40 degC the solver did not converge at reverse bias for this device: that I-V is forward",
           "only and that C-V is the closed-form depletion capacitance below.", "",
           "## Wafers (`lot_iv.csv`, `lot_cv.csv`: 27 degC, 100x100 um)", "",
           "| wafer | n doping [cm^-3] | n lifetime [us] |", "|---|---|---|"]
    out += [f"| {w} | {nd:g} | {tau * 1e6:g} |" for w, (nd, tau) in WAFERS.items()]
    out += ["", "## The closed forms' card values for the same description (modelgen's estimate, for comparison)",
            "", "Totals over the junction area (bottom plus sidewall); not measured, not fitted.", "",
            "| T [degC] | geometry | IS [A] | N | ISR [A] | NR | RS [ohm] | CJO [F] | VJ [V] | M |",
            "|---|---|---|---|---|---|---|---|---|---|"]
    for tc in TEMPERATURES_C:
        for label, w, ln in GEOMETRIES:
            dev, _, _ = _device(toml, tc, w, ln)
            p = {k: float(v[0]) for k, v in extraction.derive(dev).params.items()}
            out.append(f"| {tc:g} | {label} | {p['IS']:.4g} | {p['N']:.4g} | {p['ISR']:.4g} | {p['NR']:.4g} | "
                       f"{p['RS']:.4g} | {p['CJO']:.4g} | {p['VJ']:.4g} | {p['M']:.4g} |")
    with open(os.path.join(HERE, "TRUE_VALUES.md"), "w", encoding="utf-8", newline="\n") as fh:
        fh.write("\n".join(out) + "\n")


if __name__ == "__main__":
    main()

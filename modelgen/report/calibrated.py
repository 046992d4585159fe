"""The calibration report: measured points, the fitted physics and its card, residuals, fitted values.

The description is calibrated to the measured I-V and C-V as ``modelgen calibrate`` does
(:func:`modelgen.calibration.calibrate`); the calibrated physics is then evaluated at each measured
condition (temperature, area, perimeter) with the calibration's own forward model
(:func:`modelgen.calibration.terminal_current`, :func:`modelgen.calibration.capacitance`), and the card
derived from it at that condition through the evaluator of the dialect's simulator.
"""

from __future__ import annotations

import types

import numpy as np

from .. import calibration, cards, description, extraction, measurements, targets
from ..constants import ZERO_CELSIUS
from ..errors import InputError
from ..spice import evaluator
from . import panels
from .panels import legend, new_figure, plot

#: Points of each model curve.
POINTS = 120


def _conditions(iv, cv):
    """Distinct (T, area, perimeter) of all points of the curves, the model at each, and each point's row."""
    curves = [(c, np.ones(len(c), bool)) if c is not None else (None, None) for c in (iv, cv)]
    return calibration._conditions(curves)


def report(path, iv_file=None, cv_file=None, *, dialect="ngspice", free=None, progress=None):
    """The calibration report of the description at ``path`` against ``iv_file`` / ``cv_file``."""
    from . import Report, Table

    try:
        device, _ = description.load_with_inputs(path)
    except InputError as e:
        raise e.located(file=path) from None
    iv = measurements.read_curve(iv_file, "iv") if iv_file else None
    cv = measurements.read_curve(cv_file, "cv") if cv_file else None
    keys = [k.strip() for k in free.split(",") if k.strip()] if free else None
    if progress:
        progress("calibrating the physics to the measurements")
    try:
        cal = calibration.calibrate(device, iv, cv, keys)
    except InputError as e:
        raise (e if e.file else e.located(file=path)) from None
    conds, index = _conditions(iv, cv)
    res = extraction.derive(calibration._rows(cal.device, [], np.zeros((1, 0)), conds))
    sim = targets.get(dialect).equations
    card_of = [dict(cards.card_values(res, c, dialect)[0]) for c in range(len(conds))]
    name = str(device.name[0])
    figs, model = [], {}
    if progress:
        progress("drawing the figures")
    for kind, curve, idx in (("iv", iv, index[0]), ("cv", cv, index[1])):
        if curve is None:
            continue
        fig, axes = new_figure(2, 1, size=(6.4, 5.2), gridspec_kw={"height_ratios": [3, 1.4]})
        ax, rax = axes[0, 0], axes[1, 0]
        scale = 1.0 if kind == "iv" else 1e12
        y = np.abs(curve.y) if kind == "iv" else curve.y * scale
        plot(ax, "measurement", curve.v[curve.use], y[curve.use], "measured")
        if (~curve.use).any():
            plot(ax, "excluded", curve.v[~curve.use], y[~curve.use], "measured, left out (compliance, floor)")
        model[kind] = []
        for c in np.unique(idx):
            pts = idx == c
            v = np.linspace(curve.v[pts].min(), curve.v[pts].max(), POINTS)
            rows = np.full(len(v), c)
            with np.errstate(all="ignore"):
                if kind == "iv":
                    phys = calibration.terminal_current(res, rows, v)[0]
                    crd = evaluator.dc_current(card_of[c], v, sim, gmin=0.0)[0]
                else:
                    phys = calibration.capacitance(res, rows, v)
                    crd = evaluator.capacitance(card_of[c], v, sim, gmin=0.0)
            first = c == np.unique(idx)[0]
            plot(ax, "physics", v, np.abs(phys) * scale, "calibrated physics" if first else "_")
            plot(ax, "card", v, np.abs(crd) * scale, f"its card in {sim}'s equations" if first else "_")
            model[kind].append((int(c), v, phys, crd))
        # residuals of the calibrated physics at the measured points used
        use = curve.use & np.isfinite(curve.y)
        with np.errstate(all="ignore"):
            at = (calibration.terminal_current(res, idx[use], curve.v[use])[0] if kind == "iv"
                  else calibration.capacitance(res, idx[use], curve.v[use]))
            r = 100 * (at / curve.y[use] - 1)
        plot(rax, "physics", curve.v[use], r, "calibrated physics / measured - 1").set_linestyle("none")
        rax.lines[-1].set_marker(".")
        rax.axhline(0.0, color="#777777", linewidth=0.8)
        rax.set_ylabel("residual [%]")
        rax.set_xlabel("bias V [V]")
        model[kind + "_residual"] = (curve.v[use], r)
        if kind == "iv":
            ax.set_yscale("log")
            ax.set_ylabel("current |I| [A]")
            ax.set_title(f"{name}: measured I-V and the calibrated physics")
        else:
            ax.set_ylabel("capacitance C [pF]")
            ax.set_title(f"{name}: measured C-V and the calibrated physics")
        ax.set_xlabel("bias V [V]")
        legend(ax, loc="best")
        conds_text = "; ".join(f"{(t if t > 0 else float(device.temperature[0])) - ZERO_CELSIUS:g} degC"
                               + (f", area {a * 1e12:g} um^2" if a > 0 else "")
                               + (f", perimeter {p * 1e6:g} um" if p > 0 else "")
                               for t, a, p in conds[np.unique(idx)])
        figs.append(panels.Panel(f"calibration_{kind}", "Measured I-V" if kind == "iv" else "Measured C-V", fig,
                                 f"One model curve per measured condition ({conds_text}). The card is the "
                                 "calibrated description's closed-form card at that condition."))
    fitted = [["key", "value (SI)", "standard error", "relative"]]
    for k, f in cal.fitted.items():
        rel = f["stderr"] / abs(f["value"]) if f["value"] else float("inf")
        fitted.append([k, f"{f['value']:.5g}", f"{f['stderr']:.3g}", f"{100 * rel:.3g} %"])
    ck = cal.correlation["keys"]
    # numbered columns: the keys' names would make the table wider than a printed page
    corr = [["", *(f"({j + 1})" for j in range(len(ck)))]] + [
        [f"({j + 1}) {a}", *(f"{x:+.3f}" for x in row)]
        for j, (a, row) in enumerate(zip(ck, cal.correlation["matrix"]))]
    regions = [["region", "points", "rms", "worst"]] + [
        [k, str(v["points"]), f"{100 * v['rms']:.3g} %", f"{100 * v['worst']:+.3g} %"]
        for k, v in cal.residuals.items() if "points" in v]
    notes = [("warning", w) for w in cal.warnings] + [("note", m) for m in
                                                     [*(iv.notes if iv else ()), *(cv.notes if cv else ()),
                                                      *cal.notes]]
    card = cards.card(extraction.derive(cal.device), 0, dialect=dialect)
    inputs = [str(path)] + [str(f) for f in (iv_file, cv_file) if f]
    return Report(kind="calibration", title=f"{name}: calibration report", inputs=inputs, panels=figs,
                  tables=[Table("Fitted values", fitted, "Standard errors from the Jacobian (delta method)."),
                          Table("Correlations of the fitted values", corr),
                          Table("Residuals per region", regions, "Relative, model against measured.")],
                  notes=notes, card=card, card_title=f"The calibrated card ({dialect} dialect, nominal conditions)",
                  settings=f"dialect {dialect}; free keys {', '.join(cal.fitted)}",
                  caution="A calibration is a physics estimate from the measurements given: confirm it on further "
                          "devices.",
                  data=types.SimpleNamespace(calibration=cal, result=res, conditions=conds, index=index,
                                             cards=card_of, model=model, iv=iv, cv=cv))

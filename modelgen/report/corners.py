"""The corners report: IS, forward voltage, leakage, C(0 V) and BV against temperature.

The physics is evaluated at each corner (:func:`modelgen.corners.run`); the single card fitted over
them is rescaled to each temperature by its simulator's own temperature equations
(:func:`modelgen.spice.evaluator.adjusted`), as the simulator will do, and the residual is the card's
value over the physics' at each corner, less one.
"""

from __future__ import annotations

import types

import numpy as np

from .. import cards, corners, description, targets
from ..constants import ZERO_CELSIUS
from ..errors import InputError
from ..extraction import predicted_capacitance
from ..spice import evaluator
from ..spread import forward_voltage
from . import panels
from .panels import legend, new_figure, plot

#: Forward current of the forward-voltage panel [A].
VF_CURRENT = 1e-3
#: Points of the card's curves over the temperature range.
GRID = 41
_DC = ("IS", "N", "ISR", "NR", "VJ", "M", "IKF", "RS")


def card_at(card, temperatures_c, simulator):
    """What the simulator makes of ``card`` at each temperature: ``{quantity: array}``.

    IS (bottom plus sidewall, IS + JSW PJ), the forward voltage at :data:`VF_CURRENT`
    (:func:`modelgen.spread.forward_voltage` of the rescaled card), the reverse current at ``reverse_bias``
    (``leakage``, no GMIN), C(0 V) (depletion only) and BV.
    """
    t_c = np.asarray(temperatures_c, float)
    rows = [evaluator.adjusted(card, float(tc), simulator) for tc in t_c]
    is_total = np.array([a["IS"] + a.get("JSW", 0.0) * (a.get("PJ", 0.0) if "PJ" in card else 0.0) for a in rows])
    cols = {k: np.array([float(a.get(k, 0.0)) for a in rows]) for k in _DC}
    cols["IS"] = is_total
    with np.errstate(all="ignore"):
        vf = forward_voltage(cols, t_c + ZERO_CELSIUS, VF_CURRENT, simulator)
        c0 = np.array([evaluator.capacitance({**card, "TT": 0.0, "RS": 0.0}, np.array([0.0]), simulator, gmin=0.0,
                                             temperature_c=float(tc))[0] for tc in t_c])
    return {"IS": is_total, "VF": vf, "C0": c0, "BV": np.array([float(a["BV"]) for a in rows])}


def card_leakage(card, temperatures_c, bias, simulator):
    """The card's reverse current at ``bias`` [A] (positive, no GMIN) at each temperature [degC]."""
    return np.array([-float(evaluator.dc_current(card, np.array([bias]), simulator, gmin=0.0,
                                                 temperature_c=float(tc))[0][0]) for tc in temperatures_c])


def physics_at(result, simulator):
    """The physics at each corner row of ``result``: the same quantities as :func:`card_at`, and leakage."""
    p = {k: np.asarray(result.params[k], float) for k in _DC}
    t = np.asarray(result.derived["temperature"], float)
    with np.errstate(all="ignore"):
        vf = forward_voltage(p, t, VF_CURRENT, simulator)
    return {"IS": p["IS"], "VF": vf, "C0": predicted_capacitance(result, [0.0])[:, 0],
            "BV": np.asarray(result.params["BV"], float), "leakage": np.asarray(result.derived["leakage"], float)}


_QUANTITIES = (("IS", "saturation current IS", "A", True),
               ("VF", f"forward voltage at {VF_CURRENT * 1e3:g} mA", "V", False),
               ("leakage", "reverse leakage", "A", True),
               ("C0", "capacitance at 0 V (CJO with the sidewall)", "F", False),
               ("BV", "breakdown voltage BV (an estimate: derate and confirm)", "V", False))


def report(path, temperatures_c, *, dialect="ngspice", progress=None):
    """The corners report of the description at ``path`` over ``temperatures_c`` [degC]."""
    from . import Report, Table

    try:
        device, raw = description.load_with_inputs(path)
        temps = corners.corner_temperatures(list(temperatures_c))
        run = corners.run(device, temps, dialect)
        text = corners.card_text(run, inputs=raw)
    except InputError as e:
        raise e.located(file=path) if not e.file and e.key != "--at" else e from None
    sim = targets.get(dialect).equations
    card = dict(cards.card_values(run.result, run.nominal, dialect, overrides=run.fit.values)[0])
    corner_t = np.asarray(run.evaluated, float)
    grid = np.union1d(np.linspace(corner_t.min(), corner_t.max(), GRID), corner_t)
    bias = float(run.result.derived["leakage_bias"][run.nominal])
    phys = physics_at(run.result, sim)
    phys_grid = physics_at(corners.evaluate(device, corners.kelvin(grid)), sim)  # the same physics between corners
    on_grid = card_at(card, grid, sim) | {"leakage": card_leakage(card, grid, bias, sim)}
    at_corners = card_at(card, corner_t, sim) | {"leakage": card_leakage(card, corner_t, bias, sim)}
    if progress:
        progress("drawing the figures")
    figs = []
    name = str(device.name[0])
    for key, label, unit, log in _QUANTITIES:
        if not np.all(np.isfinite(phys[key])):
            continue
        fig, axes = new_figure(2, 1, size=(6.4, 4.6), sharex=True, gridspec_kw={"height_ratios": [3, 1.3]})
        ax, res = axes[0, 0], axes[1, 0]
        plot(ax, "physics", grid, phys_grid[key], "physics")
        line = plot(ax, "physics", corner_t, phys[key], "physics at the corners")
        line.set_linestyle("none")
        line.set_marker("o")
        plot(ax, "card", grid, on_grid[key], f"the single fitted card in {sim}'s temperature equations")
        if log:
            ax.set_yscale("log")
        ax.set_ylabel(f"{key} [{unit}]")
        ax.set_title(f"{name}: {label}")
        legend(ax, loc="best")
        with np.errstate(all="ignore"):
            if key == "leakage":  # decades apart: a percentage would read -100 % everywhere
                r, what = np.log10(at_corners[key] / phys[key]), "log10(card / physics)"
            else:
                r, what = 100 * (at_corners[key] / phys[key] - 1), "card / physics - 1 [%]"
        plot(res, "card", corner_t, r, what).set_marker("s")
        res.axhline(0.0, color="#777777", linewidth=0.8)
        res.set_ylabel("residual [decades]" if key == "leakage" else "residual [%]")
        res.set_xlabel("temperature [degC]")
        caption = f"Corners at {', '.join(f'{t:g}' for t in corner_t)} degC (nominal {run.evaluated[run.nominal]:g})."
        if key == "leakage":
            caption += (f" At {bias:g} V; the physics' leakage includes the depletion region's generation, which a "
                        "level-1 card does not carry (modelgen card --form subckt adds it at TNOM).")
        figs.append(panels.Panel(f"corners_{key}", label[0].upper() + label[1:], fig, caption))
    fit_rows = [["parameter", "fitted value"]] + [[k, cards.format_number(v)] for k, v in run.fit.values.items()]
    err_rows = [["quantity", "worst error over the corners"]] + [[k, f"{100 * v:.3g} %"]
                                                                for k, v in run.fit.worst_error.items()]
    notes = [("warning", w.removeprefix("warning: ")) for w in run.warnings()]
    notes.append(("note", " ".join(line.strip() for line in run.fit_lines())))
    return Report(kind="corners", title=f"{name}: temperature corners report", inputs=[str(path)], panels=figs,
                  tables=[Table("Fitted temperature parameters", fit_rows),
                          Table("Worst error of the single card", err_rows)],
                  notes=notes, card=text, card_title=f"The fitted card ({dialect} dialect)",
                  settings=f"dialect {dialect}; corners {', '.join(f'{t:g}' for t in temps)} degC",
                  data=types.SimpleNamespace(run=run, card=card, physics=phys, physics_grid=phys_grid, grid=grid,
                                             on_grid=on_grid,
                                             at_corners=at_corners, corner_t=corner_t))

"""The device report: one description's physics, solver, card and simulator on common axes."""

from __future__ import annotations

import os

import numpy as np

from .. import calibration, cards, description, extraction, numeric, structures, targets
from ..constants import EPS0, Q, ZERO_CELSIUS, thermal_voltage
from ..errors import InputError
from ..physics import diffusion, junction
from ..spice import evaluator
from . import panels
from .panels import legend, new_figure, plot, shade_window

#: Forward terminal voltages of the closed forms and the card [V]: 5 mV steps up to the window's top.
FORWARD_STEP = 0.005
#: Reverse points of the closed forms and the card.
REVERSE_POINTS = 60
#: Junction voltage of the excess-carrier panel when none is given [V], or this share of VJ where lower.
PROFILE_BIAS = 0.6
PROFILE_SHARE = 0.75
#: Forward sweep step of the ngspice run [V] (ngspice's DC sweep is evenly spaced).
SIMULATOR_STEP = 0.025
#: GMIN of the ngspice run [S]: far below ngspice's default 1e-12 S, whose GMIN V would hide a card's reverse
#: current of IS (picoamperes at a few volts) behind the conductance the simulator adds for convergence.
GMIN = 1e-18


class Device:
    """What the device panels show, computed once (all SI arrays); see :func:`compute`."""


def _card_of(result, dialect, fitted):
    """The card's parameters as the dialect carries them (the fitted ones where the card is fitted)."""
    return dict(cards.card_values(result, 0, dialect, fitted.params if fitted else None)[0])


def card_from_file(card_file, name, section=None, instance=None):
    """The diode card of ``card_file`` a device report shows: ``(Card, its text, dialect from the header or None)``.

    The card named ``name`` (the description's), or the file's only diode card; in a library with sections,
    the one in ``section``. A scalable card (a ``.model`` or a subcircuit) is taken at ``instance`` =
    (bottom area [m^2], perimeter [m]), the description's geometry
    (:func:`modelgen.spice.check.diode_cards`). InputError (naming the file) when none or several fit.
    """
    from ..cards import reader
    from ..spice import check

    text = reader.read_limited(card_file)
    found = check.diode_cards(text, file=card_file, instance=instance)  # InputError naming file, line and key
    named = [c for c in found if c.name.lower() == name.lower()] or (found if len(found) == 1 else [])
    if section is not None:
        named = [c for c in named if (c.section or "").lower() == section.lower()]
    if len(named) != 1:
        have = ", ".join(f"{c.name}" + (f" (section {c.section})" if c.section else "") for c in found[:8])
        why = "several diode cards" if len(named) > 1 else "no diode card"
        hint = "give --section" if len(named) > 1 else "name the card as the description does"
        raise InputError(f"{why} named {name} to report{' in section ' + section if section else ''}; "
                         f"the file has: {have}; {hint}", file=card_file)
    card = named[0]
    lines = reader.split_lines(text)
    end = card.line
    while end < len(lines) and lines[end].lstrip().startswith("+"):
        end += 1
    headers = [d for n, d in check.dialect_headers(text) if n < card.line]
    return card, "\n".join(lines[card.line - 1:end]) + "\n", (headers[-1] if headers else None)


def compute(path, *, dialect="ngspice", physics="closed", window=None, profile_bias=None,
            simulate=True, progress=None, card_file=None, section=None):
    """Everything the device report plots, for the description at ``path``.

    Parameters
    ----------
    path : str
        A device description (TOML).
    dialect : str
        Whose card and whose equations (a registered target).
    physics : {'closed', 'numeric'}
        The card from the closed forms or fitted to the solver (as ``modelgen card --physics``);
        diffused and tabulated profiles always take the solver's.
    window : numeric.Window, optional
        Default: the description's ``[fit]`` table.
    profile_bias : float, optional
        Junction voltage of the excess-carrier profile [V]; default :data:`PROFILE_BIAS`, or
        :data:`PROFILE_SHARE` of VJ where that is lower.
    simulate : bool
        Run ngspice on the card when it is installed.
    card_file, section : str, optional
        Show this card file's card (:func:`card_from_file`) instead of the one derived from the
        description: the report then compares a given card (hand-edited, fitted elsewhere, from an older
        run) with the physics of the description; its dialect is the one its header names, else ``dialect``.

    Returns
    -------
    Device
        Attributes: ``result``, ``raw``, ``dialect``, ``window``, ``sweep`` and ``fitted`` (None where the
        solver failed: ``solver_error``), ``card`` (dict), ``card_text``, ``forward_v``, ``reverse_v``,
        ``cv_v``, the closed forms' ``physics_forward``/``physics_reverse``/``physics_cv``, the card's
        ``card_forward``/``card_reverse``/``card_cv`` (the evaluator of the dialect's simulator),
        ``spice`` (ngspice's own run, or None with ``spice_note``), the solver's ``field`` and
        ``excess`` solutions, ``errors`` (per region).
    """
    dev = Device()
    note = progress or (lambda text: None)
    try:
        device, raw = description.load_with_inputs(path)
        result = extraction.derive(device)
        win = window if window is not None else numeric.Window.from_device(result.device, 0)
    except InputError as e:
        raise e.located(file=path) from None
    sim = targets.get(dialect).equations  # the simulator whose equations stand for the dialect
    dev.path, dev.result, dev.raw, dev.dialect, dev.window, dev.simulator = path, result, raw, dialect, win, sim
    dev.name = str(result.device.name[0])
    dev.temperature = float(result.derived["temperature"][0])
    vj = float(result.params["VJ"][0])
    dev.profile_bias = (round(min(PROFILE_BIAS, PROFILE_SHARE * vj), 3) if profile_bias is None
                        else float(profile_bias))
    if not 0.0 < dev.profile_bias < vj:
        raise InputError(f"the excess-carrier profile's junction voltage must lie between 0 V and the junction "
                         f"potential VJ = {vj:.4g} V, got {dev.profile_bias:g} V", key="--bias")
    geometry = (float(result.derived["bottom_area"][0]), float(result.device.perimeter[0]))
    given = card_from_file(card_file, dev.name, section, geometry) if card_file is not None else None  # first
    numeric_path = physics == "numeric" or not bool(structures.closed_form_holds(result)[0])
    note("solving the device with the drift-diffusion solver")
    from ..physics.driftdiffusion import SolverError

    dev.sweep = dev.fitted = None
    dev.solver_error = None
    try:
        dev.sweep = numeric.sweep(result, 0, win)
        dev.fitted = numeric.fit(result, 0, dev.sweep, dialect)
    except SolverError as e:
        dev.solver_error = str(e)
    if numeric_path and dev.fitted is None:
        raise InputError(f"the card needs the numerical solver, which failed: {dev.solver_error}", file=path)
    fitted = dev.fitted if numeric_path else None
    dev.card_physics = "fitted to the solver" if fitted else "closed forms"
    dev.card = _card_of(result, dialect, fitted)
    dev.card_parsed = None
    dev.card_notes = []
    if given is not None:
        card, text, named = given
        if named and named != dialect:
            dialect = dev.dialect = named
            sim = dev.simulator = targets.get(dialect).equations
        dev.card_parsed = card
        dev.card = dict(card.params)
        dev.card_text = text
        dev.card_physics = f"card file {os.path.basename(str(card_file))}"
        tnom = card.params.get("TNOM")
        if tnom is not None and abs(tnom + ZERO_CELSIUS - dev.temperature) > 0.01:
            dev.card_notes.append(("warning", f"the card's TNOM ({tnom:g} degC) is not the description's "
                                   f"temperature ({dev.temperature - ZERO_CELSIUS:g} degC): the card is drawn at "
                                   "its TNOM, the physics at the description's temperature"))
        if card.source is not None or card.scaling is not None or card.wrapper:
            dev.card_notes.append(("note", "the card's subcircuit (its generation source or scaling) is not drawn: "
                                   "the diode card alone, as its instance sees it"))
    elif fitted:
        dev.card_text = cards.card(numeric.card_result(result, 0, fitted), 0, dialect=dialect, inputs=raw,
                                   overrides=fitted.params, extra=list(numeric.header_lines(dev.sweep, fitted)))
    else:
        dev.card_text = cards.card(result, 0, dialect=dialect, inputs=raw)

    # the bias grids: forward to the window's top current (or the solver's last point), reverse to its bias
    top = _top_voltage(dev)
    dev.forward_v = np.round(np.arange(1, int(np.ceil(top / FORWARD_STEP)) + 1) * FORWARD_STEP, 12)
    dev.reverse_v = np.linspace(win.reverse_bias, 0.0, REVERSE_POINTS + 1)[:-1]
    dev.cv_v = np.linspace(win.capacitance_low, win.capacitance_high, 41)
    rows = np.zeros(len(dev.forward_v), int)
    dev.physics_forward = calibration.terminal_current(result, rows, dev.forward_v)[0]
    dev.physics_reverse = calibration.terminal_current(result, np.zeros(len(dev.reverse_v), int), dev.reverse_v)[0]
    dev.physics_cv = extraction.predicted_capacitance(result, dev.cv_v)[0]
    with np.errstate(all="ignore"):
        dev.card_forward = evaluator.dc_current(dev.card, dev.forward_v, sim, gmin=0.0)[0]
        dev.card_reverse = evaluator.dc_current(dev.card, dev.reverse_v, sim, gmin=0.0)[0]
        dev.card_cv = evaluator.capacitance(dev.card, dev.cv_v, sim, gmin=0.0)
    dev.errors = {"card": numeric.errors_of(dev.card, dev.sweep, dialect) if dev.sweep else {},
                  "closed": dev.fitted.closed_errors if dev.fitted else {},
                  "fitted": dev.fitted.errors if dev.fitted else {}}
    dev.spice, dev.spice_note = None, ""
    if simulate:
        note("running ngspice on the card")
        dev.spice, dev.spice_note = _ngspice(dev, top)
    else:
        dev.spice_note = "ngspice not run (--no-simulator)"
    dev.solution = _solver_profiles(dev)
    return dev


def _top_voltage(dev):
    """The forward plot's top terminal voltage: the solver's last point, else the card's at the top current."""
    if dev.sweep is not None and len(dev.sweep.forward_bias):
        return float(min(dev.sweep.forward_bias[-1], dev.window.voltage_cap))
    v = np.arange(1, int(dev.window.voltage_cap / FORWARD_STEP) + 1) * FORWARD_STEP
    i = evaluator.dc_current(dev.card, v, dev.simulator, gmin=0.0)[0]
    past = np.flatnonzero(i >= dev.window.current_high)
    return float(v[past[0]] if len(past) else v[-1])


def _ngspice(dev, top):
    """ngspice's own DC and AC run of the card's text (read back and rebuilt as ``check`` does)."""
    from ..cards import reader
    from ..spice import check, ngspice
    from ..spice.process import SimulatorError

    if dev.dialect not in ("ngspice", "spice3"):
        return None, f"ngspice not run: the {dev.dialect} dialect is not meant for it"
    if not ngspice.available():
        return None, "ngspice not installed (Debian package: ngspice): no simulator curve"
    parsed = [dev.card_parsed] if dev.card_parsed is not None else [c for c in reader.read_cards(dev.card_text)
                                                                     if c.type == "D"]
    library, labels = check.deck_cards(parsed)
    stop = SIMULATOR_STEP * np.ceil(top / SIMULATOR_STEP)
    start = SIMULATOR_STEP * np.floor(dev.window.reverse_bias / SIMULATOR_STEP)
    volts = np.round(np.arange(start, stop + 1e-9, SIMULATOR_STEP), 9)
    temperature = parsed[0].params.get("TNOM", dev.temperature - ZERO_CELSIUS)
    try:
        out = ngspice.simulate(library, labels, volts, dev.cv_v[::4], rs={labels[0]: parsed[0].params.get("RS", 0)},
                               temperature_c=temperature, gmin=GMIN)[labels[0]]
    except SimulatorError as e:
        return None, f"ngspice failed: {e}"
    return {"V": np.asarray(out["voltage"]), "I": np.asarray(out["current"]), "CV": dev.cv_v[::4],
            "C": np.asarray(out["capacitance"])}, f"ngspice run on the card text (GMIN {GMIN:g} S)"


def _solver_profiles(dev):
    """The solver's solution at the profile bias and the reverse bias (None where it fails)."""
    from ..physics import driftdiffusion

    try:
        s = structures.structure_for(dev.result, 0)
        return driftdiffusion.solve(s, [dev.profile_bias, dev.window.reverse_bias], capacitance=False)
    except (driftdiffusion.SolverError, ValueError):
        return None


# --------------------------------------------------------------------------- panels

def _forward_panel(dev):
    fig, axes = new_figure()
    ax = axes[0, 0]
    v = dev.forward_v
    plot(ax, "physics", v, np.abs(dev.physics_forward), "physics: closed forms")
    if dev.sweep is not None:
        plot(ax, "solver", dev.sweep.forward_bias, np.abs(dev.sweep.forward_current), "physics: numerical solver")
    plot(ax, "card", v, np.abs(dev.card_forward), f"card ({dev.card_physics}) in {dev.simulator} equations")
    if dev.spice is not None:
        m = dev.spice["V"] > 1e-6
        plot(ax, "simulator", dev.spice["V"][m], np.abs(dev.spice["I"][m]), "ngspice's run of the card")
    else:
        ax.plot([], [], " ", label=dev.spice_note)
    if dev.sweep is not None and dev.sweep.in_window.any():
        fv = dev.sweep.forward_bias[dev.sweep.in_window]
        shade_window(ax, fv.min(), fv.max(), "fit window")
    ax.set_yscale("log")
    low = np.abs(dev.card_forward)[0]
    if np.isfinite(low) and low > 0:
        ax.set_ylim(bottom=low / 10)
    ax.set_xlabel("forward voltage V [V]")
    ax.set_ylabel("current |I| [A]")
    ax.set_title(f"{dev.name}: forward I-V at {dev.temperature - ZERO_CELSIUS:g} degC")
    legend(ax, loc="lower right")
    order = [r for r in (*numeric.FORWARD_REGIONS, "reverse", "capacitance") if r in dev.errors["card"]]
    shown = " (shown)"
    fitted = dev.card_physics == "fitted to the solver"
    given = dev.card_parsed is not None  # a card file's card: its own column first
    table = [["region"] + ([f"{dev.card_physics}{shown}"] if given else [])
             + ["closed-form card" + ("" if fitted or given else shown),
                "card fitted to the solver" + (shown if fitted else "")]]
    columns = ([dev.errors["card"]] if given else []) + [dev.errors["closed"], dev.errors["fitted"]]
    for r in order:
        table.append([r] + [f"{100 * e[r]:.3g} %" if r in e else "" for e in columns])
    if len(table) == 1:
        table.append(["(no solver points)", "the solver did not run: " + (dev.solver_error or "n/a"), ""])
    caption = ("Worst error against the numerical solver inside the fit window (shaded), |I_card / I_solver - 1|, "
               "of the closed-form card and of the card fitted to the solver (modelgen card --physics numeric); "
               "capacitance against the solver's C-V. " + (dev.spice_note + "." if dev.spice_note else ""))
    return panels.Panel("forward_iv", "Forward I-V", fig, caption, table)


def _reverse_panel(dev):
    fig, axes = new_figure()
    ax = axes[0, 0]
    plot(ax, "physics", dev.reverse_v, np.abs(dev.physics_reverse), "physics: closed forms (with generation)")
    if dev.sweep is not None:
        plot(ax, "solver", dev.sweep.reverse_bias, np.abs(dev.sweep.reverse_current), "physics: numerical solver")
    plot(ax, "card", dev.reverse_v, np.abs(dev.card_reverse), f"card in {dev.simulator} equations (no GMIN)")
    if dev.spice is not None:
        m = dev.spice["V"] < -1e-6
        plot(ax, "simulator", dev.spice["V"][m], np.abs(dev.spice["I"][m]), f"ngspice's run (GMIN {GMIN:g} S)")
    else:
        ax.plot([], [], " ", label=dev.spice_note)
    ax.set_yscale("log")
    ax.set_xlabel("bias V [V]")
    ax.set_ylabel("reverse current |I| [A]")
    ax.set_title(f"{dev.name}: reverse I-V")
    legend(ax, loc="best")
    return panels.Panel("reverse_iv", "Reverse I-V", fig,
                        "A level-1 card carries IS only in reverse; the physics adds the depletion region's "
                        "generation current (modelgen card --form subckt carries it).")


def _cv_panel(dev):
    fig, axes = new_figure()
    ax = axes[0, 0]
    f = 1e12
    plot(ax, "physics", dev.cv_v, dev.physics_cv * f, "physics: depletion approximation")
    if dev.sweep is not None:
        plot(ax, "solver", dev.sweep.cv_bias, dev.sweep.capacitance * f, "physics: numerical solver")
    plot(ax, "card", dev.cv_v, dev.card_cv * f, f"card in {dev.simulator} equations")
    if dev.spice is not None:
        plot(ax, "simulator", dev.spice["CV"], dev.spice["C"] * f, "ngspice's run of the card (AC, 1 MHz)")
    else:
        ax.plot([], [], " ", label=dev.spice_note)
    ax.set_xlabel("bias V [V]")
    ax.set_ylabel("capacitance C [pF]")
    ax.set_title(f"{dev.name}: C-V")
    legend(ax, loc="upper left")
    return panels.Panel("cv", "C-V", fig, "Small-signal capacitance; the card's includes TT dI/dV in forward bias.")


def _extents(dev, bias):
    """Depletion extents into the p and n side at a bias [m] (depletion approximation)."""
    r = dev.result
    d = r.device
    _, xp, xn = junction.depletion_width(r.params["VJ"][0], bias, r.derived["p"]["doping"][0],
                                         r.derived["n"]["doping"][0], d.grading[0], d.linear[0],
                                         d.relative_permittivity[0] * EPS0)
    return float(xp), float(xn)


def excess_densities(dev, bias):
    """The exact finite-width excess minority density in each neutral region at junction voltage ``bias``.

    Returns ``{side: (x, density)}``: x the distance from the metallurgical junction [m] (p side negative),
    density [m^-3] = ni_eff^2 / N (exp(V/Vt) - 1) u(x)/u(0)
    (:func:`modelgen.physics.diffusion.excess_profile`); the neutral width at that bias is the reference
    neutral width less the change of the depletion extent.
    """
    r = dev.result
    vt = float(thermal_voltage(r.derived["temperature"][0]))
    extents = dict(zip("pn", _extents(dev, bias)))
    out = {}
    for side, sign in (("p", -1.0), ("n", 1.0)):
        s = {k: float(v[0]) for k, v in r.derived[side].items() if np.asarray(v).dtype.kind == "f"}
        width = s["neutral_width"] + s["depletion_extent"] - extents[side]
        x = np.linspace(0.0, width, 120)
        u0 = s["ni_eff"] ** 2 / s["doping"] * np.expm1(bias / vt)
        u = u0 * diffusion.excess_profile(x, width, s["diffusion_length"], s["diffusivity"], s["contact_velocity"])
        out[side] = (sign * (extents[side] + x), u)
    return out


def _profile_panel(dev):
    fig, axes = new_figure(1, 2, size=(7.6, 3.6))
    data = excess_densities(dev, dev.profile_bias)
    sol = dev.solution
    for ax, side in zip(axes[0], ("p", "n")):
        x, u = data[side]
        plot(ax, "physics", x * 1e6, u * 1e-6, "physics: exact finite-width solution")
        if sol is not None:
            m = sol.mesh
            xj = m.x[m.junction]
            eq = np.exp(m.equilibrium[:, 1 if side == "p" else 2]) * m.c0
            dens = (sol.n if side == "p" else sol.p)[0] - eq
            sel = m.x <= xj if side == "p" else m.x >= xj
            xs = (m.x[sel] - xj) * 1e6
            inside = (xs <= x.max() * 1e6 + 1e-9) & (xs >= x.min() * 1e6 - 1e-9) if side == "p" else \
                (xs >= x.min() * 1e6 - 1e-9) & (xs <= x.max() * 1e6 + 1e-9)
            plot(ax, "solver", xs[inside], dens[sel][inside] * 1e-6, "numerical solver")
        ax.set_xlabel("distance from the junction x [um]")
        ax.set_ylabel(("electrons" if side == "p" else "holes") + " in excess [cm^-3]")
        ax.set_title(f"{side} side")
        legend(ax, loc="best")
    fig.suptitle(f"{dev.name}: excess minority carriers at {dev.profile_bias:g} V junction voltage", fontsize=10)
    w = {s: float(dev.result.derived[s]["w_over_l"][0]) for s in "pn"}
    return panels.Panel("excess_carriers", "Excess carriers in the neutral regions", fig,
                        f"W/L: p side {w['p']:.3g}, n side {w['n']:.3g}; the contact's recombination velocity "
                        "sets the density at each region's far end.")


def field_profile(dev, bias):
    """The depletion-approximation field at ``bias`` [V]: x [m] from the metallurgical junction and E [V/m].

    Abrupt: E = q NA (x + xp)/eps on the p side, q ND (xn - x)/eps on the n side; linear: q a (W^2/4 - x^2)/(2 eps)
    (Sze & Ng 2007, sec. 2.2).
    """
    r = dev.result
    d = r.device
    eps = float(d.relative_permittivity[0]) * EPS0
    xp, xn = _extents(dev, bias)
    x = np.union1d(np.linspace(-xp, 0.0, 81), np.linspace(0.0, xn, 161))  # the kink at 0 on the grid
    if bool(d.linear[0]):
        a = float(d.grading[0])
        e = Q * a * (((xp + xn) / 2) ** 2 - x ** 2) / (2 * eps)
    else:
        na, nd = float(r.derived["p"]["doping"][0]), float(r.derived["n"]["doping"][0])
        e = np.where(x < 0, Q * na * (x + xp) / eps, Q * nd * (xn - x) / eps)
    return x, e


def _field_panel(dev):
    fig, axes = new_figure()
    ax = axes[0, 0]
    bias = dev.window.reverse_bias
    x, e = field_profile(dev, bias)
    plot(ax, "physics", x * 1e6, e * 1e-5, "physics: depletion approximation")
    sol = dev.solution
    if sol is not None:
        m = sol.mesh
        xm = 0.5 * (m.x[1:] + m.x[:-1])
        field = -np.diff(sol.psi[1]) / np.diff(m.x)
        xj = m.x[m.junction]
        span = (x.max() - x.min())
        keep = (xm - xj >= x.min() - span) & (xm - xj <= x.max() + span)
        plot(ax, "solver", (xm[keep] - xj) * 1e6, np.abs(field[keep]) * 1e-5, "numerical solver")
    ax.set_xlabel("distance from the junction x [um]")
    ax.set_ylabel("field |E| [kV/cm]")
    ax.set_title(f"{dev.name}: field at {bias:g} V")
    legend(ax, loc="best")
    peak = float(dev.result.derived["breakdown_peak_field"][0])
    return panels.Panel("field", "Field at reverse bias", fig,
                        f"Peak field at breakdown by the ionization integral: {peak * 1e-5:.4g} kV/cm; "
                        f"BV {dev.card.get('BV', float('nan')):.4g} V (an estimate: derate it and confirm it on "
                        "measured devices).")


def panels_of(dev):
    """The device report's figures, in page order."""
    return [_forward_panel(dev), _reverse_panel(dev), _cv_panel(dev), _profile_panel(dev), _field_panel(dev)]


def notes_of(dev):
    """The findings of the description and of the fit (severity, text)."""
    out = [(m.severity, m.text) for m in dev.result.findings_for(0)]
    if dev.fitted is not None:
        out += [(m.severity, m.text) for m in dev.fitted.findings if dev.card_physics == "fitted to the solver"]
    if dev.solver_error:
        out.append(("warning", f"the numerical solver failed: {dev.solver_error}"))
    return out + list(getattr(dev, "card_notes", []))


def report(path, *, dialect="ngspice", physics="closed", profile_bias=None, simulate=True, progress=None,
           card_file=None, section=None):
    """The device report of the description at ``path`` (a :class:`modelgen.report.Report`); with
    ``card_file``, of that file's card against the description's physics (:func:`compute`)."""
    from . import Report

    dev = compute(path, dialect=dialect, physics=physics, profile_bias=profile_bias, simulate=simulate,
                  progress=progress, card_file=card_file, section=section)
    dialect = dev.dialect
    if progress:
        progress("drawing the figures")
    w = dev.window
    low = numeric._low(w)
    settings = (f"dialect {dialect}; card from the {dev.card_physics}; fit window {low}"
                f" to {_si(w.current_high, 'A')}, reverse {w.reverse_bias:g} V, C-V {w.capacitance_low:g} to "
                f"{w.capacitance_high:g} V; excess carriers at {dev.profile_bias:g} V")
    inputs = [str(path)] + ([str(card_file)] if card_file is not None else [])
    return Report(kind="device", title=f"{dev.name}: device report", inputs=inputs, panels=panels_of(dev),
                  notes=notes_of(dev), card=dev.card_text, card_title=f"The card ({dialect} dialect)",
                  settings=settings, data=dev)


def _si(x, unit):
    return numeric._si(x, unit)

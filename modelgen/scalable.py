"""The scalable card: one model whose instance carries its area and perimeter.

A process library ships one diode model per junction type; each instance
says how big it is (``D1 a k NAME area=<m^2> pj=<m>``) and the simulator
scales the model's values. What ngspice 39 scales (measured: a card with
``area=2 pj=3`` on the instance against one with the values multiplied by
hand, DC and AC; and its diode parameter table, ``devhelp diode``):

- ``area`` multiplies IS, ISR, IKF and CJO and divides RS;
- ``pj`` multiplies JSW and CJSW; it does not touch ISR or IKF;
- IBV, BV, N, NR, TT, VJ, M, FC and the sidewall's PHP, MJSW, FCS are not
  scaled.

So the card holds the bottom junction's physics per square metre and the
sidewall's per metre of perimeter. The sidewall is a strip of height
``junction_depth`` along the perimeter with the bottom junction's physics
(as modelgen's per-device cards take it), so JSW = J0 xj and CJSW = Cj xj.
A neutral region's width does not change with area, so J0, Cj, the
recombination current density and the knee current density are constants
of the process; RS of a vertical diode's neutral regions scales as
1/area, so RS is carried as ohm m^2. What does not scale is said in notes
(see :func:`scalable_params`).

Units on the card: IS, ISR, IKF [A/m^2]; JSW [A/m]; CJO [F/m^2]; CJSW
[F/m]; RS [ohm m^2]; the instance's ``area`` [m^2] and ``pj`` [m].

Because ngspice gives ISR and IKF no perimeter term, the ``.model`` form
loses the sidewall's share of them; :func:`scalable_subckt` writes the
form that does not: a subcircuit whose one diode has the junction area
``area + pj*xj`` behind a resistor RS A / area.
"""

from __future__ import annotations

import numpy as np

from . import targets
from .cards.render import card_columns, environment, file_header
from .cards.text import comment_lines, format_numbers, safe
from .extraction import Result

#: The parameters of a scalable card, in card order, with the unit each is written in.
UNITS = {"IS": "A/m^2", "JSW": "A/m", "N": "1", "RS": "ohm*m^2", "CJO": "F/m^2", "CJSW": "F/m", "VJ": "V",
         "PHP": "V", "M": "1", "MJSW": "1", "FC": "1", "FCS": "1", "TT": "s", "BV": "V", "IBV": "A",
         "EG": "eV", "XTI": "1", "ISR": "A/m^2", "NR": "1", "IKF": "A/m^2", "TNOM": "degC"}

#: Dialects with a scalable form (ngspice's diode scales by its instance's area and pj).
DIALECTS = ("ngspice",)

#: Criteria of the notes (stated in each note's text).
SIDEWALL_SHARE = 0.01      # sidewall share of the junction area above which ISR/IKF lose over 1 %
PLANAR_SIDEWALL = 0.1      # perimeter x depth over bottom area above which the planar strip is doubtful
SPREADING = 10.0           # lateral size under this many spreading lengths: edge current not per perimeter


def _columns(result: Result):
    """Per-unit values of every device of ``result`` (arrays), and the parts the notes need."""
    _, p = card_columns(result, "ngspice")  # the dialect's own values (TNOM, IBV with BV) before the split
    dev = result.device
    total = np.asarray(result.derived["junction_area"], float)  # A + P xj
    bottom = np.asarray(result.derived["bottom_area"], float)
    xj = np.where(dev.perimeter > 0, dev.junction_depth, 0.0)
    # IS and CJO of the whole junction (card_columns has split them into bottom and sidewall)
    per_area = {k: np.asarray(result.params[k], float) / total for k in ("IS", "CJO", "ISR", "IKF")}
    contact = np.asarray(dev.contact_resistance, float)
    out = {"IS": per_area["IS"], "JSW": per_area["IS"] * xj, "N": p["N"],
           # neutral regions: R A constant; the contact (part of RS) taken as a specific resistivity Rc A
           "RS": p["RS"] * bottom,
           "CJO": per_area["CJO"], "CJSW": per_area["CJO"] * xj, "VJ": p["VJ"], "PHP": p["VJ"], "M": p["M"],
           "MJSW": p["M"], "FC": p["FC"], "FCS": p["FC"], "TT": p["TT"], "BV": p["BV"], "IBV": p["IBV"],
           "EG": p["EG"], "XTI": p["XTI"], "ISR": per_area["ISR"], "NR": p["NR"], "IKF": per_area["IKF"],
           "TNOM": p["TNOM"]}
    spread = np.maximum(*(np.minimum(result.derived[s]["neutral_width"], result.derived[s]["diffusion_length"])
                          for s in ("p", "n")))
    return out, {"bottom": bottom, "perimeter": np.asarray(dev.perimeter, float), "xj": xj, "contact": contact,
                 "spread": spread}


def geometry_notes(per_unit_spread, xj, area, perimeter, sidewall_exact=False):
    """Where the scalable card's scaling stops holding at an instance geometry.

    Parameters
    ----------
    per_unit_spread : float
        The spreading length of the injected carriers [m]: for each side the
        shorter of neutral width and diffusion length, the longer of the two sides.
    xj : float
        Junction depth, the sidewall's height [m].
    area, perimeter : float
        The instance's bottom area [m^2] and perimeter [m].
    sidewall_exact : bool
        True for the subcircuit form (:func:`scalable_subckt`), which scales
        every term with the whole junction area: the first criterion does not apply.

    Returns
    -------
    list of str
        One line per criterion broken (empty: the scaling holds by these criteria).

    Notes
    -----
    Criteria (common practice for area/perimeter separation, stated here as numbers):
    sidewall share s = P xj / (A + P xj) above 1 %: ngspice scales ISR and IKF
    by area alone, so the sidewall's share of the recombination current and of
    the knee is lost (by s); P xj above 0.1 A: the sidewall is a large part of
    the junction and its planar-strip model (a curved junction in fact) is
    doubtful; lateral size 4 A / P under 10 spreading lengths: carriers
    injected near the edge spread sideways, so the edge current is not simply
    per perimeter.
    """
    notes = []
    side = perimeter * xj
    share = side / (area + side) if area + side > 0 else 0.0
    if share > SIDEWALL_SHARE and not sidewall_exact:
        notes.append(f"sidewall share {share:.3g} of the junction area (P xj / (A + P xj) over {SIDEWALL_SHARE:g}): "
                     "ngspice scales ISR and IKF by area only, so the recombination current and the knee lose "
                     "the sidewall's share (the --form subckt scalable card carries it)")
    if side > PLANAR_SIDEWALL * area:
        notes.append(f"perimeter x junction depth is {side / area:.3g} of the area (over {PLANAR_SIDEWALL:g}): "
                     "the sidewall as a planar strip of height xj is doubtful; measure devices of several "
                     "perimeter-to-area ratios")
    if perimeter > 0 and 4 * area / perimeter < SPREADING * per_unit_spread:
        notes.append(f"lateral size 4A/P = {4e6 * area / perimeter:.3g} um is under {SPREADING:g} spreading "
                     f"lengths ({per_unit_spread * 1e6:.3g} um): edge current is not simply per perimeter")
    return notes


def scalable_params(result: Result, i=0, dialect="ngspice", sidewall_exact=False):
    """The per-area and per-perimeter card values of device ``i``, and notes on where they stop scaling.

    Parameters
    ----------
    result : Result
        From :func:`modelgen.extraction.derive`.
    i : int
        Which device.
    dialect : str
        A dialect with a scalable form (:data:`DIALECTS`).
    sidewall_exact : bool
        For the subcircuit form: leave out the note on the sidewall share of
        ISR and IKF, which that form carries.

    Returns
    -------
    (per_unit_params, notes) :
        ``per_unit_params``: name -> float in the units of :data:`UNITS`
        (sidewall terms only where the device has a perimeter, BV/IBV only
        where breakdown was found); ``notes``: one-line texts.

    Raises
    ------
    ValueError
        A dialect without a scalable form.

    Notes
    -----
    The bottom junction's saturation current density J0 = IS / (A + P xj),
    depletion capacitance per area, recombination current density and knee
    current density are constants of the process (the neutral widths do not
    change with area); the sidewall has them per area over a height xj
    (Sze & Ng, Physics of Semiconductor Devices, 3rd ed., 2007, ch. 2, for
    the planar junction; the area/perimeter split is common practice).
    RS: a neutral region of width W and bottom area A has R = W / (q N mu A),
    so R A is constant. A contact resistance Rc given in ohms does not scale
    with the junction; it is carried as a specific contact resistivity
    Rc A of the description (right only if the contact opening scales with
    the junction area), and a note says so.
    """
    if dialect not in DIALECTS:
        raise ValueError(f"the {targets.get(dialect).name} dialect has no scalable form; "
                         f"scalable cards: {', '.join(DIALECTS)}")
    cols, parts = _columns(result)
    values = {k: float(v[i]) for k, v in cols.items() if np.isfinite(v[i])}
    if not parts["perimeter"][i] > 0:
        for k in ("JSW", "CJSW", "PHP", "MJSW", "FCS"):
            values.pop(k, None)
    notes = geometry_notes(float(parts["spread"][i]), float(parts["xj"][i]), float(parts["bottom"][i]),
                           float(parts["perimeter"][i]), sidewall_exact)
    if parts["contact"][i] > 0:
        notes.append(f"contact resistance {parts['contact'][i]:.4g} ohm does not scale with the junction: "
                     f"carried in RS as a specific resistivity Rc A = {parts['contact'][i] * parts['bottom'][i]:.4g} "
                     "ohm m^2 (right only if the contact opening scales with the area)")
    return values, notes


#: A standing header line: what the simulator scales, and the share it cannot.
SCALING = ("scaling: ngspice multiplies IS, ISR, IKF, CJO by area and JSW, CJSW by pj, and divides RS by area; "
           "the sidewall's share P xj / (A + P xj) of the recombination current (ISR) and of the knee (IKF) is "
           "not carried, so at small or narrow geometries those are underestimated by about that share")


def _heads(result, i, dialect, name, form, label, extra, notes):
    """The file header (``NAME: scalable diode FORM``, with ``extra`` lines) and the card's comment lines
    (where it came from, the scaling notes, the device's findings but the standing caution)."""
    header = file_header(dialect, f"{name}: scalable diode {form}", 1, result=result, extra=extra)
    src = result.device.source[i] if len(result.device.source) else ""
    lines = [f"* {name}: {label}" + (f", from {safe(str(src).rsplit('/', 1)[-1])}" if src else "")]
    for n in notes:
        lines += comment_lines("scaling: " + n)
    for severity, _kind, text in result.findings_for(i):
        if severity != "caution":
            lines += comment_lines(f"{severity}: {text}")
    return header, lines


def instance_line(name):
    """The instance syntax a scalable card is used with (a header comment)."""
    return f"instance: D1 a k {name} area=<bottom area, m^2> pj=<perimeter, m>"


def scalable_card(result: Result, i=0, dialect="ngspice", name=None):
    """The scalable card of device ``i`` as a file of one card.

    Parameters
    ----------
    result : Result
    i : int
    dialect : str
        A dialect with a scalable form (:data:`DIALECTS`).
    name : str, optional
        The model name (a checked SPICE identifier); default the device's.

    Returns
    -------
    str
        Comment header (what made it, the instance syntax, the units, the
        notes of :func:`scalable_params`, the device's findings), then the
        ``.model`` card in the dialect's template.
    """
    values, notes = scalable_params(result, i, dialect)
    name = result.device.name[i] if name is None else name
    units = "; ".join(f"{k} [{UNITS[k]}]" for k in values)
    header, lines = _heads(result, i, dialect, name, "model card", "scalable",
                           (instance_line(name), f"units: {units}", SCALING), notes)
    texts = format_numbers(np.array(list(values.values())))
    target = targets.get(dialect)
    body = environment().get_template(target.template).render(
        card={"header": lines, "name": name, "params": list(zip(values, texts))})
    return environment().get_template(target.library_template).render(
        header=header, sections=[{"name": None, "body": body}])


#: Instance parameters of the subcircuit form's defaults: a 100 x 100 um diode [m^2], [m].
DEFAULT_INSTANCE = (1e-8, 4e-4)

#: A standing header line of the subcircuit form: what it scales.
SUBCKT_SCALING = ("scaling: the diode inside has the junction area area + pj*xj (bottom and sidewall), so IS, ISR, "
                  "IKF and CJO, given per m^2 of junction, scale with both, as the per-device cards take them; the "
                  "series resistance R1 is RS A / area [ohm]")


def subckt_instance_line(name):
    """The instance syntax of the subcircuit form (a header comment)."""
    return f"instance: X1 a k {name} area=<bottom area, m^2> pj=<perimeter, m>"


def scalable_subckt(result: Result, i=0, dialect="ngspice", name=None):
    """The scalable subcircuit of device ``i``: every term scaled with the whole junction area.

    ngspice's diode scales ISR and IKF by its instance's ``area`` alone
    (module docstring), so a ``.model`` card cannot give the sidewall its
    share of the recombination current and of the knee. This form can: a
    subcircuit with instance parameters ``area`` [m^2] and ``pj`` [m]
    holds one diode of junction area ``area + pj*xj`` (the bottom plus the
    sidewall strip of height xj, the planar-strip model of the per-device
    cards) whose model gives IS, ISR, IKF and CJO per m^2 of junction, and
    a resistor ``R1 = (RS A)/area`` for the neutral regions (and the contact
    as a specific resistivity). At any geometry it gives the per-device
    card's equations: IS, ISR, IKF and CJO are the same totals, the sidewall
    shares VJ, M and FC with the bottom as the per-device card's PHP, MJSW
    and FCS do, and RS carries the same total current.

    Parameters
    ----------
    result : Result
    i : int
    dialect : str
        A dialect whose target has a scalable subcircuit template.
    name : str, optional
        The subcircuit and model name (a checked SPICE identifier); default the device's.

    Returns
    -------
    str
        The library text: header (instance syntax, units, notes, findings),
        then ``.subckt NAME a k area=.. pj=..`` ... ``.ends``; the defaults
        are :data:`DEFAULT_INSTANCE`.
    """
    target = targets.get(dialect)
    if dialect not in DIALECTS or target.scalable_template is None:
        raise ValueError(f"the {target.name} dialect has no scalable subcircuit form; "
                         f"scalable cards: {', '.join(DIALECTS)}")
    values, notes = scalable_params(result, i, dialect, sidewall_exact=True)
    for k in ("JSW", "CJSW", "PHP", "MJSW", "FCS"):
        values.pop(k, None)
    rsa = values.pop("RS", 0.0)
    xj = float(result.device.junction_depth[i]) if result.device.perimeter[i] > 0 else 0.0
    name = result.device.name[i] if name is None else name
    units = "; ".join(f"{k} [{UNITS[k]}]" for k in values) + "; R1 = RS A / area with RS A [ohm*m^2]"
    notes.append("the generation source of the per-device --form subckt is not in this form: the reverse current "
                 "is the diode's own")
    header, lines = _heads(result, i, dialect, name, "subcircuit", "scalable subcircuit",
                           (subckt_instance_line(name), f"units: {units}", SUBCKT_SCALING), notes)
    texts = format_numbers(np.array(list(values.values()) + [rsa, xj, *DEFAULT_INSTANCE]))
    *params, rsa_text, xj_text, area_text, pj_text = texts
    body = environment().get_template(target.scalable_template).render(
        card={"header": lines, "name": name, "params": list(zip(values, params)), "rsa": rsa_text if rsa > 0 else None,
              "xj": xj_text, "area": area_text, "pj": pj_text})
    return environment().get_template(target.library_template).render(
        header=header, sections=[{"name": None, "body": body}])


__all__ = ["DEFAULT_INSTANCE", "DIALECTS", "SCALING", "SUBCKT_SCALING", "UNITS", "geometry_notes", "instance_line",
           "scalable_card", "scalable_params", "scalable_subckt", "subckt_instance_line"]

"""Run diode model cards through gnucap and read back I-V and C-V.

One call of :func:`simulate` writes one netlist holding the cards of a
library and, for every requested model and bias point, one diode with its own
voltage source (each pair in a subcircuit of its own, see :func:`_netlist`),
and runs ``gnucap -b`` on it once.  The DC currents come from one ``.op`` (the
diodes are independent circuits, so one Newton solve covers them all); the
capacitances come from one ``.ac`` at :data:`AC_FREQUENCY` around that
operating point.

What gnucap 0.36 (Debian package ``gnucap``) does, found by experiment and by
reading its ``apps/d_diode.model`` and ``lib/u_opt*.cc``:

* Thermal voltage: ``Vt = P_K_Q * (T_C + 273.15) * N`` with
  ``P_K_Q = 1.3806226e-23 / 1.6021918e-19`` (``include/constant.h``, the old
  SPICE values: 8.6170869e-5 V/K, 2.86e-5 below CODATA 2018).  At 0.8 V
  (V/Vt = 31) that alone moves the current by 8.8e-4 from a closed form that
  uses ``scipy.constants``.
* Temperature (``.options temperature=``, ``.temp`` or ``.op temp=``; default
  27 degC, TNOM default 27): only IS is scaled,
  ``IS (T/TNOM)^XTI exp(EG/(N Vt) (T/TNOM - 1))`` -- XTI is not divided by N
  as in SPICE3 -- and CJO, VJ are not scaled at all.
* Voltage sources are Norton equivalents with ``OPT::shortckt`` (10 uOhm by
  default) in series; at 4 mA that drops 45 nV and changes the current by
  1.2e-6.  The ``.op`` therefore runs with ``short=`` :data:`DC_SHORT`.  The
  AC current of a source is ``(Vsrc - Vnode)/short``, which loses digits when
  ``short`` is small, so the ``.ac`` runs with ``short=`` :data:`AC_SHORT`.
  The AC analysis reuses the ``.op`` bias; it does not solve it again.
* With the default ``lcbypass`` the diffusion capacitance ``TT * gd`` of the
  operating point is left stale (``Cj`` is evaluated with the ``gd`` of an
  early iteration and then bypassed once its voltage settles): at 0.7 V the
  capacitance came out 77 % low.  Both analyses use
  ``.options nobypass nolcbypass``.
* The default convergence tolerances stop the iteration early for the tiny
  currents of a cold diode (at -40 degC a 1.05e-8 A current came out as
  4.8e-16 A with no warning); the runs set ``reltol=1e-9 abstol=1e-25``.
* ``gmin`` (``.options gmin=``, default 1e-12 S) is added to the diagonal of
  every node of the DC matrix, the diode's internal RS node included, and not
  to the AC matrix.  The default diode path (``diodeflags=0``) adds no
  ``gmin`` of its own.  The current returned is the diode's ``i(D)``
  (junction plus capacitor branch), which the node ``gmin`` is not part of.
* Printed DC results are rounded to a multiple of ``floor`` (1e-21, device
  probes smaller than 1) and ``vfloor`` (1e-15 V, node voltages): a reverse
  current of 8.720866e-16 A prints as 872.087E-18.  Both are set to 1e-300.
* Unknown model parameters give, below an echo of the card, a line
  ``^ ? NAME: bad parameter ISR ignored`` (so ISR, NR, IKF, JSW, PHP, FCS, PJ,
  AREA, CJ0 ...).  ``LEVEL=`` makes gnucap look for a model type ``D1`` and
  drop the whole card (``? model: "D1" no match``, then ``...: can't find:
  NAME``).  ``BV``, ``IBV``, ``KF`` and ``AF`` are accepted silently and not
  used by the default diode path (it has no breakdown).  ``CJSW`` (with
  ``PBSW``, ``MJSW``) is accepted and multiplied by the instance perimeter,
  0 by default, so it silently adds nothing.
* A run that did not converge is not always reported: with ``itl1=2`` gnucap
  printed a wrong operating point and no warning.  Check results against an
  independent evaluation.

The capacitance is measured as asked: the diode's terminal admittance
``Y = I/V`` from the AC current of its source and the AC voltage across it,
``Z_junction = 1/Y - RS`` with the card's ``RS``, and
``C = Im(1/Z_junction) / omega``.
"""

from __future__ import annotations

import math
import re
import shutil
import tempfile
from pathlib import Path

import numpy as np

from ..cards import reader
from .process import SimulatorError, run, without_comments

__all__ = ["available", "simulate", "AC_FREQUENCY", "DC_SHORT", "AC_SHORT", "NUMDGT"]

GNUCAP = "gnucap"
AC_FREQUENCY = 1e6  # Hz; high enough that Im(Y) of a 0.1 pF junction stands well above round-off
DC_SHORT = 1e-9  # ohm, series resistance of gnucap's voltage sources in the .op
AC_SHORT = 1.0  # ohm, the same in the .ac (only the node voltage enters Y, so its size does not matter)
NUMDGT = 15  # digits gnucap prints; its own formatter is good to about 1e-11 relative

_TITLE = "modelgen gnucap batch run"
# A value as gnucap prints it: mantissa, optional exponent, optional scale letter ("Meg" for 1e6).
_PRINTED = re.compile(r"[-+]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][-+]?\d+)?(?:Meg|[fpnumKGT])?"
                      r"|\?\?|NA|[-+]?Inf|NaN|[-+]?Over")
_PRINTED_SCALE = {"f": 1e-15, "p": 1e-12, "n": 1e-9, "u": 1e-6, "m": 1e-3,
                  "K": 1e3, "Meg": 1e6, "G": 1e9, "T": 1e12}
_COMPLAINT = re.compile(r"^\s*\^|can't|error|bad |\? ", re.IGNORECASE)  # a gnucap complaint line
_INSTANCE = re.compile(r"\b[XC][IQ](\d+)_\d+\b", re.IGNORECASE)  # our subcircuits and their instances
_BANNER = ("Gnucap ", "Never trust", "Copyright", "Gnucap comes", "This is free software",
           "to redistribute", "the GNU General", "See the file", "main version:",
           "core-lib version:", "default plugins:")


def available() -> bool:
    """True when ``gnucap`` is on PATH and runs a one-resistor netlist in batch mode."""
    if shutil.which(GNUCAP) is None:
        return False
    try:
        out = _run("probe\nR1 1 0 1k\nV1 1 0 dc 1\n.print op v(1)\n.op\n.end\n", timeout=30.0)
    except RuntimeError:
        return False
    return any(line.startswith("#") for line in out.splitlines())


def simulate(library_text: str, names: list[str], dc_volts, cap_volts, *, temperature_c=27.0,
             gmin=None, rs=None, timeout=120.0) -> dict:
    """Run gnucap once for the models ``names`` of ``library_text``.

    Parameters
    ----------
    library_text : str
        ``.model NAME D (...)`` cards with ``+`` continuation lines, passed to
        gnucap without comment lines (any of which could be a ``*>`` command)
        and without lines that are just ``.end``.
    names : list of str
        Models to simulate, one diode per model and bias.  Gnucap matches model
        names without regard to case; so does this function.
    dc_volts : array_like
        Voltages (V) applied anode to cathode across the whole diode, ``RS``
        included.
    cap_volts : array_like
        DC biases (V) at which the small-signal capacitance is measured.
    temperature_c : float
        Circuit temperature (degC), set with ``.options temperature=``.
    gmin : float or None
        ``.options gmin=`` (S); None keeps gnucap's 1e-12.  Gnucap adds it to
        the diagonal of every node of the DC matrix, not inside the diode.
    rs : dict, optional
        Series resistance of each model [ohm] to take off the AC impedance;
        default the card's RS.
    timeout : float
        Seconds before the gnucap process is abandoned.

    Returns
    -------
    dict
        ``{name: {"current": ndarray (A), "capacitance": ndarray (F),
        "messages": list of str}}`` keyed by the names as given.  ``current``
        is gnucap's ``i(D)`` at each voltage of ``dc_volts``; ``capacitance`` is
        ``Im(1/(1/Y - RS)) / omega`` at each bias of ``cap_volts``, with ``Y``
        the diode's terminal admittance at :data:`AC_FREQUENCY` and ``RS`` read
        from the card.  ``messages`` holds, once each and in order, every line
        gnucap printed that is not a banner, title, echo or result: those that
        name the model or one of its diodes, and those that name no model at
        all (a load or parse problem of the whole run).  A value gnucap printed
        as ``??`` is NaN.

    Raises
    ------
    ValueError
        A name is missing from ``library_text``, is not a ``D`` model, or is
        given twice.
    modelgen.spice.process.SimulatorError
        Gnucap is missing, fails, times out or prints no results (a
        RuntimeError): one line, with gnucap's output in its ``output``.
    """
    names = list(names)
    dc = np.atleast_1d(np.asarray(dc_volts, dtype=float)).ravel()
    cv = np.atleast_1d(np.asarray(cap_volts, dtype=float)).ravel()
    if not (np.all(np.isfinite(dc)) and np.all(np.isfinite(cv))):
        raise ValueError("dc_volts and cap_volts must be finite")
    # the card reader of modelgen (same rules as ngspice's manual), keys upper case
    models = {c.name.upper(): {"type": c.type, "params": c.params} for c in reader.read_cards(library_text)}
    seen = set()
    for name in names:
        key = name.upper()
        if key in seen:
            raise ValueError(f"model {name!r} is given twice (gnucap ignores case)")
        seen.add(key)
        if key not in models:
            raise ValueError(f"model {name!r} is not in the library text")
        if models[key]["type"] != "D":
            raise ValueError(f"model {name!r} is a {models[key]['type']} model, not D")
    rs = np.array([(rs or {}).get(n, models[n.upper()]["params"].get("RS", 0.0)) for n in names])

    netlist, op_labels, ac_labels = _netlist(library_text, names, dc, cv, temperature_c, gmin)
    output = _run(netlist, timeout=timeout)
    blocks = _result_blocks(output)

    m, k, j = len(names), dc.size, cv.size
    current = np.empty((m, 0))
    if op_labels:
        current = _block(blocks, op_labels, output).reshape(m, k)
    capacitance = np.empty((m, 0))
    if ac_labels:
        ac = _block(blocks, ac_labels, output).reshape(m, j, 4)
        volts = ac[..., 0] + 1j * ac[..., 1]
        amps = ac[..., 2] + 1j * ac[..., 3]
        with np.errstate(divide="ignore", invalid="ignore"):
            y = -amps / volts  # the source's current flows out of its + node into the diode
            z_junction = 1.0 / y - rs[:, None]
            capacitance = np.imag(1.0 / z_junction) / (2 * math.pi * AC_FREQUENCY)
        capacitance = np.where(y == 0, 0.0, capacitance)

    messages = _messages(output, names, list(models))
    return {name: {"current": current[i].copy(), "capacitance": capacitance[i].copy(),
                   "messages": messages[i]} for i, name in enumerate(names)}


def _run(netlist: str, *, timeout: float) -> str:
    exe = shutil.which(GNUCAP)
    if exe is None:
        raise SimulatorError("gnucap is not on PATH (Debian package: gnucap)")
    with tempfile.TemporaryDirectory(prefix="modelgen-gnucap-") as tmp:
        path = Path(tmp) / "run.ckt"
        path.write_text(netlist)
        code, output = run([exe, "-b", str(path)], cwd=tmp, timeout=timeout, what="gnucap")
    if code != 0:
        why = f"killed by signal {-code}" if code < 0 else f"exit status {code}"
        raise SimulatorError(f"gnucap failed ({why})", output=output)
    return output


def _netlist(library_text, names, dc, cv, temperature_c, gmin):
    """The netlist, and the probe labels of the .op and .ac tables as gnucap prints them.

    Each diode sits with its source in a subcircuit of its own.  At the top
    level gnucap numbers every netlist node before the diodes' internal
    (RS) nodes, so diode k's two nodes end up about N apart and the
    skyline LU costs ~N^3 (1000 diodes: 8 s).  Inside subcircuits the nodes
    are numbered as each instance expands, next to each other (1000 diodes:
    0.1 s).  Probes name the subcircuit's parts as ``D1.XI0_3``; gnucap
    prints them as ``XI0_3.D1``.  (It has no probe for a node inside a
    subcircuit; the source's own ``v`` is the same voltage.)
    """
    library = "\n".join(line for line in without_comments(library_text).split("\n")
                        if line.strip().lower() != ".end")
    lines = [_TITLE, library, "* one diode and its source per model and bias, each in a subcircuit"]
    op_probes, op_labels, ac_probes, ac_labels = [], [], [], []
    for i, name in enumerate(names):
        for k, v in enumerate(dc):
            cell = f"I{i}_{k}"
            lines += [f".subckt C{cell}", f"V1 a 0 dc {v:.17g}", f"D1 a 0 {name}", ".ends", f"X{cell} C{cell}"]
            op_probes.append(f"i(D1.X{cell})")
            op_labels.append(f"i(X{cell}.D1)")
        for k, v in enumerate(cv):
            cell = f"Q{i}_{k}"
            lines += [f".subckt C{cell}", f"V1 a 0 dc {v:.17g} ac 1", f"D1 a 0 {name}", ".ends", f"X{cell} C{cell}"]
            for what in ("vr", "vi", "ir", "ii"):
                ac_probes.append(f"{what}(V1.X{cell})")
                ac_labels.append(f"{what}(X{cell}.V1)")
    options = (f".options numdgt={NUMDGT} floor=1e-300 vfloor=1e-300 outwidth=1000000000"
               f" nobypass nolcbypass temperature={float(temperature_c):.17g}"
               # gnucap's default abstol (1e-12 A) lets a cold diode's tiny currents stop the
               # iteration far from the solution (seen at -40 degC: 4.8e-16 A for 1.05e-8 A)
               " reltol=1e-9 abstol=1e-25")
    if gmin is not None:
        options += f" gmin={float(gmin):.17g}"
    lines += [options, f".options short={DC_SHORT:g}"]
    if op_probes:
        lines += _print_lines("op", op_probes)
    lines.append(".op")
    if ac_probes:
        lines += [f".options short={AC_SHORT:g}"] + _print_lines("ac", ac_probes) + [f".ac {AC_FREQUENCY:.17g}"]
    lines.append(".end")
    return "\n".join(lines) + "\n", op_labels, ac_labels


def _print_lines(mode, probes, per_line=40):
    """``.print MODE`` and ``+`` continuation lines (gnucap reads at most 4095 characters a line)."""
    return [f".print {mode}"] + ["+ " + " ".join(probes[n:n + per_line])
                                 for n in range(0, len(probes), per_line)]


def _value(token: str) -> float:
    if token in ("??", "NA", "NaN"):
        return math.nan
    if token.lstrip("+-") in ("Inf", "Over"):
        return -math.inf if token.startswith("-") else math.inf
    m = re.fullmatch(r"(.*?)(Meg|[fpnumKGT])?", token)
    return float(m.group(1)) * _PRINTED_SCALE.get(m.group(2), 1.0)


def _result_blocks(output: str) -> list[tuple[list[str], list[str], int, int]]:
    """Each printed table: (header labels, tokens of its first data row, first line, last line)."""
    lines = output.splitlines()
    blocks = []
    i = 0
    while i < len(lines):
        if lines[i].startswith("#") and i + 1 < len(lines):
            header = lines[i][1:].split()
            j = i + 1
            data = lines[j]
            while j + 1 < len(lines) and lines[j + 1].startswith("+"):
                j += 1
                data += " " + lines[j][1:]
            blocks.append((header, _PRINTED.findall(data), i, j))
            i = j + 1
        else:
            i += 1
    return blocks


def _block(blocks, labels, output) -> np.ndarray:
    want = [label.lower() for label in labels]
    for header, tokens, _, _ in blocks:
        if [h.lower() for h in header[-len(want):]] == want and len(tokens) == len(want) + 1:
            return np.array([_value(t) for t in tokens[1:]])
    analysis = ".ac" if labels[0].startswith("v") else ".op"
    problems = list(dict.fromkeys(ln.strip().lstrip("^ ") for ln in output.splitlines() if _COMPLAINT.search(ln)))
    detail = f": {'; '.join(problems[:3])[:300]}" if problems else ""
    raise SimulatorError(f"gnucap printed no {analysis} results{detail}", output=output)


def _messages(output: str, names: list[str], library_names: list[str]) -> list[list[str]]:
    """Gnucap's warning and error lines, sorted to the models they concern.

    A line that names a model of the library (or one of the diodes made for
    ``names``) goes to that model only, and is dropped when the model is not in
    ``names``; a line that names none goes to every model.
    """
    lines = output.splitlines()
    skip = set()
    for _, _, first, last in _result_blocks(output):
        skip.update(range(first, last + 1))
    found: dict[str, str] = {}  # message -> the .model card it points into ("NAME", "NAM..." or "")
    title_seen = False
    echo = ""
    for n, line in enumerate(lines):
        text = line.strip()
        if n in skip or not text:
            continue
        if not title_seen:
            if text == _TITLE:
                title_seen = True
            continue  # banner and title
        if n + 1 < len(lines) and lines[n + 1].lstrip().startswith("^"):
            echo = text  # echo of the netlist line the next line points into
            continue
        card = ""
        if text.startswith("^"):
            text = text[1:].strip()
            # gnucap shortens a long echo to its first 15 characters, " ... " and
            # the part around the error, which can cut the model name short
            m = re.match(r"\.model\s+([^\s(]+)( \.\.\. )?", echo, re.IGNORECASE)
            card = (m.group(1) + ("..." if m.group(2) else "")) if m else ""
        echo = ""
        found.setdefault(text, card)
    if not title_seen:  # output without the title: keep everything that is not banner
        found = {}
        for n, line in enumerate(lines):
            text = line.strip()
            if text and n not in skip and not text.startswith(_BANNER):
                found.setdefault(text, "")
    index = {name.upper(): i for i, name in enumerate(names)}
    others = [n for n in library_names if n.upper() not in index]
    word = lambda n: re.compile(r"(?<![A-Za-z0-9_$])" + re.escape(n) + r"(?![A-Za-z0-9_$])",
                                re.IGNORECASE)
    ours = [(i, word(n)) for i, n in enumerate(names)]
    theirs = [word(n) for n in others]
    out: list[list[str]] = [[] for _ in names]
    for text, card in found.items():
        hits = {i for i, w in ours if w.search(text)}
        hits |= {int(m.group(1)) for m in _INSTANCE.finditer(text) if int(m.group(1)) < len(names)}
        if not hits and any(w.search(text) for w in theirs):
            continue  # about a model of the library that was not asked for
        if not hits and card:  # the line names no model; the card it points into does
            if card.endswith("..."):
                stem = card[:-3].upper()
                match = lambda n: n.upper().startswith(stem)
            else:
                match = lambda n: n.upper() == card.upper()
            hits = {i for i, n in enumerate(names) if match(n)}
            if not hits and any(match(n) for n in others):
                continue
        for i in (sorted(hits) if hits else range(len(names))):
            out[i].append(text)
    return out

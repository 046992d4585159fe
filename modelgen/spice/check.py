"""Prove cards in real simulators: run them and compare with the evaluator.

For every diode card of a file, each requested simulator runs a DC curve
(0.2 to 0.8 V forward in 50 mV steps) and the small-signal capacitance at
0, -1 and -5 V. The evaluator computes the same from the card's parameters
with that simulator's equations; a card passes when every point agrees to
:data:`TOLERANCE` and the simulator printed no warning about it.
"""

from __future__ import annotations

import importlib
from dataclasses import dataclass, field

import numpy as np

from ..cards import reader
from . import evaluator

DC_VOLTS = np.round(np.arange(0.2, 0.8 + 1e-9, 0.05), 12)
CAP_VOLTS = np.array([0.0, -1.0, -5.0])
#: Relative agreement asked of simulator and evaluator.
TOLERANCE = 1e-3
#: Simulators modelgen knows how to run, and the Debian package of each.
PACKAGES = {"ngspice": "ngspice", "gnucap": "gnucap"}


def runner(simulator):
    """The runner module of ``simulator`` (``available()``, ``simulate()``)."""
    return importlib.import_module(f"{__package__}.{simulator}")


def installed(simulator):
    """True if ``simulator`` can be run here."""
    try:
        return runner(simulator).available()
    except ImportError:
        return False


@dataclass
class Outcome:
    """How one card fared in one simulator."""

    model: str
    simulator: str
    section: str | None
    dc_error: float
    cap_error: float
    messages: list = field(default_factory=list)

    @property
    def ok(self):
        return (not self.messages and self.dc_error <= TOLERANCE and self.cap_error <= TOLERANCE)


def split_sections(text):
    """The cards of each ``.lib`` section (None: outside any section), ready for a test deck.

    Only ``.model`` lines, their ``+`` continuations, comments and blank lines
    are kept: any other line of the file (a ``.control`` block, an element,
    an ``.include``) never reaches the simulator, so checking a file cannot
    run what it might carry besides cards.
    """
    parts, current = {}, None
    for line in text.splitlines():
        word = line.strip().split(None, 1)
        head = word[0].lower() if word else ""
        if head == ".lib" and len(word) > 1 and len(word[1].split()) == 1:
            current = word[1].strip()
            continue
        if head == ".endl":
            current = None
            continue
        if head == ".end":
            break
        if not head or head.startswith(("*", "+")) or head == ".model":
            parts.setdefault(current, []).append(line)
    return {k: "\n".join(v) + "\n" for k, v in parts.items()}


def _relative_error(sim, ref):
    sim, ref = np.asarray(sim, float), np.asarray(ref, float)
    if sim.shape != ref.shape or not np.all(np.isfinite(sim)):
        return np.inf
    return float(np.max(np.abs(sim / ref - 1.0)))


def check_text(text, simulators, *, file=None, temperature_c=None, gmin=1e-12):
    """Run every diode card of ``text`` in each simulator and compare.

    Parameters
    ----------
    text : str
        Cards or a library as modelgen writes them (or by hand).
    simulators : list of str
        Installed simulators to use.
    file : str, optional
        For error messages.
    temperature_c : float, optional
        Circuit temperature [degC]; default each card's TNOM (27 if none).
    gmin : float
        ngspice's GMIN [S] (its default 1e-12); gnucap's default diode adds none.

    Returns
    -------
    list of Outcome

    Raises
    ------
    modelgen.errors.InputError
        The text does not parse, or holds no diode card.
    RuntimeError
        A simulator failed to run.
    """
    cards = [c for c in reader.read_cards(text, file=file) if c.type == "D"]
    if not cards:
        from ..errors import InputError
        raise InputError("no diode (.model NAME D) card found", file=file)
    parts = split_sections(text)
    outcomes = []
    for section in dict.fromkeys(c.section for c in cards):
        group = [c for c in cards if c.section == section]
        by_temp = {}
        for c in group:
            t = temperature_c if temperature_c is not None else c.params.get("TNOM", 27.0)
            by_temp.setdefault(t, []).append(c)
        for sim in simulators:
            for t, members in by_temp.items():
                names = [c.name for c in members]
                rs = {c.name: c.params.get("RS", 0.0) for c in members}
                kwargs = {"gmin": gmin} if sim == "ngspice" else {}
                res = runner(sim).simulate(parts[section], names, DC_VOLTS, CAP_VOLTS, rs=rs,
                                           temperature_c=t, **kwargs)
                for c in members:
                    got = res[c.name]
                    card = dict(c.params)
                    card.setdefault("TNOM", t)
                    g = gmin if sim == "ngspice" else None
                    i_ref, _ = evaluator.dc_current(card, DC_VOLTS, sim, gmin=g)
                    c_ref = evaluator.capacitance(card, CAP_VOLTS, sim, gmin=g)
                    outcomes.append(Outcome(c.name, sim, section, _relative_error(got["current"], i_ref),
                                            _relative_error(got["capacitance"], c_ref),
                                            list(got.get("messages", []))))
    return outcomes


def table(outcomes):
    """A plain-text table of outcomes, one row per card and simulator."""
    rows = [("model", "section", "simulator", "DC worst", "C worst", "result")]
    for o in outcomes:
        rows.append((o.model, o.section or "-", o.simulator, f"{o.dc_error:.2e}", f"{o.cap_error:.2e}",
                     "ok" if o.ok else ("WARNING: " + "; ".join(o.messages) if o.messages else "MISMATCH")))
    widths = [max(len(r[k]) for r in rows) for k in range(len(rows[0]) - 1)]
    return "\n".join("  ".join(r[k].ljust(widths[k]) for k in range(len(widths))) + "  " + r[-1]
                     for r in rows) + "\n"

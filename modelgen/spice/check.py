"""Run diode cards in real simulators and compare with the evaluator of their equations.

What is checked, and what is not
--------------------------------
For each diode card, each simulator it is checked in computes a DC curve
(:data:`DC_VOLTS`: 0.2 to 0.8 V forward in 50 mV steps) and the small-signal
capacitance at :data:`CAP_VOLTS` (0, -1 and -5 V, from an AC analysis), and
for a card inside a ``.subckt`` with modelgen's generation source
(:mod:`modelgen.leakage`) the subcircuit's current at :data:`REVERSE_VOLTS`
(-1 and -5 V) where the simulator runs behavioural sources, at
one temperature: the card's TNOM, or the temperature asked for. A
statistical library (:mod:`modelgen.statistical`, known by its header) is
checked at points: every process variable 0, then each variable (global or
local) at +1, the deck giving ngspice the variables as ``.param`` values and the
parameters as the library's expressions of them, for ngspice to evaluate. modelgen's
evaluator (:mod:`modelgen.spice.evaluator`) computes the same points from
the same parameters with that simulator's equations and constants, at the
same temperature. A card passes when every point agrees within
:data:`TOLERANCE` and the simulator printed no warning about it.

So a pass says that the simulator reads every parameter of the card and
computes what modelgen expects from it: the card means in the simulator what
it means in modelgen. It says nothing about whether the card describes a real
device well: that needs measurements.

Which simulators
----------------
Cards written by modelgen carry a header naming their dialect (``* NAME:
diode model card, modelgen 0.1.0, dialect ngspice (...)``, or for a library
``* TITLE: N cards, modelgen ..., dialect ...``); each card is run in the
simulators its dialect is meant for (``modelgen.targets.TARGETS[...]
.simulators``), the nearest such header above the card deciding. A card with
no such header is run in every simulator modelgen knows. An explicit list of
simulators overrides both.

What reaches a simulator
------------------------
Nothing of the checked file: ngspice runs a comment line that starts ``*#``
as a control command and gnucap runs a ``*>`` line as a command, so a
comment can be a command. The deck is rebuilt from the parsed numbers
alone: each card becomes ``.model DMG<k> D (`` with one ``+ KEY=value`` line
per parameter (the key a checked identifier, the value a float formatted
here), under a name made here; the test circuit and analysis lines are
the runners' own.

Scale
-----
Cards are run in chunks (:data:`CHUNK` cards per simulator process: gnucap's
run time grows faster than linearly with the size of one netlist, ngspice's
much less), so the time is linear in the number of cards. Each simulator
process runs (waited for by a worker thread) while this thread evaluates the
same cards, so the two overlap on two cores; most of the time is the
evaluator's. A sample of a big library can be checked instead of all of it
(:func:`sample`).

Plausible values
----------------
Before anything runs, every parameter the evaluator uses is checked against
:data:`PLAUSIBLE` (bounds and the reason for each); a value outside is bad
input (:class:`~modelgen.cards.reader.CardSyntaxError`), not a failed check.
"""

from __future__ import annotations

import bisect
import math
from dataclasses import dataclass, field

import numpy as np

from .. import targets
from ..cards import reader
from ..errors import InputError
from . import evaluator

DC_VOLTS = np.round(np.arange(0.2, 0.8 + 1e-9, 0.05), 12)
CAP_VOLTS = np.array([0.0, -1.0, -5.0])
#: Reverse biases at which a card's generation source (a ``.subckt`` form) is checked [V].
REVERSE_VOLTS = np.array([-1.0, -5.0])
#: Relative agreement asked of simulator and evaluator.
TOLERANCE = 1e-3
#: Simulators modelgen knows how to run, and the Debian package of each.
PACKAGES = {name: sim.package for name, sim in targets.SIMULATORS.items()}
#: Cards per simulator process (:attr:`modelgen.targets.Simulator.check_chunk`).
CHUNK = {name: sim.check_chunk for name, sim in targets.SIMULATORS.items()}
#: Seconds one simulator process (one chunk) may take before it is killed.
DEFAULT_TIMEOUT = 120.0
#: Circuit temperatures the check accepts [degC] (also the bounds of TNOM).
TEMPERATURE_RANGE = (-200.0, 500.0)

_LABEL = "DMG"         # deck names: DMG0, DMG1, ... (the user's names never reach a simulator)

# (low, low included, high, high included, unit, why: the first sentence goes into the error message)
_POSITIVE_CURRENT = (0.0, False, 1.0, True, "A",
                     "a saturation current is positive and at most 1 A. Zero leaves no diode; silicon "
                     "junctions of any practical size lie many decades below 1 A, and above it the 0.8 V "
                     "test point means kiloamperes")
_OFF_OR_CURRENT = (0.0, True, 1.0, True, "A", "0 switches the term off; otherwise at most 1 A, as IS")
_IDEALITY = (0.5, True, 10.0, True, "",
             "an emission coefficient lies near 1-2. It is 1 for diffusion and 2 for recombination "
             "current (Sah, Noyce & Shockley 1957); measured devices lie within 1-5, so 0.5-10 leaves room")
_POTENTIAL = (0.05, True, 10.0, True, "V",
              "a junction potential is positive and of order 1 V. About 0.5-1.1 V in silicon, up to "
              "about 3 V in wide-gap materials; 1 - V/VJ must stay positive below FC VJ, so VJ cannot "
              "be zero or negative")
_GRADING = (0.0, True, 1.0, False, "",
            "a grading coefficient lies below 1. It is 1/2 for an abrupt, 1/3 for a linear junction "
            "(Sze & Ng 2007, sec. 2.2-2.3), hyperabrupt profiles higher but below 1 (ngspice itself "
            "limits M to 0.9, from memory, with a warning)")
_FORWARD_FRACTION = (0.0, True, 1.0, False, "",
                     "FC must stay below 1, where the capacitance formula divides by zero. FC is the fraction "
                     "of VJ beyond which the depletion formula is continued by a straight line, whose "
                     "(1 - FC)^-(1+M) is infinite at 1 (ngspice itself limits FC to 0.95, from memory, "
                     "with a warning)")
_CAPACITANCE = (0.0, True, 1e-3, True, "F",
                "a capacitance is not negative and far below 1 mF. Power diodes reach nanofarads")
_COEFFICIENT = (-1.0, True, 1.0, True, "per K or K^2",
                "a temperature coefficient is small. Fitted values are of order 1e-3 /K (or 1e-5 /K^2); "
                "beyond 1 the parameter changes sign or explodes within one kelvin")

#: Plausible range of every parameter the evaluator uses, and why.
PLAUSIBLE = {
    "IS": _POSITIVE_CURRENT,
    "N": _IDEALITY,
    "RS": (0.0, True, 1e9, True, "ohm",
           "a resistance is not negative. A negative RS makes V = Vd + RS I non-monotonic, so the "
           "DC solution is not unique; 1 Gohm is far beyond any diode's series resistance"),
    "CJO": _CAPACITANCE,
    "VJ": _POTENTIAL,
    "M": _GRADING,
    "FC": _FORWARD_FRACTION,
    "TT": (0.0, True, 1e-3, True, "s",
           "a transit time is not negative and below 1 ms. Minority-carrier lifetimes in silicon are "
           "picoseconds to milliseconds"),
    "BV": (0.0, False, 1e5, True, "V",
           "a breakdown voltage is a positive magnitude. SPICE quotes it so; 100 kV is beyond any single junction"),
    "IBV": (0.0, False, 1.0, True, "A", "the current at BV is positive and small. The SPICE default is 1 mA"),
    "NBV": _IDEALITY,
    "EG": (0.1, True, 10.0, True, "eV",
           "a band gap lies between 0.1 and 10 eV. It is 0.67 eV in germanium, 1.12 eV in silicon, 3.3 eV in "
           "silicon carbide (Sze & Ng 2007)"),
    "XTI": (-100.0, True, 100.0, True, "",
            "the temperature exponent of IS is of order 3. It is 3 for diffusion, 2 for recombination "
            "current; fits stay within a few units of those"),
    "TNOM": (TEMPERATURE_RANGE[0], True, TEMPERATURE_RANGE[1], True, "degC",
             "the temperature range a check runs at. SPICE temperature laws are fits near room "
             "temperature; beyond -200..500 degC they mean nothing for silicon"),
    "ISR": _OFF_OR_CURRENT,
    "NR": _IDEALITY,
    "IKF": (0.0, True, 1e6, True, "A", "a knee current is positive, or 0 for no knee"),
    "JSW": _OFF_OR_CURRENT,
    "CJSW": _CAPACITANCE,
    "CJP": _CAPACITANCE,
    "PHP": _POTENTIAL,
    "VJSW": _POTENTIAL,
    "PBSW": _POTENTIAL,
    "MJSW": _GRADING,
    "FCS": _FORWARD_FRACTION,
    "PJ": (0.0, True, 1e6, True, "", "a perimeter factor is not negative. It counts devices"),
    "AREA": (1e-6, True, 1e6, True, "", "an area factor lies between 1e-6 and 1e6. It scales a device "
             "(an instance parameter in SPICE; on a card the simulator warns)"),
    "TCV": (-100.0, True, 100.0, True, "V/K",
            "the temperature coefficient of BV is at most 100 V/K in size. Avalanche breakdown moves "
            "by about 0.1 %/K of BV (Sze & Ng 2007, sec. 2.4.3) and BV reaches kilovolts; a reach-"
            "through fit can be negative"),
    "TRS1": _COEFFICIENT,
    "TRS2": _COEFFICIENT,
    "TTT1": _COEFFICIENT,
    "TTT2": _COEFFICIENT,
}


def runner(simulator):
    """The runner module of ``simulator`` (``available()``, ``simulate()``)."""
    return targets.SIMULATORS[simulator].run_module()


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
    temperature: float = 27.0

    @property
    def ok(self):
        return (not self.messages and self.dc_error <= TOLERANCE and self.cap_error <= TOLERANCE)


@dataclass
class Report:
    """What :func:`check_report` did.

    outcomes : list of Outcome
        One per card and simulator run, in file order, simulator by simulator.
    cards : int
        Diode cards in the file.
    checked : int
        Cards checked (fewer than ``cards`` when sampled).
    not_installed : dict
        Simulator -> number of cards meant for it that were not checked
        because it is not installed.
    """

    outcomes: list
    cards: int
    checked: int
    not_installed: dict = field(default_factory=dict)


def _range_text(key, rule):
    lo, lo_in, hi, hi_in, unit, _ = rule
    unit = f" {unit}" if unit else ""
    return f"{lo:g} {'<=' if lo_in else '<'} {key} {'<=' if hi_in else '<'} {hi:g}{unit}"


def validate(card, file=None):
    """Refuse a card whose values lie outside :data:`PLAUSIBLE`.

    Raises
    ------
    modelgen.cards.reader.CardSyntaxError
        Naming the file, the ``.model`` line and the parameter.
    """
    for key, value in card.params.items():
        rule = PLAUSIBLE.get(key)
        if rule is None:
            continue  # a parameter the evaluator does not use: the simulator says what it makes of it
        lo, lo_in, hi, hi_in, _, why = rule
        inside = (value >= lo if lo_in else value > lo) and (value <= hi if hi_in else value < hi)
        if not inside:
            raise reader.CardSyntaxError(
                f".model {card.name}: {key}={value!r} is outside {_range_text(key, rule)} "
                f"({why.split('. ')[0]})",
                file=file, row=card.line, key=key)


def dialect_headers(text):
    """``(line number, dialect name)`` of every header line modelgen writes, in order.

    A header is a ``*`` comment line holding ``, modelgen VERSION, dialect
    NAME (`` (the first line of every file modelgen writes: ``* NAME: diode
    model card, modelgen ...`` or ``* TITLE: N cards, modelgen ...``); found
    with plain string operations (no regular expression runs on
    the file's text).
    """
    found = []
    for number, line in enumerate(reader.split_lines(text), start=1):
        s = line.strip()
        if not s.startswith("*") or ", modelgen " not in s or ", dialect " not in s:
            continue
        name = s.rsplit(", dialect ", 1)[1].split(" (", 1)[0].strip()
        found.append((number, name if name in targets.TARGETS else None))
    return found


def meant_for(cards, text):
    """The simulators each card is meant for: from the nearest header above it, else all known."""
    headers = dialect_headers(text)
    lines = [n for n, _ in headers]
    out = []
    for c in cards:
        k = bisect.bisect_left(lines, c.line) - 1
        dialect = headers[k][1] if k >= 0 else None
        out.append(tuple(targets.TARGETS[dialect].simulators) if dialect else tuple(PACKAGES))
    return out


def sample(n, size):
    """Indices of a deterministic sample of ``size`` out of ``n`` cards.

    Every (n/size)-th card, starting with the first: spread evenly through
    the file, the same on every run, with no random generator.
    """
    if size is None or size >= n:
        return list(range(n))
    return [(k * n) // size for k in range(size)]


def _number(value):
    """A float as the deck writes it: its shortest exact repr, without a trailing ``.0``."""
    text = repr(float(value))
    return text[:-2] if text.endswith(".0") else text


def deck_cards(cards, sources=False, expressions=False):
    """The ``.model`` lines of a deck, rebuilt from the parsed numbers, and the deck's names.

    Nothing of the file's text is copied: the name is made here, the keys
    are identifiers the reader checked, the values are formatted floats.
    With ``sources``, each card that has a generation source also gets a
    subcircuit ``<label>X a k`` holding the diode and the source, written
    here in modelgen's form from its five numbers; the third value returned
    maps those labels to their subcircuit names. With ``expressions``, a
    point of a statistical library (:func:`modelgen.statistical.read_library`)
    is written as the simulator's own arithmetic: a ``.param <label>V<j> =
    value`` per process variable (the variable overridden at the point's
    value) and each varying parameter as its expression of those names,
    rebuilt here from the parsed numbers (:meth:`modelgen.statistical.Expression.text`).
    """
    labels = [f"{_LABEL}{k}" for k in range(len(cards))]
    lines = []
    wrapped = {}
    for label, c in zip(labels, cards):
        if expressions and c.expressions:
            names = [f"{label}V{j}" for j in range(len(c.variables))]
            lines += [f".param {n} = {_number(x)}" for n, (_, x) in zip(names, c.variables)]
            lines.append(f".model {label} D (")
            lines += [f"+ {key}={e.text(names)}" for key, e in c.expressions.items()]
            lines.append("+ )")
            continue
        lines.append(f".model {label} D (")
        lines += [f"+ {key}={_number(value)}" for key, value in c.params.items()]
        lines.append("+ )")
        if sources and c.source is not None:
            g = {k: _number(v) for k, v in c.source.items()}
            wrapped[label] = f"{label}X"
            lines += [f".subckt {label}X a k", f"D1 a k {label}",
                      f"B1 a k I = -({g['IG']} * pow(1 - min(V(a,k), 0) / {g['VJ']}, {g['M']}) - {g['IE']}) "
                      f"* (1 - exp(min(V(a,k), 0) / {g['VG']}))", f".ends {label}X"]
    text = "\n".join(lines) + "\n"
    return (text, labels, wrapped) if sources else (text, labels)


#: Magnitudes below which agreement is judged absolutely (to TOLERANCE times
#: these): a card with no CJO and no TT has no capacitance at all, and 0 F
#: against 0 F agrees. 1 fF is below the capacitance of any junction worth a
#: CJO; 1e-18 A is six decades below the current of IS = 1e-15 A at 0.2 V.
CAPACITANCE_FLOOR = 1e-15
CURRENT_FLOOR = 1e-18


def _relative_error(sim, ref, floor):
    sim, ref = np.asarray(sim, float), np.asarray(ref, float)
    if sim.shape != ref.shape or not np.all(np.isfinite(sim)):
        return math.inf
    err = np.abs(sim - ref) / np.maximum(np.abs(ref), floor)
    return float(np.max(err)) if err.size else 0.0


def _user_names(messages, labels, cards):
    """Messages with the deck's names (DMG3, any case) turned back into the user's."""
    import re

    names = {label.upper(): c.name for label, c in zip(labels, cards)}
    pattern = re.compile(r"(?<![A-Za-z0-9_])" + _LABEL + r"\d{1,9}(?![A-Za-z0-9_])", re.IGNORECASE)
    return [pattern.sub(lambda m: names.get(m.group(0).upper(), m.group(0)), text) for text in messages]


def _reference(card, simulator, temperature, file):
    """The evaluator's DC current and capacitance for one card [A], [F], and with a generation source
    its subcircuit's current at :data:`REVERSE_VOLTS` (the diode plus :func:`modelgen.leakage.source_current`)."""
    params = card.params  # what a card leaves out takes the SPICE defaults (evaluator.DEFAULTS)
    with np.errstate(all="ignore"):  # each simulator's own default GMIN, as its runner leaves it
        i_ref, _ = evaluator.dc_current(params, DC_VOLTS, simulator, temperature_c=temperature)
        c_ref = evaluator.capacitance(params, CAP_VOLTS, simulator, temperature_c=temperature)
        r_ref = None
        if card.source is not None and targets.SIMULATORS[simulator].behavioural_source:
            from ..leakage import source_current

            g = card.source
            r_ref = (evaluator.dc_current(params, REVERSE_VOLTS, simulator, temperature_c=temperature)[0]
                     + source_current(g["IG"], g["IE"], g["M"], g["VJ"], g["VG"], REVERSE_VOLTS))
    if not (np.all(np.isfinite(i_ref)) and np.all(np.isfinite(c_ref))
            and (r_ref is None or np.all(np.isfinite(r_ref)))):
        raise reader.CardSyntaxError(f".model {card.name}: its {simulator} equations give a non-finite "
                                     f"current or capacitance at {temperature:g} degC", file=file, row=card.line)
    return i_ref, c_ref, r_ref


def _simulate_chunk(simulator, chunk, temperature, timeout):
    from ..statistical import SIMULATORS as evaluating

    sources = targets.SIMULATORS[simulator].behavioural_source
    library, labels, *wrapped = deck_cards(chunk, sources, expressions=simulator in evaluating)
    rs = {label: c.params.get("RS", 0.0) for label, c in zip(labels, chunk)}
    extra = {"wrapped": wrapped[0], "reverse_volts": REVERSE_VOLTS} if sources and wrapped[0] else {}
    return runner(simulator).simulate(library, labels, DC_VOLTS, CAP_VOLTS, rs=rs, temperature_c=temperature,
                                      timeout=timeout, **extra), labels


def _run_chunk(pool, simulator, chunk, temperature, timeout, file):
    """One simulator process for ``chunk``, run while this thread evaluates the same cards."""
    pending = pool.submit(_simulate_chunk, simulator, chunk, temperature, timeout)
    refs = [_reference(c, simulator, temperature, file) for c in chunk]
    got, labels = pending.result()
    out = []
    for label, c, (i_ref, c_ref, r_ref) in zip(labels, chunk, refs):
        r = got[label]
        dc = _relative_error(r["current"], i_ref, CURRENT_FLOOR)
        messages = _user_names(list(r.get("messages", [])), labels, chunk)
        if r_ref is not None:
            dc = max(dc, _relative_error(r.get("reverse", []), r_ref, CURRENT_FLOOR))
        elif c.source is not None:
            messages.append(f"its generation source needs a behavioural source, which {simulator} lacks: "
                            "only the diode was checked")
        out.append(Outcome(c.name, simulator, c.section, dc, _relative_error(r["capacitance"], c_ref,
                                                                             CAPACITANCE_FLOOR),
                           messages, temperature))
    return out


def check_cards(cards, plan, *, file=None, temperature_c=None, timeout=DEFAULT_TIMEOUT, progress=None):
    """Run ``cards`` in the simulators ``plan`` gives each, in chunks, and compare.

    Parameters
    ----------
    cards : list of Card
        Diode cards, already validated.
    plan : list of tuple of str
        For each card, the simulators to run it in (installed ones).
    file : str, optional
        For error messages.
    temperature_c : float, optional
        Circuit temperature [degC]; default each card's TNOM (27 if none).
    timeout : float
        Seconds each simulator process may take.
    progress : callable, optional
        Called as ``progress(done, total)`` (card runs) after each chunk.

    Returns
    -------
    list of Outcome
        In file order, simulator by simulator.

    Raises
    ------
    modelgen.spice.process.SimulatorError
        A simulator failed or timed out.
    """
    from concurrent.futures import ThreadPoolExecutor

    from . import process

    total = sum(len(p) for p in plan)
    results = {}
    process.allow()
    # one worker thread waits for the simulator while this one evaluates (the simulator runs
    # on another core); on any exception here, the run in progress is killed, not awaited
    pool = ThreadPoolExecutor(max_workers=1, thread_name_prefix="modelgen-simulator")
    try:
        _run_all(pool, cards, plan, results, temperature_c, timeout, file, progress, total)
    except BaseException:
        process.cancel()
        raise
    finally:
        pool.shutdown(wait=True, cancel_futures=True)
        process.allow()
    return [results[(s, k)] for s in PACKAGES for k in range(len(cards)) if (s, k) in results]


def _run_all(pool, cards, plan, results, temperature_c, timeout, file, progress, total):
    done = 0
    for simulator in PACKAGES:
        groups = {}
        for k, (c, sims) in enumerate(zip(cards, plan)):
            if simulator in sims:
                t = temperature_c if temperature_c is not None else c.params.get("TNOM", 27.0)
                groups.setdefault(t, []).append(k)
        for t, members in groups.items():
            size = CHUNK.get(simulator, 50)
            for start in range(0, len(members), size):
                part = members[start:start + size]
                for k, o in zip(part, _run_chunk(pool, simulator, [cards[k] for k in part], t, timeout, file)):
                    results[(simulator, k)] = o
                done += len(part)
                if progress is not None:
                    progress(done, total)


#: The instance a scalable card (per-area and per-perimeter values, ``modelgen card --scalable``) is checked
#: at: a 100 x 100 um diode, bottom area [m^2] and perimeter [m].
SCALABLE_REFERENCE = (1e-8, 4e-4)
#: How ngspice's instance ``area`` and ``pj`` scale a diode's parameters (measured in tests/test_scalable.py).
INSTANCE_SCALING = {"IS": "area", "ISR": "area", "IKF": "area", "CJO": "area", "RS": "1/area",
                    "JSW": "pj", "CJSW": "pj"}


def at_instance(params, area, pj):
    """A card's parameters as one instance ``area``, ``pj`` of it sees them (:data:`INSTANCE_SCALING`), PJ=1."""
    factor = {"area": area, "1/area": 1.0 / area, "pj": pj}
    out = {k: v * factor[INSTANCE_SCALING[k]] if k in INSTANCE_SCALING else v for k, v in params.items()}
    if "JSW" in out or "CJSW" in out:
        out["PJ"] = 1.0
    return out


#: The parameters of a scalable subcircuit's diode given per m^2 of junction (:func:`modelgen.scalable.scalable_subckt`).
PER_JUNCTION_AREA = ("IS", "ISR", "IKF", "CJO")


def at_subckt_instance(params, scaling):
    """The totals one default instance of a scalable subcircuit sees: the diode's per-m^2 values times
    its junction area area + pj xj, and its series resistor RSA / area as RS."""
    junction = scaling["area"] + scaling["pj"] * scaling["xj"]
    out = {k: v * junction if k in PER_JUNCTION_AREA else v for k, v in params.items()}
    if scaling["rsa"] > 0:
        out["RS"] = scaling["rsa"] / scaling["area"]
    return out


def _scalable_lines(text):
    """Line numbers of the headers of scalable cards (``..: scalable diode model card, modelgen ...``)."""
    return [n for n, line in enumerate(reader.split_lines(text), start=1)
            if line.lstrip().startswith("*") and ": scalable diode model card, modelgen " in line]


def diode_cards(text, file=None, instance=None):
    """The diode cards of ``text``, validated (:func:`validate`); InputError when there is none.

    A card under a scalable card's header is taken as the instance :data:`SCALABLE_REFERENCE` sees it
    (:func:`at_instance`): what runs in the simulator and the evaluator is that 100 x 100 um diode. The
    diode of a scalable subcircuit is taken as its default instance sees it (:func:`at_subckt_instance`).
    ``instance`` = (bottom area [m^2], perimeter [m]) takes both kinds at that instance instead.
    A statistical library (known by its header) gives one card per point it is checked at: every
    process variable 0, then each one, global or local, at +1 (:func:`modelgen.statistical.read_library`).
    """
    from dataclasses import replace

    from .. import statistical

    if statistical.is_statistical(text):
        cards = statistical.read_library(text, file)
    else:
        cards = [c for c in reader.read_cards(text, file=file) if c.type == "D"]
    if not cards:
        raise InputError("no diode (.model NAME D) card found", file=file)
    scalable = _scalable_lines(text)
    if scalable:
        headers = [n for n, _ in dialect_headers(text)]
        for k, c in enumerate(cards):
            j = bisect.bisect_left(headers, c.line) - 1
            if j >= 0 and headers[j] in scalable:
                cards[k] = replace(c, params=at_instance(c.params, *(instance or SCALABLE_REFERENCE)))
    at = {} if instance is None else {"area": instance[0], "pj": instance[1]}
    cards = [replace(c, params=at_subckt_instance(c.params, c.scaling | at)) if c.scaling else c for c in cards]
    for c in cards:
        validate(c, file)
    return cards


def check_text(text, simulators=None, **options):
    """The outcomes of :func:`check_report` (a list of :class:`Outcome`)."""
    return check_report(text, simulators, **options).outcomes


def check_report(text, simulators=None, *, file=None, temperature_c=None, sample_size=None,
                 timeout=DEFAULT_TIMEOUT, progress=None, available=None):
    """Check the diode cards of ``text`` (see the module docstring).

    Parameters
    ----------
    text : str
        Cards or a library, as modelgen writes them or by hand.
    simulators : list of str, optional
        Run every card in these; default: each card in the simulators its
        header's dialect is meant for (all known ones without a header).
    file : str, optional
        For error messages.
    temperature_c : float, optional
        Circuit temperature [degC] for simulator and evaluator alike;
        default each card's TNOM (27 if none).
    sample_size : int, optional
        Check only this many cards, spread evenly (:func:`sample`).
    timeout : float
        Seconds each simulator process may take.
    progress : callable, optional
        ``progress(done, total)`` after each simulator process.
    available : callable, optional
        ``available(simulator) -> bool``; default :func:`installed`.

    Returns
    -------
    Report

    Raises
    ------
    modelgen.errors.InputError
        The text does not parse, holds no diode card, or a value is implausible.
    modelgen.spice.process.SimulatorError
        A simulator failed or timed out.
    """
    if temperature_c is not None:
        lo, hi = TEMPERATURE_RANGE
        if not (lo <= temperature_c <= hi):
            raise InputError(f"{temperature_c!r} degC is outside {lo:g}..{hi:g} degC", key="--temperature")
    cards = diode_cards(text, file)
    chosen = [cards[k] for k in sample(len(cards), sample_size)]
    wanted = [tuple(simulators)] * len(chosen) if simulators else meant_for(chosen, text)
    is_there = {}
    for s in dict.fromkeys(s for w in wanted for s in w):
        is_there[s] = (available or installed)(s)
    missing = {}
    plan = []
    for sims in wanted:
        plan.append(tuple(s for s in sims if is_there[s]))
        for s in sims:
            if not is_there[s]:
                missing[s] = missing.get(s, 0) + 1
    outcomes = check_cards(chosen, plan, file=file, temperature_c=temperature_c, timeout=timeout,
                           progress=progress)
    return Report(outcomes, len(cards), len(chosen), missing)


def table(outcomes):
    """A plain-text table of outcomes, one row per card and simulator."""
    rows = [("model", "section", "simulator", "T [degC]", "DC worst", "C worst", "result")]
    for o in outcomes:
        rows.append((o.model, o.section or "-", o.simulator, f"{o.temperature:g}", f"{o.dc_error:.2e}",
                     f"{o.cap_error:.2e}",
                     "ok" if o.ok else ("WARNING: " + "; ".join(o.messages) if o.messages else "MISMATCH")))
    widths = [max(len(r[k]) for r in rows) for k in range(len(rows[0]) - 1)]
    return "\n".join("  ".join(r[k].ljust(widths[k]) for k in range(len(widths))) + "  " + r[-1]
                     for r in rows) + "\n"

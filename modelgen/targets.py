"""The simulator targets: one object per output dialect, one per simulator.

Everything modelgen knows about a circuit simulator lives here, as data:

- a :class:`Simulator` is a program that reads cards (ngspice, gnucap): its
  constants (k, q), its default GMIN, which terms of the diode equations it
  implements (reverse tail, breakdown, recombination current, high-injection
  knee, sidewall current), its temperature law, and the module that runs it
  in batch mode;
- a :class:`Target` is what a card is written for (an output dialect): the
  parameters it carries, in card order, how the sidewall maps (own terms or
  folded into the bottom ones), whether it reads ``.lib`` sections, its
  templates, whose equations stand for it (``equations``, used by the
  evaluator and the temperature fit) and which simulators its cards are
  proven in (``simulators``, used by ``check``).

The card renderer (:mod:`modelgen.cards`), the evaluator
(:mod:`modelgen.spice.evaluator`), the corner fit (:mod:`modelgen.corners`)
and ``check`` ask these objects; no other module compares a dialect's or a
simulator's name. Adding a target is one :class:`Target` passed to
:func:`register`, plus a template if its syntax differs from the SPICE form.
"""

from __future__ import annotations

import importlib
from dataclasses import dataclass, field


@dataclass(frozen=True)
class Simulator:
    """A circuit simulator that reads the cards: constants and equation variants.

    Attributes
    ----------
    name : str
        The program's name (and its command).
    package : str
        The Debian package that installs it (named in messages).
    boltzmann, charge : float
        The simulator's own k [J/K] and q [C]; they matter at 1e-4, since a
        forward current at 0.8 V scales as exp(V q / k T).
    gmin : float
        Conductance it puts across every junction by default [S].
    reverse_tail : bool
        SPICE's reverse current -IS (1 + (3 N Vt / (e V))^3) below -3 N Vt.
    breakdown : bool
        BV / IBV modelled.
    recombination : bool
        ISR / NR with the depletion-width factor ((1 - Vd/VJ)^2 + 0.005)^(M/2).
    knee : bool
        The high-injection knee I / (1 + sqrt(I/IKF)).
    sidewall_current : bool
        JSW times the model's PJ adds to the saturation current.
    sidewall_capacitance_fc : str
        The card parameter that plays FC for the sidewall capacitance (``"FCS"``
        or ``"FC"``).
    temperature_law : str
        ``"spice3"``: IS, ISR, JSW by EG and XTI/N, CJO/VJ by SPICE3's law,
        BV by TCV, RS by TRS1/TRS2, TT by TTT1/TTT2. ``"saturation_only"``:
        only IS is rescaled, by (T/TNOM)^XTI exp(EG/(N Vt) (T/TNOM - 1)) (XTI
        not divided by N).
    runner : str
        Module (under :mod:`modelgen.spice`) that runs it in batch mode.
    behavioural_source : bool
        It runs modelgen's generation source (a ``B`` element with ``min``,
        ``pow`` and ``exp``, :mod:`modelgen.leakage`), so ``check`` can prove it.
    check_chunk : int
        Cards per simulator process in ``check`` (measured on a 2-core
        machine with cards from ``modelgen lots``: gnucap takes 0.06 s for 25
        cards, 0.34 s for 100 and 1.8 s for 200, superlinear; ngspice 0.2 s
        for 200 and 0.7 s for 400).
    """

    name: str
    package: str
    boltzmann: float
    charge: float
    gmin: float
    reverse_tail: bool
    breakdown: bool
    recombination: bool
    knee: bool
    sidewall_current: bool
    sidewall_capacitance_fc: str
    temperature_law: str
    runner: str
    check_chunk: int = 100
    behavioural_source: bool = False

    @property
    def xti_per_n(self):
        """True where the saturation-current law divides XTI by N (the SPICE3 law)."""
        return self.temperature_law == "spice3"

    def run_module(self):
        """The batch-runner module (``available()``, ``simulate()``)."""
        return importlib.import_module(f"modelgen.spice.{self.runner}")


@dataclass(frozen=True)
class Target:
    """An output dialect: what its cards carry and which simulators read them.

    Attributes
    ----------
    name : str
        The dialect's name on the command line and in card headers.
    title : str
        What it is, for card headers.
    carries : tuple of str
        The parameters the target reads, in card order. Temperature
        coefficients (TCV, TRS1, TRS2) appear only when a temperature fit
        supplies them.
    sidewall : str
        ``"split"``: the target has its own sidewall terms (JSW, CJSW, PHP,
        MJSW, FCS with perimeter factor PJ); ``"fold"``: the perimeter part is
        folded into IS and CJO (exact here: the sidewall has the bottom
        junction's physics per area).
    sections : bool
        The target reads ``.lib NAME`` / ``.endl`` sections.
    equations : str
        The simulator whose equations and temperature law stand for the
        target in the evaluator and the temperature fit.
    simulators : tuple of str
        The simulators its cards are meant for, and so proven in by ``check``.
    cost : dict
        For each card parameter the target cannot carry, what leaving it out
        costs (said in the card header).
    template, library_template : str
        Jinja2 templates of one card and of a library: a name in the
        package's ``templates/`` folder, or an absolute path.
    leakage_template : str or None
        Template of the form that wraps the diode and a behavioural source for
        the reverse generation current (:mod:`modelgen.leakage`) in a
        subcircuit; None where the target has no such source.
    scalable_template : str or None
        Template of the scalable subcircuit (:func:`modelgen.scalable.scalable_subckt`):
        instance parameters area and pj, one diode of junction area
        area + pj xj and a series resistance RS A / area; None where the
        target has no parameterised subcircuit.
    """

    name: str
    title: str
    carries: tuple
    sidewall: str
    sections: bool
    equations: str
    simulators: tuple
    cost: dict = field(default_factory=dict)
    template: str = "card.j2"
    library_template: str = "library.j2"
    leakage_template: str | None = None
    scalable_template: str | None = None

    @property
    def simulator(self):
        """The :class:`Simulator` whose equations stand for this target."""
        return SIMULATORS[self.equations]

    def fitted_temperature_parameters(self):
        """Card parameters a temperature fit supplies for this target, in fit order."""
        return ("EG", "XTI") + tuple(k for k in ("TCV", "TRS1", "TRS2") if k in self.carries)


SIMULATORS = {
    # ngspice 39: src/include/ngspice/const.h (CODATA 2014 values); the diode equations
    # of src/spicelib/devices/dio (read from the source and checked against its output)
    "ngspice": Simulator("ngspice", package="ngspice", boltzmann=1.38064852e-23, charge=1.6021766208e-19,
                         gmin=1e-12, reverse_tail=True, breakdown=True, recombination=True, knee=True,
                         sidewall_current=True, sidewall_capacitance_fc="FCS", temperature_law="spice3",
                         runner="ngspice", check_chunk=200, behavioural_source=True),
    # gnucap 0.36: include/constant.h, the values marked "(spice)"; its default diode
    # path has no reverse tail, no breakdown, no GMIN, and rescales IS alone
    "gnucap": Simulator("gnucap", package="gnucap", boltzmann=1.3806226e-23, charge=1.6021918e-19,
                        gmin=0.0, reverse_tail=False, breakdown=False, recombination=False, knee=False,
                        sidewall_current=False, sidewall_capacitance_fc="FC",
                        temperature_law="saturation_only", runner="gnucap", check_chunk=40),
}

#: What leaving a parameter off a card costs (card headers).
COST = {
    "ISR": "depletion-region recombination current: low-bias current is underestimated",
    "NR": "ideality of the recombination current",
    "IKF": "high-injection knee: current at high forward bias is overestimated",
    "BV": "breakdown: the reverse current does not break down",
    "IBV": "current at BV",
}

TARGETS: dict = {}


def register(target: Target):
    """Add ``target`` to :data:`TARGETS` (replacing one of the same name) and return it.

    Raises
    ------
    ValueError
        A simulator it names is unknown, or its sidewall mapping is neither
        ``"split"`` nor ``"fold"``.
    """
    for sim in (target.equations, *target.simulators):
        if sim not in SIMULATORS:
            raise ValueError(f"target {target.name}: unknown simulator {sim!r}; known: {', '.join(SIMULATORS)}")
    if target.sidewall not in ("split", "fold"):
        raise ValueError(f"target {target.name}: sidewall must be 'split' or 'fold'")
    TARGETS[target.name] = target
    return target


def unregister(name):
    """Remove a target (tests that register a toy one clean up with this)."""
    TARGETS.pop(name, None)


def get(name) -> Target:
    """The target called ``name``.

    Raises
    ------
    KeyError
        With a message listing the known targets.
    """
    try:
        return TARGETS[name]
    except KeyError:
        raise KeyError(f"unknown dialect {name!r}; known: {', '.join(sorted(TARGETS))}") from None


_LEVEL1 = ("IS", "N", "RS", "CJO", "VJ", "M", "FC", "TT", "BV", "IBV", "EG", "XTI", "TNOM")

# Berkeley SPICE3 level-1 diode (SPICE3 user's guide): portable, proven in both simulators
register(Target("spice3", "Berkeley SPICE3 level-1 diode", carries=_LEVEL1, sidewall="fold", sections=False,
                equations="ngspice", simulators=("ngspice", "gnucap"), cost=COST))
# ngspice 39 diode: names checked against ngspice's parameter table and its behaviour
# (PHP is the sidewall potential; VJSW is not accepted; PJ=1 on the model makes the
# sidewall values totals for one device, as AREA=1 does for the bottom ones)
register(Target("ngspice", "ngspice level-1 diode",
                carries=("IS", "JSW", "N", "RS", "CJO", "CJSW", "VJ", "PHP", "M", "MJSW", "FC", "FCS", "TT",
                         "BV", "IBV", "EG", "XTI", "ISR", "NR", "IKF", "PJ", "TCV", "TRS1", "TRS2", "TNOM"),
                sidewall="split", sections=True, equations="ngspice", simulators=("ngspice",), cost=COST,
                leakage_template="subckt.j2", scalable_template="scalable.j2"))
# gnucap 0.36 diode: no ISR/NR/IKF; BV is accepted but its default diode path has no breakdown
register(Target("gnucap", "gnucap diode",
                carries=("IS", "N", "RS", "CJO", "VJ", "M", "FC", "TT", "EG", "XTI", "TNOM"),
                sidewall="fold", sections=False, equations="gnucap", simulators=("gnucap",),
                cost={**COST, "BV": "gnucap 0.36's diode has no breakdown model, so BV would be read and ignored"}))

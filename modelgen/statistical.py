"""A statistical library for ngspice's own Monte Carlo, from a description's [spread] table.

The form
--------

One process variable per entry of the [spread] table (:mod:`modelgen.spread`),
each of unit standard deviation: standard normal for a normal or lognormal
entry, uniform on [-sqrt 3, sqrt 3] for a uniform one. A variable ``x``
moves its key as :func:`modelgen.spread.sample` does: a lognormal entry
multiplies the nominal value by exp(s' x), a normal or uniform one adds s x
(s the entry's sigma, s' = s / value; a local sigma scaled by
sqrt(reference_area / area), Pelgrom's law, as :func:`modelgen.spread.sample`).

Each variable is written with ngspice's own random functions in their
absolute form with nominal 0 (ngspice manual, "Using random param(eters)":
``agauss(nom, avar, sigma)`` is nom plus a Gaussian of standard deviation
avar / sigma; ``aunif(nom, avar)`` is nom plus a uniform draw on +-avar):
``agauss(0, 1, 1)`` and ``aunif(0, 1.7320508075688772)``. The relative forms
(``gauss``, ``unif``) vary a fraction of the nominal value, which is 0 here,
so they would vary nothing: the absolute form rules that confusion out.

How ngspice 39 draws them (measured, tests/test_statistical.py, and its
``inp_fix_agauss_in_param``): a ``.param`` whose right side calls a random
function becomes a function that every line reading it calls again, so
such a parameter read by two lines, or twice in one ``.model`` line, gives
two independent draws. A plain ``.param`` that reads it, however, is
evaluated once in its scope. So each variable is written in two lines::

    .param NAME_draw = agauss(0, 1, 1)
    .param NAME = {NAME_draw}

at the top level of the library for a global variable (one draw per
circuit load, shared by every instance), and inside the ``.subckt NAME a k``
wrapper for a local one (one draw per instance, shared by every parameter of
that instance's card). ngspice's command ``mc_source`` reloads the circuit,
so a ``.control`` loop of ``mc_source`` and an analysis is its Monte Carlo.

The card's parameters are expressions of the variables, from central
differences of :func:`modelgen.extraction.derive` at +-1 of each variable
(one derive call for every row): linear in log for the positive parameters
that vary multiplicatively (:data:`LOGARITHMIC`: P = P0 exp(sum b_j x_j)),
linear otherwise (P = P0 + sum b_j x_j). A parameter no variable moves
(relative sensitivity below :data:`STILL`) stays a number. The linearisation
error is measured against the full physics over samples of
:func:`modelgen.spread.sample` and written in the header.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, replace

import numpy as np

from . import description, extraction, spread, targets
from .cards.render import card_columns, environment, file_header
from .cards.text import comment_lines, format_number, safe
from .errors import InputError
from .spice import evaluator
from .spread import SHARINGS

#: Dialects with a statistical form (ngspice's numparam random functions and mc_source).
DIALECTS = ("ngspice",)
#: Simulators that evaluate the library's expressions themselves when it is checked.
SIMULATORS = ("ngspice",)
#: Parameters linearised in log: positive, and varying by factors (currents, capacitances, times, RS, BV).
LOGARITHMIC = ("IS", "JSW", "ISR", "IKF", "CJO", "CJSW", "TT", "RS", "BV", "IBV")
#: A parameter whose sensitivities are all below this (relative to its nominal value) stays a number.
STILL = 1e-9
#: Half-width of a uniform variable of unit standard deviation: sqrt(3).
UNIFORM_HALF_WIDTH = math.sqrt(3.0)
#: Figures whose linearisation error is stated beside the parameters'.
FIGURES = ("VF@1mA", "C@-1V")
#: The first header line's title, by which check knows the form.
TITLE = "statistical diode library"
#: ngspice's random call of each kind of variable.
DRAWS = {"normal": "agauss(0, 1, 1)", "uniform": f"aunif(0, {UNIFORM_HALF_WIDTH!r})"}


@dataclass(frozen=True)
class Variable:
    """One process variable: its .param name, the [spread] entry it stands for, and its draw."""

    name: str
    key: str
    shared: str          # "global" or "local"
    distribution: str    # the entry's: normal, lognormal, uniform
    step: float          # what x = 1 does to the key: a log step (lognormal) or a step in SI units
    mix: tuple = ()      # correlated: x = sum c z_j over (c, j), z_j the independent draw of variable j

    @property
    def draw(self):
        """The variable's own distribution: ``"uniform"`` for a uniform entry, else ``"normal"``."""
        return "uniform" if self.distribution == "uniform" else "normal"


def variables(device, tolerances, kind="both"):
    """The process variables of ``tolerances`` for the nominal ``device`` (length 1), in entry order.

    ``kind`` ("global", "local", "both") keeps the entries of that sharing.
    Names: the model name in lower case, ``_g_`` or ``_l_``, the key with
    dots as underscores (``dsw_demo_g_n_doping``). Correlated entries
    (``correlations`` in [spread]) get their ``mix``: the row of the
    Cholesky factor of their sharing's correlation matrix that
    :func:`modelgen.spread.sample` mixes its independent normal draws with.
    """
    area = float(device.area[0])
    prefix = str(device.name[0]).lower()
    out = []
    for t in tolerances.entries:
        if kind not in ("both", t.shared):
            continue
        s = t.sigma
        if t.shared == "local" and t.area_scaling:
            s = s * math.sqrt(tolerances.reference_area / area)
        if t.distribution == "lognormal":
            s = s / float(spread.key_column(device, t.key)[0])
        out.append(Variable(f"{prefix}_{t.shared[0]}_{t.key.replace('.', '_')}", t.key, t.shared,
                            t.distribution, s))
    index = {(v.key, v.shared): j for j, v in enumerate(out)}
    for shared in SHARINGS if tolerances.correlations else ():
        chosen, rho = tolerances.correlation_matrix(shared)
        if len(chosen) < 2 or np.array_equal(rho, np.eye(len(chosen))) or (chosen[0].key, shared) not in index:
            continue
        lower = np.linalg.cholesky(rho)  # as spread.sample mixes its normal draws
        at = [index[(t.key, shared)] for t in chosen]
        rows_ = [tuple((float(lower[i, k]), at[k]) for k in range(i + 1) if lower[i, k] != 0.0)
                 for i in range(len(at))]
        mixed = [r != ((1.0, at[i]),) for i, r in enumerate(rows_)]
        read = {j for r, m in zip(rows_, mixed) if m for _, j in r}  # draws a mixture reads
        for i, j in enumerate(at):
            if mixed[i] or j in read:
                out[j] = replace(out[j], mix=rows_[i])
    return out


def rows(device, variables_, x, file=None):
    """Devices at variable values ``x`` (rows, variables): what :func:`modelgen.spread.sample` gives for
    the draws behind ``x`` (factors of lognormal entries multiply, steps add).

    Raises InputError (key ``spread.KEY``) for a value outside the key's range
    (a normal entry whose one-sigma step makes a doping negative, say).
    """
    x = np.asarray(x, float)
    n = x.shape[0]
    out = spread.repeated(device, n)
    factor, shift = {}, {}
    for j, v in enumerate(variables_):
        if v.distribution == "lognormal":
            factor[v.key] = factor.get(v.key, 0.0) + v.step * x[:, j]
        else:
            shift[v.key] = shift.get(v.key, 0.0) + v.step * x[:, j]
    for key in sorted(set(factor) | set(shift)):
        nominal = float(spread.key_column(device, key)[0])
        value = nominal * np.exp(factor[key]) if key in factor else np.full(n, nominal)
        value = value + shift.get(key, 0.0)

        def refuse(mask, _, message, values=None, key=key):
            if np.any(mask):
                i = int(np.flatnonzero(mask)[0])
                text = message.format(**{k: v[i] for k, v in values.items()}) if values else message
                raise InputError(f"{text} one sigma from the nominal value: the library cannot be linearised "
                                 "there; give the key a lognormal distribution or a smaller sigma",
                                 file=file, key=f"spread.{key}")

        description.check_range(key, value, refuse)
        out = spread.with_key(out, key, value)
    return out


def values_of(device, tolerances, variables_, seed, n):
    """The variable values behind ``n`` rows of :func:`modelgen.spread.sample` (seed ``seed``), and the rows.

    spread.sample draws the global entries from one stream and the local ones
    from another, whatever is kept; so its "global" and "local" samples of
    one seed hold, each alone, the two parts of its "both" sample, and each
    variable is read back from the key it moves there.
    """
    kinds = {v.shared for v in variables_}
    kind = "both" if len(kinds) > 1 else next(iter(kinds))
    full = spread.sample(device, tolerances, n, seed, kind)
    x = np.zeros((n, len(variables_)))
    for shared in kinds:
        part = spread.sample(device, tolerances, n, seed, shared) if kind == "both" else full
        for j, v in enumerate(variables_):
            if v.shared != shared or v.step == 0:
                continue
            nominal = float(spread.key_column(device, v.key)[0])
            value = np.asarray(spread.key_column(part, v.key), float)
            x[:, j] = (np.log(value / nominal) if v.distribution == "lognormal" else value - nominal) / v.step
    return x, full


@dataclass(frozen=True)
class Expression:
    """A card parameter: P0 exp(sum b x) (``log``) or P0 + sum b x (``linear``); ``terms``: (b, variable index)."""

    form: str
    nominal: float
    terms: tuple

    def evaluate(self, x):
        """The parameter at variable values ``x`` (rows, variables), vectorised."""
        x = np.atleast_2d(np.asarray(x, float))
        s = np.zeros(x.shape[0])
        for b, j in self.terms:
            s = s + b * x[:, j]
        return self.nominal * np.exp(s) if self.form == "log" else self.nominal + s

    def text(self, names):
        """The ngspice text: ``{P0*exp(b1*x1+b2*x2)}`` or ``{P0+b1*x1}``; the nominal number when still."""
        p0 = format_number(self.nominal)
        if not self.terms:
            return p0
        sums = "".join(("+" if b >= 0 else "-") + f"{format_number(abs(b))}*{names[j]}" for b, j in self.terms)
        return "{" + (f"{p0}*exp({sums.lstrip('+')})" if self.form == "log" else p0 + sums) + "}"


def sensitivities(device, variables_, dialect="ngspice", file=None):
    """Each card parameter as an :class:`Expression` of the variables, from central differences.

    Rows: the nominal device, then each variable at +1 and at -1, all derived
    in one :func:`modelgen.extraction.derive` call; b_j = (f(+1) - f(-1)) / 2
    with f = ln P for :data:`LOGARITHMIC` parameters, P otherwise.

    Returns
    -------
    (dict, Result) :
        Card parameter name -> Expression in the dialect's card order (those
        the nominal card carries), and the nominal Result (one row).

    Raises
    ------
    InputError
        A row the physics cannot describe (from derive), or a parameter
        that a step of one sigma makes non-finite or non-positive in log form.
    """
    k = len(variables_)
    x = np.zeros((1 + 2 * k, k))
    for j in range(k):
        x[1 + 2 * j, j] = 1.0
        x[2 + 2 * j, j] = -1.0
    result = extraction.derive(rows(device, variables_, x, file))
    columns, _ = card_columns(result, dialect)
    out = {}
    for name, column in columns:
        column = np.asarray(column, float)
        p0 = float(column[0])
        if not math.isfinite(p0):
            continue
        log = name in LOGARITHMIC and p0 > 0
        f = np.log(column) if log and np.all(column > 0) else column
        if not np.all(np.isfinite(f)):
            raise InputError(f"{name} is not finite{' and positive' if log else ''} one sigma away from the "
                             "nominal device: the library cannot be linearised there", key="spread")
        b = 0.5 * (f[1::2] - f[2::2])
        scale = 1.0 if log else max(abs(p0), 1e-300)
        terms = tuple((float(bj), j) for j, bj in enumerate(b) if abs(bj) / scale >= STILL)
        out[name] = Expression("log" if log else "linear", p0, terms)
    return out, result.take([0])


def _figure_columns(params, temperature):
    """VF@1mA [V] and C@-1V [F] of cards given as columns (the card's own equations, ngspice's)."""
    vf = spread.forward_voltage(params, temperature, 1e-3)
    c = evaluator.depletion_capacitance(params["CJO"], params["VJ"], params["M"], params["FC"], -1.0)
    if "CJSW" in params:
        c = c + evaluator.depletion_capacitance(params["CJSW"], params["PHP"], params["MJSW"], params["FCS"], -1.0)
    return {"VF@1mA": vf, "C@-1V": c}


def linearisation_error(device, tolerances, variables_, expressions, n=4000, seed=1, dialect="ngspice"):
    """Largest relative difference of the linearised expressions from the full physics over ``n`` samples.

    The samples are :func:`modelgen.spread.sample`'s (seed ``seed``); each is
    derived in full (one derive call) and its card taken in the dialect; the
    expressions are evaluated at the sample's variable values. VF@1mA and
    C@-1V are computed with the card's own equations from both.

    Returns
    -------
    dict
        Parameter or figure -> largest |linear / full - 1| (fraction), for
        each varying parameter and each of :data:`FIGURES`.
    """
    x, full_rows = values_of(device, tolerances, variables_, seed, n)
    columns, _ = card_columns(extraction.derive(full_rows), dialect)
    full = {k: np.asarray(v, float) for k, v in columns}
    linear = {k: e.evaluate(x) for k, e in expressions.items()}
    out = {}
    for k, e in expressions.items():
        if e.terms:
            out[k] = float(np.max(np.abs(linear[k] / full[k] - 1.0)))
    t = np.full(n, float(np.asarray(full_rows.temperature, float)[0]))
    figures_full = _figure_columns(full, t)
    figures_linear = _figure_columns({k: linear.get(k, full.get(k)) for k in full}, t)
    for f in FIGURES:
        out[f] = float(np.max(np.abs(figures_linear[f] / figures_full[f] - 1.0)))
    return out


def _declarations(found, shared):
    """The template's variables of one sharing: (name, draw, mixing text or None), and the mixed ones last.

    A correlated variable reads its own draw into ``NAME_z`` (a plain .param:
    one value) and is the mixture ``{0+c1*A_z+c2*B_z}`` of its group's.
    """
    mine = [v for v in found if v.shared == shared]
    names = [f"{v.name}_z" for v in found]
    return {"draws": [(v.name, DRAWS[v.draw], bool(v.mix)) for v in mine],
            "mixes": [(v.name, Expression("linear", 0.0, v.mix).text(names)) for v in mine if v.mix]}


@dataclass
class Library:
    """A statistical library: its text and its document (variables, expressions, linearisation error)."""

    text: str
    document: dict


def _percent(x):
    return f"{100 * x:.2g} %"


def library(device, tolerances, *, dialect="ngspice", kind="both", samples=4000, seed=1, source=None):
    """The statistical library of the nominal ``device`` (length 1) with ``tolerances``.

    Parameters
    ----------
    device : Device
        The nominal device, SI.
    tolerances : modelgen.spread.Tolerances
    dialect : str
        Only the dialects of :data:`DIALECTS`.
    kind : {"both", "global", "local"}
        Which entries become variables.
    samples, seed : int
        The samples of :func:`modelgen.spread.sample` the linearisation error is measured over.
    source : str, optional
        The description's file name, for the header.

    Returns
    -------
    Library

    Raises
    ------
    InputError
        A dialect without a statistical form (key ``--dialect``), no entry of
        the kind asked for, or what :func:`sensitivities` raises.
    """
    if dialect not in DIALECTS:
        raise InputError(f"a statistical library is written for {', '.join(DIALECTS)} only (its random "
                         f"functions and mc_source), not {dialect}", key="--dialect")
    found = variables(device, tolerances, kind)
    if not found:
        raise InputError(f"the [spread] table has no {kind} entry to make a variable of",
                         file=tolerances.file, key="spread")
    expressions, nominal = sensitivities(device, found, dialect, tolerances.file)
    error = linearisation_error(device, tolerances, found, expressions, samples, seed, dialect)
    name = str(device.name[0])
    names = [v.name for v in found]
    logs = [k for k, e in expressions.items() if e.terms and e.form == "log"]
    linears = [k for k, e in expressions.items() if e.terms and e.form == "linear"]
    extra = [
        "use: .include this file; instance X1 anode cathode " + name + "; ngspice's Monte Carlo is a .control "
        "loop of mc_source (a reload: new draws) and an analysis",
        "process variables, one per [spread] entry, each of unit standard deviation: agauss(0, 1, 1) (standard "
        "normal), aunif(0, 1.7320508075688772) (uniform on +-sqrt 3); the absolute form with nominal 0, since "
        "the relative forms gauss and unif vary a fraction of a nominal 0, that is nothing (ngspice manual, "
        "Using random param(eters))",
        "global variables: one draw per run (a .param at the top level, read through a plain .param so that "
        "ngspice evaluates it once); local variables: one draw per instance (the same two lines inside the "
        ".subckt)",
    ]
    for v in found:
        sigma = "log sigma" if v.distribution == "lognormal" else "sigma (SI)"
        extra.append(f"  {v.name}: {v.key}, {v.shared}, {v.distribution}, {sigma} {v.step:.6g}"
                     + (" (scaled for this area)" if v.shared == "local" else ""))
    if any(v.mix for v in found):
        extra.append("correlated variables: each reads its own draw into NAME_z and is the mixture of its "
                     "group's z by the Cholesky factor of the [spread] correlations, as modelgen spread draws")
    if logs:
        extra.append(f"linear in log, P = P0 exp(sum b x): {', '.join(logs)}")
    if linears:
        extra.append(f"linear, P = P0 + sum b x: {', '.join(linears)}")
    extra.append("sensitivities b: central differences of the physics at +-1 of each variable")
    extra.append(f"linearisation error, largest over {samples} samples of modelgen spread (seed {seed}) "
                 "against the full physics: " + "; ".join(f"{k} {_percent(v)}" for k, v in error.items()))
    header = file_header(dialect, f"{name}: {TITLE}", 1, result=nominal, extra=extra)
    lines = [f"* {name}: statistical" + (f", from {safe(str(source).rsplit('/', 1)[-1])}" if source else "")]
    for severity, _kind, text in nominal.findings_for(0):
        if severity != "caution":
            lines += comment_lines(f"{severity}: {text}")
    template = environment().get_template("statistical.j2")
    body = template.render(
        name=name, lines=lines,
        globals=_declarations(found, "global"), locals=_declarations(found, "local"),
        params=[(k, e.text(names)) for k, e in expressions.items()])
    text = environment().get_template(targets.get(dialect).library_template).render(
        header=header, sections=[{"name": None, "body": body}])
    from .cards.reader import MAX_LINE

    longest = max(len(x) for x in text.splitlines() if not x.startswith("*"))
    if longest > MAX_LINE:
        raise InputError(f"{len(found)} process variables make a card line of {longest} characters, more than "
                         f"the {MAX_LINE} a simulator reads: spread fewer keys", file=tolerances.file, key="spread")
    document = {
        "name": name, "dialect": dialect, "samples": int(samples), "seed": int(seed),
        "variables": [{"name": v.name, "key": v.key, "shared": v.shared, "distribution": v.distribution,
                       "draw": DRAWS[v.draw], "step": v.step,
                       "mix": {f"{found[j].name}_z": c for c, j in v.mix}} for v in found],
        "parameters": {k: {"form": e.form, "nominal": e.nominal,
                           "sensitivities": {names[j]: b for b, j in e.terms}} for k, e in expressions.items()},
        "linearisation_error": error,
    }
    return Library(text, document)


# ------------------------------------------------------------------------------------------------ reading back

_HEADER = f": {TITLE}, modelgen "
_UNUM = r"(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?"
_NUM = r"[-+]?" + _UNUM
_IDENT = r"[a-z][a-z0-9_]*"
_DRAW = re.compile(r"\.param\s+(" + _IDENT + r")_draw\s*=\s*(agauss\(0, 1, 1\)|aunif\(0, 1\.7320508075688772\))\Z")
_READ = re.compile(r"\.param\s+(" + _IDENT + r")\s*=\s*\{(" + _IDENT + r")_draw\}\Z")
_TERM = re.compile(r"([-+]?)(" + _UNUM + r")\*(" + _IDENT + r")")
_TERMS = r"([-+]?" + _UNUM + r"\*" + _IDENT + r"(?:[-+]" + _UNUM + r"\*" + _IDENT + r")*)"
_LOG = re.compile(r"\{(" + _NUM + r")\*exp\(" + _TERMS + r"\)\}\Z")
_LINEAR = re.compile(r"\{(" + _NUM + r")((?:[-+]" + _UNUM + r"\*" + _IDENT + r")+)\}\Z")
_MIX = re.compile(r"\.param\s+(" + _IDENT + r")\s*=\s*(\{\S+\})\Z")
_PARAM = re.compile(r"([A-Za-z][A-Za-z0-9_]*)=(\S+)\Z")


def is_statistical(text):
    """True if ``text`` holds the header of a statistical library modelgen wrote (plain string tests)."""
    from .cards import reader

    return any(line.lstrip().startswith("*") and _HEADER in line for line in reader.split_lines(text))


def _terms(text, index, bad):
    out = []
    for sign, number, name in _TERM.findall(text):
        if name not in index:
            raise bad(f"{name} is not a process variable of the library")
        out.append((float(sign + number), index[name]))
    return tuple(out)


def read_library(text, file=None):
    """A statistical library modelgen wrote -> its variables and the points it is checked at, as Cards.

    The form is read exactly as :func:`library` writes it (the draw and read
    ``.param`` lines, correlated variables as mixtures of their group's
    ``NAME_z`` draws, one ``.subckt NAME a k`` with ``D1 a k NAME`` and the
    ``.model`` whose values are numbers or :class:`Expression` texts); any
    other line than comments is refused. Returns one
    :class:`~modelgen.cards.reader.Card` per point: all variables 0
    (section ``nominal``), then each variable, global or local, at +1 (section
    ``VARIABLE+1``), each with its ``params`` evaluated here and its
    ``expressions`` (name -> Expression) and ``variables`` (names and values)
    for the simulator to evaluate itself.

    Raises
    ------
    modelgen.cards.reader.CardSyntaxError
        A line outside the form, naming it.
    """
    from .cards import reader

    variables_, kinds, zs = [], {}, set()
    draws, model, wrapper, params, first = {}, None, None, {}, None
    for number, pieces in reader._logical_lines(str(text), file):
        def bad(message, number=number):
            return reader.CardSyntaxError(f"statistical library: {message}", file=file, row=number)

        line = " ".join(s.strip() for _, s in pieces)
        low = line.lower()
        m = _DRAW.match(low)
        if m:
            draws[m.group(1)] = m.group(2)
            continue
        m = _READ.match(low)
        if m:
            name, drawn = m.groups()
            if drawn not in draws or name not in (drawn, drawn + "_z"):
                raise bad(f"{name} does not read its own draw")
            if name == drawn:
                variables_.append(name)
                kinds[name] = "local" if wrapper else "global"
            else:
                zs.add(name)
            continue
        m = _MIX.match(low)
        if m:
            mixed = _LINEAR.match(m.group(2))
            if not mixed or float(mixed.group(1)) != 0.0 or m.group(1) + "_z" not in zs:
                raise bad(f"{m.group(1)} is not a mixture of draws of the library's form")
            _terms(mixed.group(2), {z: 0 for z in zs}, bad)
            variables_.append(m.group(1))
            kinds[m.group(1)] = "local" if wrapper else "global"
            continue
        words = line.split()
        if low.startswith(".subckt"):
            if wrapper or len(words) != 4 or words[2:] != ["a", "k"]:
                raise bad("expected one .subckt NAME a k")
            wrapper = words[1]
            continue
        if low.startswith(".ends"):
            if not wrapper:
                raise bad(".ends without .subckt")
            wrapper = False
            continue
        if low.startswith("d1 "):
            if not wrapper or words[1:] != ["a", "k", wrapper]:
                raise bad("expected D1 a k NAME inside the .subckt")
            continue
        if low.startswith(".model"):
            if not wrapper or model is not None or len(words) < 3 or words[1] != wrapper or words[2:4] != ["D", "("]:
                raise bad("expected one .model NAME D ( inside the .subckt")
            model, first = wrapper, number
            index = {name: j for j, name in enumerate(variables_)}
            for row, piece in pieces[1:]:
                piece = piece.strip()
                if piece == ")":
                    continue
                pm = _PARAM.match(piece)
                if not pm:
                    raise bad(f"{piece[:40]!r} is not KEY=value", row)
                key, value = pm.group(1).upper(), pm.group(2)
                if key in params:
                    raise bad(f"{key} is given twice", row)
                if value.startswith("{"):
                    lm, nm = _LOG.match(value.lower()), _LINEAR.match(value.lower())
                    if not (lm or nm):
                        raise bad(f"{key}: {value[:40]!r} is not an expression of the library's form", row)
                    m2 = lm or nm
                    params[key] = Expression("log" if lm else "linear", float(m2.group(1)),
                                             _terms(m2.group(2), index, lambda s, row=row: bad(s, row)))
                else:
                    params[key] = Expression("linear", reader.parse_number(value, file=file, line=row, key=key), ())
            continue
        raise bad(f"{line[:40]!r} is not part of modelgen's statistical form")
    if model is None or wrapper:
        raise reader.CardSyntaxError("statistical library: no complete .subckt with its .model", file=file)
    points = [("nominal", np.zeros(len(variables_)))]
    for j, name in enumerate(variables_):  # every variable, global and local, at +1 on its own
        x = np.zeros(len(variables_))
        x[j] = 1.0
        points.append((f"{name}+1", x))
    cards = []
    for section, x in points:
        values = {k: float(e.evaluate(x[None, :])[0]) for k, e in params.items()}
        cards.append(reader.Card(name=model, type="D", params=values, line=first, section=section,
                                 expressions=dict(params), variables=tuple(zip(variables_, x.tolist()))))
    return cards


__all__ = ["DIALECTS", "Expression", "LOGARITHMIC", "Library", "Variable", "is_statistical", "library",
           "linearisation_error", "read_library", "sensitivities", "values_of", "variables"]

"""Measured I-V and C-V curves: plain CSV with units in brackets, read into SI arrays.

A measurement file is a CSV table whose first line (after any ``#`` comment
lines, which are skipped wherever they are) names the columns, each numeric
column with its unit in brackets, like a lot table (:mod:`modelgen.lots`)::

    V [V], I [A], T [degC], area [um^2], perimeter [um]
    V [mV], C [pF]
    wafer, V [V], I [mA]

Columns: ``V`` (bias), ``I`` (current, an I-V file) or ``C`` (capacitance, a
C-V file), optionally ``T`` (temperature), ``area``, ``perimeter`` (or the
words ``voltage``/``bias``, ``current``, ``capacitance``, ``temperature`` in
any case; the one-letter names in upper case), and one
group column of plain text named by the caller (``group="wafer"``). Any unit
of the right dimension may stand in the brackets; pint reads the header only
and every value is a plain number converted with its column's factor. Other
numeric columns are not used (a note says so); a column of text that is not
the group is an error.

Sweeps
    A sweep is a run of consecutive points with the same group, temperature,
    area and perimeter. Within a sweep the bias must be strictly monotonic
    (either way); a sweep needs at least :data:`MIN_POINTS` points. A logged
    temperature that wanders (a chuck's regulation) is one temperature while
    each point stays within :data:`TEMPERATURE_TOLERANCE` of the one before:
    such a run is taken at its median temperature, and a note says so.

Compliance (I-V)
    Stated (``compliance`` [A]): every point with ``|I|`` within
    :data:`COMPLIANCE_TOLERANCE` of it or above is left out. Found (not
    stated): in each sweep, the largest ``|I|`` repeated within
    :data:`COMPLIANCE_TOLERANCE` by two or more points at the sweep's end of
    largest ``|V|`` on that side (the current has stopped growing with
    ``|V|``); those points are left out.

Noise floor (I-V)
    Stated (``floor`` [A]): every point with ``|I|`` below it is left out.
    Found (not stated), per sweep, on the forward points (V > 0) in order of
    rising V and after the compliance points are gone: the current must rise
    strictly, and be positive, from some point up to the top; the forward
    points before that run are below the floor. Only failures in the lower
    half of the sweep's decades count (|I| below the geometric mean of its
    smallest non-zero and largest forward |I|): a dip among large currents
    is noise or heating, not the floor. The floor level is the
    largest ``|I|`` among them, and every point of the sweep (also reverse
    ones) whose ``|I|`` is not above :data:`FLOOR_MARGIN` times that level is
    left out too. A sweep whose forward current rises all the way has no
    found floor.

A C-V file has neither; a capacitance at or below zero is an error.

Whatever is left out is kept in the curve with ``use`` False and said in
``notes`` (counts and lines). A sweep left with fewer than
:data:`MIN_POINTS` usable points is left out as a whole (a note); a file
with fewer than :data:`MIN_POINTS` usable points is an error.

Every problem with a file is one :class:`~modelgen.errors.InputError` naming
the file, the line (as an editor counts it) and the column; nothing partial
is returned.
"""

from __future__ import annotations

import csv
from dataclasses import dataclass, field, replace
from itertools import pairwise

import numpy as np

from .errors import InputError, shown
from .textio import read_text
from .units import MAX_UNIT, apply_factor, unit_factor

#: Largest measurement file read (a sweep of thousands of points is well under 1 MiB).
READ_LIMIT = 16 * 2**20
#: Fewest points a sweep needs, and fewest usable points a file needs.
MIN_POINTS = 3
#: Consecutive logged temperatures this close [K] belong to one sweep (a chuck's regulation, common practice:
#: hot chucks hold +-0.1 to +-0.5 K); the sweep is then taken at its median.
TEMPERATURE_TOLERANCE = 0.5
#: Relative closeness of currents taken as one compliance level (0.1 %).
COMPLIANCE_TOLERANCE = 1e-3
#: Points of a sweep whose |I| is not above this many times the found floor level are left out.
FLOOR_MARGIN = 2.0
#: Longest column name.
MAX_KEY = 64

#: Column roles: accepted names -> (role, kind of quantity in units.KINDS). The one-letter names are
#: upper case (a "t [s]" column is a time, not a temperature); the words are matched in any case.
_ROLES = {
    "V": ("v", "voltage"), "voltage": ("v", "voltage"), "bias": ("v", "voltage"),
    "I": ("y_iv", "current"), "current": ("y_iv", "current"),
    "C": ("y_cv", "capacitance"), "capacitance": ("y_cv", "capacitance"),
    "T": ("temperature", "temperature"), "temperature": ("temperature", "temperature"),
    "area": ("area", "area"),
    "perimeter": ("perimeter", "length"),
}
_EXAMPLE = {"voltage": "V [V]", "current": "I [A]", "capacitance": "C [pF]", "temperature": "T [degC]",
            "area": "area [um^2]", "length": "perimeter [um]"}
KINDS = ("iv", "cv")


@dataclass
class Curve:
    """All the points of one measurement file (SI; arrays of equal length).

    Attributes
    ----------
    kind : str
        ``"iv"`` or ``"cv"``.
    file : str
    v : ndarray
        Bias [V].
    y : ndarray
        Current [A] (iv) or capacitance [F] (cv).
    line : ndarray of int
        1-based line number of each point in the file.
    temperature : ndarray
        [K]; NaN where the file has no temperature column.
    area : ndarray
        [m^2]; NaN where none.
    perimeter : ndarray
        [m]; NaN where none.
    group : ndarray of object (str)
        The group column's text; ``""`` where there is none.
    use : ndarray of bool
        False for points left out (compliance, noise floor, too short a sweep).
    notes : list of str
        What was left out and why, with counts and lines; columns not used.
    """

    kind: str
    file: str
    v: np.ndarray
    y: np.ndarray
    line: np.ndarray
    temperature: np.ndarray
    area: np.ndarray
    perimeter: np.ndarray
    group: np.ndarray
    use: np.ndarray
    notes: list = field(default_factory=list)

    def __len__(self):
        return len(self.v)

    def sweeps(self):
        """Indices of each sweep: runs of consecutive points of one (group, T, area, perimeter)."""
        return _sweeps(self.group, self.temperature, self.area, self.perimeter)

    def take(self, mask):
        """The points where ``mask`` (a bool mask or indices), as a Curve of their own (notes kept)."""
        idx = np.arange(len(self))[mask]
        return replace(self, v=self.v[idx], y=self.y[idx], line=self.line[idx],
                       temperature=self.temperature[idx], area=self.area[idx], perimeter=self.perimeter[idx],
                       group=self.group[idx], use=self.use[idx], notes=list(self.notes))


def _same(a):
    """True where entry k equals entry k - 1 (NaN equal to NaN), for k >= 1."""
    if a.dtype == object:
        return a[1:] == a[:-1]
    return (a[1:] == a[:-1]) | (np.isnan(a[1:]) & np.isnan(a[:-1]))


def _sweeps(*keys):
    n = len(keys[0])
    if n == 0:
        return []
    same = np.ones(n - 1, bool)
    for k in keys:
        same &= _same(np.asarray(k))
    starts = np.concatenate([[0], np.flatnonzero(~same) + 1, [n]])
    return [np.arange(a, b) for a, b in pairwise(starts)]


# ---------------------------------------------------------------------------------------- text

def _si(x, unit):
    """``x`` with an SI prefix, three significant digits: 0.01 -> "10 mA"."""
    if x == 0 or not np.isfinite(x):
        return f"{x:g} {unit}"
    prefixes = ((1e-15, "f"), (1e-12, "p"), (1e-9, "n"), (1e-6, "u"), (1e-3, "m"), (1.0, ""), (1e3, "k"))
    scale, p = prefixes[0]
    for s, q in prefixes:
        if abs(x) >= s * (1 - 1e-9):
            scale, p = s, q
    return f"{x / scale:.3g} {p}{unit}"


def _line_ranges(lines):
    """Sorted line numbers as ranges: [3, 4, 5, 9] -> "lines 3-5, 9"."""
    lines = np.sort(np.asarray(lines, int))
    if len(lines) == 0:
        return "no lines"
    breaks = np.flatnonzero(np.diff(lines) != 1)
    starts = np.concatenate([[0], breaks + 1])
    ends = np.concatenate([breaks, [len(lines) - 1]])
    parts = [f"{lines[a]}" if a == b else f"{lines[a]}-{lines[b]}" for a, b in zip(starts, ends)]
    more = len(parts) - 8
    shown_parts = parts if more <= 0 else parts[:8] + [f"... ({more} more range{'' if more == 1 else 's'})"]
    return ("line " if len(lines) == 1 else "lines ") + ", ".join(shown_parts)


def _points(k):
    return f"{k} point" + ("" if k == 1 else "s")


# ---------------------------------------------------------------------------------------- reading

def _records(text):
    """The records of ``text`` that are neither blank nor ``#`` comments, with their line numbers."""
    if "\r" in text:
        text = text.replace("\r\n", "\n").replace("\r", "\n")
    kept = [(k + 1, ln) for k, ln in enumerate(text.split("\n"))
            if ln.strip(" ,\t") and not ln.lstrip().startswith("#")]
    lines = [k for k, _ in kept]
    if '"' not in text:
        return [ln.split(",") for _, ln in kept], lines
    return list(csv.reader([ln for _, ln in kept])), lines


def _header(cell, j, file, row):
    """``(name, unit or None)`` of a header cell: ``name`` or ``name [unit]``."""
    name, bracket, rest = cell.partition("[")
    name, unit = name.strip(), None
    if bracket:
        rest = rest.rstrip()
        if not rest.endswith("]") or "[" in rest or "]" in rest[:-1]:
            raise InputError(f"column {j + 1}: {shown(cell)} is not 'name' or 'name [unit]'", file=file, row=row)
        unit = rest[:-1].strip() or None
    if not name:
        raise InputError(f"column {j + 1}: {shown(cell)} names no column", file=file, row=row)
    if len(name) > MAX_KEY:
        raise InputError(f"column {j + 1}: a name of {len(name)} characters: at most {MAX_KEY} are accepted",
                         file=file, row=row)
    if unit is not None and len(unit) > MAX_UNIT:
        raise InputError(f"a unit of {len(unit)} characters: at most {MAX_UNIT} are accepted",
                         file=file, row=row, key=name)
    return name, unit


def _numbers(cells, lines, file, name):
    """Plain numbers of one column (finite), or the error at the first bad cell."""
    try:
        x = np.fromiter(map(float, cells), float, len(cells))
    except ValueError:
        x = None
    if x is None or not np.isfinite(x).all():
        for c, ln in zip(cells, lines.tolist()):
            try:
                value = float(c)
            except ValueError:
                what = "empty cell: a number is required" if not c.strip() else f"not a number: {shown(c.strip())}"
                raise InputError(what, file=file, row=ln, key=name) from None
            if not np.isfinite(value):
                raise InputError(f"not a finite number: {shown(c.strip())}", file=file, row=ln, key=name)
    return x


def _is_numeric(cells):
    try:
        return bool(np.isfinite(np.fromiter(map(float, cells), float, len(cells))).all())
    except ValueError:
        return False


def read_curve(path, kind, *, group=None, floor=None, compliance=None):
    """Read a measured I-V or C-V file into a :class:`Curve` (SI), with points left out noted.

    Parameters
    ----------
    path : str or path-like
        The CSV file (see the module's description for its form).
    kind : {"iv", "cv"}
    group : str, optional
        Name of the column of plain text that groups the points (e.g.
        ``"wafer"``); without it a column of text is an error.
    floor : float, optional
        The instrument's noise floor [A] (I-V only): points with ``|I|``
        below it are left out. Default: found per sweep (module description).
    compliance : float, optional
        The instrument's current compliance [A] (I-V only). Default: found
        per sweep (module description).

    Returns
    -------
    Curve

    Raises
    ------
    InputError
        One error naming the file, the line and the column: unreadable or too
        large a file (:data:`READ_LIMIT`), a header cell without a unit or
        with a unit of the wrong dimension, a missing V or I/C column, a
        column given twice, a cell that is not a finite number, a
        capacitance at or below zero, a temperature at or below 0 K, a
        negative area or perimeter, a bias not strictly monotonic within a
        sweep, a sweep of fewer than :data:`MIN_POINTS` points, fewer than
        :data:`MIN_POINTS` usable points in the file.
    """
    if kind not in KINDS:
        raise ValueError(f"kind must be one of {KINDS}, not {kind!r}")
    file = str(path)
    for key, value in (("floor", floor), ("compliance", compliance)):
        if value is None:
            continue
        if kind == "cv":
            raise InputError("applies to I-V files only, not to C-V", file=file, key=key)
        if not (np.isfinite(value) and value > 0):
            raise InputError(f"must be a positive current in A, not {value!r}", file=file, key=key)
    records, lines = _records(read_text(file, "measurement file", limit=READ_LIMIT))
    if not records:
        raise InputError("no header: the first line that is not a # comment must name the columns", file=file)
    head_line = lines[0]
    header = [_header(c, j, file, head_line) for j, c in enumerate(records[0])]
    body, lines = records[1:], np.array(lines[1:], int)
    n, width = len(body), len(header)
    if n == 0:
        raise InputError("no points below the header", file=file, row=head_line)
    widths = np.fromiter(map(len, body), int, n)
    bad = np.flatnonzero(widths != width)
    if len(bad):
        i = int(bad[0])
        raise InputError(f"has {widths[i]} cells where the header has {width}", file=file, row=int(lines[i]),
                         key="columns")
    cols = list(zip(*body))
    cells = {}
    roles = {}
    unused = []
    for j, (name, unit) in enumerate(header):
        if name in cells:
            raise InputError("column given twice", file=file, row=head_line, key=name)
        cells[name] = cols[j]  # float() takes surrounding spaces; the group's text is stripped below
        if group is not None and name == group:
            if unit is not None:
                raise InputError("the group column holds text and takes no unit", file=file, row=head_line, key=name)
            roles["group"] = name
            continue
        role = _ROLES.get(name) or (_ROLES.get(name.lower()) if len(name) > 1 else None)
        if role is None:
            if not _is_numeric(cells[name]):
                first = next((ln for c, ln in zip(cells[name], lines) if not _is_numeric([c])), head_line)
                raise InputError("a column of text: pass its name as the group (e.g. group=\"wafer\") "
                                 "or remove it", file=file, row=int(first), key=name)
            unused.append(name)
            continue
        which, qkind = role
        if which == "y_iv" and kind == "cv" or which == "y_cv" and kind == "iv":
            other = "current" if which == "y_iv" else "capacitance"
            raise InputError(f"a {other} column in a{'n I-V' if kind == 'iv' else ' C-V'} file",
                             file=file, row=head_line, key=name)
        which = "y" if which.startswith("y") else which
        if which in roles:
            raise InputError(f"a second {qkind} column (the first is {roles[which][0]!r})", file=file,
                             row=head_line, key=name)
        if unit is None:
            raise InputError(f"no unit: write the unit in brackets, e.g. \"{_EXAMPLE[qkind]}\"", file=file,
                             row=head_line, key=name)
        try:
            scale, offset = unit_factor(unit, qkind)
        except ValueError as e:
            raise InputError(f"unit: {e}", file=file, row=head_line, key=name) from None
        roles[which] = (name, scale, offset)
    if group is not None and "group" not in roles:
        raise InputError("no such column to group by", file=file, row=head_line, key=group)
    for which, label in (("v", "a bias column, e.g. \"V [V]\""),
                         ("y", "a current column, e.g. \"I [A]\"" if kind == "iv"
                          else "a capacitance column, e.g. \"C [pF]\"")):
        if which not in roles:
            raise InputError(f"no {'bias' if which == 'v' else 'current' if kind == 'iv' else 'capacitance'} "
                             f"column: the file needs {label}", file=file, row=head_line,
                             key="V" if which == "v" else "I" if kind == "iv" else "C")

    def column(which):
        if which not in roles:
            return np.full(n, np.nan)
        name, scale, offset = roles[which]
        return apply_factor(_numbers(cells[name], lines, file, name), scale, offset)

    def refuse(mask, which, message):
        if mask.any():
            i = int(np.flatnonzero(mask)[0])
            raise InputError(message, file=file, row=int(lines[i]), key=roles[which][0])

    v, y = column("v"), column("y")
    temperature, area, perimeter = column("temperature"), column("area"), column("perimeter")
    with np.errstate(invalid="ignore"):
        if kind == "cv":
            refuse(~(y > 0), "y", "a capacitance at or below zero: every C must be positive")
        refuse(temperature <= 0, "temperature", "a temperature at or below absolute zero")
        refuse(~(area > 0) & ~np.isnan(area), "area", "an area at or below zero")
        refuse(perimeter < 0, "perimeter", "a negative perimeter")
    grp = (np.array([c.strip() for c in cells[roles["group"]]], dtype=object) if "group" in roles
           else np.full(n, "", dtype=object))
    if "group" in roles:
        refuse_group = grp == ""
        if refuse_group.any():
            i = int(np.flatnonzero(refuse_group)[0])
            raise InputError("empty cell: each point needs its group", file=file, row=int(lines[i]),
                             key=roles["group"])
    curve = Curve(kind=kind, file=file, v=v, y=y, line=lines, temperature=temperature, area=area,
                  perimeter=perimeter, group=grp, use=np.ones(n, bool),
                  notes=[f"{file}: column {shown(u)} not used" for u in unused])
    _settle_temperature(curve)
    sweeps = curve.sweeps()
    for idx in sweeps:
        _check_sweep(curve, idx, roles["v"][0])
    if kind == "iv":
        _leave_out_compliance(curve, sweeps, compliance)
        _leave_out_floor(curve, sweeps, floor)
    _leave_out_short(curve, sweeps)
    if curve.use.sum() < MIN_POINTS:
        raise InputError(f"only {_points(int(curve.use.sum()))} usable (at least {MIN_POINTS} are needed)"
                         + ("; " + "; ".join(n.split(": ", 1)[1] for n in curve.notes) if curve.notes else ""),
                         file=file, row=int(lines[0]), key=roles["y"][0])
    return curve


def _settle_temperature(curve):
    """Runs of one group and geometry whose logged temperature moves by at most TEMPERATURE_TOLERANCE from
    point to point are one sweep: their temperatures become the run's median (in place, with a note)."""
    t = curve.temperature
    if len(t) < 2 or not np.isfinite(t).any():
        return
    with np.errstate(invalid="ignore"):
        close = np.abs(np.diff(t)) <= TEMPERATURE_TOLERANCE
    same = close & _same(curve.group) & _same(curve.area) & _same(curve.perimeter)
    starts = np.concatenate([[0], np.flatnonzero(~same) + 1, [len(t)]])
    for a, b in pairwise(starts):  # over runs (sweeps), not points
        run = t[a:b]
        if b - a > 1 and np.all(np.isfinite(run)) and run.max() > run.min():
            t[a:b] = np.median(run)
            curve.notes.append(f"{curve.file}: lines {_line_ranges(curve.line[a:b])}: the temperature varies by "
                               f"{run.max() - run.min():.3g} K within the sweep (each step at most "
                               f"{TEMPERATURE_TOLERANCE:g} K); taken as its median, {t[a] - 273.15:.4g} degC")


def _check_sweep(curve, idx, vname):
    """A sweep has at least MIN_POINTS points and a strictly monotonic bias."""
    if len(idx) < MIN_POINTS:
        raise InputError(f"a sweep of {_points(len(idx))} ({_line_ranges(curve.line[idx])}; a sweep is a run of "
                         f"points of one group, temperature and geometry): at least {MIN_POINTS} are needed",
                         file=curve.file, row=int(curve.line[idx[0]]), key=vname)
    dv = np.diff(curve.v[idx])
    direction = np.sign(dv[0])
    bad = np.flatnonzero(np.sign(dv) != direction) if direction != 0 else np.array([0])
    if len(bad):
        k = int(bad[0])
        a, b = curve.v[idx[k]], curve.v[idx[k + 1]]
        why = "repeats" if a == b else "turns back"
        raise InputError(f"the bias {why} ({a:g} V, then {b:g} V) within one sweep (one group, temperature and "
                         "geometry): V must be strictly monotonic; start a new sweep with a different group, "
                         "temperature or geometry", file=curve.file, row=int(curve.line[idx[k + 1]]), key=vname)


def _note(curve, mask, what):
    k = int(mask.sum())
    if k:
        curve.notes.append(f"{curve.file}: {_points(k)} {what} left out ({_line_ranges(curve.line[mask])})")


def _leave_out(curve, sweeps, stated, at_stated, stated_what, find, found_what):
    """Leave out the points at a stated level (``at_stated(level)``) or those ``find`` finds per sweep.

    ``find(curve, idx)`` gives ``(mask over the curve, level)`` or None; the
    notes name the level (``{level}`` in the texts).
    """
    if stated is not None:
        out = curve.use & at_stated(stated)
        curve.use &= ~out
        _note(curve, out, stated_what.format(level=_si(stated, "A")))
        return
    out, levels = np.zeros(len(curve), bool), []
    for idx in sweeps:
        found = find(curve, idx)
        if found is not None:
            out |= found[0]
            levels.append(found[1])
    curve.use &= ~out
    if levels:
        lo, hi = _si(min(levels), "A"), _si(max(levels), "A")
        _note(curve, out, found_what.format(level=hi if lo == hi else f"{lo} to {hi}"))


def _compliance_in(curve, idx):
    """The points of sweep ``idx`` at a found compliance (module description), and its level."""
    ai = np.abs(curve.y[idx])
    top = ai.max()
    if not top > 0:
        return None
    near = ai >= top * (1 - COMPLIANCE_TOLERANCE)
    order = np.argsort(curve.v[idx])  # rising V
    if curve.v[idx][np.argmax(ai)] >= 0:
        order = order[::-1]  # from the sweep's end of largest |V| on the side of the largest current
    from_end = near[order]
    run = len(from_end) if from_end.all() else int(np.argmin(from_end))
    if run < 2:
        return None
    out = np.zeros(len(curve), bool)
    out[idx[order[:run]]] = True
    return out, top


def _floor_in(curve, idx):
    """The points of sweep ``idx`` at a found noise floor (module description), and its level."""
    fwd = idx[(curve.v[idx] > 0) & curve.use[idx]]
    if len(fwd) < 2:
        return None
    fwd = fwd[np.argsort(curve.v[fwd])]
    i = curve.y[fwd]
    rising = np.concatenate([i[:-1] < i[1:], [True]]) & (i > 0)
    # a dip among large currents (noise, heating) is not the floor: only failures in the lower half of
    # the sweep's decades count, below the geometric mean of its smallest non-zero and largest |I|
    a = np.abs(i)
    low = np.sqrt(a[a > 0].min() * a.max()) if (a > 0).any() else np.inf
    fails = np.flatnonzero(~rising & (a < low))  # the rising run to the top starts after the last one
    start = int(fails[-1]) + 1 if len(fails) else 0
    if start == 0:
        return None
    level = float(np.abs(i[:start]).max())
    out = np.zeros(len(curve), bool)
    out[fwd[:start]] = True
    out[idx] |= curve.use[idx] & (np.abs(curve.y[idx]) <= FLOOR_MARGIN * level)
    return out, level


def _leave_out_compliance(curve, sweeps, stated):
    """Points at the compliance: at or within COMPLIANCE_TOLERANCE of a stated one, or found per sweep."""
    _leave_out(curve, sweeps, stated, lambda c: np.abs(curve.y) >= c * (1 - COMPLIANCE_TOLERANCE),
               "at the {level} compliance (stated)", _compliance_in,
               "at the {level} compliance (found: the largest current repeated at the end of a sweep)")


def _leave_out_floor(curve, sweeps, stated):
    """Points at the noise floor: below a stated one, or found per sweep (see the module description)."""
    _leave_out(curve, sweeps, stated, lambda f: np.abs(curve.y) < f, "below the {level} noise floor (stated)",
               _floor_in, "at the noise floor (found: the forward current rises steadily only above it; "
                          "level {level})")


def _leave_out_short(curve, sweeps):
    """Sweeps left with fewer than MIN_POINTS usable points are left out whole."""
    short = np.zeros(len(curve), bool)
    for idx in sweeps:
        k = int(curve.use[idx].sum())
        if 0 < k < MIN_POINTS:
            short[idx] = curve.use[idx]
    curve.use &= ~short
    _note(curve, short, f"of sweeps left with fewer than {MIN_POINTS} usable points")

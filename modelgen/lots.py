"""Lots: a table of devices (CSV, or a TOML/JSON list) to a model library.

A CSV table has one device per row. Its columns are the description's keys
flattened with dots (``p.doping``, ``n.lifetime``, ``area``, ``material.ni``)
and a unit in brackets applies to the whole column (``p.doping [cm^-3]``):
those cells are plain numbers, converted with one factor per column. A
column without a unit holds a quantity string per cell (``"1e17 cm^-3"``),
parsed cell by cell (slower). An empty cell leaves an optional key out for
that row. Constant columns can be given once (``--set KEY=VALUE``).

The physics runs over the whole table at once, in chunks of
:data:`CHUNK` rows to bound memory; one row gives the same numbers as the
same device alone.
"""

from __future__ import annotations

import csv
import io
import json
import math
import os
import re
import string
from dataclasses import dataclass

import numpy as np

from . import description, extraction
from .description import KEYS
from .errors import InputError, Problems, shown, type_name
from .output import bulk
from .textio import read_text
from .units import MAX_QUANTITY, MAX_UNIT, apply_factor, parse_quantity, unit_factor

#: Rows per physics chunk (bounds the breakdown solver's memory).
CHUNK = 50000
#: Longest key in a header cell or --set (the longest known key has 30 characters).
MAX_KEY = 64
#: Longest cell of a table: a number, a quantity string, a name or a word.
MAX_CELL = MAX_QUANTITY
#: --name formats: an optional 0 and a width of at most two digits, then an optional d ("05d", "3", "").
_NAME_SPEC = re.compile(r"(0?)([0-9]{0,2})d?")
_NAME_WIDTH = 20




@dataclass
class Table:
    """Raw SI columns of a table, with where each row came from."""

    columns: dict
    lines: np.ndarray      # line number of each row in the file (1-based, header = 1)
    file: str
    problems: Problems


#: A column ``KEY.stderr`` beside ``KEY`` (as ``modelgen calibrate --by`` writes) is accepted and not used.
STDERR_SUFFIX = ".stderr"


def _header(cell, j, file):
    """``(key, unit or None)`` of header cell ``cell`` (column ``j``, 0-based): ``key`` or ``key [unit]``."""
    key, bracket, rest = cell.partition("[")
    key, unit = key.strip(), None
    if bracket:
        rest = rest.rstrip()
        if not rest.endswith("]") or "[" in rest or "]" in rest[:-1]:
            raise InputError(f"column {j + 1}: {shown(cell)} is not 'key' or 'key [unit]'", file=file)
        unit = rest[:-1].strip() or None
    if not key:
        raise InputError(f"column {j + 1}: {shown(cell)} names no key", file=file)
    if len(key) > MAX_KEY:
        raise InputError(f"column {j + 1}: a key of {len(key)} characters: at most {MAX_KEY} are accepted",
                         file=file)
    if unit is not None and len(unit) > MAX_UNIT:
        raise InputError(f"column unit: a unit of {len(unit)} characters: at most {MAX_UNIT} are accepted",
                         file=file, key=key)
    return ("material.name" if key == "material" else key), unit


def _bounded(cells, key, problems):
    """The cells, with any longer than :data:`MAX_CELL` reported and emptied (numpy would pad every cell)."""
    lens = np.fromiter(map(len, cells), int, len(cells))
    long = lens > MAX_CELL
    if not long.any():
        return cells
    problems.add(long, key, "a cell of {k} characters: at most " + str(MAX_CELL) + " are accepted", {"k": lens})
    return ["" if x else c for c, x in zip(cells, long.tolist())]


def _listed(cells, bad):
    """Cells shown for messages, only where ``bad`` (each shortened: a cell may be long)."""
    out = np.full(len(cells), "", dtype=object)
    for i in np.flatnonzero(bad).tolist():
        out[i] = shown(str(cells[i]))
    return out


def _convert_column(key, cells, unit, lines, file, problems):
    """SI values of one column; bad cells recorded in ``problems``."""
    spec = KEYS[key]
    if spec.kind == "number" or (unit is not None and spec.kind not in ("text", "choice")):
        try:  # the common case, every cell a plain number: one pass of float()
            x = np.fromiter(map(float, cells), float, len(cells))
        except ValueError:
            pass  # empty or bad cells: the careful path below
        else:
            if np.isfinite(x).all():
                if unit is not None and spec.kind == "number":
                    raise InputError(f"column {key!r} is a plain number and takes no unit", file=file, key=key)
                scale, offset = (1.0, 0.0) if spec.kind == "number" else _factor(key, unit, file)
                return apply_factor(x, scale, offset)
    arr = np.array(_bounded(cells, key, problems), dtype=str)
    empty = arr == ""
    if (arr[~empty] != np.char.strip(arr[~empty])).any():  # rare: cells padded with spaces
        arr = np.char.strip(arr)
        empty = arr == ""
    cells = arr
    if spec.kind in ("text", "choice"):
        if unit:
            raise InputError(f"column {key!r} takes no unit", file=file, key=key)
        vals = arr.astype(object)
        if spec.kind == "choice":
            bad = ~empty & ~np.isin(vals, spec.choices)
            if bad.any():
                problems.add(bad, key, "{v} is not one of: " + ", ".join(spec.choices), {"v": _listed(vals, bad)})
        if spec.default is not None:
            vals = np.where(empty, spec.default, vals)
        elif empty.any():
            problems.add(empty, key, "empty cell: a value is required")
        return vals
    out = np.full(len(cells), np.nan)
    if spec.kind == "number" or unit is not None:
        if unit is not None and spec.kind == "number":
            raise InputError(f"column {key!r} is a plain number and takes no unit", file=file, key=key)
        scale, offset = (1.0, 0.0) if spec.kind == "number" else _factor(key, unit, file)
        text = arr.copy()
        text[empty] = "nan"
        try:
            x = text.astype(float)
        except ValueError:
            x = np.array([_float_or_none(c) for c in text], dtype=float)
        bad = ~empty & ~np.isfinite(x)
        if key.endswith(".surface_recombination"):
            ohmic = np.char.lower(np.char.strip(text)) == "ohmic"
            bad &= ~ohmic
            x = np.where(ohmic, np.inf, x)
        if bad.any():
            problems.add(bad, key, "not a finite number: {v}", {"v": _listed(cells, bad)})
        with np.errstate(invalid="ignore"):
            out = np.where(np.isinf(x), x, apply_factor(x, scale, offset))
        out[bad] = np.nan
        return out
    # no unit in the header: each cell carries its own (the slower path)
    messages = np.full(len(cells), "", dtype=object)
    for i in np.flatnonzero(~empty):
        c = cells[i].strip()
        if key.endswith(".surface_recombination") and c.lower() == "ohmic":
            out[i] = math.inf
            continue
        try:
            out[i] = parse_quantity(c, spec.kind)
        except InputError as e:
            messages[i] = e.message
    problems.add(messages != "", key, "{m}", {"m": messages})
    return out


def _float_or_none(text):
    try:
        return float(text)
    except ValueError:
        return math.nan


def _factor(key, unit, file):
    try:
        return unit_factor(unit, KEYS[key].kind)
    except ValueError as e:
        raise InputError(f"column unit: {e}", file=file, key=key) from None


def read_csv(path, *, sets=None, name_pattern=None, collect=True):
    """Read a CSV lot table into SI columns (see :func:`_read_csv` for the parameters)."""
    with bulk():
        return _read_csv(path, sets=sets, name_pattern=name_pattern, collect=collect)


def _read_csv(path, *, sets=None, name_pattern=None, collect=True):
    """Read a CSV lot table into SI columns.

    Parameters
    ----------
    path : str
        The CSV file. The first line names the columns.
    sets : dict, optional
        ``key -> value as text``: a constant column (``--set``); it must not
        also be a column.
    name_pattern : str, optional
        Model names for a table without a ``name`` column (with one, it is an
        error): ``{row}`` (the line number) and ``{index}`` (0-based), each
        with at most a plain integer format, e.g. ``"DLOT{row:05d}"``.
    collect : bool
        Collect bad cells row by row (True) or raise at the first.

    Returns
    -------
    Table

    Raises
    ------
    InputError
        Problems with the file as a whole: unreadable, no header, an unknown
        or repeated column, a unit that does not fit its column.
    """
    path = str(path)
    records, starts, spans = _records(read_text(path, "table"), path)
    if not records or starts[0] != 1:
        raise InputError("the first line must name the columns", file=path)
    if spans[0]:
        raise InputError("the header has a line break inside a quoted cell", file=path)
    header, body = records[0], records[1:]
    lines = np.array(starts[1:], dtype=int)
    n = len(body)
    if n == 0:
        raise InputError("the table has no rows", file=path)
    problems = Problems(n, sources=(path,) * n, rows=lines, collect=collect)
    width = len(header)
    parsed = [_header(cell, j, path) for j, cell in enumerate(header)]
    spanning = np.flatnonzero(spans[1:])
    if len(spanning):  # rare: quoted cells holding line breaks, reported under the column of the first
        at = np.full(n, -1)
        for i in spanning.tolist():
            at[i] = min(next((j for j, c in enumerate(body[i]) if "\n" in c), 0), width - 1)
        for j in np.unique(at[spanning]).tolist():
            problems.add(at == j, parsed[j][0], "a line break inside a quoted cell (the row spans {k} lines)",
                         {"k": spans[1:] + 1})
    lens = np.fromiter(map(len, body), int, n)
    short = lens != width
    problems.add(short, "columns", "has {k} cells where the header has " + str(width), {"k": lens})
    for i in np.flatnonzero(short).tolist():
        r = body[i]
        body[i] = r + [""] * (width - len(r)) if len(r) < width else r[:width]
    cols = list(zip(*body)) if n else [()] * width
    columns = {}
    for j, (key, unit) in enumerate(parsed):
        if key.endswith(STDERR_SUFFIX) and key[:-len(STDERR_SUFFIX)] in KEYS:
            continue  # a calibration's standard error beside its value: carried in the table, not used here
        if key not in KEYS or key in ("material",):
            raise InputError(f"unknown column; known keys: {', '.join(sorted(k for k in KEYS if k != 'material'))}",
                             file=path, key=key)
        if key in columns:
            raise InputError("column given twice", file=path, key=key)
        columns[key] = _convert_column(key, cols[j], unit, lines, path, problems)
    _apply_options(columns, lines, path, problems, sets, name_pattern)
    return Table(columns=columns, lines=lines, file=path, problems=problems)


def _records(text, path):
    """The non-blank records of CSV ``text``, the line each starts on, and how many more lines each spans.

    Line numbers are those an editor shows, also after a quoted cell that
    holds a line break.
    """
    if "\r" in text:
        text = text.replace("\r\n", "\n").replace("\r", "\n")
    numbered = [(k + 1, ln) for k, ln in enumerate(text.split("\n")) if ln.strip(" ,\t")]
    starts, one_line = [k for k, _ in numbered], np.zeros(len(numbered), int)
    if '"' not in text:  # no quoting anywhere: a plain split is the same and faster
        return [ln.split(",") for _, ln in numbered], starts, one_line
    try:
        records = list(csv.reader([ln for _, ln in numbered]))
    except csv.Error:
        records = None  # the careful reading below says where
    if records is not None and len(records) == len(numbered):  # no quoted cell holds a line break
        return records, starts, one_line
    records, starts, spans = [], [], []
    reader = csv.reader(io.StringIO(text, newline="\n"))
    done = 0
    try:
        for record in reader:
            first, done = done + 1, reader.line_num
            if "".join(record).strip(" \t"):
                records.append(record)
                starts.append(first)
                spans.append(done - first)
    except csv.Error as e:
        raise InputError(f"not valid CSV: {e}", file=path, row=reader.line_num) from None
    return records, starts, np.array(spans, int)


def _names(pattern, lines):
    """Model names from a --name pattern: only {row} and {index}, each with a plain integer format."""
    def bad(why):
        return InputError(f"{shown(pattern)}: {why}; write e.g. \"DLOT{{row:05d}}\" ({{row}} the line or "
                          f"entry number, {{index}} the 0-based row)", key="--name")

    if len(pattern) > MAX_KEY:
        raise bad(f"longer than {MAX_KEY} characters")
    try:
        fields = [f for f in string.Formatter().parse(pattern) if f[1] is not None]
    except ValueError as e:
        raise bad(str(e)) from None
    for _, field, spec, conversion in fields:
        if field not in ("row", "index"):
            raise bad(f"{{{shown(field)[1:-1]}}} is not a field: only {{row}} and {{index}}")
        m = _NAME_SPEC.fullmatch(spec or "")
        if conversion is not None or m is None:
            raise bad(f"only a plain integer format such as {{{field}:05d}} is allowed")
        if m.group(2) and int(m.group(2)) > _NAME_WIDTH:
            raise bad(f"a width of at most {_NAME_WIDTH}")
    names = np.array([pattern.format(row=r, index=i) for i, r in enumerate(lines.tolist())], dtype=object)
    if not description.is_name(names[0]):  # the rest differ only in digits: one line, not one per row
        raise bad(f"gives {shown(names[0])}, not {description.NAME_RULE}")
    return names


def _apply_options(columns, lines, path, problems, sets, name_pattern):
    """Add the --set columns and the --name names to a table's columns; check names are unique."""
    n = len(lines)
    for key, value in (sets or {}).items():
        if key == "material":
            key = "material.name"
        if key not in KEYS:
            raise InputError("unknown key in --set", file=path, key=key)
        if key in columns:
            raise InputError("given both in the table and with --set", file=path, key=key)
        v = description.convert({key: value}, file="--set")[key]
        if not isinstance(v, str):  # a constant out of range is one error, not one per row
            description.check_range(key, np.array([v]), Problems(1, sources=["--set"]).add)
        columns[key] = np.array([v] * n, dtype=object if isinstance(v, str) else float)
    if name_pattern is not None:
        if "name" in columns:
            raise InputError("the table names its devices already: give --name only for a table without names",
                             file=path, key="--name")
        columns["name"] = _names(name_pattern, lines)
    if "name" not in columns:
        raise InputError("no names: add a name column (or a name to each entry), or give --name PATTERN "
                         "(e.g. \"DLOT{row:05d}\")", file=path, key="name")
    names = columns["name"]
    upper = np.array([str(x).upper() for x in names], dtype=object)
    _, first, counts = np.unique(upper, return_index=True, return_counts=True)
    dup = np.ones(n, bool)
    dup[first] = False
    dup &= np.isin(upper, upper[first][counts > 1]) & (upper != "")
    if dup.any():
        problems.add(dup, "name", "model name {x} is used by an earlier row", {"x": _listed(names, dup)})


def read_list(path, *, sets=None, name_pattern=None, collect=True):
    """A TOML (``[[device]]`` tables) or JSON (a list of objects) lot file.

    Each entry is a device description as in a single TOML file; values are
    quantity strings, parsed one by one. Problems name the entry (1-based)
    and the key at fault. ``sets`` and ``name_pattern`` are as for
    :func:`read_csv` ({row} is the entry's number).
    """
    path = str(path)
    text = read_text(path, "table")
    if path.lower().endswith(".json"):
        try:
            entries = json.loads(text)
        except RecursionError:
            raise InputError("not valid JSON: nested too deeply", file=path) from None
        except ValueError as e:  # JSONDecodeError, and integers too long to convert
            raise InputError(f"not valid JSON: {e}", file=path) from None
    else:
        doc = description.parse_toml(text, path)
        for key in doc:
            if key != "device":
                raise InputError("unknown top-level key: a lot file holds [[device]] tables only",
                                 file=path, key=key)
        entries = doc.get("device")
    if not isinstance(entries, list) or not entries:
        raise InputError("expected a list of device tables ([[device]] in TOML, a JSON list of objects)",
                         file=path)
    n = len(entries)
    lines = np.arange(1, n + 1)
    problems = Problems(n, sources=(path,) * n, rows=lines, collect=collect, label="entry")
    found = {}  # key -> (mask, messages): one problem per key for the whole list
    flats = []
    for i, entry in enumerate(entries):
        if not isinstance(entry, dict):
            raise InputError(f"expected a table of keys, got {type_name(entry)}", file=path, row=i + 1,
                             label="entry")
        errors = []
        flats.append(description.read_mapping(entry, file=path, errors=errors))
        for e in errors:
            if not collect:
                raise InputError(e.message, file=path, row=i + 1, key=e.key, label="entry")
            mask, messages = found.setdefault(e.key, (np.zeros(n, bool), np.full(n, "", dtype=object)))
            if not mask[i]:
                mask[i], messages[i] = True, e.message
    for key, (mask, messages) in found.items():
        problems.add(mask, key, "{m}", {"m": messages})
    columns = {}
    for k in sorted({k for f in flats for k in f}):
        if KEYS[k].kind in ("text", "choice"):
            default = KEYS[k].default if KEYS[k].default is not None else ""
            columns[k] = np.array([f.get(k, default) for f in flats], dtype=object)
        else:
            columns[k] = np.array([f.get(k, np.nan) for f in flats], dtype=float)
    _apply_options(columns, lines, path, problems, sets, name_pattern)
    columns.setdefault("area", np.full(n, np.nan))  # so each entry without one is named, not the whole file
    return Table(columns=columns, lines=lines, file=path, problems=problems)


def read(path, **kw):
    """:func:`read_csv` or :func:`read_list` by the file's extension."""
    if str(path).lower().endswith((".toml", ".json")):
        return read_list(path, **kw)
    return read_csv(path, **kw)


def read_chunks(path, *, sets=None, name_pattern=None, rows=CHUNK):
    """A table as a sequence of :class:`Table` pieces of at most about ``rows`` rows (bounded memory).

    TOML and JSON lists, and CSV tables of at most ``rows`` lines, come whole
    from :func:`read`. A longer CSV table is cut at line ends outside quoted
    cells and each piece, behind the header, goes through :func:`read_csv`;
    its line numbers, names from ``name_pattern`` and file name are then made
    those of the whole table, and a model name repeated from an earlier piece
    is a problem of its row, as in one pass. A table with line breaks other
    than LF and CRLF, or not UTF-8, is read whole (the reader's own counting
    and messages).
    """
    path = str(path)
    whole = path.lower().endswith((".toml", ".json"))
    if not whole:
        try:
            with open(path, "rb") as fh:
                data = fh.read()
        except OSError:
            data = b""
        whole = data.count(b"\n") <= rows + 1 or _odd_breaks(data)
    if whole:
        yield read(path, sets=sets, name_pattern=name_pattern)
        return

    def record_end(pos, count):
        """Past the ``count``-th line end from ``pos``, moved on while a quoted cell is open."""
        end = pos
        for _ in range(count):
            k = data.find(b"\n", end)
            if k < 0:
                return len(data)
            end = k + 1
        while data.count(b'"', pos, end) % 2 and end < len(data):
            k = data.find(b"\n", end)
            end = len(data) if k < 0 else k + 1
        return end

    h = record_end(0, 1)
    header = data[:h]
    seen = set()
    before = 0           # data rows in earlier pieces
    line = data.count(b"\n", 0, h)  # lines before the piece
    start = h
    while start < len(data):
        end = record_end(start, rows)
        piece = data[start:end]
        try:
            piece.decode("utf-8")
        except UnicodeDecodeError:
            yield read(path, sets=sets, name_pattern=name_pattern)  # raises the reader's own message
            return
        if piece.strip(b" ,\t\r\n"):
            table = _read_piece(path, header, piece, line - header.count(b"\n"), before, sets, name_pattern)
            names = table.columns["name"]
            upper = [str(x).upper() for x in names]
            again = np.fromiter((u in seen for u in upper), bool, len(upper))
            table.problems.add(again, "name", "model name {x!r} is used by an earlier row", {"x": names})
            seen.update(upper)
            before += len(table.lines)
            yield table
        line += piece.count(b"\n")
        start = end


def _odd_breaks(data):
    """Line breaks other than LF and CRLF (str.splitlines counts them, a cut at LF does not)."""
    return (data.count(b"\r") != data.count(b"\r\n")
            or any(data.find(c) >= 0 for c in (b"\x0b", b"\x0c", b"\x1c", b"\x1d", b"\x1e", b"\xc2\x85",
                                                  b"\xe2\x80\xa8", b"\xe2\x80\xa9")))


def _read_piece(path, header, piece, shift, before, sets, name_pattern):
    """:func:`read_csv` over ``header`` and ``piece`` (some rows of ``path``), placed as in the whole table."""
    import copy

    fd = None
    if hasattr(os, "memfd_create"):
        fd = os.memfd_create("modelgen-piece")
        with open(fd, "wb", closefd=False) as fh:
            fh.write(header)
            fh.write(piece)
        name = f"/proc/self/fd/{fd}"
    else:  # pragma: no cover - no memfd: a named temporary file
        import tempfile

        with tempfile.NamedTemporaryFile("wb", suffix=".csv", delete=False) as fh:
            fh.write(header + piece)
            name = fh.name
    try:
        table = read_csv(name, sets=sets, name_pattern=name_pattern)
    except InputError as e:
        e = copy.copy(e)
        if e.file == name:
            e.file = path
        if e.row is not None:
            e.row += shift
        raise e from None
    finally:
        if fd is not None:
            os.close(fd)
        else:  # pragma: no cover
            os.unlink(name)
    table.file = path
    table.lines = table.lines + shift
    p = table.problems
    p.sources = (path,) * p.n
    p.rows = tuple(None if r is None else r + shift for r in p.rows)
    if name_pattern and "name" not in _header_keys(header) and "name" not in (sets or {}):
        table.columns["name"] = np.array([name_pattern.format(row=int(r), index=before + i)
                                          for i, r in enumerate(table.lines)], dtype=object)
    return table


def _header_keys(header):
    import io

    text = header.decode("utf-8", "replace").lstrip("\ufeff")
    return {c.split("[")[0].strip() for c in next(csv.reader(io.StringIO(text)))}


def derive(table: Table, *, chunk=CHUNK, progress=None):
    """The physics of every row of ``table``, chunk by chunk (see :func:`_derive`)."""
    with bulk():
        return _derive(table, chunk=chunk, progress=progress)


def _derive(table: Table, *, chunk=CHUNK, progress=None):
    """The physics of every row of ``table``, chunk by chunk.

    Returns
    -------
    (Result, good) :
        The Result over the good rows (those with no problem in the table or
        in the physics) and the boolean mask of good rows in the table.
        ``table.problems`` holds every problem found.
    """
    problems = table.problems
    device = description.assemble(table.columns, sources=(table.file,) * len(table.lines),
                                  rows=tuple(int(x) for x in table.lines), problems=problems)
    n = len(device)
    bad = problems.bad
    parts = []
    for start in range(0, n, chunk):
        sl = np.arange(start, min(start + chunk, n))
        sl = sl[~bad[sl]]
        if len(sl):
            sub = device.take(sl)
            local = Problems(len(sl), sources=sub.source, rows=sub.line, collect=True)
            res = extraction.derive(sub, problems=local)
            for mask, key, message, values in local.found:
                full = np.zeros(n, bool)
                full[sl[mask]] = True
                vals = None
                if values:
                    vals = {}
                    for k, v in values.items():
                        arr = np.empty(n, dtype=object)
                        arr[sl] = list(v) if isinstance(v, np.ndarray) else v
                        vals[k] = arr
                problems.add(full, key, message, vals)
            parts.append((sl, res))
        if progress is not None:
            progress(min(start + chunk, n))
    good = ~problems.bad
    return _concatenate(parts, good), good


def _concatenate(parts, good):
    """One Result over the good rows, from chunk results (``extraction.concatenate`` of their good rows)."""
    keep = [res.take(good[sl]) for sl, res in parts]
    return extraction.concatenate(keep) if keep else None


#: Derived quantities in the summary table besides the card parameters.
SUMMARY_DERIVED = ("temperature", "builtin_voltage", "depletion_width", "reach_through")
#: Per side: what decides the current (the rest of the derived quantities: ``modelgen card --format json``).
SUMMARY_SIDE = ("w_over_l", "regime")
#: Percentiles reported in the statistics.
PERCENTILES = (1, 5, 25, 50, 75, 95, 99)


def summary_columns(result):
    """Ordered ``name -> array`` of what the summary table holds for each row."""
    cols = {"name": np.asarray(result.device.name, dtype=object),
            "line": np.asarray(result.device.line if len(result.device.line) else np.arange(1, len(result) + 1))}
    for k in extraction.PARAMETERS:
        cols[k] = result.params[k]
    for k in SUMMARY_DERIVED:
        cols[k] = result.derived[k]
    for side in ("p", "n"):
        for k in SUMMARY_SIDE:
            cols[f"{side}.{k}"] = result.derived[side][k]
    warn = np.zeros(len(result), int)
    for f in result.findings:
        if f.severity == "warning":
            warn += f.mask
    cols["warnings"] = warn
    return cols


def _cells(v, cache=None):
    """Text cells of one summary column: numbers ('' for NaN), true/false, text.

    Every number is written as on the cards, in exponent form with the fewest
    digits that read back exactly (:func:`modelgen.cards.format_numbers`), in
    every dialect; card columns already formatted for the cards (``cache``)
    are not formatted again. Each distinct value is formatted once.
    """
    from .cards import format_numbers

    if isinstance(v, np.ndarray) and v.dtype.kind == "b":
        return np.where(v, "true", "false").tolist()
    if isinstance(v, np.ndarray) and v.dtype.kind == "f":
        texts = format_numbers(v, cache)
        return [t if t is not None else "" for t in texts] if None in texts else texts
    return list(map(str, np.asarray(v).tolist()))


def _csv_header(cols):
    return ",".join(cols) + "\n"


def _csv_rows(cells):
    # the cells are numbers, true/false, SPICE identifiers or words: no quoting needed
    return "\n".join(map(",".join, zip(*cells.values()))) + "\n"


def _json_items(v, cells):
    """One column's JSON list items without brackets, and the separator that joins two runs of them."""
    kind = np.asarray(v).dtype.kind
    if kind in "fi":
        return ",".join([x or "null" for x in cells] if "" in cells else cells), ","
    if kind == "b":
        return ",".join(cells), ","
    return json.dumps(cells)[1:-1], ", "


def _json_text(rows, stats, skipped, columns):
    """The summary JSON from ``columns``: ``(key, iterable of text pieces)`` each making one list."""
    head = json.dumps({"rows": rows, "statistics": stats, "skipped": skipped}, indent=1, allow_nan=False)
    yield head[:-2] + ',\n "columns": {\n  '
    for j, (k, pieces) in enumerate(columns):
        yield (",\n  " if j else "") + json.dumps(k) + ": ["
        yield from pieces
        yield "]"
    yield "\n }\n}\n"


def statistics(cols):
    """Median, mean, standard deviation, extremes and percentiles of each numeric column."""
    stats = {}
    for k, v in cols.items():
        v = np.asarray(v)
        if k == "line" or v.dtype.kind not in "fi" or v.dtype.kind == "b":
            continue
        x = v[np.isfinite(v)].astype(float)
        if not len(x):
            continue
        pct = np.percentile(x, PERCENTILES)
        stats[k] = {"count": int(len(x)), "median": float(np.median(x)), "mean": float(np.mean(x)),
                    "std": float(np.std(x, ddof=1)) if len(x) > 1 else 0.0,
                    "min": float(x.min()), "max": float(x.max()),
                    "percentiles": {str(p): float(q) for p, q in zip(PERCENTILES, pct)}}
    return stats


def corner_cards(result, spec, name, values=None):
    """The corner cards of a lot: ``(section, name, row, comment)`` for each of :func:`corner_rows`.

    Every corner card carries the same model ``name`` in its own section, so
    switching corners changes one ``.lib`` line; the comment says which row
    it is and why. ``values``: the spec's figure over the rows when already
    computed (see :func:`corner_rows`).
    """
    from .corner_pick import figure_unit, ordinal

    figure = parse_corners(spec)[0]
    rows = corner_rows(result, spec, values)
    if figure == "IS":
        return [(section, name, i, (f"corner {section}: the row at the {ordinal(pct)} percentile of IS "
                                    f"({result.device.name[i]}), a real row so its parameters stay consistent"))
                for section, i, pct, _ in rows]
    unit = figure_unit(figure)
    return [(section, name, i, (f"corner {section}: the row at the {ordinal(pct)} percentile of {figure} "
                                f"({result.device.name[i]}, {figure} = {value:.6g} {unit}), a real row so its "
                                "parameters stay consistent"))
            for section, i, pct, value in rows]


#: Section names of the three corners: chosen by IS (as always), and by another figure.
IS_SECTIONS = ("slow", "typical", "fast")
FIGURE_SECTIONS = ("low", "typical", "high")


def parse_corners(spec):
    """A ``--corners`` specification -> (figure, three percentiles, three section names).

    ``[FIGURE:]SPEC``: FIGURE is ``IS`` (the default) or one of
    :mod:`modelgen.spread`'s figures (``VF@1mA``, ``IR@-5V``, ``C@-1V``,
    ``BV``, ``TT``); SPEC is ``"P1,P2,P3"`` (three increasing percentiles,
    e.g. ``"5,50,95"``) or ``"Ksigma"`` (the normal distribution's
    percentiles at -K, 0, +K sigma). By IS the sections are slow, typical,
    fast; by another figure low, typical, high (of that figure).
    One-line InputError (key ``--corners``).
    """
    from .corner_pick import parse_figure

    figure, colon, rest = spec.partition(":")
    figure = parse_figure(figure, key="--corners") if colon else "IS"
    text = (rest if colon else spec).strip().lower()
    if text.endswith("sigma"):
        from scipy.stats import norm
        try:
            k = float(text[:-5])
        except ValueError:
            raise InputError(f"{text!r}: write e.g. 3sigma", key="--corners") from None
        if not k > 0:
            raise InputError("sigma must be positive", key="--corners")
        pcts = [100 * norm.cdf(-k), 50.0, 100 * norm.cdf(k)]
    else:
        try:
            pcts = [float(x) for x in text.split(",")]
        except ValueError:
            raise InputError(f"{text!r}: give three percentiles, e.g. 5,50,95, or Ksigma, optionally after a "
                             "figure (VF@1mA:3sigma)", key="--corners") from None
        if len(pcts) != 3 or not (0 <= pcts[0] < pcts[1] < pcts[2] <= 100):
            raise InputError("three increasing percentiles within 0-100 (low, typical, high)", key="--corners")
    return figure, pcts, IS_SECTIONS if figure == "IS" else FIGURE_SECTIONS


def corner_figure(result, figure):
    """The values of a ``--corners`` figure over the rows of ``result`` (a chunk's full Result), SI."""
    from .corner_pick import figure_values

    try:
        return figure_values(result, figure)
    except InputError as e:
        raise InputError(e.message, key="--corners") from None


def corner_rows(result, spec, values=None):
    """Rows chosen as the three corners of a figure (by default IS): see :func:`parse_corners`.

    Real rows are taken (the one nearest each percentile of the figure, by
    rank) so each corner card keeps a physically consistent set of
    parameters. ``values``: the figure over the rows when already computed
    (a lot written chunk by chunk: :class:`LotWriter` collects them); else
    computed from ``result``, which must then hold what the figure needs
    (IS, VF, BV and TT need the card parameters only).

    Returns
    -------
    list of (section, row index, percentile, figure value)

    Raises
    ------
    InputError
        A bad spec, or the figure not finite for a row (key ``--corners``).
    """
    figure, pcts, sections = parse_corners(spec)
    v = np.asarray(corner_figure(result, figure) if values is None else values, float)
    bad = ~np.isfinite(v)
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        raise InputError(f"{figure} is not finite for {result.device.name[i]} (and {int(bad.sum()) - 1} more "
                         "rows): no corner can be placed by it", key="--corners")
    order = np.argsort(v, kind="stable")
    n = len(order)
    out = []
    for section, p in zip(sections, pcts):
        rank = int(round(p / 100 * (n - 1)))
        i = int(order[rank])
        out.append((section, i, p, float(v[i])))
    return out


#: Rows below which a chunk's summary is not worth a second process.
FORK_MIN = 5000
#: The body of the library is spliced in here (a text that cannot occur in a rendered library).
_BODY = "\x00modelgen body\x00"
#: The derived quantities the library's header and corner cards use (besides params and findings).
_CARD_DERIVED = ("temperature", "junction_area", "bottom_area")


def _rows(result, lo, hi):
    """The devices ``lo:hi`` of ``result`` as a Result of their own."""
    sl = slice(lo, hi)
    derived = {k: ({kk: vv[sl] for kk, vv in v.items()} if isinstance(v, dict) else v[sl])
               for k, v in result.derived.items()}
    findings = [extraction.Finding(f.mask[sl], f.text, {k: (v[sl] if isinstance(v, np.ndarray) else v)
                                                         for k, v in f.values.items()})
                for f in result.findings]
    return extraction.Result(device=result.device.take(sl), params={k: v[sl] for k, v in result.params.items()},
                             derived=derived, findings=findings, sources=result.sources)


def _skeleton(parts):
    """One Result over every good row for the library's header and corner cards, from chunk parts.

    Holds the names, lines, sources, parameters, the derived quantities the
    cards use, and the findings; the device's input columns are zeros that
    take no memory (nothing downstream of the physics reads them). The parts
    are emptied as their columns are joined, so memory is not doubled.
    """
    from dataclasses import fields

    from .device import Device, Side

    n = sum(len(p.names) for p in parts)
    zero = np.broadcast_to(np.float64(0.0), (n,))

    def empty(cls):
        return cls(**{f.name: (empty(Side) if f.type in ("Side", Side) else zero) for f in fields(cls)})

    def join(get):
        vals = [get(p) for p in parts]
        return np.concatenate(vals) if isinstance(vals[0], np.ndarray) else tuple(x for v in vals for x in v)

    device = empty(Device)
    for name in ("name", "material", "source", "line"):
        setattr(device, name, join(lambda p, name=name: p.device.pop(name)))
    first = parts[0]
    params = {k: join(lambda p, k=k: p.params.pop(k)) for k in list(first.params)}
    derived = {k: join(lambda p, k=k: p.derived.pop(k)) for k in list(first.derived)}
    findings = []
    for i, f0 in enumerate(first.findings):
        values = {k: (join(lambda p, i=i, k=k: p.findings[i].values[k]) if isinstance(v, np.ndarray) else v)
                  for k, v in f0.values.items()}
        findings.append(extraction.Finding(join(lambda p, i=i: p.findings[i].mask), f0.text, values))
        for p in parts[1:]:
            p.findings[i] = None
    return extraction.Result(device=device, params=params, derived=derived, findings=findings,
                             sources=first.sources)


class _Part:
    """What :func:`_skeleton` needs of a chunk's result (not its input columns)."""

    def __init__(self, result):
        d = result.device
        self.device = {"name": d.name, "material": d.material, "source": d.source, "line": d.line}
        self.names = d.name
        self.params = dict(result.params)
        self.derived = {k: result.derived[k] for k in _CARD_DERIVED}
        self.findings = list(result.findings)
        self.sources = result.sources


def _summary_part(result, cache, first):
    """A chunk's summary: its CSV text (with the header when ``first``), its JSON items per column, and
    its numeric columns for the statistics."""
    cols = summary_columns(result)
    cells = {k: _cells(v, cache) for k, v in cols.items()}
    csv_text = (_csv_header(cols) if first else "") + _csv_rows(cells)
    items = [(k,) + _json_items(v, cells[k]) for k, v in cols.items()]
    return csv_text, items


def _numeric(cols):
    return {k: v for k, v in cols.items() if k != "line" and np.asarray(v).dtype.kind in "fi"}


class LotWriter:
    """A lot's library and summary files, made chunk by chunk and replaced all together or not at all.

    Feed it the good rows chunk by chunk (:meth:`add`), then :meth:`finish`
    with the library's title and corner cards. Card text and summary text
    are made one chunk at a time (bounded memory); the library's body and
    the summary's JSON columns wait in scratch files until the header, which
    depends on every row, is known. The bytes are the same whatever the
    chunks and whether or not a second process helps (``fork``).

    Parameters
    ----------
    paths : dict
        ``{"library": path, "csv": path, "json": path}``.
    dialect : str
    inputs : sequence of paths
        Files read for this lot; no output may be one of them.
    fork : bool
        On POSIX, make each chunk's summary in a forked second process while
        this one fills the cards and goes on with the next chunk. Off by
        default: a library call never forks unless asked; the command line
        asks.
    fork_min : int
        Chunks smaller than this are not worth a second process (default :data:`FORK_MIN`).
    signals : bool
        Clean up on SIGTERM/SIGHUP (see :class:`modelgen.output.Commit`).
    keep : bool
        Keep what the header and corner cards need of each chunk (off when
        the caller holds the whole Result and passes it to :meth:`finish`).
    figure : str, optional
        A ``--corners`` figure (:func:`parse_corners`) to evaluate on each
        chunk while its full Result is at hand (IR and C need more than the
        kept skeleton holds): :meth:`figure_values` gives them over all rows.
    """

    def __init__(self, paths, *, dialect, inputs=(), fork=False, fork_min=None, signals=False, keep=True,
                 figure=None):
        from .output import Commit

        self.commit = Commit(paths, inputs=inputs, signals=signals)
        self.dialect = dialect
        self.fork = fork
        self.fork_min = FORK_MIN if fork_min is None else fork_min
        self.keep = keep
        self.parts = []      # what the header needs of each chunk (keep=True)
        self.whole = None    # those joined (:meth:`result`)
        self.numeric = []    # per chunk: the numeric summary columns, for the statistics
        self.pieces = []     # per chunk: (file, offset, [(key, length, separator)]) of its JSON items
        self.rows = 0
        self.pending = None  # (Beside, part file name) of a chunk's summary being made in a second process
        self.figure = figure
        self.figures = []    # per chunk: the figure's values (figure given)

    def __enter__(self):
        self.commit.__enter__()
        try:
            self.body = self.commit.spool("library")
            self.spool = self.commit.spool("json")
        except BaseException as e:
            self.commit.__exit__(type(e), e, e.__traceback__)
            raise
        return self

    def __exit__(self, kind, value, tb):
        if self.pending is not None:
            self.pending[0].cancel()
        for fh in (getattr(self, "body", None), getattr(self, "spool", None)) + tuple(f for f, _, _ in self.pieces):
            if fh is not None and not fh.closed:
                fh.close()
        return self.commit.__exit__(kind, value, tb)

    def add(self, result):
        """Write the cards and the summary rows of ``result`` (the next chunk's good rows)."""
        from . import cards
        from .output import Beside

        if result is None or not len(result):
            return
        with bulk():
            cache = {}  # card columns formatted once, shared by the cards and the summary (and the child)
            columns, params = cards.card_columns(result, self.dialect)
            texts = [cards.format_numbers(v, cache) for _, v in columns]
            for k in cards.left_out_names(self.dialect):  # each card lists them; so does the summary
                cards.format_numbers(params[k], cache)
            first = self.rows == 0
            self._join()
            if self.fork and len(result) >= self.fork_min:
                name = self.commit.part("json")

                def task():
                    _write_part(name, *_summary_part(result, cache, first))

                beside = Beside(task, fork=True)
                self.pending = (beside, name)
                beside.start()
            else:
                csv_text, items = _summary_part(result, cache, first)
                self.commit.write("csv", csv_text)
                self._spool_items(self.spool, items)
            self.body.write(cards.table_cards(result, self.dialect, texts=texts, cache=cache)[0].encode("utf-8"))
            self.numeric.append(_numeric(summary_columns(result)))
            if self.figure is not None:
                self.figures.append(corner_figure(result, self.figure))
            if self.keep:
                self.parts.append(_Part(result))
            self.rows += len(result)

    def _spool_items(self, fh, items):
        offset = fh.tell()
        lengths = []
        for k, text, sep in items:
            data = text.encode("utf-8")
            fh.write(data)
            lengths.append((k, len(data), sep))
        self.pieces.append((fh, offset, lengths))

    def _join(self):
        """Wait for the second process's summary of the previous chunk and take its parts in."""
        if self.pending is None:
            return
        beside, name = self.pending
        beside.join()  # an error or a signal while waiting leaves it pending, for __exit__ to end it
        self.pending = None
        fh = open(name, "rb")
        header = json.loads(fh.readline())
        start = fh.tell()
        self.commit.copy("csv", fh, start, header["csv"])
        lengths = [(k, n, sep) for k, n, sep in header["items"]]
        self.pieces.append((fh, start + header["csv"], lengths))

    def figure_values(self):
        """The ``figure``'s values over every row added (None without a figure)."""
        return np.concatenate(self.figures) if self.figure is not None and self.figures else None

    def result(self):
        """One Result over all good rows, for the header and :func:`corner_rows` (not for physics).

        Made once, from the chunks kept so far, which it then replaces.
        """
        if self.whole is None:
            self.whole, self.parts = _skeleton(self.parts), []
        return self.whole

    def finish(self, *, title, extra=(), section=None, corner_cards=(), skipped=(), result=None):
        """Write the library's header and corner cards and the summary JSON, then replace all files.

        ``result``: the whole Result when the caller holds it (else the
        chunks' skeleton, :meth:`result`).
        """
        from . import cards

        if not self.rows:
            raise ValueError("no rows to write")
        with bulk():
            self._join()
            numeric = {k: np.concatenate([c[k] for c in self.numeric]) for k in self.numeric[0]}
            self.numeric = []
            stats = statistics(numeric)
            del numeric
            self._write_json(stats, list(skipped))
            whole = result if result is not None else self.result()
            text = cards.table_library(whole, self.dialect, title=title, extra=extra, section=section,
                                       corner_cards=corner_cards, body=_BODY)
            head, tail = text.split(_BODY)
            self.commit.write("library", head)
            self.commit.copy("library", self.body)
            self.commit.write("library", tail)
            self.commit.commit()

    def _write_json(self, stats, skipped):
        keys = [k for k, _, _ in self.pieces[0][2]]

        def pieces(j):
            for n, (fh, offset, lengths) in enumerate(self.pieces):
                start = offset + sum(length for _, length, _ in lengths[:j])
                _, length, sep = lengths[j]
                if n:
                    yield sep
                yield (fh, start, length)

        def columns():
            for j, k in enumerate(keys):
                yield k, pieces(j)

        for piece in _json_text(self.rows, stats, skipped, columns()):
            if isinstance(piece, tuple):
                self.commit.copy("json", *piece)
            else:
                self.commit.write("json", piece)


def _write_part(name, csv_text, items):
    """A chunk's summary in a file: a JSON line with the lengths, then the CSV text and the JSON items."""
    data = [csv_text.encode("utf-8")] + [text.encode("utf-8") for _, text, _ in items]
    head = {"csv": len(data[0]), "items": [(k, len(d), sep) for (k, _, sep), d in zip(items, data[1:])]}
    with open(name, "wb") as fh:
        fh.write(json.dumps(head).encode("ascii") + b"\n")
        for d in data:
            fh.write(d)


def write_outputs(result, paths, *, dialect, title, extra, section, corner_cards, skipped, parallel=False,
                  chunk=CHUNK, inputs=()):
    """Make and write a lot's library and summary files, all or none, ``chunk`` rows at a time.

    ``result``: the good rows; ``paths``: ``{"library", "csv", "json"}``.
    ``parallel``: let a forked second process make the summaries (see
    :class:`LotWriter`); off by default, so a library call never forks.
    """
    with LotWriter(paths, dialect=dialect, inputs=inputs, fork=parallel, keep=False) as w:
        for lo in range(0, len(result), chunk):
            w.add(_rows(result, lo, min(lo + chunk, len(result))) if len(result) > chunk else result)
        w.finish(title=title, extra=extra, section=section, corner_cards=corner_cards, skipped=skipped,
                 result=result)

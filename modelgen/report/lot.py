"""The lot report: histograms, a scatter of two figures with the corners marked, the statistics.

Reads the summary ``modelgen lots`` writes (``.summary.json`` or ``.summary.csv``) or runs a lot table
through the lot's physics (:func:`modelgen.lots.derive`). Whatever the lot's size, the page holds a fixed
number of SVG elements: histograms of binned counts, and a scatter of at most :data:`MAX_POINTS` rows
spread evenly through the lot (every k-th row, the same on every run) plus the corner rows.
"""

from __future__ import annotations

import csv
import json
import os
import types

import numpy as np

from .. import extraction, lots
from ..errors import InputError
from . import panels
from .panels import LOT_COLOUR, legend, new_figure, plot

#: The scatter shows at most this many rows (evenly spread through the lot).
MAX_POINTS = 2000
#: Bins of each histogram.
BINS = 40
#: Parameters whose histograms are drawn (when the lot has them), then the computed figures.
HISTOGRAMS = ("IS", "RS", "CJO", "TT", "BV")
#: The forward current of the default forward-voltage figure.
DEFAULT_VF = "VF@1mA"
_UNITS = dict(extraction.UNITS, builtin_voltage="V", depletion_width="m", temperature="K", leakage="A")


def _summary_json(path):
    try:
        with open(path, "rb") as fh:
            doc = json.loads(fh.read().decode("utf-8-sig"))
    except (OSError, ValueError) as e:
        raise InputError(f"cannot read it as a lot summary (JSON): {e}", file=path) from None
    cols = doc.get("columns") if isinstance(doc, dict) else None
    if not isinstance(cols, dict) or "IS" not in cols or "name" not in cols:
        raise InputError("is not a modelgen lots summary: no 'columns' with 'name' and 'IS'", file=path)
    out = {}
    n = len(cols["name"])
    for k, v in cols.items():
        if not isinstance(v, list) or len(v) != n:
            raise InputError(f"column {k!r} does not have one entry per row ({n})", file=path, key=k)
        if k in ("name", "p.regime", "n.regime"):
            out[k] = np.asarray(v, dtype=object)
        elif v and all(isinstance(x, bool) for x in v[:1]):
            out[k] = np.asarray(v, bool)
        else:
            try:
                out[k] = np.asarray([np.nan if x is None else x for x in v], float)
            except (TypeError, ValueError):
                raise InputError("holds a value that is not a number", file=path, key=k) from None
    return out, doc.get("skipped") or []


def _summary_csv(path):
    try:
        with open(path, newline="", encoding="utf-8-sig") as fh:
            rows = list(csv.reader(fh))
    except (OSError, UnicodeDecodeError) as e:
        raise InputError(f"cannot read it as a lot summary (CSV): {e}", file=path) from None
    head, body = rows[0], rows[1:]
    if any(len(r) != len(head) for r in body):
        bad = next(j for j, r in enumerate(body) if len(r) != len(head))
        raise InputError(f"has {len(body[bad])} cells where the header has {len(head)}", file=path, row=bad + 2)
    out = {}
    for j, k in enumerate(head):
        cells = [r[j] for r in body]
        if k in ("name", "p.regime", "n.regime"):
            out[k] = np.asarray(cells, dtype=object)
        elif k == "reach_through":
            out[k] = np.asarray([c == "true" for c in cells], bool)
        else:
            try:
                out[k] = np.asarray([c if c else "nan" for c in cells], float)
            except ValueError:
                bad = next(i for i, c in enumerate(cells) if c and not _is_number(c))
                raise InputError(f"{cells[bad]!r} is not a number", file=path, row=bad + 2, key=k) from None
    return out, []


def _is_number(text):
    try:
        float(text)
        return True
    except ValueError:
        return False


def _table(path):
    """A lot table run through the physics: its summary columns, and the physical leakage."""
    table = lots.read(path)
    errors = table.problems.errors()
    if errors:
        first = errors[0]
        more = f" (and {len(errors) - 1} more problems; modelgen lots lists them all)" if len(errors) > 1 else ""
        raise InputError(first.message + more, file=first.file or path, row=first.row, key=first.key)
    result, _ = lots.derive(table)
    cols = dict(lots.summary_columns(result))
    cols["leakage"] = np.asarray(result.derived["leakage"], float)
    cols["leakage_bias"] = np.asarray(result.derived["leakage_bias"], float)
    return cols, []


def read(path):
    """The lot's columns (``name -> array``) and its skipped rows, from a summary or a table."""
    from . import lot_summary_kind

    kind = lot_summary_kind(path)
    if kind == "json":
        return _summary_json(path)
    if kind == "csv":
        return _summary_csv(path)
    return _table(path)


def figure_column(cols, spec, simulator="ngspice"):
    """A column of the lot, or a computed figure ``VF@<current>`` (forward voltage of each row's card in
    ``simulator``'s equations, :func:`modelgen.spread.forward_voltage`); returns (values, unit)."""
    if spec in cols and np.asarray(cols[spec]).dtype.kind == "f":
        return np.asarray(cols[spec], float), _UNITS.get(spec, "")
    if spec.upper().startswith("VF@"):
        from ..spread import forward_voltage, parse_figure

        try:
            current = parse_figure(spec).bias
        except InputError as e:
            raise InputError(e.message, key="--scatter") from None
        params = {k: np.asarray(cols[k], float) for k in ("IS", "N", "ISR", "NR", "VJ", "M", "IKF", "RS")}
        with np.errstate(all="ignore"):
            return forward_voltage(params, np.asarray(cols["temperature"], float), current, simulator), "V"
    known = [k for k, v in cols.items() if np.asarray(v).dtype.kind == "f" and k != "line"]
    raise InputError(f"{spec!r} is neither a column of the lot ({', '.join(known)}) nor VF@<current>",
                     key="--scatter")


def bins_for(n):
    """Histogram bins for n values: sqrt(n) rounded up, within 5 .. :data:`BINS` (common practice)."""
    return int(min(BINS, max(5, np.ceil(np.sqrt(n)))))


def _histograms(values, title):
    keys = list(values)
    ncols = 3
    nrows = int(np.ceil(len(keys) / ncols))
    fig, axes = new_figure(nrows, ncols, size=(7.6, 2.5 * nrows))
    for ax, key in zip(axes.flat, keys):
        x, unit = values[key]
        x = x[np.isfinite(x)]
        if not len(x):
            ax.set_visible(False)
            continue
        log = x.min() > 0 and x.max() / x.min() > 10
        lo, hi = float(x.min()), float(x.max())
        if hi <= lo:
            lo, hi = lo - 0.5 * abs(lo or 1) * 1e-3, hi + 0.5 * abs(hi or 1) * 1e-3
        bins = bins_for(len(x))
        edges = np.geomspace(lo, hi, bins + 1) if log else np.linspace(lo, hi, bins + 1)
        counts, edges = np.histogram(x, edges)
        bars = ax.stairs(counts, edges, fill=True, color=LOT_COLOUR, edgecolor="#0072B2", linewidth=0.6)
        bars.modelgen_role = "histogram"
        bars.modelgen_data = (counts, edges)
        if log:
            ax.set_xscale("log")
        ax.set_xlabel(f"{key} [{unit}]" if unit and unit != "1" else key)
        ax.set_ylabel("devices")
    for ax in list(axes.flat)[len(keys):]:
        ax.set_visible(False)
    fig.suptitle(title, fontsize=10)
    return fig


def _scatter(cols, xs, ys, corner_rows, n, by="IS"):
    (x, xu, xn), (y, yu, yn) = xs, ys
    fig, axes = new_figure()
    ax = axes[0, 0]
    shown = np.unique(np.linspace(0, n - 1, min(n, MAX_POINTS)).round().astype(int))
    line = plot(ax, "measurement", x[shown], y[shown],
                f"devices ({len(shown):,} of {n:,})" if len(shown) < n else f"devices ({n:,})")
    line.set_color(LOT_COLOUR)
    line.set_markeredgecolor("#0072B2")
    line.modelgen_role = "lot"
    for (section, row, pct, *_), marker in zip(corner_rows, ("v", "D", "^")):
        line = plot(ax, "corner", [x[row]], [y[row]], f"{section}: {cols['name'][row]} ({pct:.3g}th percentile of {by})")
        line.set_marker(marker)
    for v, setter in ((x, ax.set_xscale), (y, ax.set_yscale)):
        f = v[np.isfinite(v)]
        if len(f) and f.min() > 0 and f.max() / f.min() > 10:
            setter("log")
    ax.set_xlabel(f"{xn} [{xu}]" if xu and xu != "1" else xn)
    ax.set_ylabel(f"{yn} [{yu}]" if yu and yu != "1" else yn)
    ax.set_title(f"{yn} against {xn}")
    legend(ax, loc="best")
    return fig, shown


def _fmt(v):
    return f"{v:.4g}"


def report(path, *, scatter=None, corner_spec="5,50,95", dialect="ngspice", progress=None):
    """The lot report of the summary or table at ``path`` (a :class:`modelgen.report.Report`)."""
    from . import Report, Table

    if progress:
        progress("reading the lot")
    cols, skipped = read(path)
    n = len(cols["name"])
    if n == 0:
        raise InputError("holds no rows", file=path)
    sim = "ngspice"
    values = {}
    for k in HISTOGRAMS:
        if k in cols:
            values[k] = figure_column(cols, k, sim)
    values[DEFAULT_VF] = figure_column(cols, DEFAULT_VF, sim)
    if "leakage" in cols:
        values["leakage"] = figure_column(cols, "leakage", sim)
    if scatter:
        parts = [p.strip() for p in scatter.split(",")]
        if len(parts) != 2 or not all(parts):
            raise InputError(f"{scatter!r}: give two figures, X,Y (e.g. VF@1mA,BV)", key="--scatter")
    else:
        parts = [DEFAULT_VF, "leakage" if "leakage" in cols else "BV"]
    xs = (*figure_column(cols, parts[0], sim), parts[0])
    ys = (*figure_column(cols, parts[1], sim), parts[1])
    if progress:
        progress("drawing the figures")
    figure = lots.parse_corners(corner_spec)[0]
    by = None
    if figure not in ("IS",):  # a figure the lot's columns give (VF@<current>, BV, TT), else the lot's "leakage"
        column = figure
        if figure.startswith("IR@") and "leakage" in cols:
            from ..spread import parse_figure

            if np.allclose(np.asarray(cols["leakage_bias"], float), parse_figure(figure).bias, rtol=1e-9, atol=0):
                column = "leakage"  # the physical leakage each row was derived with, at that bias
        try:
            by = figure_column(cols, column, sim)[0]
        except InputError:
            raise InputError(f"{corner_spec!r}: the lot report places corners by IS, VF@<current>, BV or TT (and, "
                             "given the lot table, by IR at the rows' leakage bias)", key="--lot-corners") from None
    chosen = lots.corner_rows(types.SimpleNamespace(params={"IS": np.asarray(cols["IS"], float)},
                                                    device=types.SimpleNamespace(name=cols["name"])),
                              corner_spec, by)
    name = os.path.basename(str(path))
    hist = panels.Panel("histograms", "Histograms", _histograms(values, f"{name}: {n:,} devices"),
                        f"{bins_for(n)} bins each (log-spaced where a quantity spans over a decade); {DEFAULT_VF} "
                        f"is the forward voltage at 1 mA of each row's card in {sim}'s equations.")
    fig, shown = _scatter(cols, xs, ys, chosen, n, figure)
    sc = panels.Panel("scatter", "Scatter with the corners", fig,
                      (f"Every {n / len(shown):.3g}th row shown ({len(shown):,} of {n:,}, evenly spread through "
                       "the lot, the same on every run); " if len(shown) < n else "Every row shown; ")
                      + f"the corners are the rows nearest the percentiles {corner_spec} (of IS unless a figure "
                        "is named), as modelgen lots --corners picks them.")
    stats = lots.statistics({k: v[0] for k, v in values.items()} | {
        k: v for k, v in cols.items()
        if k not in values and np.asarray(v).dtype.kind == "f" and k not in ("line", "leakage_bias")})
    rows = [["quantity", "unit", "count", "median", "mean", "std", "p5", "p95", "min", "max"]]
    for k, s in stats.items():
        p = s["percentiles"]
        rows.append([k, _UNITS.get(k, "V" if k.startswith("VF@") else ""), str(s["count"]), _fmt(s["median"]),
                     _fmt(s["mean"]), _fmt(s["std"]), _fmt(p["5"]), _fmt(p["95"]), _fmt(s["min"]), _fmt(s["max"])])
    notes = []
    if "warnings" in cols:
        warned = int(np.sum(np.asarray(cols["warnings"], float) > 0))
        if warned:
            notes.append(("note", f"{warned:,} of {n:,} rows carry warnings (see their cards)"))
    for s in skipped[:20]:
        notes.append(("note", f"skipped row {s.get('row')}: {s.get('key')}: {s.get('message')}"))
    if len(skipped) > 20:
        notes.append(("note", f"... and {len(skipped) - 20} more skipped rows"))
    corner_table = Table("Corners", [["corner", "row", "name", "IS [A]", xs[2], ys[2]]] + [
        [section, str(int(cols["line"][row])) if "line" in cols else str(row + 1), str(cols["name"][row]),
         _fmt(cols["IS"][row]), _fmt(xs[0][row]), _fmt(ys[0][row])] for section, row, *_ in chosen])
    return Report(kind="lot", title=f"{name}: lot report", inputs=[str(path)], panels=[hist, sc],
                  tables=[corner_table, Table("Statistics", rows, "Across the lot's rows (NaN left out).")],
                  notes=notes, settings=f"scatter {xs[2]} against {ys[2]}; corners {corner_spec}",
                  data=types.SimpleNamespace(columns=cols, values=values, shown=shown, corners=chosen,
                                             x=xs, y=ys))

"""The one card renderer: a single card is a library of one.

Every card text modelgen writes, from ``card``, ``corners`` or ``lots``, is
made here by :func:`render` from :class:`Part` objects (some devices of one
:class:`~modelgen.extraction.Result`, optionally renamed, in a section).
A file has one header (what made it, the dialect, the models, the caution,
what the dialect cannot carry and what that costs); each card has its own
lines (its name and where it came from, the inputs as written when known,
its findings, the values its dialect cannot carry) and its parameters.

Speed: the card template is rendered once per set of parameters with
placeholder tokens (:func:`_fill_pattern`) and the resulting pattern filled
for every card; numbers are formatted column-wise, each distinct value once.
"""

from __future__ import annotations

import json
import re
import string
from dataclasses import dataclass
from operator import itemgetter
from pathlib import Path
from typing import Sequence

import jinja2
import numpy as np

from .. import __version__, targets
from ..constants import ZERO_CELSIUS
from ..extraction import PARAMETERS, Result
from .text import CONTROL, comment_lines, format_numbers, safe

_HERE = Path(__file__).resolve().parent

CAUTION = ("CAUTION: a physics-derived estimate. Check it against measured I-V and C-V of real "
           "devices before design sign-off; derate and confirm breakdown.")

_SECTION = re.compile(r"[A-Za-z][A-Za-z0-9_]{0,63}\Z")


def _template_dir():
    """templates/ inside the installed package, else the source tree's."""
    for d in (_HERE.parent / "templates", _HERE.parent.parent / "templates"):
        if d.is_dir():
            return d
    raise FileNotFoundError("modelgen templates directory not found")


_ENV = None


def _template_file(name):
    """A template given by its absolute path (a target registered from outside the package)."""
    path = Path(name)
    if path.is_absolute() and path.is_file():
        return path.read_text(encoding="utf-8")
    return None


def environment():
    """The jinja2 environment: templates by name from the templates folder, or by absolute path.

    Strict: a value a template asks for and does not get is an error.
    """
    global _ENV
    if _ENV is None:
        loader = jinja2.ChoiceLoader([jinja2.FileSystemLoader(str(_template_dir())),
                                      jinja2.FunctionLoader(_template_file)])
        _ENV = jinja2.Environment(loader=loader,
                                  autoescape=False, keep_trailing_newline=True,
                                  undefined=jinja2.StrictUndefined, trim_blocks=True, lstrip_blocks=True)
    return _ENV


def card_columns(result: Result, dialect, overrides=None):
    """The card parameters of every device, as the dialect carries them.

    Parameters
    ----------
    result : Result
    dialect : str
        A target name (:data:`modelgen.targets.TARGETS`).
    overrides : dict, optional
        Name -> value (or array over devices) replacing or adding parameters,
        e.g. fitted EG, XTI, TCV, TRS1, TRS2; TCV and TRS1/2 appear only when
        supplied.

    Returns
    -------
    (columns, params) :
        ``columns``: list of ``(NAME, array)`` in card order, NaN where a
        device's card leaves the parameter off (BV when no breakdown was
        found, sidewall terms when there is no sidewall); ``params``: every
        parameter by name, including those the dialect cannot carry.
    """
    d = targets.get(dialect)
    n = len(result)
    p = {k: np.asarray(v, float) for k, v in result.params.items()}
    p["TNOM"] = np.round(result.derived["temperature"] - ZERO_CELSIUS, 9)
    for k, v in (overrides or {}).items():
        p[k] = np.broadcast_to(np.asarray(v, float), (n,))
    if d.sidewall == "split":
        total, bottom = result.derived["junction_area"], result.derived["bottom_area"]
        split = total > bottom
        f = bottom / total
        nan = np.nan
        p.update(JSW=np.where(split, p["IS"] * (1 - f), nan), IS=np.where(split, p["IS"] * f, p["IS"]),
                 CJSW=np.where(split, p["CJO"] * (1 - f), nan), CJO=np.where(split, p["CJO"] * f, p["CJO"]),
                 PHP=np.where(split, p["VJ"], nan), MJSW=np.where(split, p["M"], nan),
                 FCS=np.where(split, p["FC"], nan), PJ=np.where(split, 1.0, nan))
    no_bv = ~np.isfinite(p["BV"])
    p["IBV"] = np.where(no_bv, np.nan, p["IBV"])
    columns = [(name, p[name]) for name in d.carries if name in p]
    return columns, p


def left_out_names(dialect):
    """The card parameters modelgen derives that ``dialect`` cannot carry (IBV goes with BV)."""
    carries = targets.get(dialect).carries
    return [k for k in PARAMETERS if k not in carries and k != "IBV"]


def card_values(result: Result, i, dialect, overrides=None):
    """The parameters of device ``i`` as dialect ``dialect`` carries them.

    Returns
    -------
    (values, left_out) :
        ``values``: list of ``(NAME, float)`` in card order; ``left_out``:
        ``(NAME, float)`` of the derived parameters the dialect cannot carry.
    """
    columns, p = card_columns(result, dialect, overrides)
    values = [(k, float(v[i])) for k, v in columns if np.isfinite(v[i])]
    left = [(k, float(p[k][i])) for k in left_out_names(dialect) if np.isfinite(p[k][i])]
    return values, left


@dataclass
class Part:
    """Cards of some devices of one Result, for :func:`render`.

    Attributes
    ----------
    result : Result
    rows : sequence of int, optional
        Which devices, in card order (default: all).
    section : str, optional
        The ``.lib`` section the cards go in (None: outside any section).
    names : sequence of str, optional
        Model names replacing the devices' own, one per card (checked SPICE
        identifiers).
    comments : sequence of str or None, optional
        One more header line per card (made safe).
    inputs : sequence of dict or None, optional
        Per card, the description's keys as the user wrote them (shown in
        the card's header, made safe).
    overrides : dict, optional
        Parameters replacing the derived ones over all the result's devices
        (a temperature fit's), see :func:`card_columns`.
    texts : list, optional
        The formatted columns of all the result's devices when already made
        (``format_numbers`` of each of :func:`card_columns`' columns).
    cache : dict, optional
        A :func:`~modelgen.cards.text.format_numbers` cache shared with other
        texts of the same result (the summary): the values a dialect cannot
        carry are formatted once for both.
    source : dict, optional
        A generation source per device (:meth:`modelgen.leakage.Generation.values`:
        arrays over all the result's devices by :data:`SOURCE_KEYS`): each card
        becomes a ``.subckt`` holding the diode and the source, from the
        target's ``leakage_template``.
    """

    result: Result
    rows: Sequence | None = None
    section: str | None = None
    names: Sequence | None = None
    comments: Sequence | None = None
    inputs: Sequence | None = None
    overrides: dict | None = None
    texts: list | None = None
    cache: dict | None = None
    source: dict | None = None


def _positional(text, keys):
    """``text`` (a str.format pattern with named fields) with the fields numbered by their place in ``keys``."""
    out = []
    for literal, field_name, spec, conversion in string.Formatter().parse(text):
        out.append(literal.replace("{", "{{").replace("}", "}}"))
        if field_name is not None:
            out.append("{%d%s%s}" % (keys.index(field_name), "!" + conversion if conversion else "",
                                     ":" + spec if spec else ""))
    return "".join(out)


def _per_card_findings(result, rows):
    """For each of ``rows``, the lines of its findings (all but those said once in the file header).

    Each finding's messages are made by one ``map`` over its value columns and
    appended to the cards it applies to with one object-array addition.
    """
    rows = np.asarray(rows, int)
    out = np.full(len(rows), "", dtype=object)
    for f in result.findings:
        if f.severity == "caution":
            continue  # a standing reminder, the same for every card: said once in the file header
        at = np.flatnonzero(np.asarray(f.mask)[rows])
        if not len(at):
            continue
        devices = rows[at]
        keys = list(f.values)
        if keys:
            cols = [np.asarray(v)[devices].tolist() if isinstance(v, np.ndarray) else [v] * len(at)
                    for v in f.values.values()]
            messages = map(("\n* " + _positional(f.text, keys)).format, *cols)
        else:
            messages = ["\n* " + f.text.format()] * len(at)
        added = np.empty(len(at), dtype=object)
        added[:] = list(messages)
        out[at] = out[at] + added
    return out.tolist()


def _inputs_lines(inputs):
    lines = comment_lines("inputs:")
    for k in sorted(inputs):
        v = inputs[k]
        shown = json.dumps(v, ensure_ascii=False) if isinstance(v, str) else repr(v)
        lines += comment_lines(f"  {k} = {shown}")
    return lines


_TOKEN = "\x01"


#: The numbers of a generation source (:mod:`modelgen.leakage`), in template order.
SOURCE_KEYS = ("IG", "IE", "M", "VJ", "VG")


def _fill_pattern(dialect, names, source=False):
    """A str.format pattern for one card with these parameters, made by rendering the card template.

    The template is rendered once with placeholder tokens for the header
    block ({0}), the name ({1}) and each value ({2}, {3}, ...); the result,
    braces escaped and tokens turned into positional fields, is filled for
    every card. The template stays the one place that holds the card
    syntax; filling is fast.
    """
    token = lambda k: f"{_TOKEN}{k}{_TOKEN}"  # noqa: E731
    proto = {"header": [token(0)], "name": token(1), "params": [(k, token(j + 2)) for j, k in enumerate(names)]}
    target = targets.get(dialect)
    template = target.template
    if source:
        if target.leakage_template is None:
            raise ValueError(f"the {target.name} dialect has no generation-source form")
        template = target.leakage_template
        proto["source"] = {k: token(len(names) + 2 + j) for j, k in enumerate(SOURCE_KEYS)}
    text = environment().get_template(template).render(card=proto)
    text = text.replace("{", "{{").replace("}", "}}")
    return re.sub(f"{_TOKEN}(\\d+){_TOKEN}", lambda m: "{" + m.group(1) + "}", text)


def part_cards(part: Part, dialect):
    """The card texts of a :class:`Part`, one string per card, in order."""
    result = part.result
    dev = result.device
    n = len(dev)
    rows = np.arange(n) if part.rows is None else np.asarray(part.rows, int)
    m = len(rows)
    if m == 0:
        return []
    columns, p = card_columns(result, dialect, part.overrides)
    names = [k for k, _ in columns]
    pick = rows.tolist()
    whole = m == n and np.array_equal(rows, np.arange(n))
    if part.texts is None:
        texts = [format_numbers(v[rows]) for _, v in columns]
    elif whole:
        texts = part.texts
    else:
        texts = [[col[i] for i in pick] for col in part.texts]
    model = list(part.names) if part.names is not None else [dev.name[i] for i in pick]
    # the card's own header lines: model names are checked SPICE identifiers; file names,
    # comments and inputs have control characters removed; findings are our own one-line texts
    src = safe(Path(dev.source[0]).name) if len(dev.source) and dev.source[0] else ""
    lines = list(dev.line) if len(dev.line) else None
    if lines is not None:
        heads = [f"* {model[k]}: from {src} line {lines[i]}" for k, i in enumerate(pick)]
    elif src:
        heads = [f"* {name}: from {src}" for name in model]
    else:
        heads = [f"* {name}" for name in model]
    extra = [""] * m
    if part.comments is not None:
        extra = [e + ("\n" + "\n".join(comment_lines(c)) if c else "") for e, c in zip(extra, part.comments)]
    if part.inputs is not None:
        extra = [e + ("\n" + "\n".join(_inputs_lines(c)) if c else "") for e, c in zip(extra, part.inputs)]
    findings = _per_card_findings(result, pick)
    left = left_out_names(dialect)
    if left:
        left_texts = [format_numbers(p[k], part.cache) if whole and part.cache is not None
                      else format_numbers(p[k][rows]) for k in left]
        notes = [" ".join(f"{k}={t}" for k, t in zip(left, vals) if t is not None)
                 for vals in zip(*left_texts)]
        target = targets.get(dialect).name
        notes = [f"\n* not carried by the {target} dialect: {t}" if t else "" for t in notes]
    else:
        notes = [""] * m
    heads = list(map("".join, zip(heads, extra, findings, notes)))
    present = (np.isfinite(np.column_stack([v[rows] for _, v in columns])) if columns
               else np.zeros((m, 0), bool))
    codes = present.astype(np.int64) @ (np.int64(1) << np.arange(present.shape[1], dtype=np.int64))
    _, first, group_of = np.unique(codes, return_index=True, return_inverse=True)
    group_of = group_of.ravel()
    out = [None] * m
    wrapped = part.source is not None
    if wrapped:
        texts = texts + [format_numbers(np.asarray(part.source[k], float)[rows]) for k in SOURCE_KEYS]
    extra_cols = list(range(len(columns), len(texts)))
    for g, f in enumerate(first.tolist()):
        cols = [j for j, ok in enumerate(present[f]) if ok] + extra_cols
        fill = _fill_pattern(dialect, [names[j] for j in cols if j < len(names)], wrapped).format
        if len(first) == 1:
            return list(map(fill, heads, model, *[texts[j] for j in cols]))
        idx = np.flatnonzero(group_of == g).tolist()
        pickg = itemgetter(*idx) if len(idx) > 1 else (lambda seq, i=idx[0]: (seq[i],))
        for k, text in zip(idx, map(fill, pickg(heads), pickg(model), *[pickg(texts[j]) for j in cols])):
            out[k] = text
    return out


def models_lines(result):
    """Header lines naming the published model behind each material quantity."""
    lines = comment_lines("models:")
    for k, v in sorted(result.sources.items()):
        lines += comment_lines(f"  {k}: {v}")
    return lines


def file_header(dialect, title, count, *, result=None, extra=()):
    """The header lines of a card file: what made it, the dialect, models, caution, what is not carried."""
    d = targets.get(dialect)
    counted = title if count == 1 else f"{title}: {count} cards"
    header = comment_lines(f"{counted}, modelgen {__version__}, dialect {d.name} ({d.title})")
    for line in extra:
        header += comment_lines(line)
    if result is not None:
        header += models_lines(result)
    header += comment_lines(CAUTION)
    if result is not None:
        for f in result.findings:
            if f.severity == "caution" and f.mask.any():
                header += comment_lines(f.text)
    left = left_out_names(dialect)
    if left:
        header += comment_lines(f"not carried by the {d.name} dialect (each card lists its values): "
                                + "; ".join(f"{k}: {d.cost.get(k, 'not carried')}" for k in left))
    return header


def check_sections(parts, dialect):
    """Raise ValueError for sections the dialect lacks, bad section names, or a name twice in a section."""
    d = targets.get(dialect)
    seen = set()
    for part in parts:
        if part.section is not None:
            if not d.sections:
                raise ValueError(f"the {d.name} dialect has no .lib sections")
            if not _SECTION.match(part.section):
                raise ValueError(f"section name {part.section!r} must be a letter followed by letters, digits or "
                                 "underscores")
        dev = part.result.device
        rows = range(len(dev)) if part.rows is None else np.asarray(part.rows).tolist()
        names = part.names if part.names is not None else [dev.name[i] for i in rows]
        for name in names:
            key = (part.section, name.upper())
            if key in seen:
                where = f" in section {part.section}" if part.section else ""
                raise ValueError(f"model name {name} is used twice{where}")
            seen.add(key)


def render(parts, dialect, *, title, extra=(), bodies=None):
    """A card file: the file header, then the cards of every part, in ``.lib`` sections where given.

    Parameters
    ----------
    parts : list of Part
        Cards keep the order given; consecutive parts with the same section
        share one ``.lib`` block.
    dialect : str
        A target name.
    title : str
        First header line (``"DMODEL: diode model card"``, ``"diode model library"``).
    extra : sequence of str
        More file-header lines (made safe).
    bodies : list of str or None, optional
        Per part, its cards' text when already made (by :func:`part_cards`,
        possibly in pieces); None entries are made here.

    Raises
    ------
    ValueError
        Named sections for a dialect without them, a section name that is
        not a SPICE identifier, or a model name used twice in one section.
    """
    check_sections(parts, dialect)
    count = sum(len(p.result) if p.rows is None else len(p.rows) for p in parts)
    header = file_header(dialect, title, count, result=parts[0].result if parts else None, extra=extra)
    sections = []
    for k, part in enumerate(parts):
        body = bodies[k] if bodies is not None and bodies[k] is not None else "".join(part_cards(part, dialect))
        if sections and sections[-1]["name"] == part.section:
            sections[-1]["body"] += body
        else:
            sections.append({"name": part.section, "body": body})
    return environment().get_template(targets.get(dialect).library_template).render(header=header,
                                                                                     sections=sections)


def card(result: Result, i=0, dialect="spice3", inputs=None, overrides=None, extra=(), source=None):
    """The model card of device ``i`` as a file of one card.

    Parameters
    ----------
    result : Result
        From :func:`modelgen.extraction.derive`.
    i : int
        Which device.
    dialect : str
        A target name.
    inputs : dict, optional
        The description's keys and values as the user wrote them, shown in
        the card's header.
    overrides : dict, optional
        Parameters replacing the derived ones (a temperature fit's).
    extra : sequence of str
        More header lines (made safe like all header text).
    source : dict, optional
        A generation source (see :class:`Part`): the card becomes a ``.subckt``.
    """
    part = Part(result, rows=[i], inputs=[inputs] if inputs else None, overrides=overrides, source=source)
    return render([part], dialect, title=f"{result.device.name[i]}: diode model card", extra=extra)


def library(parts, dialect="spice3", title="diode model library", extra=()):
    """Several cards in one file, optionally in named ``.lib`` sections.

    ``parts``: a list of ``(section, result, i, inputs)`` (device ``i`` of
    ``result``; ``inputs`` may be None), or of :class:`Part`. See :func:`render`.
    """
    parts = [p if isinstance(p, Part) else
             Part(p[1], rows=[p[2]], section=p[0], inputs=[p[3]] if p[3] else None) for p in parts]
    return render(parts, dialect, title=title, extra=extra)


def table_cards(result: Result, dialect="spice3", rows=None, corner_cards=(), texts=None, cache=None):
    """The card texts of devices ``rows`` (default all), concatenated, and of any corner cards.

    ``corner_cards`` holds ``(section, name, i, comment)``: device ``i``
    again, named ``name``, with one more header line. ``texts``: the
    formatted columns of all devices when already made; ``cache``: a
    number-formatting cache shared with the summary (see :class:`Part`).

    Returns
    -------
    (body, corners) :
        The cards of ``rows`` as one text, and a list of the corner cards' texts.
    """
    body = "".join(part_cards(Part(result, rows=rows, texts=texts, cache=cache), dialect))
    corners = [part_cards(Part(result, rows=[i], names=[name], comments=[comment], texts=texts), dialect)[0]
               for _, name, i, comment in corner_cards]
    return body, corners


def table_library(result: Result, dialect="spice3", *, title="diode model library", extra=(), section=None,
                  corner_cards=(), body=None):
    """A library with one card per device of a (large) table, and corner cards in sections of their own.

    ``body``: the cards' text when already made (by :func:`table_cards`,
    possibly in pieces). See :func:`render`.
    """
    parts = [Part(result, section=section)]
    parts += [Part(result, rows=[i], names=[name], comments=[comment], section=sec)
              for sec, name, i, comment in corner_cards]
    return render(parts, dialect, title=title, extra=extra, bodies=[body] + [None] * len(corner_cards))


__all__ = ["CAUTION", "CONTROL", "Part", "card", "card_columns", "card_values", "check_sections", "file_header",
           "library", "part_cards", "render", "table_cards", "table_library"]

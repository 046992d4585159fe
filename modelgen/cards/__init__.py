"""Model-card text: number formatting, safe comments, dialects, templates.

Templates hold no logic beyond loops: every number arrives formatted and
every comment arrives as a safe line. A dialect is a template plus the list of
parameters it carries (:data:`DIALECTS`).
"""

from __future__ import annotations

import json
import math
import re
from operator import itemgetter
from dataclasses import dataclass
from pathlib import Path

import jinja2
import numpy as np

from .. import __version__
from ..extraction import PARAMETERS, UNITS, Result

_HERE = Path(__file__).resolve().parent


def _template_dir():
    """templates/ inside the installed package, else the source tree's."""
    for d in (_HERE.parent / "templates", _HERE.parent.parent / "templates"):
        if d.is_dir():
            return d
    raise FileNotFoundError("modelgen templates directory not found")


@dataclass(frozen=True)
class Dialect:
    """An output dialect: its template and the parameters it carries.

    ``carries`` lists, in card order, the parameters the simulator reads.
    ``sidewall`` is ``"split"`` where the simulator has its own sidewall terms
    (JSW, CJSW, PHP, MJSW with perimeter factor PJ) and ``"fold"`` where the
    perimeter part is folded into IS and CJO (exact here: the sidewall has the
    bottom junction's physics per area). ``sections``: the target reads
    ``.lib NAME`` / ``.endl`` sections. ``simulators``: the simulators the
    dialect's cards are meant for, and so the ones ``check`` runs them in.
    """

    name: str
    title: str
    carries: tuple
    sidewall: str
    sections: bool
    cost: dict
    simulators: tuple = ()
    template: str = "card.j2"
    library_template: str = "library.j2"


_COST = {
    "ISR": "depletion-region recombination current: low-bias current is underestimated",
    "NR": "ideality of the recombination current",
    "IKF": "high-injection knee: current at high forward bias is overestimated",
    "BV": "breakdown: the reverse current does not break down",
    "IBV": "current at BV",
}

DIALECTS = {
    # Berkeley SPICE3 level-1 diode (SPICE3 user's guide)
    "spice3": Dialect(
        name="spice3", title="Berkeley SPICE3 level-1 diode",
        carries=("IS", "N", "RS", "CJO", "VJ", "M", "FC", "TT", "BV", "IBV", "EG", "XTI", "TNOM"),
        sidewall="fold", sections=False, cost=_COST, simulators=("ngspice", "gnucap")),
    # ngspice 39 diode: names checked against ngspice's parameter table and its behaviour
    # (PHP is the sidewall potential; VJSW is not accepted; PJ=1 on the model makes the
    # sidewall values totals for one device, as AREA=1 does for the bottom ones)
    "ngspice": Dialect(
        name="ngspice", title="ngspice level-1 diode",
        carries=("IS", "JSW", "N", "RS", "CJO", "CJSW", "VJ", "PHP", "M", "MJSW", "FC", "FCS", "TT",
                 "BV", "IBV", "EG", "XTI", "ISR", "NR", "IKF", "PJ", "TCV", "TRS1", "TRS2", "TNOM"),
        sidewall="split", sections=True, cost=_COST, simulators=("ngspice",)),
    # gnucap 0.36 diode: no ISR/NR/IKF; BV is accepted but its default diode path has no breakdown
    "gnucap": Dialect(
        name="gnucap", title="gnucap diode",
        carries=("IS", "N", "RS", "CJO", "VJ", "M", "FC", "TT", "EG", "XTI", "TNOM"),
        sidewall="fold", sections=False,
        cost={**_COST, "BV": "gnucap 0.36's diode has no breakdown model, so BV would be read and ignored"},
        simulators=("gnucap",)),
}

_SIDEWALL = ("JSW", "CJSW", "PHP", "MJSW", "FCS", "PJ")
#: Parameters a card carries only when a fit supplies them.
_OPTIONAL = ("TCV", "TRS1", "TRS2")


def card_columns(result: Result, dialect, overrides=None):
    """The card parameters of every device, as the dialect carries them.

    Parameters
    ----------
    result : Result
    dialect : str
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
    d = DIALECTS[dialect]
    n = len(result)
    p = {k: np.asarray(v, float) for k, v in result.params.items()}
    p["TNOM"] = np.round(result.derived["temperature"] - 273.15, 9)
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


def _left_out(d, p, i):
    lines = []
    if not math.isfinite(p["BV"][i]) and "BV" in d.carries:
        lines.append("BV, IBV: no avalanche breakdown found below 2e6 V/cm")
    for name in PARAMETERS:
        if name not in d.carries and name != "IBV" and math.isfinite(p[name][i]):
            lines.append(f"{name}={format_number(p[name][i])} ({d.cost.get(name, 'not carried')})")
    return lines


def card_values(result: Result, i, dialect, overrides=None):
    """The parameters of device ``i`` as dialect ``dialect`` carries them.

    Returns
    -------
    (values, left_out) :
        ``values``: list of ``(NAME, float)`` in card order; ``left_out``:
        lines saying what the dialect cannot carry and what that costs.
    """
    columns, p = card_columns(result, dialect, overrides)
    values = [(k, float(v[i])) for k, v in columns if math.isfinite(v[i])]
    return values, _left_out(DIALECTS[dialect], p, i)


def _exponent_form(r):
    """Python's shortest round-trip repr ``r`` of a finite float, in exponent form.

    A positional repr (1e-4 <= |x| < 1e16) is rewritten digit for digit:
    '33.87' -> '3.387e+01', '0.0025' -> '2.5e-03'; exponent reprs pass.
    """
    if "e" in r:
        return r
    sign = ""
    if r[0] == "-":
        sign, r = "-", r[1:]
    ip, _, fp = r.partition(".")
    if ip != "0":
        exp = len(ip) - 1
        digits = (ip + fp).rstrip("0")
    else:
        stripped = fp.lstrip("0")
        if not stripped:
            return sign + "0e+00"
        exp = len(stripped) - len(fp) - 1
        digits = stripped.rstrip("0")
    mantissa = digits[0] + "." + digits[1:] if len(digits) > 1 else digits
    return sign + mantissa + ("e+%02d" % exp if exp >= 0 else "e-%02d" % -exp)


def format_number(x):
    """A float in exponent form with the fewest digits that read back exactly.

    ``1e-15`` -> ``1e-15``, ``0.5`` -> ``5e-01``, ``2.3234916272313127e-15``
    -> ``2.3234916272313127e-15`` (the same text as numpy's
    ``format_float_scientific(x, unique=True, trim='-', exp_digits=2)``, made
    from Python's shortest repr, which is faster). Raises ValueError for
    non-finite values (they never belong on a card).
    """
    x = float(x)
    if not math.isfinite(x):
        raise ValueError(f"non-finite value {x!r} cannot go on a card")
    return _exponent_form(repr(x))


def _take(texts, index):
    """``[texts[k] for k in index]``, done by itemgetter in C."""
    index = np.asarray(index).ravel().tolist()
    if not index:
        return []
    if len(index) == 1:
        return [texts[index[0]]]
    return list(itemgetter(*index)(texts))


def format_numbers(values, cache=None):
    """:func:`format_number` over an array; NaN gives None. Each distinct value is formatted once.

    ``cache`` (a dict) remembers arrays already formatted in this run, so a
    column shared by a library and its summary is formatted once.
    """
    if cache is not None and isinstance(values, np.ndarray) and id(values) in cache:
        return cache[id(values)][1]
    v = np.asarray(values, float)
    uniq, inverse = np.unique(v, return_inverse=True)
    finite = np.isfinite(uniq)
    texts = [r if "e" in r else _exponent_form(r) for r in map(repr, uniq[finite].tolist())]
    if not finite.all():
        full = [None] * len(uniq)
        for k, t in zip(np.flatnonzero(finite).tolist(), texts):
            full[k] = t
        texts = full
    out = _take(texts, inverse)
    if cache is not None and isinstance(values, np.ndarray):
        cache[id(values)] = (values, out)  # keep the array alive so its id stays unique
    return out


_CONTROL = re.compile(r"[\x00-\x1f\x7f-\x9f\u2028\u2029]")


def comment_lines(text, prefix="* "):
    """Turn any text into SPICE comment lines, one ``*`` line per input line.

    Control characters (including carriage returns, tabs, form feeds and
    Unicode line separators) are removed, so no part of the text can begin a
    line of its own: every returned line starts with ``prefix``.
    """
    out = []
    for line in str(text).splitlines() or [""]:
        out.append((prefix + _CONTROL.sub("", line)).rstrip())
    return out


def _inputs_lines(inputs):
    lines = []
    for k in sorted(inputs):
        v = inputs[k]
        shown = json.dumps(v, ensure_ascii=False) if isinstance(v, str) else repr(v)
        lines += comment_lines(f"  {k} = {shown}")
    return lines


CAUTION = ("CAUTION: a physics-derived estimate. Check it against measured I-V and C-V of real "
           "devices before design sign-off; derate and confirm breakdown.")


def _card_header(result, i, dialect, inputs):
    row = result.row(i)
    d = DIALECTS[dialect]
    header = comment_lines(f"{row['name']}: diode model card, modelgen {__version__}, dialect {d.name} ({d.title})")
    src = result.device.source[i] if len(result.device.source) else None
    if src:
        header += comment_lines(f"from: {Path(src).name}")
    if inputs:
        header += comment_lines("inputs:") + _inputs_lines(inputs)
    return header, row


def _models_lines(result):
    lines = comment_lines("models:")
    for k, v in sorted(result.sources.items()):
        lines += comment_lines(f"  {k}: {v}")
    return lines


def _card_dict(result, i, dialect, inputs, with_models, overrides=None, extra=()):
    """What the templates need for one card: header and note lines, name, formatted params."""
    header, row = _card_header(result, i, dialect, inputs)
    if with_models:
        header += _models_lines(result) + comment_lines(CAUTION)
    for line in extra:
        header += comment_lines(line)
    for w in row["warnings"]:
        header += comment_lines(w)
    values, left_out = card_values(result, i, dialect, overrides)
    notes = []
    if left_out:
        notes = comment_lines(f"left out, the {dialect} set cannot carry them:")
        for s in left_out:
            notes += comment_lines("  " + s)
    return {"header": header, "notes": notes, "name": row["name"],
            "params": [(k, format_number(v)) for k, v in values]}


def _block(result, i, dialect, inputs, with_models, overrides=None, extra=()):
    card = _card_dict(result, i, dialect, inputs, with_models, overrides, extra)
    return _environment().get_template(DIALECTS[dialect].template).render(card=card)


def card(result: Result, i=0, dialect="spice3", inputs=None, overrides=None, extra=()):
    """The model card of device ``i`` as text.

    Parameters
    ----------
    result : Result
        From :func:`modelgen.extraction.derive`.
    i : int
        Which device.
    dialect : str
        A key of :data:`DIALECTS`.
    inputs : dict, optional
        The description's keys and values as the user wrote them, shown in
        the header.
    overrides : dict, optional
        Parameters replacing the derived ones (a temperature fit's).
    extra : sequence of str
        More header lines (made safe like all header text).
    """
    return _block(result, i, dialect, inputs, with_models=True, overrides=overrides, extra=extra)


def library(parts, dialect="spice3", title="diode model library", extra=()):
    """Several cards in one file, optionally in named ``.lib`` sections.

    Parameters
    ----------
    parts : list of (section, result, i, inputs)
        ``section`` is a section name or None (no section); ``inputs`` may be
        None. Cards keep the order given; sections appear in order of first
        use.
    dialect : str
        A key of :data:`DIALECTS`.
    title : str
        First header line.
    extra : sequence of str
        More lines for the file header.

    Raises
    ------
    ValueError
        Named sections for a dialect without them, a section name that is
        not a SPICE identifier, or a model name used twice in one section.
    """
    d = DIALECTS[dialect]
    sections, seen = {}, set()
    for section, result, i, inputs in parts:
        if section is not None:
            if not d.sections:
                raise ValueError(f"the {dialect} dialect has no .lib sections")
            if not re.fullmatch(r"[A-Za-z][A-Za-z0-9_]{0,63}", section):
                raise ValueError(f"section name {section!r} must be a letter followed by letters, digits or "
                                 "underscores")
        name = result.device.name[i]
        if (section, name.upper()) in seen:
            where = f" in section {section}" if section else ""
            raise ValueError(f"model name {name} is used twice{where}")
        seen.add((section, name.upper()))
        sections.setdefault(section, []).append(_block(result, i, dialect, inputs, with_models=False))
    first = parts[0][1] if parts else None
    header = comment_lines(f"{title}: {sum(len(v) for v in sections.values())} cards, modelgen {__version__}, "
                           f"dialect {d.name} ({d.title})")
    for line in extra:
        header += comment_lines(line)
    if first is not None:
        header += _models_lines(first)
    header += comment_lines(CAUTION)
    return _environment().get_template(d.library_template).render(
        header=header, sections=[{"name": k, "body": "\n".join(v)} for k, v in sections.items()])


_ENV = None


def _environment():
    global _ENV
    if _ENV is None:
        _ENV = jinja2.Environment(loader=jinja2.FileSystemLoader(str(_template_dir())),
                                  autoescape=False, keep_trailing_newline=True,
                                  undefined=jinja2.StrictUndefined, trim_blocks=True, lstrip_blocks=True)
    return _ENV


def json_safe(v):
    """``v`` with non-finite floats as None, through dicts and lists (strict JSON)."""
    if isinstance(v, dict):
        return {k: json_safe(x) for k, x in v.items()}
    if isinstance(v, (list, tuple)):
        return [json_safe(x) for x in v]
    if isinstance(v, float) and not math.isfinite(v):
        return None
    return v


def row_document(result: Result, i=0):
    """Device ``i`` as plain data: name, params (SI), units, derived (SI), warnings.

    Non-finite numbers become None: an ideal ohmic contact's velocity
    (infinite; ``contact`` says ``"ohmic"``) and a BV that was not found.
    """
    row = result.row(i)
    for side in ("p", "n"):
        s = row["derived"][side]
        v = s["contact_velocity"]
        s["contact"] = "ohmic" if math.isinf(v) else ("reflecting" if v == 0 else "finite")
    return json_safe({"name": row["name"], "params": row["params"], "units": {k: UNITS[k] for k in PARAMETERS},
                      "derived": row["derived"], "warnings": row["warnings"]})


def as_json(result: Result, i=0):
    """Device ``i`` as a JSON text (see :func:`row_document`)."""
    return json.dumps(row_document(result, i), indent=2, allow_nan=False) + "\n"


def _row_warnings(result, rows=None):
    """Per device, the warnings that matter on its own card (notes and cautions go once in the header).

    Returns a list with, for each device, its warning lines joined by newlines ('' when none);
    with ``rows``, only those devices' entries are filled.
    """
    out = [""] * len(result)
    only = None
    if rows is not None:
        only = np.zeros(len(result), bool)
        only[np.asarray(rows, int)] = True
    for f in result.findings:
        mask = f.mask if only is None else f.mask & only
        if f.text.startswith(("note:", "caution:")) or not mask.any():
            continue
        idx = np.flatnonzero(mask).tolist()
        keys = list(f.values)
        cols = [f.values[k][idx].tolist() if isinstance(f.values[k], np.ndarray) else [f.values[k]] * len(idx)
                for k in keys]
        for i, vals in zip(idx, zip(*cols) if keys else [()] * len(idx)):
            msg = f.text.format(**dict(zip(keys, vals)))
            out[i] = out[i] + "\n" + msg if out[i] else msg
    return out


_TOKEN = "\x01"


def _fill_pattern(dialect, names):
    """A str.format pattern for one card with these parameters, made by rendering the card template.

    The template is rendered once with placeholder tokens for the header
    block ({0}), the name ({1}) and each value ({2}, {3}, ...); the result,
    braces escaped and tokens turned into positional fields, is filled for
    every device. The template stays the one place that holds the card
    syntax; filling is fast.
    """
    token = lambda k: f"{_TOKEN}{k}{_TOKEN}"  # noqa: E731
    proto = {"header": [token(0)], "notes": [], "name": token(1),
             "params": [(k, token(j + 2)) for j, k in enumerate(names)]}
    text = _environment().get_template(DIALECTS[dialect].template).render(card=proto)
    text = text.replace("{", "{{").replace("}", "}}")
    return re.sub(f"{_TOKEN}(\\d+){_TOKEN}", lambda m: "{" + m.group(1) + "}", text)


def table_cards(result: Result, dialect="spice3", rows=None, corner_cards=(), texts=None):
    """The card texts of devices ``rows`` (default all), concatenated, and of any corner cards.

    Each card's header names its row (file and line) and carries its own
    warnings. ``corner_cards`` holds ``(section, name, i, comment)``: device
    ``i`` again, named ``name``. Cards are filled into a pattern made from
    the card template (:func:`_fill_pattern`), grouped by which parameters
    they carry; numbers are formatted column-wise, and each group is filled
    by one ``map`` over its columns.

    ``texts``: the formatted columns of all devices when already made
    (``format_numbers`` of each of :func:`card_columns`' columns).

    Returns
    -------
    (body, corners) :
        The cards of ``rows`` as one text, and a list of the corner cards' texts.
    """
    columns, p = card_columns(result, dialect)
    names = [k for k, _ in columns]
    dev = result.device
    n = len(dev)
    rows = np.arange(n) if rows is None else np.asarray(rows)
    wanted = np.concatenate([rows, np.array([c[2] for c in corner_cards], dtype=int)])
    pick = wanted.tolist()
    if texts is None:
        texts = [format_numbers(v[wanted]) for _, v in columns]
    elif not corner_cards and len(rows) == n and np.array_equal(rows, np.arange(n)):
        pass  # all devices in order: the columns as they are
    else:
        texts = [[col[i] for i in pick] for col in texts]  # position k: device wanted[k]
    src = _CONTROL.sub("", Path(dev.source[0]).name) if len(dev.source) and dev.source[0] else ""
    lines = list(dev.line) if len(dev.line) else [None] * n
    warnings = _row_warnings(result, wanted)
    model = [dev.name[i] for i in pick]
    comments = [None] * len(rows)
    for m, (_, name, _, comment) in enumerate(corner_cards):
        model[len(rows) + m] = name
        comments.append(_CONTROL.sub("", comment) if comment else None)
    heads = []  # names: checked SPICE identifiers; src and comments: control characters removed
    for k, i in enumerate(pick):
        where = f"{src} line {lines[i]}" if lines[i] is not None else src
        h = f"* {model[k]}: {where}"
        if comments[k]:
            h += "\n* " + comments[k]
        if warnings[i]:
            h += "\n* " + warnings[i].replace("\n", "\n* ")  # our own one-line messages
        heads.append(h)
    present = np.isfinite(np.column_stack([v[wanted] for _, v in columns])) if columns else np.zeros((len(wanted), 0), bool)
    codes = present.astype(np.int64) @ (np.int64(1) << np.arange(present.shape[1], dtype=np.int64))
    _, first, group_of = np.unique(codes, return_index=True, return_inverse=True)
    group_of = group_of.ravel()
    out = [None] * len(wanted)
    for g, f in enumerate(first.tolist()):
        cols = [j for j, ok in enumerate(present[f]) if ok]
        fill = _fill_pattern(dialect, [names[j] for j in cols]).format
        if len(first) == 1:
            out = list(map(fill, heads, model, *[texts[j] for j in cols]))
            break
        idx = np.flatnonzero(group_of == g).tolist()
        pickg = itemgetter(*idx) if len(idx) > 1 else (lambda seq, i=idx[0]: (seq[i],))
        for k, text in zip(idx, map(fill, pickg(heads), pickg(model), *[pickg(texts[j]) for j in cols])):
            out[k] = text
    return "".join(out[:len(rows)]), out[len(rows):]


def table_library(result: Result, dialect="spice3", *, title="diode model library", extra=(), section=None,
                  corner_cards=(), body=None):
    """A library with one card per device of a (large) table.

    The notes, cautions and what the dialect leaves out are said once in the
    file header; each card names its row and carries its own warnings
    (:func:`table_cards`). ``section`` puts the cards in a named ``.lib``
    section; ``corner_cards`` (see :func:`table_cards`) adds corner cards in
    sections of their own. ``body``: the cards' text when already made (by
    :func:`table_cards`, possibly in parts).
    """
    d = DIALECTS[dialect]
    if (section or corner_cards) and not d.sections:
        raise ValueError(f"the {dialect} dialect has no .lib sections")
    dev = result.device
    made, corners = table_cards(result, dialect, rows=np.arange(0) if body is not None else None,
                                corner_cards=corner_cards)
    sections = [{"name": section, "body": made if body is None else body}]
    for (sec, _, _, _), text in zip(corner_cards, corners):
        sections.append({"name": sec, "body": text})
    left = [k for k in PARAMETERS if k not in d.carries and k != "IBV"]
    header = comment_lines(f"{title}: {len(dev)} cards, modelgen {__version__}, dialect {d.name} ({d.title})")
    for line in extra:
        header += comment_lines(line)
    if left:
        header += comment_lines(f"left out, the {d.name} set cannot carry them (values in the summary table): "
                                + "; ".join(f"{k}: {d.cost.get(k, 'not carried')}" for k in left))
    if any(f.text.startswith("note:") and f.mask.any() for f in result.findings):
        header += comment_lines("each side's regime (short / medium / long by W/L) is in the summary table; the "
                                "exact finite-width factor is used for all")
    header += _models_lines(result) + comment_lines(CAUTION)
    return _environment().get_template(d.library_template).render(header=header, sections=sections)

"""Reports: a device, a lot, its temperature corners or a calibration, as one self-contained HTML page.

``modelgen report INPUT -o REPORT.html`` recognises INPUT by its content
(:func:`detect`) and builds the figures (:mod:`modelgen.report.panels`,
matplotlib with the Agg backend, imported only here) and the page
(:mod:`modelgen.report.page`). The kinds:

- ``device``: a device description (TOML) - :mod:`modelgen.report.device`;
- ``lot``: a lot summary (``.summary.json`` / ``.summary.csv`` of ``modelgen
  lots``) or a lot table (run through the lot's physics) - :mod:`modelgen.report.lot`;
- ``corners``: a description with ``corners=`` temperatures - :mod:`modelgen.report.corners`;
- ``calibration``: a description with measured ``iv``/``cv`` files - :mod:`modelgen.report.calibrated`;
- a card file (a ``.model`` card or library) with a description beside it: the device report of that
  card against the description's physics (:func:`description_for` finds the description).
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field

from ..errors import InputError

KINDS = ("device", "lot", "corners", "calibration")


@dataclass
class Table:
    """A table of the page: ``title``, ``rows`` (the first is the header), ``caption``."""

    title: str
    rows: list
    caption: str = ""


@dataclass
class Report:
    """A report before it is written: its panels (matplotlib figures) and its text.

    ``notes`` are ``(severity, text)`` pairs; ``card`` the card text shown at the end (escaped on the page).
    """

    kind: str
    title: str
    inputs: list
    panels: list
    tables: list = field(default_factory=list)
    notes: list = field(default_factory=list)
    card: str = ""
    card_title: str = "The card"
    settings: str = ""
    caution: str = ""
    data: object = None  # what the panels were made from (for scripts and tests)

    def html(self):
        """The page as text."""
        from .page import html

        return html(self)

    def pngs(self, dpi=150):
        """``{key: PNG bytes}`` of every figure."""
        from .page import png

        return {p.key: png(p, dpi) for p in self.panels}

    def close(self):
        """Drop the figures (they hold memory until then)."""
        for p in self.panels:
            p.figure.clear()


def _head(path, size=4096):
    try:
        with open(path, "rb") as fh:
            return fh.read(size).decode("utf-8-sig", "replace")
    except OSError as e:
        raise InputError(f"cannot read it: {e.strerror or e}", file=path) from None


def detect(path):
    """The report kind of the file at ``path``: 'device', 'lot' or 'card' (by content, not by name alone).

    A text with a SPICE ``.model``, ``.subckt`` or ``.lib`` line is a card file.
    A TOML file with ``[[device]]`` tables, a JSON list, a ``modelgen lots`` summary (JSON with ``columns``
    and ``statistics``, or CSV whose header starts ``name,line,IS,``) or any other CSV is a lot; a TOML
    description (a ``name`` and ``[p]``/``[n]`` tables) is a device. Anything else is an error.
    """
    head = _head(path)
    text = head.lstrip()
    if not text:
        raise InputError("is empty: give a device description, a lot table or a lot summary", file=path)
    if _spice(head):
        return "card"
    if text.startswith("{"):
        return "lot"  # a lots summary (checked when read)
    if text.startswith("["):
        first = text.split("\n", 1)[0].strip()
        if first.startswith("[[device]]"):
            return "lot"
        if first in ("[p]", "[n]", "[fit]", "[card]", "[spread]", "[material]"):
            return "device"
        return "lot"  # a JSON list of descriptions
    import tomllib

    try:
        with open(path, "rb") as fh:
            doc = tomllib.loads(fh.read().decode("utf-8-sig"))
    except (tomllib.TOMLDecodeError, UnicodeDecodeError, OSError):
        doc = None
    if isinstance(doc, dict):
        if "device" in doc and isinstance(doc["device"], list):
            return "lot"
        if "name" in doc or "p" in doc or "n" in doc:
            return "device"
    if doc is None and str(path).lower().endswith(".toml"):
        return "device"  # its loader names the TOML error
    if "," in head.split("\n", 1)[0]:
        return "lot"
    raise InputError("is neither a device description (TOML) nor a lot table or summary (CSV, JSON)", file=path)


_DOT_LINES = (".model", ".subckt", ".lib", ".include")


def _spice(head):
    """True when ``head`` (a file's first bytes) has a SPICE dot line: a card file, not TOML/CSV/JSON."""
    return any(line.lstrip().lower().startswith(_DOT_LINES) for line in head.splitlines())


def description_for(card_file, given=None):
    """The description a card file's report compares it with: ``given``, else the file its card header
    names (``* NAME: from FILE`` or ``* NAME: scalable, from FILE``, beside the card file), else
    ``STEM.toml`` beside it.

    InputError naming the card file when there is none.
    """
    if given is not None:
        return given
    folder = os.path.dirname(str(card_file))
    for line in _head(card_file, 65536).splitlines():
        s = line.strip()
        if s.startswith("*") and " from " in s and ".toml" in s:  # '* NAME: from FILE', '* NAME: scalable, from FILE'
            named = s.rsplit(" from ", 1)[1].strip()
            candidate = os.path.join(folder, os.path.basename(named))
            if named.lower().endswith(".toml") and os.path.isfile(candidate):
                return candidate
    stem = os.path.splitext(str(card_file))[0] + ".toml"
    if os.path.isfile(stem):
        return stem
    raise InputError("is a card file, and no description is beside it (neither the file its header names nor "
                     f"{os.path.basename(stem)}): give --description FILE", file=card_file)


def build(path, *, corners=None, iv=None, cv=None, progress=None, **options):
    """The report for ``path``: a calibration with ``iv``/``cv``, corners with ``corners``, else by content.

    Parameters
    ----------
    path : str
    corners : sequence of float, optional
        Temperatures [degC]: a corners report of the description.
    iv, cv : str, optional
        Measured I-V / C-V files: a calibration report of the description.
    progress : callable, optional
        Called with a short text before each long step.
    options
        Passed to the kind's builder (``dialect``, ``physics``, ``profile_bias``, ``simulate``,
        ``scatter``, ``corner_spec``, ``free``); for a card file ``description`` (default: see
        :func:`description_for`) and ``section``.

    Raises
    ------
    InputError
        Bad input, naming the file (and row and key where there is one).
    """
    kind = detect(path)
    if kind == "card":
        if iv or cv or corners:
            raise InputError("--iv, --cv and --corners take a device description, not a card file", file=path)
        from .device import report as make

        described = description_for(path, options.get("description"))
        if detect(described) != "device":
            raise InputError("is not a device description", file=described)
        return make(described, progress=progress, card_file=path,
                    **_pick(options, "dialect", "profile_bias", "simulate", "section"))
    if (iv or cv) and corners:
        raise InputError("give measured data (--iv/--cv) or --corners, not both", key="--corners")
    if iv or cv or corners:
        if kind != "device":
            raise InputError("--iv, --cv and --corners take a device description", file=path)
        kind = "calibration" if (iv or cv) else "corners"
    if kind == "device":
        from .device import report as make

        return make(path, progress=progress, **_pick(options, "dialect", "physics", "profile_bias", "simulate"))
    if kind == "lot":
        from .lot import report as make

        return make(path, progress=progress, **_pick(options, "scatter", "corner_spec", "dialect"))
    if kind == "corners":
        from .corners import report as make

        return make(path, corners, progress=progress, **_pick(options, "dialect"))
    from .calibrated import report as make

    return make(path, iv, cv, progress=progress, **_pick(options, "dialect", "free"))


def _pick(options, *names):
    return {k: options[k] for k in names if k in options and options[k] is not None}


def write(report, output, png_dir=None, *, inputs=(), signals=False):
    """Write the page to ``output`` and, with ``png_dir``, each figure to ``png_dir/KEY.png``: all or none.

    The files go through :class:`modelgen.output.Commit` (temporary files renamed into place together).
    """
    import tempfile

    from ..output import Commit

    paths = {"report": output}
    blobs = {}
    if png_dir is not None:
        if not os.path.isdir(png_dir):
            raise InputError("is not a folder to write the figures to", file=png_dir)
        blobs = report.pngs()
        for key in blobs:
            paths[f"figure {key}"] = os.path.join(png_dir, f"{key}.png")
    text = report.html()
    with Commit(paths, inputs=inputs, signals=signals) as c:
        c.write("report", text)
        for key, data in blobs.items():
            with tempfile.TemporaryFile() as spool:
                spool.write(data)
                c.copy(f"figure {key}", spool, 0, len(data))
        c.commit()
    return text


def lot_summary_kind(path):
    """'json' or 'csv' when ``path`` is a ``modelgen lots`` summary, else None."""
    head = _head(path)
    text = head.lstrip()
    if text.startswith("{"):
        return "json"
    if text.split("\n", 1)[0].strip().startswith("name,line,IS,"):
        return "csv"
    return None


__all__ = ["KINDS", "Report", "Table", "build", "detect", "write"]

"""The report page: one self-contained HTML file with the figures as inline SVG.

No network: no external scripts, styles or fonts (matplotlib writes text as
paths). Deterministic: each figure's SVG ids come from a fixed salt (the
figure's key; ``svg.hashsalt``) and no date goes into the metadata, so the
same input gives the same bytes. Every text from the user (names, file
names, findings, the card) is escaped by jinja2's autoescaping.
"""

from __future__ import annotations

import io
import re

import jinja2
import matplotlib
from markupsafe import Markup, escape

from .. import __version__
from ..cards.render import _template_dir

#: The standing caution (as the card header says it).
CAUTION = ("A card is a physics estimate: check it against measured I-V and C-V of real devices before design "
           "sign-off. Breakdown figures are estimates from the depletion approximation and published ionization "
           "coefficients: derate them and confirm them on measured devices.")

_ENV = None


def environment():
    """The report's jinja2 environment (HTML autoescaping on, strict undefined)."""
    global _ENV
    if _ENV is None:
        _ENV = jinja2.Environment(loader=jinja2.FileSystemLoader(str(_template_dir())), autoescape=True,
                                  undefined=jinja2.StrictUndefined, trim_blocks=True, lstrip_blocks=True,
                                  keep_trailing_newline=True)
    return _ENV


_XML_HEAD = re.compile(r"\A.*?(?=<svg\b)", re.S)
_METADATA = re.compile(r"\s*<metadata>.*?</metadata>", re.S)
_XMLNS = re.compile(r'\s+xmlns(?::\w+)?="[^"]*"')


def svg(panel):
    """The panel's figure as SVG text for inlining (no XML prolog, fixed ids, no date)."""
    buf = io.StringIO()
    with matplotlib.rc_context({"svg.hashsalt": f"modelgen-{panel.key}", "svg.fonttype": "path"}):
        panel.figure.savefig(buf, format="svg", metadata={"Date": None, "Creator": None})
    text = _XML_HEAD.sub("", buf.getvalue(), count=1)
    # inline SVG in HTML needs no namespace declarations (the HTML parser supplies them, xlink:href included)
    # and no RDF metadata: no URI of any kind is left in the page
    text = _METADATA.sub("", text, count=1)
    text = _XMLNS.sub("", text)
    # matplotlib's own ids are unique within one figure only: prefix them with the panel's key
    text = re.sub(r'id="([^"]+)"', lambda m: f'id="{panel.key}-{m.group(1)}"', text)
    text = re.sub(r'(xlink:href|href)="#([^"]+)"', lambda m: f'{m.group(1)}="#{panel.key}-{m.group(2)}"', text)
    text = re.sub(r'url\(#([^)]+)\)', lambda m: f"url(#{panel.key}-{m.group(1)})", text)
    # a title for screen readers, and the figure's own role
    return text.replace("<svg ", f'<svg role="img" aria-label="{_attr(panel.title)}" ', 1)


def _attr(text):
    return escape(str(text))


def png(panel, dpi=150):
    """The panel's figure as PNG bytes (no software or date metadata)."""
    buf = io.BytesIO()
    panel.figure.savefig(buf, format="png", dpi=dpi, metadata={"Software": None})
    return buf.getvalue()


def html(report):
    """The report as one HTML document (text)."""
    figures = [{"key": p.key, "title": p.title, "caption": p.caption, "svg": Markup(svg(p)),
                "table": p.table} for p in report.panels]
    return environment().get_template("report.html.j2").render(
        report=report, figures=figures, version=__version__, caution=CAUTION)

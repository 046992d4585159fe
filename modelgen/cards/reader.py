"""Read SPICE ``.model`` cards and model libraries back into numbers.

:func:`read_cards` takes the text of a card file or a library and returns one
:class:`Card` per ``.model`` line; :func:`read_file` does the same for a file;
:func:`parse_number` reads one SPICE number with its scale suffix.

What is accepted (the conventions are those of the ngspice manual, chapter 2,
"Circuit Description", checked against ngspice-39's own reading):

* Whole-line comments: a line whose first non-blank character is ``*``.
* End-of-line comments: everything from ``;``, from ``//``, or from a ``$``
  that is followed by a blank or ends the line. A ``$`` glued to text is not a
  comment.
* Blank lines and comment lines, anywhere, including between the lines of one
  continued card (ngspice skips them the same way).
* Continuation: a line whose first non-blank character is ``+`` continues
  the line before it.
* Leading blanks on any line are ignored.
* Keywords in any case: ``.model``, ``.MODEL``, ``.Model``; parameter names
  in any case (returned upper-case); model types returned upper-case.
* ``.model NAME TYPE (P1=V1 P2=V2 ...)`` with the parentheses optional, the
  opening one glued to the type or not (``D(IS=1)``), and the closing one
  anywhere after the last value, on a line of its own (``+ )``) included.
  Parameters are separated by blanks and/or commas; ``P = V`` with blanks
  round the ``=`` is the same as ``P=V``.
* ``.lib NAME`` ... ``.endl [NAME]`` sections: a card inside one gets the
  section's name. ``.lib FILE NAME`` (a reference to another library) is
  ignored, as is ``.include`` and every other dot line, and every element line.
  Reading stops at ``.end``.

What is refused, with a :class:`CardSyntaxError` that gives the line:

* a number that is not a SPICE number (see :func:`parse_number`); values are
  numbers only, so ``{expressions}`` and ``'expressions'`` are refused too;
* a parameter written twice in one card (a card that says two things is
  suspicious; SPICE itself would silently keep one of them), and a model
  name defined twice in one section (or twice outside sections), in any case;
* text beyond the bounds of what a card needs: a number longer than
  :data:`MAX_NUMBER` characters, a model name longer than :data:`MAX_NAME`
  or holding a control or format character, a parameter name longer than
  :data:`MAX_KEY`, a line (not a comment) longer than :data:`MAX_LINE`, more
  than :data:`MAX_CARDS` cards, and (in :func:`read_limited`) a file larger
  than :data:`MAX_FILE_BYTES` or not a regular file;
* a ``.model`` line without a name or without a type, a parameter without a
  ``=`` and a value, a parameter name that is not a name, unbalanced or
  misplaced parentheses;
* a ``+`` line with nothing before it to continue;
* ``.lib`` sections nested, unclosed, or closed with another name, and an
  ``.endl`` with no open section.

Subcircuits: a ``.model`` inside ``.subckt NAME a k`` ... ``.ends`` is
returned like any other, with ``wrapper`` the subcircuit's name; if the
subcircuit also holds modelgen's generation source (:mod:`modelgen.leakage`)
across its two ports, in exactly the form modelgen writes it
(``B... a k I = -(IG * pow(1 - min(V(a,k), 0) / VJ, M) - IE) * (1 - exp(min(V(a,k), 0) / VG))``),
its five numbers are the card's ``source``. A subcircuit in the scalable form
modelgen writes (:func:`modelgen.scalable.scalable_subckt`: ``.subckt NAME a k
area=A pj=P``, an optional ``R1 a j {RSA/area}`` and ``D1 j k NAME
area={area+pj*XJ}``, exactly so) gives the card's ``scaling``, those four
numbers. Any other element is ignored, as outside subcircuits. A ``.subckt`` inside another, or one never closed, is refused.

Not handled: the title line of a full netlist (the text is read the way a
``.include``-d library is: the first line is an ordinary line), and
``.include``/``.lib FILE`` references are not followed.
"""

from __future__ import annotations

import decimal
import math
import re
from dataclasses import dataclass, field, replace

from ..errors import InputError
from ..textio import read_text

__all__ = ["Card", "CardSyntaxError", "parse_number", "read_cards", "read_file", "read_limited", "read_text"]


class CardSyntaxError(InputError):
    """Text that is not a well-formed SPICE number, card or library.

    ``row`` is the 1-based line number (also available as :attr:`line`),
    ``key`` the parameter name where one is concerned.
    """

    @property
    def line(self):
        return self.row


@dataclass(frozen=True)
class Card:
    """One ``.model`` card.

    name : str
        The model name as written.
    type : str
        The model type, upper-case (``"D"``, ``"NPN"``, ...).
    params : dict
        Upper-case parameter name -> float, in the order written.
    line : int
        1-based line number of the ``.model`` line.
    section : str or None
        Name of the enclosing ``.lib NAME`` ... ``.endl`` section, as written
        on the ``.lib`` line; None outside any section.
    wrapper : str or None
        Name of the enclosing ``.subckt``, None outside one.
    source : dict or None
        The generation source beside the diode in that subcircuit, by name
        (IG, IE, M, VJ, VG), when it has modelgen's form.
    scaling : dict or None
        The scalable subcircuit's defaults and scaling, when it has
        modelgen's form: ``area`` [m^2] and ``pj`` [m] (the instance
        defaults), ``xj`` [m] (the diode's area is area + pj xj) and ``rsa``
        [ohm m^2] (the series resistor RSA / area; 0 without one).
    expressions, variables : dict or None, tuple
        A point of a statistical library (:func:`modelgen.statistical.read_library`):
        each parameter as an Expression of the process variables, and the
        variables' (name, value) at this point; ``params`` holds their values.
    """

    name: str
    type: str
    params: dict = field(hash=False)
    line: int
    section: str | None = None
    wrapper: str | None = None
    source: dict | None = field(default=None, hash=False)
    scaling: dict | None = field(default=None, hash=False)
    expressions: dict | None = field(default=None, hash=False)
    variables: tuple = ()


# Scale factors (ngspice manual, Table 2.2 "Ngspice scale factors"), as exact
# decimal strings so that a suffix never costs a rounding. Case does not
# matter, so M and m are both milli and mega must be written MEG. The manual
# also says letters after a number or after a scale factor are ignored, so
# "10pF", "1megohm", "5mA" and "2.5V" read as 10p, 1meg, 5m and 2.5.
# There is no atto: the ngspice manual's table does not list it and ngspice-39
# reads "5a" as 5, the "a" a unit letter, so "IBV=1A" means one ampere.
# MEG and MIL are tried before the one-letter factors.
SCALE = {
    "MEG": "1e6", "MIL": "25.4e-6",
    "T": "1e12", "G": "1e9", "K": "1e3", "M": "1e-3", "U": "1e-6",
    "N": "1e-9", "P": "1e-12", "F": "1e-15",
}
_SUFFIXES = sorted(SCALE, key=len, reverse=True)

# Mantissa, optional exponent, then letters only. As in ngspice, an "e"
# straight after the mantissa always starts the exponent, and an exponent
# with no digits is zero: "1emeg" is 1e6 and "1.1eV" is 1.1 in ngspice-39.
# Each repeat is separated from the next by a character it cannot match, so a
# failing match costs time linear in the text (no nested or adjacent
# unbounded repeats that could split one run of digits several ways); the
# text is also refused beyond MAX_NUMBER characters before any matching.
_NUMBER = re.compile(r"([+-]?(?:\d+(?:\.\d*)?|\.\d+))(?:[eE]([+-]?)(\d*))?([A-Za-z]*)")
#: Longest number text read [characters]: 17 significant digits, sign, point,
#: a three-digit exponent and a unit word fit with room to spare.
MAX_NUMBER = 100
#: Longest model name [characters] (modelgen writes at most 64).
MAX_NAME = 128
#: Longest parameter name [characters] (SPICE's are at most 8 or so).
MAX_KEY = 32
#: Longest line that is not a comment [characters] (gnucap reads at most 4095
#: characters a line, so a longer one is not portable anyway).
MAX_LINE = 4096
#: Largest card file read [bytes]: above the 100,000-card library (55-75 MB
#: by dialect) the README quotes.
MAX_FILE_BYTES = 128 * 1024 * 1024
#: Most ``.model`` cards read from one text: twice that library. With the
#: size limit this bounds the reading time too (about 5 s for 200,000 one-line
#: cards on a 2-core machine; 12 s for the 100,000 cards modelgen writes).
MAX_CARDS = 200_000


def parse_number(text, *, file=None, line=None, key=None):
    """A SPICE number as a float.

    Accepted: an optional sign, digits with an optional decimal point
    (``12``, ``-44``, ``3.14159``, ``.5``, ``5.``), an optional exponent
    (``1e-14``, ``2.65E+3``), then an optional scale factor in any case
    (T G MEG K M MIL U N P F A; see :data:`SCALE`, ``M`` is milli), then any
    letters, which are ignored as units (``10pF``, ``1megohm``, ``2.5V``). A
    scale factor after an exponent multiplies it: ``1e3k`` is 1e6. Blanks
    round the text are ignored. The result is the correctly rounded double
    of the exact decimal value, so ``parse_number(repr(x)) == x``.

    Raises :class:`CardSyntaxError` (with the ``file``, ``line`` and ``key``
    given, for the message) for anything else, including expressions, and
    for values beyond the range of a double.
    """
    s = str(text).strip()
    if len(s) > MAX_NUMBER:
        raise CardSyntaxError(f"a number of {len(s)} characters ({s[:20]!r}...): at most {MAX_NUMBER} are read",
                              file=file, row=line, key=key)
    m = _NUMBER.fullmatch(s)
    if m is None:
        if s[:1] in ("{", "'", '"'):
            why = f"{s!r} is an expression; only plain numbers can be read"
        else:
            why = f"{s!r} is not a SPICE number"
        raise CardSyntaxError(why, file=file, row=line, key=key)
    mantissa, sign, digits, letters = m.groups()
    scale = "1"
    if letters:
        upper = letters.upper()
        for suffix in _SUFFIXES:
            if upper.startswith(suffix):
                scale = SCALE[suffix]
                break
    literal = f"{mantissa}e{sign or ''}{digits or '0'}"
    if scale == "1":
        # no scale factor: float() of a decimal literal is already the correctly rounded double
        value = float(literal)
        nonzero = mantissa.lstrip("+-").replace(".", "").strip("0") != ""
    else:
        # exact decimal product (enough digits for the mantissa's and the scale's),
        # then one correct rounding to a double
        ctx = decimal.Context(prec=len(mantissa) + 8, Emax=decimal.MAX_EMAX, Emin=decimal.MIN_EMIN)
        try:
            exact = decimal.Decimal(literal)
            value = float(ctx.multiply(exact, decimal.Decimal(scale)))
            nonzero = exact != 0
        except (ArithmeticError, ValueError):
            nonzero, value = True, math.inf
    if not math.isfinite(value) or (value == 0.0 and nonzero):
        raise CardSyntaxError(f"{s!r} is beyond the range of a double", file=file, row=line, key=key)
    return value


# --- lines -----------------------------------------------------------------

_NEWLINE = re.compile(r"\r\n|\r|\n")
# ";" or "//" anywhere, or "$" followed by a blank or the end of the line
_INLINE_COMMENT = re.compile(r";|//|\$(?=\s|$)")
_TOKEN = re.compile(r"[()=]|[^\s,()=]+")
_NAME = re.compile(r"[A-Za-z_][A-Za-z0-9_]*")


def split_lines(text):
    """The physical lines of ``text`` as SPICE reads them: split at CR LF, CR or LF only.

    (Python's ``str.splitlines`` also splits at vertical tab, form feed,
    U+2028 and more, which a simulator does not: line numbers would drift.)
    """
    return _NEWLINE.split(text)


def _logical_lines(text, file):
    """``(first line number, [(line number, text), ...])`` per logical line.

    Comments are removed and continuation lines joined to the line they
    continue (each piece keeps its own line number, for messages).
    """
    if text.startswith("\ufeff"):
        text = text[1:]
    current = None
    for number, raw in enumerate(split_lines(text), start=1):
        s = raw.strip()
        if not s or s.startswith("*"):
            continue
        if len(s) > MAX_LINE:
            raise CardSyntaxError(f"a line of {len(s)} characters: at most {MAX_LINE} are read outside comments",
                                  file=file, row=number)
        m = _INLINE_COMMENT.search(s)
        if m:
            s = s[:m.start()].rstrip()
        if s.startswith("+"):
            if current is None:
                raise CardSyntaxError("a '+' continuation line with no line before it to continue",
                                      file=file, row=number)
            current[1].append((number, s[1:]))
            continue
        if not s:
            continue
        if current is not None:
            yield current
        current = (number, [(number, s)])
    if current is not None:
        yield current


def _tokens(pieces):
    """``(text, line number)`` for each field: words, ``(``, ``)``, ``=``."""
    out = []
    for number, s in pieces:
        out += [(t, number) for t in _TOKEN.findall(s)]
    return out


def _card(pieces, section, file):
    """One :class:`Card` from the pieces of a ``.model`` logical line."""
    toks = _tokens(pieces)[1:]          # drop ".model"
    first = pieces[0][0]
    if not toks or toks[0][0] in "()=":
        raise CardSyntaxError(".model line without a model name", file=file, row=first)
    name = toks[0][0]
    if len(name) > MAX_NAME:
        raise CardSyntaxError(f"a model name of {len(name)} characters ({name[:20]!r}...): at most {MAX_NAME}",
                              file=file, row=toks[0][1])
    if not name.isprintable():
        raise CardSyntaxError(f".model {name!r}: the name holds a control or format character",
                              file=file, row=toks[0][1])
    if len(toks) < 2 or toks[1][0] in "()=" or (len(toks) > 2 and toks[2][0] == "="):
        raise CardSyntaxError(f".model {name}: no model type (such as D) after the name",
                              file=file, row=toks[0][1])
    mtype, type_line = toks[1]
    if not _NAME.fullmatch(mtype):
        raise CardSyntaxError(f".model {name}: {mtype!r} is not a model type", file=file, row=type_line)
    rest = toks[2:]
    opened = closed = False
    if rest and rest[0][0] == "(":
        opened = True
        rest = rest[1:]
    params = {}
    i = 0
    while i < len(rest):
        t, number = rest[i]
        if t == ")":
            if not opened or closed:
                raise CardSyntaxError(f".model {name}: ')' without a matching '('", file=file, row=number)
            closed = True
            i += 1
            continue
        if closed:
            raise CardSyntaxError(f".model {name}: {t!r} after the closing ')'", file=file, row=number)
        if t in "(=":
            raise CardSyntaxError(f".model {name}: unexpected {t!r} where a parameter name should be",
                                  file=file, row=number)
        if len(t) > MAX_KEY or not _NAME.fullmatch(t):
            shown = t if len(t) <= MAX_KEY else t[:20] + "..."
            raise CardSyntaxError(f".model {name}: {shown!r} is not a parameter name (a letter, then letters, "
                                  f"digits or _, at most {MAX_KEY})", file=file, row=number)
        key = t.upper()
        if i + 1 >= len(rest) or rest[i + 1][0] != "=":
            raise CardSyntaxError(f".model {name}: parameter {t} has no value (write {t}=value)",
                                  file=file, row=number, key=key)
        eq_line = rest[i + 1][1]
        if i + 2 >= len(rest) or rest[i + 2][0] in "()=":
            raise CardSyntaxError(f".model {name}: parameter {t} has no value after '='",
                                  file=file, row=eq_line, key=key)
        value, value_line = rest[i + 2]
        if key in params:
            raise CardSyntaxError(f".model {name}: parameter {key} is given twice", file=file,
                                  row=number, key=key)
        params[key] = parse_number(value, file=file, line=value_line, key=key)
        i += 3
    if opened and not closed:
        raise CardSyntaxError(f".model {name}: '(' is never closed", file=file, row=first)
    return Card(name=name, type=mtype.upper(), params=params, line=first, section=section)


_NUM = r"([^\s(),*/]+)"
#: modelgen's generation source (templates/subckt.j2), blanks optional where the template has them.
_SOURCE = re.compile(
    r"B\w*\s+(\S+)\s+(\S+)\s+I\s*=\s*-\(\s*" + _NUM + r"\s*\*\s*pow\(\s*1\s*-\s*min\(\s*V\(\s*(\S+?)\s*,\s*(\S+?)\s*\)"
    r"\s*,\s*0\s*\)\s*/\s*" + _NUM + r"\s*,\s*" + _NUM + r"\s*\)\s*-\s*" + _NUM + r"\s*\)\s*\*\s*\(\s*1\s*-\s*exp\("
    r"\s*min\(\s*V\(\s*(\S+?)\s*,\s*(\S+?)\s*\)\s*,\s*0\s*\)\s*/\s*" + _NUM + r"\s*\)\s*\)\Z", re.IGNORECASE)
_SOURCE_KEYS = ("IG", "VJ", "M", "IE", "VG")


def _source(pieces, ports, file):
    """The five numbers of modelgen's generation source on this B line across ``ports``, else None."""
    text = " ".join(s for _, s in pieces)
    m = _SOURCE.match(text)
    if not m:
        return None
    a, k, ig, a1, k1, vj, mg, ie, a2, k2, vg = m.groups()
    nodes = [x.lower() for x in (a, k, a1, k1, a2, k2)]
    if ports is None or nodes != [p.lower() for p in ports] * 3:
        return None
    line = pieces[0][0]
    values = [parse_number(v, file=file, line=line, key=key) for v, key in zip((ig, vj, mg, ie, vg), _SOURCE_KEYS)]
    return dict(zip(_SOURCE_KEYS, values))


#: modelgen's scalable subcircuit (templates/scalable.j2): its opening line, resistor and diode.
_SCALABLE_OPEN = re.compile(r"\.subckt\s+(\S+)\s+(\S+)\s+(\S+)\s+area\s*=\s*" + _NUM + r"\s+pj\s*=\s*" + _NUM + r"\s*\Z",
                            re.IGNORECASE)
_SCALABLE_R = re.compile(r"R\w*\s+(\S+)\s+(\S+)\s+\{\s*" + _NUM + r"\s*/\s*area\s*\}\s*\Z", re.IGNORECASE)
_SCALABLE_D = re.compile(r"D\w*\s+(\S+)\s+(\S+)\s+(\S+)\s+area\s*=\s*\{\s*area\s*\+\s*pj\s*\*\s*" + _NUM
                         + r"\s*\}\s*\Z", re.IGNORECASE)


class _Scalable:
    """What is seen of modelgen's scalable subcircuit form inside one ``.subckt`` (see :func:`read_cards`)."""

    def __init__(self, pieces, file):
        m = _SCALABLE_OPEN.match(" ".join(s for _, s in pieces))
        self.line = pieces[0][0]
        self.file = file
        self.ports = [m.group(2).lower(), m.group(3).lower()] if m else None
        self.instance = (m.group(4), m.group(5)) if m else None
        self.resistor = None     # (from, to, RSA text, line)
        self.diode = None        # (anode, cathode, model, XJ text, line)
        self.extra = False       # another R or D element: not modelgen's form

    def see(self, pieces, keyword):
        text = " ".join(s for _, s in pieces)
        m = (_SCALABLE_R if keyword.startswith("r") else _SCALABLE_D).match(text)
        slot = "resistor" if keyword.startswith("r") else "diode"
        if m is None or getattr(self, slot) is not None:
            self.extra = True
        else:
            setattr(self, slot, (*[g.lower() for g in m.groups()[:-1]], m.groups()[-1], pieces[0][0]))

    def scaling(self, model):
        """The four numbers, if this subcircuit is the form exactly around ``model``; else None."""
        if self.ports is None or self.diode is None or self.extra:
            return None
        a, k = self.ports
        d_a, d_k, d_model, xj, d_line = self.diode
        if d_model != model.lower() or d_k != k:
            return None
        rsa, r_line = "0", d_line
        if self.resistor is not None:
            r_from, r_to, rsa, r_line = self.resistor
            if r_from != a or r_to != d_a or d_a in (a, k):
                return None
        elif d_a != a:
            return None
        values = [parse_number(v, file=self.file, line=n, key=key) for v, n, key in
                  ((self.instance[0], self.line, "area"), (self.instance[1], self.line, "pj"), (xj, d_line, "xj"),
                   (rsa, r_line, "rsa"))]
        return dict(zip(("area", "pj", "xj", "rsa"), values))


def read_cards(text, *, file=None):
    """Every ``.model`` card in ``text``, in order, as :class:`Card` objects.

    ``file`` names the source in error messages only. See the module
    docstring for what is accepted and what raises
    :class:`CardSyntaxError`.
    """
    cards = []
    section = None                       # (name, line of the .lib)
    seen = {}                            # (section, NAME) -> line of its .model
    wrapper = None                       # [name, line, ports, first card index, source]
    for first, pieces in _logical_lines(str(text), file):
        words = " ".join(s for _, s in pieces).split()
        keyword = words[0].lower()
        if keyword == ".subckt":
            if wrapper is not None:
                raise CardSyntaxError(f".subckt inside .subckt {wrapper[0]} (opened on line {wrapper[1]})",
                                      file=file, row=first)
            if len(words) < 2:
                raise CardSyntaxError(".subckt without a name", file=file, row=first)
            wrapper = [words[1], first, words[2:4] if len(words) >= 4 else None, len(cards), None,
                       _Scalable(pieces, file)]
            continue
        if keyword == ".ends":
            if wrapper is not None:
                cards[wrapper[3]:] = [replace(c, wrapper=wrapper[0], source=wrapper[4],
                                              scaling=wrapper[5].scaling(c.name)) for c in cards[wrapper[3]:]]
            wrapper = None
            continue
        if wrapper is not None and keyword[:1] in ("r", "d") and wrapper[5].ports is not None:
            wrapper[5].see(pieces, keyword)
            continue
        if wrapper is not None and keyword.startswith("b"):
            found = _source(pieces, wrapper[2], file)
            if found is not None:
                wrapper[4] = found
            continue
        if keyword == ".model":
            if len(cards) >= MAX_CARDS:
                raise CardSyntaxError(f"more than {MAX_CARDS} .model cards: split the library", file=file,
                                      row=first)
            card = _card(pieces, section[0] if section else None, file)
            where = (card.section.upper() if card.section else None, card.name.upper())
            if where in seen:
                place = f"section {card.section}" if card.section else "outside any section"
                raise CardSyntaxError(f".model {card.name} is defined twice {place} (first on line {seen[where]}); "
                                      "SPICE names are case-insensitive", file=file, row=card.line)
            seen[where] = card.line
            cards.append(card)
        elif keyword == ".lib":
            args = words[1:]
            if not args:
                raise CardSyntaxError(".lib without a section name", file=file, row=first)
            if len(args) == 1:
                if section is not None:
                    raise CardSyntaxError(f".lib {args[0]} inside section {section[0]} "
                                          f"(opened on line {section[1]}); sections do not nest",
                                          file=file, row=first)
                section = (args[0], first)
            # .lib FILE NAME refers to another library: not followed
        elif keyword == ".endl":
            if section is None:
                raise CardSyntaxError(".endl without an open .lib section", file=file, row=first)
            if len(words) > 1 and words[1].lower() != section[0].lower():
                raise CardSyntaxError(f".endl {words[1]} closes section {section[0]} "
                                      f"(opened on line {section[1]})", file=file, row=first)
            section = None
        elif keyword == ".end":
            break
    if section is not None:
        raise CardSyntaxError(f".lib {section[0]} is never closed with .endl", file=file, row=section[1])
    if wrapper is not None:
        raise CardSyntaxError(f".subckt {wrapper[0]} is never closed with .ends", file=file, row=wrapper[1])
    return cards


def read_limited(path, limit=None, kind="card file"):
    """The UTF-8 text of the regular file ``path``, refusing more than ``limit`` bytes.

    :func:`modelgen.textio.read_text` with pipes refused too: a directory,
    a device such as ``/dev/zero`` (also through a symbolic link), a FIFO or
    a socket is refused before anything is read, and at most ``limit + 1``
    bytes (default :data:`MAX_FILE_BYTES`) are read.

    Raises
    ------
    InputError
        Naming the file: missing, not a regular file, too large, unreadable,
        or not UTF-8.
    """
    return read_text(path, kind, MAX_FILE_BYTES if limit is None else limit, pipes=False)


def read_file(path):
    """:func:`read_cards` of a UTF-8 text file (read with :func:`read_limited`).

    Raises :class:`~modelgen.errors.InputError` naming the file when it is
    missing, not a regular file, too large, unreadable or not UTF-8, and
    :class:`CardSyntaxError` (with the file) for what is in it.
    """
    return read_cards(read_limited(path), file=str(path))

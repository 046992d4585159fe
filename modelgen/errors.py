"""The one exception family of modelgen.

Every error that a user's input can cause is an :class:`InputError` that
knows the file, the row (for tables) and the key path. The command line
prints ``str(error)`` as one line on stderr and exits with status 2.
"""

from __future__ import annotations

import copy
import re

#: Characters that would break a one-line message: controls, and the line separators Unicode adds.
_UNPRINTABLE = re.compile("[\x00-\x1f\x7f-\x9f\u2028\u2029]")
#: Longest piece of user text (a key, a value) an error message repeats.
SHOWN = 40


def shown(value, limit=SHOWN):
    """``repr(value)``, shortened to about ``limit`` characters, for error messages."""
    if isinstance(value, str) and len(value) > limit:
        return repr(value[:limit]) + f"... ({len(value)} characters)"
    text = repr(value)
    return text if len(text) <= 2 * limit else text[:limit] + "..."


_TYPE_NAMES = {"NoneType": "null", "str": "string", "int": "integer", "float": "number", "bool": "boolean",
               "dict": "table", "list": "list"}


def type_name(value):
    """How a TOML or JSON user would name the type of ``value`` ("string", "table", "null", ...)."""
    return _TYPE_NAMES.get(type(value).__name__, type(value).__name__)


def printable(text):
    """True if ``text`` holds no control character or line break."""
    return _UNPRINTABLE.search(text) is None


def one_line(text):
    """``text`` with control characters and line breaks escaped, so it prints as one line."""
    return _UNPRINTABLE.sub(lambda m: repr(m.group())[1:-1], text)


class ModelgenError(Exception):
    """Base class of modelgen's own errors."""


class InputError(ModelgenError):
    """A problem with what the user gave, located by file, row and key.

    Parameters
    ----------
    message : str
        What is wrong and, where it helps, what would be right.
    file : str, optional
        The input file.
    row : int, optional
        Line number in a table (1-based, as an editor shows it), or the
        entry's number in a TOML/JSON list of devices.
    key : str, optional
        Dotted key path, e.g. ``p.doping``.
    label : str
        What ``row`` counts: ``"line"`` (a CSV table) or ``"entry"`` (a list).

    ``str(error)`` is always one line: control characters in any part are
    escaped, and a key longer than :data:`SHOWN` characters is shortened.
    """

    def __init__(self, message, *, file=None, row=None, key=None, label="line"):
        super().__init__(message)
        self.message = message
        self.file = file
        self.row = row
        self.key = key
        self.label = label

    def located(self, *, file=None, row=None):
        """The same error (same class) with the file and row filled in where unknown."""
        other = copy.copy(self)
        other.file = self.file or file
        other.row = self.row if self.row is not None else row
        return other

    def __str__(self):
        parts = []
        if self.file:
            parts.append(str(self.file))
        if self.row is not None:
            parts.append(f"{self.label} {self.row}")
        if self.key:
            key = str(self.key)
            parts.append(key if len(key) <= SHOWN else shown(key))
        parts.append(self.message)
        return one_line(": ".join(parts))


class Problems:
    """Rules broken across a table of devices: each a row mask, a key and a message.

    With ``collect=False`` (one device, or a table that must be all good) the
    first problem raises its :class:`InputError` at once. With
    ``collect=True`` every problem is kept and :meth:`errors` lists one
    located error per broken rule and row, in row order.

    ``message`` may be a format string filled per row from ``values``
    (arrays of the table's length). ``label`` names what ``rows`` count
    (``"line"`` in a CSV table, ``"entry"`` in a TOML/JSON list).
    """

    def __init__(self, n, *, sources=None, rows=None, collect=False, label="line"):
        self.n = n
        self.sources = tuple(sources) if sources is not None and len(sources) else (None,) * n
        self.rows = tuple(None if r is None else int(r) for r in rows) if rows is not None and len(rows) else (None,) * n
        self.collect = collect
        self.label = label
        self.found = []

    def _error(self, i, key, message, values):
        text = message.format(**{k: v[i] for k, v in values.items()}) if values else message
        return InputError(text, file=self.sources[i], row=self.rows[i], key=key, label=self.label)

    def add(self, mask, key, message, values=None):
        """Record (or raise, when not collecting) the rule ``key`` broken where ``mask``."""
        import numpy as np

        mask = np.broadcast_to(np.asarray(mask, bool), (self.n,))
        if not mask.any():
            return
        if not self.collect:
            raise self._error(int(np.flatnonzero(mask)[0]), key, message, values)
        self.found.append((mask.copy(), key, message, values))

    @property
    def bad(self):
        """Rows with at least one problem (bool array)."""
        import numpy as np

        out = np.zeros(self.n, bool)
        for mask, *_ in self.found:
            out |= mask
        return out

    def errors(self):
        """Every problem as a located InputError, ordered by row, then as found.

        Only the first problem of each row and key is kept: a cell that did
        not parse is not reported again as missing, nor are the keys of a
        table (``p.doping``) once the table itself (``p``) was wrong.
        """
        import numpy as np

        items, seen = [], set()
        for order, (mask, key, message, values) in enumerate(self.found):
            parent = key.split(".", 1)[0] if isinstance(key, str) else key
            for i in np.flatnonzero(mask).tolist():
                if (i, key) not in seen and (i, parent) not in seen:
                    seen.add((i, key))
                    items.append((i, order, self._error(i, key, message, values)))
        return [e for _, _, e in sorted(items, key=lambda t: (t[0], t[1]))]

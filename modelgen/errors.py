"""The one exception family of modelgen.

Every error that a user's input can cause is an :class:`InputError` that
knows the file, the row (for tables) and the key path. The command line
prints ``str(error)`` as one line on stderr and exits with status 2.
"""

from __future__ import annotations

import copy


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
        Line number in a table (1-based, as an editor shows it).
    key : str, optional
        Dotted key path, e.g. ``p.doping``.
    """

    def __init__(self, message, *, file=None, row=None, key=None):
        super().__init__(message)
        self.message = message
        self.file = file
        self.row = row
        self.key = key

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
            parts.append(f"row {self.row}")
        if self.key:
            parts.append(self.key)
        parts.append(self.message)
        return ": ".join(parts)

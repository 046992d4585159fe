"""Reading a user's text file with errors that name it; writing outputs atomically."""

from __future__ import annotations

from pathlib import Path

from .errors import InputError


def read_text(path, kind="input file"):
    """The UTF-8 text of ``path``.

    Raises
    ------
    InputError
        Naming the file: missing, a directory, unreadable, or not UTF-8.
    """
    name = str(path)
    try:
        return Path(path).read_text(encoding="utf-8")
    except FileNotFoundError:
        raise InputError("no such file", file=name) from None
    except IsADirectoryError:
        raise InputError(f"is a directory, not a {kind}", file=name) from None
    except UnicodeDecodeError as e:
        raise InputError(f"not UTF-8 text (bad byte at offset {e.start})", file=name) from None
    except OSError as e:
        raise InputError(f"cannot be read: {e.strerror or e}", file=name) from None


def write_atomic_many(texts, *, inputs=(), signals=False):
    """Write ``{path: text}`` so that none is replaced unless all could be (see :class:`modelgen.output.Commit`)."""
    from .output import write_files

    write_files(texts, inputs=inputs, signals=signals)


def write_atomic(path, text, *, inputs=(), signals=False):
    """Write ``text`` to ``path`` through a temporary file and a rename.

    The file at ``path`` is either left as it was or replaced whole; a
    half-written output never exists under its name.
    """
    write_atomic_many({path: text}, inputs=inputs, signals=signals)

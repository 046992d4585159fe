"""Reading a user's text file with errors that name it; writing outputs atomically."""

from __future__ import annotations


from .errors import InputError


#: Largest file :func:`read_text` reads unless told otherwise (a 100,000-row lot table is about 10 MB).
READ_LIMIT = 512 * 2**20


def _size(n):
    return f"{n // 2**20} MiB" if n >= 2**20 else f"{n // 2**10} KiB" if n >= 2**10 else f"{n} bytes"


def read_text(path, kind="input file", limit=READ_LIMIT):
    """The UTF-8 text of ``path``, at most ``limit`` bytes of it.

    A leading byte-order mark (spreadsheets write one in "CSV UTF-8") is
    dropped. Reading stops after ``limit`` bytes, so a device file such as
    /dev/zero gives an error, not an exhausted memory.

    Raises
    ------
    InputError
        Naming the file: missing, a directory, unreadable, larger than
        ``limit``, or not UTF-8.
    """
    name = str(path)
    try:
        with open(path, "rb") as fh:
            data = fh.read(limit + 1)
    except FileNotFoundError:
        raise InputError("no such file", file=name) from None
    except IsADirectoryError:
        raise InputError(f"is a directory, not a {kind}", file=name) from None
    except OSError as e:
        raise InputError(f"cannot be read: {e.strerror or e}", file=name) from None
    if len(data) > limit:
        raise InputError(f"larger than {_size(limit)}, the most a {kind} may hold", file=name)
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as e:
        raise InputError(f"not UTF-8 text (bad byte at offset {e.start})", file=name) from None


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

"""Reading a user's text file with errors that name it; writing outputs atomically."""

from __future__ import annotations

import os
import tempfile
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


def temporary_beside(path):
    """A new empty temporary file beside ``path`` (same folder, so a rename is atomic); its name."""
    fd, tmp = tempfile.mkstemp(prefix=".modelgen-", suffix=".tmp", dir=os.path.dirname(os.path.abspath(path)))
    os.close(fd)
    return tmp


def _write(tmp, text):
    with open(tmp, "w", encoding="utf-8", newline="\n") as fh:
        fh.write(text)


def write_atomic_many(texts, *, parallel=False):
    """Write several files so that none is replaced unless all could be written.

    Parameters
    ----------
    texts : dict
        Target path -> text, or -> a function of no arguments returning the
        text (made only when needed).
    parallel : bool
        Make the texts given as functions, but the first, in a forked child
        process while this one makes the others (uses a second core; POSIX
        only, otherwise sequential). The bytes written are the same.

    Every text goes to a temporary file beside its target first; only when
    all are written are they renamed into place.
    """
    items = [(os.path.abspath(p), t) for p, t in texts.items()]
    temps = [temporary_beside(p) for p, _ in items]
    try:
        lazy = [k for k, (_, t) in enumerate(items) if callable(t)]
        forked = lazy[1:] if parallel and hasattr(os, "fork") and len(lazy) > 1 else []
        pid = os.fork() if forked else None
        if pid == 0:  # the child: make its texts, write them, and leave without any cleanup of the parent's
            code = 0
            try:
                for k in forked:
                    _write(temps[k], items[k][1]())
            except BaseException:
                code = 1
            os._exit(code)
        for k, (_, t) in enumerate(items):
            if k not in forked:
                _write(temps[k], t() if callable(t) else t)
        if pid:
            _, status = os.waitpid(pid, 0)
            if status != 0:  # the child failed: make its texts here, where an error can be seen
                for k in forked:
                    _write(temps[k], items[k][1]())
    except BaseException:
        for tmp in temps:
            try:
                os.unlink(tmp)
            except OSError:
                pass
        raise
    for tmp, (path, _) in zip(temps, items):
        os.replace(tmp, path)


def write_atomic(path, text):
    """Write ``text`` to ``path`` through a temporary file and a rename.

    The file at ``path`` is either left as it was or replaced whole; a
    half-written output never exists under its name.
    """
    write_atomic_many({path: text})

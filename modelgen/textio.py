"""Reading a user's text file with errors that name it; writing outputs atomically."""

from __future__ import annotations

import os
import tempfile

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


def _file_mode():
    """The permissions a newly created file gets here (0666 less the umask)."""
    mask = os.umask(0)
    os.umask(mask)
    return 0o666 & ~mask


def temporary_beside(path):
    """A new empty temporary file beside ``path`` (same folder, so a rename is atomic); its name.

    It gets the permissions an ordinary new file would (mkstemp's own are 0600),
    so the renamed output is as readable as any other file the user writes.
    """
    fd, tmp = tempfile.mkstemp(prefix=".modelgen-", suffix=".tmp", dir=os.path.dirname(os.path.abspath(path)))
    os.close(fd)
    os.chmod(tmp, _file_mode())
    return tmp


def _write(tmp, text):
    with open(tmp, "w", encoding="utf-8", newline="\n") as fh:
        fh.write(text)


def write_atomic_many(texts):
    """Write several files so that none is replaced unless all could be written.

    Every text goes to a temporary file beside its target first; only when
    all are written are they renamed into place.
    """
    items = [(os.path.abspath(p), t) for p, t in texts.items()]
    temps = [temporary_beside(p) for p, _ in items]
    try:
        for tmp, (_, text) in zip(temps, items):
            _write(tmp, text)
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

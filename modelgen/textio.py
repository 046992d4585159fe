"""Reading a user's text file with errors that name it (outputs are written by :mod:`modelgen.output`)."""

from __future__ import annotations

import os
import stat

from .errors import InputError


#: Largest file :func:`read_text` reads unless told otherwise (a 100,000-row lot table is about 10 MB).
READ_LIMIT = 512 * 2**20


def _size(n):
    return f"{n // 2**20} MiB" if n >= 2**20 else f"{n // 2**10} KiB" if n >= 2**10 else f"{n} bytes"


def read_text(path, kind="input file", limit=READ_LIMIT, *, pipes=True):
    """The UTF-8 text of ``path``, at most ``limit`` bytes of it.

    The file is opened without blocking and checked before anything is read:
    a directory, a device (such as ``/dev/zero``, also through a symbolic
    link) or a socket is refused; a pipe (``/dev/stdin``, a FIFO) is read
    when ``pipes`` is true (one with no writer reads as empty, it cannot
    stall the run) and refused otherwise. Reading stops after ``limit``
    bytes, so a file that grows while it is read cannot exhaust memory. A
    leading byte-order mark (spreadsheets write one in "CSV UTF-8") is
    dropped.

    Raises
    ------
    InputError
        Naming the file: missing, not a file that can be read, larger than
        ``limit``, unreadable, or not UTF-8.
    """
    name = str(path)
    try:
        fd = os.open(name, os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_CLOEXEC", 0))
    except FileNotFoundError:
        raise InputError("no such file", file=name) from None
    except IsADirectoryError:
        raise InputError(f"is a directory, not a {kind}", file=name) from None
    except OSError as e:
        raise InputError(f"cannot be read: {e.strerror or e}", file=name) from None
    try:
        mode = os.fstat(fd).st_mode
        if stat.S_ISDIR(mode):
            raise InputError(f"is a directory, not a {kind}", file=name)
        if stat.S_ISFIFO(mode) and pipes:
            os.set_blocking(fd, True)  # a writer is there (or none: then the read ends at once, empty)
        elif not stat.S_ISREG(mode):
            raise InputError(f"is not a regular file (a device, FIFO or socket), not a {kind}", file=name)
    except BaseException:
        os.close(fd)
        raise
    with os.fdopen(fd, "rb") as fh:
        try:
            data = fh.read(limit + 1)
        except OSError as e:
            raise InputError(f"cannot be read: {e.strerror or e}", file=name) from None
    if len(data) > limit:
        raise InputError(f"larger than {_size(limit)}, the most a {kind} may hold", file=name)
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as e:
        raise InputError(f"not UTF-8 text (bad byte at offset {e.start})", file=name) from None

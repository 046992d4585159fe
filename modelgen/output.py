"""Writing outputs: several files replaced together or not at all, bulk work, an optional second process.

Every command that writes files goes through :class:`Commit`:

- the targets are checked first (not a folder, the folder exists, no two
  outputs are one file, no output is an input), and a bad one is an
  :class:`~modelgen.errors.InputError` naming the user's path;
- each output is written to a temporary file beside its target, named
  ``.TARGET.modelgen-PID-HOST-TOKEN.tmp``; temporaries a killed run left
  behind (their process is gone) are removed by the next run onto the same
  target, and nothing else is touched;
- the commit holds an exclusive lock on each output folder, keeps the old
  files (hard links) until every rename has succeeded, and puts them back
  when one fails;
- with ``signals=True`` (the command line) SIGTERM and SIGHUP end the run
  through the same clean-up as an error; SIGINT does already.

:func:`bulk` pauses the cyclic garbage collector during bulk work, and
:class:`Beside` runs a task in a forked second process when the caller opts
in (the command line does; a library call never forks unless asked).
"""

from __future__ import annotations

import errno
import gc
import hashlib
import os
import re
import secrets
import shutil
import signal
import socket
import sys
import tempfile
import threading
from contextlib import contextmanager

from .errors import InputError

#: The mark in the names of our temporary files; a later run removes stale ones carrying it.
MARK = ".modelgen-"
_HOST = hashlib.sha1(socket.gethostname().encode("utf-8", "replace")).hexdigest()[:8]
_STALE = re.compile(r"(\d+)-([0-9a-f]{8})-[0-9a-f]+\.(tmp|bak|part)")
#: The longest part of a target's name that goes into its temporary files' names.
_BASE = 100


@contextmanager
def bulk():
    """Cyclic garbage collection paused while millions of small acyclic objects are made.

    They hold no reference cycles, and each collection would walk them all:
    with the collector running, reading 100,000 table rows takes about twice
    as long.
    """
    enabled = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if enabled:
            gc.enable()


def _file_mode():
    """The permissions a newly created file gets here (0666 less the umask)."""
    mask = os.umask(0)
    os.umask(mask)
    return 0o666 & ~mask


def _alive(pid):
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:  # another user's process: alive
        return True
    return True


def temporary_name(path, kind="tmp"):
    """A fresh name beside ``path`` for one of our temporary files (``kind``: tmp, bak or part)."""
    folder, base = os.path.split(os.path.abspath(path))
    return os.path.join(folder, f".{base[:_BASE]}{MARK}{os.getpid()}-{_HOST}-{secrets.token_hex(4)}.{kind}")


def sweep(path):
    """Remove the temporary files that runs now dead left beside ``path``.

    Only names of our own pattern for this very target, made on this host
    by a process that no longer exists, are removed.
    """
    folder, base = os.path.split(os.path.abspath(path))
    prefix = f".{base[:_BASE]}{MARK}"
    try:
        names = os.listdir(folder or ".")
    except OSError:
        return
    for name in names:
        if not name.startswith(prefix):
            continue
        m = _STALE.fullmatch(name[len(prefix):])
        if m and m.group(2) == _HOST and int(m.group(1)) != os.getpid() and not _alive(int(m.group(1))):
            try:
                os.unlink(os.path.join(folder, name))
            except OSError:
                pass


class _Terminated(SystemExit):
    """SIGTERM or SIGHUP arrived: leave through the clean-up, exit status 128 + signal."""


def _on_signal(signum, frame):
    raise _Terminated(128 + signum)


def _unlink(path):
    try:
        os.unlink(path)
    except OSError:
        pass


LABELS = {"csv": "summary CSV", "json": "summary JSON"}


def _label(role):
    return LABELS.get(role, role)


def check_targets(paths, inputs=()):
    """Refuse outputs that cannot be written before anything is made.

    ``paths``: role -> path. Raises :class:`InputError` naming the user's
    path: an existing folder, a missing folder, two outputs that are one
    file, an output that is one of ``inputs``.
    """
    seen = {}
    ins = {}
    for p in inputs:
        if p is not None and os.path.exists(p):
            ins[os.path.realpath(p)] = str(p)
    for role, path in paths.items():
        path = str(path)
        real = os.path.realpath(path)
        if os.path.isdir(path):
            raise InputError(f"is a folder, not a file to write the {_label(role)} to", file=path)
        if os.path.exists(path) and not os.path.isfile(path):
            raise InputError(f"is not a regular file (a device, a pipe or a socket) to write the {_label(role)} "
                             f"to; give a file name", file=path)
        folder = os.path.dirname(os.path.abspath(path))
        if not os.path.isdir(folder):
            raise InputError(f"cannot write the {_label(role)}: folder {folder} does not exist", file=path)
        for other_real, (other_role, other) in seen.items():
            if real == other_real or (os.path.exists(path) and os.path.exists(other)
                                      and os.path.samefile(path, other)):
                raise InputError(f"the {_label(role)} and the {_label(other_role)} ({other}) would be the same "
                                 f"file: give them different names", file=path)
        for in_real, given in ins.items():
            if real == in_real or (os.path.exists(path) and os.path.samefile(path, given)):
                raise InputError(f"the {_label(role)} would overwrite the input {given}", file=path)
        seen[real] = (role, path)


class Commit:
    """Stage several output files and replace them all together, or none.

    Use as a context manager; write with :meth:`write` (text) or
    :meth:`copy` (from a spool), then call :meth:`commit`. Leaving the
    block without a commit (an error, a signal) removes every temporary
    file and leaves the targets as they were.

    Parameters
    ----------
    paths : dict
        role -> target path; the role names the file in messages.
    inputs : sequence of paths
        Files the run reads; no output may be one of them.
    signals : bool
        Turn SIGTERM and SIGHUP into a clean exit while staging (main thread
        only; the previous handlers come back afterwards). For the command
        line; a library call leaves signal handling alone.
    """

    def __init__(self, paths, *, inputs=(), signals=False):
        self.paths = {role: str(p) for role, p in paths.items()}
        self.inputs = inputs
        self.signals = signals
        self.temps = {}
        self.handles = {}
        self.committed = False
        self._saved = {}

    # -- staging --------------------------------------------------------------------------------
    def __enter__(self):
        check_targets(self.paths, self.inputs)
        if self.signals and threading.current_thread() is threading.main_thread():
            for s in (signal.SIGTERM, signal.SIGHUP):
                self._saved[s] = signal.signal(s, _on_signal)
        try:
            for path in self.paths.values():
                sweep(path)
            mode = _file_mode()
            for role, path in self.paths.items():
                tmp = temporary_name(path)
                self.temps[role] = tmp  # named before it exists: a signal right after the open still finds it
                try:
                    fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL, mode)
                except OSError as e:
                    del self.temps[role]
                    raise self._error(role, e) from None
                self.handles[role] = os.fdopen(fd, "w", encoding="utf-8", newline="\n")
        except BaseException:
            self._abort()
            raise
        return self

    def _error(self, role, e):
        return InputError(f"cannot write the {_label(role)}: {e.strerror or e}", file=self.paths[role])

    def write(self, role, text):
        """Append ``text`` to the output ``role``."""
        try:
            self.handles[role].write(text)
        except OSError as e:
            raise self._error(role, e) from None

    def copy(self, role, spool, start=0, length=None):
        """Append ``length`` bytes (default: to the end) of the binary file ``spool`` from ``start``."""
        fh = self.handles[role]
        try:
            fh.flush()
            spool.flush()
            if length is None:
                length = os.fstat(spool.fileno()).st_size - start
            if hasattr(os, "copy_file_range"):  # in the kernel, no copy through this process
                src, dst, off = spool.fileno(), fh.fileno(), start
                while length > 0:
                    try:
                        k = os.copy_file_range(src, dst, length, off)
                    except OSError as e:
                        if e.errno in (errno.EXDEV, errno.ENOSYS, errno.EINVAL, errno.EOPNOTSUPP) and off == start:
                            break  # not between these files: copy through this process below
                        raise
                    if k == 0:
                        raise OSError(errno.EIO, "copy ended early")
                    off += k
                    length -= k
                start = off
            if length > 0:
                spool.seek(start)
                shutil.copyfileobj(_Limited(spool, length), fh.buffer, 1 << 20)
                fh.buffer.flush()
        except OSError as e:
            raise self._error(role, e) from None

    def spool(self, role=None):
        """An anonymous binary scratch file beside output ``role`` (default the first): no name, no leftovers."""
        path = self.paths[role or next(iter(self.paths))]
        try:
            return tempfile.TemporaryFile(dir=os.path.dirname(os.path.abspath(path)))
        except OSError as e:
            raise self._error(role or next(iter(self.paths)), e) from None

    def part(self, role=None):
        """A named scratch file beside output ``role`` (for a second process), removed with the temporaries."""
        path = self.paths[role or next(iter(self.paths))]
        name = temporary_name(path, "part")
        self.temps[f"part:{name}"] = name  # named before it exists, as in __enter__
        try:
            os.close(os.open(name, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600))
        except OSError as e:
            del self.temps[f"part:{name}"]
            raise self._error(role or next(iter(self.paths)), e) from None
        return name

    # -- the commit -----------------------------------------------------------------------------
    def commit(self):
        """Rename every staged file over its target, all or none, under a lock on the output folders."""
        for role, fh in self.handles.items():
            try:
                fh.close()
            except OSError as e:
                raise self._error(role, e) from None
        locks = _lock_folders(self.paths.values())
        try:
            self._replace_all()
        finally:
            for fd in locks:
                os.close(fd)  # closing releases the lock
        self.committed = True

    def _replace_all(self):
        roles = list(self.paths)
        existed = {role: os.path.lexists(self.paths[role]) for role in roles}
        backups = {}
        done = []
        try:
            for role in roles:  # keep each old file under a second name until all renames succeeded
                if existed[role]:
                    bak = temporary_name(self.paths[role], "bak")
                    try:
                        os.link(self.paths[role], bak)
                    except OSError:
                        continue  # no hard links here: this target cannot be rolled back
                    backups[role] = bak
            for role in roles:
                try:
                    os.replace(self.temps[role], self.paths[role])
                except OSError as e:
                    raise self._error(role, e) from None
                done.append(role)
        except BaseException:
            for role in done:  # put back what was replaced; remove what was new
                try:
                    if role in backups:
                        os.replace(backups.pop(role), self.paths[role])
                    elif not existed[role]:
                        os.unlink(self.paths[role])
                except OSError:
                    pass
            for bak in backups.values():
                _unlink(bak)
            raise
        for bak in backups.values():
            _unlink(bak)

    # -- leaving --------------------------------------------------------------------------------
    def _abort(self):
        for fh in self.handles.values():
            try:
                fh.close()
            except OSError:
                pass
        for tmp in self.temps.values():
            _unlink(tmp)

    def __exit__(self, kind, value, tb):
        try:
            if not self.committed:
                self._abort()
            else:
                for key, tmp in self.temps.items():
                    if key.startswith("part:"):
                        _unlink(tmp)
        finally:
            for s, h in self._saved.items():
                signal.signal(s, h)
            self._saved = {}
        return False


class _Limited:
    """A read-only view of the next ``n`` bytes of a file, for copyfileobj."""

    def __init__(self, fh, n):
        self.fh, self.n = fh, n

    def read(self, size=-1):
        if self.n <= 0:
            return b""
        data = self.fh.read(self.n if size < 0 else min(size, self.n))
        self.n -= len(data)
        return data


def _lock_folders(paths):
    """Exclusive locks (flock) on the folders of ``paths``, in a fixed order; the open descriptors."""
    try:
        import fcntl
    except ImportError:  # pragma: no cover - no flock here (Windows): commit unlocked
        return []
    fds = []
    try:
        for folder in sorted({os.path.dirname(os.path.abspath(p)) for p in paths}):
            fd = os.open(folder, os.O_RDONLY)
            fds.append(fd)
            try:
                fcntl.flock(fd, fcntl.LOCK_EX)
            except OSError as e:  # a file system without flock on folders: commit unlocked there
                if e.errno not in (errno.ENOLCK, errno.EOPNOTSUPP, errno.EBADF, errno.EINVAL):
                    raise
    except BaseException:
        for fd in fds:
            os.close(fd)
        raise
    return fds


def write_files(texts, *, inputs=(), signals=False):
    """Write ``{path: text}``, all files replaced together or none (see :class:`Commit`)."""
    paths = {("output" if len(texts) == 1 else f"output {k + 1}"): p for k, p in enumerate(texts)}
    with Commit(paths, inputs=inputs, signals=signals) as c:
        for role, p in paths.items():
            c.write(role, texts[p])
        c.commit()


_SIGNALS = (signal.SIGTERM, signal.SIGHUP, signal.SIGINT)


def _checkpoint():
    """A Python-level call: a signal already caught runs its handler here (at the call's start)."""


class Beside:
    """Run ``task()`` in a forked second process while this one works on (optional).

    With ``fork=False`` (the default for library calls), or where there is
    no fork, :meth:`join` runs the task here. A child that fails is not
    trusted: :meth:`join` runs the task again here, where its error can be
    seen. The task must write its results to files; the child leaves with
    ``os._exit`` and never runs the parent's clean-up. Keep the object
    before calling :meth:`start`, so that :meth:`cancel` can end the child
    whatever happens next.
    """

    def __init__(self, task, *, fork=False):
        self.task = task
        self.fork = fork and hasattr(os, "fork")
        self.pid = None

    def start(self):
        """Fork the second process (when asked to), with SIGTERM, SIGHUP and SIGINT held meanwhile.

        A signal that arrived during the fork would otherwise run its handler
        inside the interpreter's after-fork hooks, where the exception it
        raises is dropped; held, it arrives after the fork, in ordinary code.
        """
        if not self.fork:
            return self
        for stream in (sys.stdout, sys.stderr):
            try:
                stream.flush()
            except (AttributeError, OSError, ValueError):
                pass
        held = signal.pthread_sigmask(signal.SIG_BLOCK, _SIGNALS)
        try:
            _checkpoint()
            pid = os.fork()
        except BaseException:
            signal.pthread_sigmask(signal.SIG_SETMASK, held)
            raise
        if pid == 0:
            code = 0
            try:
                for s in _SIGNALS:
                    signal.signal(s, signal.SIG_DFL)
                signal.pthread_sigmask(signal.SIG_SETMASK, held)
                self.task()
            except BaseException:
                code = 1
            os._exit(code)
        self.pid = pid
        signal.pthread_sigmask(signal.SIG_SETMASK, held)
        return self

    def join(self):
        """Wait for the task (or run it here); return when its results are in place."""
        if self.pid is None:
            self.task()
            return
        try:
            _, status = os.waitpid(self.pid, 0)  # a signal here leaves self.pid set, for cancel()
        except ChildProcessError:
            status = 1
        self.pid = None
        if status != 0:
            self.task()

    def cancel(self):
        """End the second process, if any (on an error or a signal in this one)."""
        if self.pid is not None:
            try:
                os.kill(self.pid, signal.SIGKILL)
                os.waitpid(self.pid, 0)
            except OSError:
                pass
            self.pid = None


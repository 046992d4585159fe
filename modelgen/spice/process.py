"""Run a simulator as a child process that cannot outlive modelgen.

Every simulator run of :mod:`modelgen.spice` goes through :func:`run`:

* the child gets a session (and so a process group) of its own, so that a
  timeout or an interrupt ends it and anything it started, with one
  ``killpg``;
* on Linux the child also asks the kernel for SIGKILL when its parent dies
  (``prctl(PR_SET_PDEATHSIG)``, set between fork and exec), so that even a
  ``kill -9`` of modelgen, which runs no clean-up code, takes the simulator
  down with it;
* a run that does not finish within its timeout, or that is interrupted
  (KeyboardInterrupt, or any exception raised while waiting, such as the
  one the command line raises on SIGTERM), has its process group killed
  and reaped before the exception goes on;
* a run waited for in another thread (``check`` overlaps a simulator run
  with its own evaluation) is ended from the main thread by :func:`cancel`,
  which kills every run in progress and refuses new ones until
  :func:`allow`.

Failures are :class:`SimulatorError`: a one-line message for the user, the
simulator's output kept apart in :attr:`SimulatorError.output`.
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import threading

__all__ = ["SimulatorError", "allow", "cancel", "run", "without_comments"]

#: prctl option number of PR_SET_PDEATHSIG (linux/prctl.h).
_PR_SET_PDEATHSIG = 1


class SimulatorError(RuntimeError):
    """A simulator could not be run, failed, or timed out.

    ``str()`` is one line for the user; ``output`` holds what the simulator
    printed (possibly long), for a developer.
    """

    def __init__(self, message, output=""):
        super().__init__(message)
        self.output = output


def without_comments(text):
    """``text`` with every comment line removed, before it goes into a netlist.

    ngspice runs a comment that starts ``*#`` as a control command and gnucap
    runs one that starts ``*>``; a comment carries nothing a simulator needs,
    so none is passed on. The text is split at every line break Python knows
    (LF, CR, vertical tab, form feed, U+2028, ...), more than either simulator
    splits at, so that a comment hidden behind one of them is removed too; the
    pieces left are joined with LF.
    """
    return "\n".join(piece for piece in text.splitlines() if not piece.strip().startswith("*"))


def _prctl():
    if not sys.platform.startswith("linux"):
        return None
    try:
        import ctypes

        return ctypes.CDLL(None, use_errno=True).prctl
    except (OSError, AttributeError):
        return None


_PRCTL = _prctl()


def _child_setup(parent):
    """preexec_fn: die with the parent (resolved before the fork: no imports in the child)."""
    prctl = _PRCTL

    def setup():
        if prctl is not None:
            prctl(_PR_SET_PDEATHSIG, signal.SIGKILL, 0, 0, 0)
        if os.getppid() != parent:  # the parent died before the prctl took effect
            os._exit(1)

    return setup


def _kill_group(proc):
    try:
        if os.name == "posix":
            os.killpg(proc.pid, signal.SIGKILL)
        else:  # pragma: no cover - no process groups to kill
            proc.kill()
    except (ProcessLookupError, PermissionError):
        pass
    try:
        proc.wait(timeout=10)
    except subprocess.TimeoutExpired:  # pragma: no cover - SIGKILL is not ignorable
        pass


_LOCK = threading.Lock()
_LIVE = set()
_CANCELLED = False


def allow():
    """Let :func:`run` start processes again after a :func:`cancel`."""
    global _CANCELLED
    with _LOCK:
        _CANCELLED = False


def cancel():
    """Kill every run in progress, in any thread, and refuse new ones until :func:`allow`."""
    global _CANCELLED
    with _LOCK:
        _CANCELLED = True
        live = list(_LIVE)
    for proc in live:
        _kill_group(proc)


def run(argv, *, cwd, timeout, what):
    """Run ``argv`` in ``cwd`` and return ``(returncode, output)`` (stdout and stderr together).

    Parameters
    ----------
    argv : list of str
    cwd : str
        Working directory of the child.
    timeout : float
        Seconds before the child's process group is killed.
    what : str
        Name used in error messages (``"ngspice"``).

    Raises
    ------
    SimulatorError
        The program cannot be started or does not finish within ``timeout``.
    """
    posix = {"start_new_session": True, "preexec_fn": _child_setup(os.getpid())} if os.name == "posix" else {}
    # started and registered under the lock: a cancel() from another thread either comes first (and
    # this run is refused) or finds the process registered and kills it, never in between
    with _LOCK:
        cancelled = _CANCELLED
        if cancelled:
            raise SimulatorError(f"{what} run cancelled")
        try:
            proc = subprocess.Popen(argv, cwd=cwd, stdin=subprocess.DEVNULL, stdout=subprocess.PIPE,
                                    stderr=subprocess.STDOUT, **posix)
        except OSError as e:
            raise SimulatorError(f"{what} could not be started: {e.strerror or e}") from None
        _LIVE.add(proc)
    try:
        out, _ = proc.communicate(timeout=timeout)
    except subprocess.TimeoutExpired:
        _kill_group(proc)
        raise SimulatorError(f"{what} did not finish within {timeout:g} s") from None
    except BaseException:
        _kill_group(proc)
        raise
    finally:
        with _LOCK:
            _LIVE.discard(proc)
        proc.stdout.close()  # a killed run's pipe too: left to the garbage collector it warns later
    return proc.returncode, out.decode("utf-8", errors="replace")

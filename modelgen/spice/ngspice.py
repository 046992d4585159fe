"""Run ngspice in batch mode on diode cards: DC currents and capacitances.

One ngspice run covers every model of a library: each model drives one
diode from a common swept node through its own 0 V ammeter for the DC
curve, and one diode per capacitance bias, each with its own source carrying
an AC stimulus. The AC admittance Y gives the junction capacitance after the
series RS is taken off: Zj = 1/Y - RS, C = Im(1/Zj) / omega.

Tolerances are tightened (RELTOL 1e-6, ABSTOL 1e-24, VNTOL 1e-9) so that the
simulator's own convergence error stays well below the 1e-3 comparison.
"""

from __future__ import annotations

import os
import re
import shutil
import tempfile

import numpy as np

from .process import SimulatorError, run, without_comments

#: AC analysis frequency for the capacitance [Hz].
FREQUENCY = 1e6
_PROBLEM = re.compile(r"warning|error|unrecognized|ignored|too large|cannot|unknown|fatal", re.I)


def available():
    """True if an ngspice binary is on the PATH."""
    return shutil.which("ngspice") is not None


def _deck(library_text, names, dc_volts, cap_volts, temperature_c, gmin, out_dc, out_ac, wrapped=None,
          reverse_volts=()):
    wrapped = wrapped or {}
    lines = ["* modelgen check deck", without_comments(library_text), "VSWEEP sweep 0 DC 0"]
    reverse = []
    for k, name in enumerate(names):
        lines.append(f"VM{k} sweep m{k} DC 0")
        lines.append(f"DDC{k} m{k} 0 {name}")
        if name in wrapped:  # the subcircuit at fixed reverse biases: constant columns of the DC table
            for j, v in enumerate(reverse_volts):
                lines.append(f"VR{k}_{j} r{k}_{j} 0 DC {float(v)!r}")
                lines.append(f"XR{k}_{j} r{k}_{j} 0 {wrapped[name]}")
                reverse.append(f"i(VR{k}_{j})")
        for j, v in enumerate(cap_volts):
            lines.append(f"VC{k}_{j} c{k}_{j} 0 DC {float(v)!r} AC 1")
            lines.append(f"DAC{k}_{j} c{k}_{j} 0 {name}")
    lines.append(f".options temp={float(temperature_c)!r} gmin={gmin!r} reltol=1e-6 abstol=1e-24 vntol=1e-9")
    dc_vecs = " ".join([f"i(VM{k})" for k in range(len(names))] + reverse)
    ac_vecs = " ".join(f"i(VC{k}_{j})" for k in range(len(names)) for j in range(len(cap_volts)))
    lines += [".control", "set wr_singlescale", "set wr_vecnames", "option numdgt=15"]
    dc = np.asarray(dc_volts, float)
    steps = np.diff(dc)
    if len(dc) < 2 or not np.allclose(steps, steps[0], rtol=0, atol=1e-12):
        raise ValueError("dc_volts must be at least two evenly spaced voltages")
    # stop half a step past the last point so rounding cannot drop it
    lines.append(f"dc VSWEEP {float(dc[0])!r} {float(dc[-1] + 0.5 * steps[0])!r} {float(steps[0])!r}")
    lines.append(f"wrdata {out_dc} {dc_vecs}")  # first column: the sweep scale
    if len(cap_volts):
        lines.append(f"ac lin 1 {FREQUENCY!r} {FREQUENCY!r}")
        lines.append(f"wrdata {out_ac} {ac_vecs}")
    lines += [".endc", ".end", ""]
    return "\n".join(lines)


def _read_table(path):
    with open(path) as fh:
        header = fh.readline().split()
        rows = [list(map(float, ln.split())) for ln in fh if ln.strip()]
    return header, np.array(rows)


def simulate(library_text, names, dc_volts, cap_volts, *, rs=None, temperature_c=27.0, gmin=1e-12,
             timeout=120.0, wrapped=None, reverse_volts=()):
    """Run ngspice once for all models in ``library_text``.

    Parameters
    ----------
    library_text : str
        ``.model`` cards (continuation lines allowed); comment lines are dropped
        (:func:`~modelgen.spice.process.without_comments`), so none can be a command.
    names : list of str
        The model names to exercise.
    dc_volts : array_like
        Evenly spaced terminal voltages for the DC curve [V].
    cap_volts : array_like
        Biases for the capacitance [V].
    rs : dict, optional
        Series resistance of each model [ohm], taken off the AC impedance.
    temperature_c : float
        Circuit temperature [degC].
    gmin : float
        GMIN [S].
    timeout : float
        [s].
    wrapped : dict, optional
        Model name -> name of a subcircuit (ports a, k) to run at ``reverse_volts``.
    reverse_volts : array_like
        Fixed biases for those subcircuits [V].

    Returns
    -------
    dict
        ``{name: {"voltage": array [V], "current": array [A], "capacitance": array [F],
        "messages": list of str}}``, plus ``"reverse"`` (the subcircuit's current, anode to
        cathode, at each of ``reverse_volts`` [A]) for the wrapped names; the messages are
        ngspice's warning and error lines that name the model, or all of them where none does.

    Raises
    ------
    modelgen.spice.process.SimulatorError
        ngspice missing, failed, timed out, or wrote no results (a RuntimeError; one line,
        the log in its ``output``).
    """
    if not available():
        raise SimulatorError("ngspice is not installed (Debian package: ngspice)")
    rs = rs or {}
    with tempfile.TemporaryDirectory(prefix="modelgen-ngspice-") as tmp:
        out_dc, out_ac = os.path.join(tmp, "dc.txt"), os.path.join(tmp, "ac.txt")
        deck = os.path.join(tmp, "deck.cir")
        with open(deck, "w") as fh:
            fh.write(_deck(library_text, names, dc_volts, cap_volts, temperature_c, gmin, out_dc, out_ac,
                           wrapped, reverse_volts))
        code, log = run(["ngspice", "-b", deck], cwd=tmp, timeout=timeout, what="ngspice")
        messages = [ln.strip() for ln in log.splitlines() if _PROBLEM.search(ln)]
        # ngspice -b exits 1 after a .control run even when all went well: judge by its output
        if not os.path.exists(out_dc) or (len(cap_volts) and not os.path.exists(out_ac)):
            why = f"killed by signal {-code}" if code < 0 else f"exit status {code}"
            first = messages[0] if messages else "no results written"
            raise SimulatorError(f"ngspice failed ({why}): {first[:200]}", output=log)
        _, dc = _read_table(out_dc)
        result = {}
        for k, name in enumerate(names):
            word = re.compile(r"(?<![A-Za-z0-9_])" + re.escape(name) + r"(?![A-Za-z0-9_])", re.I)
            mine = [m for m in messages if word.search(m)]
            result[name] = {"voltage": dc[:, 0], "current": dc[:, 1 + k],
                            # ngspice names the model in some messages, only the line in others
                            "messages": mine or messages}
        column = 1 + len(names)
        for name in names:
            if name in (wrapped or {}):
                # the source's current leaves its + node into the subcircuit: the device's is the opposite
                result[name]["reverse"] = -dc[0, column:column + len(reverse_volts)]
                column += len(reverse_volts)
        if len(cap_volts):
            _, ac = _read_table(out_ac)
            omega = 2 * np.pi * FREQUENCY
            # wrdata writes: frequency, re, im for each vector (scale shared)
            vals = ac[0, 1:]
            for k, name in enumerate(names):
                caps = []
                for j in range(len(cap_volts)):
                    col = 2 * (k * len(cap_volts) + j)
                    i_src = complex(vals[col], vals[col + 1])
                    y = -i_src  # source current flows into its + node; the diode's is the opposite
                    if y == 0:  # no admittance printed at all: no capacitance either
                        caps.append(0.0)
                        continue
                    zj = 1 / y - rs.get(name, 0.0)
                    caps.append((1 / zj).imag / omega if zj != 0 else np.inf)
                result[name]["capacitance"] = np.array(caps)
    return result

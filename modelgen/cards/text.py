"""Text that goes onto a card: numbers in exponent form, safe comment lines.

Every number on a card is written with the fewest digits that read back
exactly (:func:`format_number`; column-wise and each distinct value once by
:func:`format_numbers`). Every piece of text that is not a number or a
checked model name reaches a card only through :func:`comment_lines` (or,
for bulk headers, with :data:`CONTROL` characters removed), so no part of
it can begin a netlist line of its own.
"""

from __future__ import annotations

import math
import re
from operator import itemgetter

import numpy as np


def _exponent_form(r):
    """Python's shortest round-trip repr ``r`` of a finite float, in exponent form.

    A positional repr (1e-4 <= |x| < 1e16) is rewritten digit for digit:
    '33.87' -> '3.387e+01', '0.0025' -> '2.5e-03'; exponent reprs pass.
    """
    if "e" in r:
        return r
    sign = ""
    if r[0] == "-":
        sign, r = "-", r[1:]
    ip, _, fp = r.partition(".")
    if ip != "0":
        exp = len(ip) - 1
        digits = (ip + fp).rstrip("0")
    else:
        stripped = fp.lstrip("0")
        if not stripped:
            return sign + "0e+00"
        exp = len(stripped) - len(fp) - 1
        digits = stripped.rstrip("0")
    mantissa = digits[0] + "." + digits[1:] if len(digits) > 1 else digits
    return sign + mantissa + ("e+%02d" % exp if exp >= 0 else "e-%02d" % -exp)


def format_number(x):
    """A float in exponent form with the fewest digits that read back exactly.

    ``1e-15`` -> ``1e-15``, ``0.5`` -> ``5e-01``, ``2.3234916272313127e-15``
    -> ``2.3234916272313127e-15`` (the same text as numpy's
    ``format_float_scientific(x, unique=True, trim='-', exp_digits=2)``, made
    from Python's shortest repr, which is faster). Raises ValueError for
    non-finite values (they never belong on a card).
    """
    x = float(x)
    if not math.isfinite(x):
        raise ValueError(f"non-finite value {x!r} cannot go on a card")
    return _exponent_form(repr(x))


def take(texts, index):
    """``[texts[k] for k in index]``, done by itemgetter in C."""
    index = np.asarray(index).ravel().tolist()
    if not index:
        return []
    if len(index) == 1:
        return [texts[index[0]]]
    return list(itemgetter(*index)(texts))


def format_numbers(values, cache=None):
    """:func:`format_number` over an array; NaN gives None. Each distinct value is formatted once.

    ``cache`` (a dict) remembers arrays already formatted in this run, so a
    column shared by a library and its summary is formatted once.
    """
    if cache is not None and isinstance(values, np.ndarray) and id(values) in cache:
        return cache[id(values)][1]
    v = np.asarray(values, float)
    uniq, inverse = np.unique(v, return_inverse=True)
    finite = np.isfinite(uniq)
    texts = [r if "e" in r else _exponent_form(r) for r in map(repr, uniq[finite].tolist())]
    if not finite.all():
        full = [None] * len(uniq)
        for k, t in zip(np.flatnonzero(finite).tolist(), texts):
            full[k] = t
        texts = full
    out = take(texts, inverse)
    if cache is not None and isinstance(values, np.ndarray):
        cache[id(values)] = (values, out)  # keep the array alive so its id stays unique
    return out


#: Characters that could end a comment line or start a new one: control characters, including
#: carriage return, tab, vertical tab and form feed, and the Unicode line and paragraph separators.
CONTROL = re.compile(r"[\x00-\x1f\x7f-\x9f\u2028\u2029\x85]")


def safe(text):
    """``text`` with every :data:`CONTROL` character removed."""
    return CONTROL.sub("", str(text))


def comment_lines(text, prefix="* "):
    """Turn any text into SPICE comment lines, one ``*`` line per input line.

    Control characters (including carriage returns, tabs, form feeds and
    Unicode line separators) are removed, so no part of the text can begin a
    line of its own: every returned line starts with ``prefix``.
    """
    out = []
    for line in str(text).splitlines() or [""]:
        out.append((prefix + CONTROL.sub("", line)).rstrip())
    return out

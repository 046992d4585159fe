"""The one pint registry, and text-to-SI conversion at the input boundary.

pint is used only here, where text becomes numbers. Parse once per value
(or once per table column); the physics never sees a pint quantity.
"""

from __future__ import annotations

import hashlib
import importlib.metadata
import importlib.util
import json
import math
import os
import re
import stat
from functools import lru_cache

from .errors import InputError, printable, shown, type_name

#: Longest unit text accepted ("cm^2/(V*s)" is 10 characters).
MAX_UNIT = 64
#: Longest quantity string accepted: a number and a unit.
MAX_QUANTITY = 100
#: Environment variable naming the folder of the unit-factor cache; set but empty: no cache on disk.
CACHE_ENV = "MODELGEN_CACHE_DIR"
_CACHE_MAX_ENTRIES = 256
_CACHE_MAX_BYTES = 64 * 1024


@lru_cache(maxsize=1)
def registry():
    """The application's one pint registry, made on first use (about 0.3 s).

    It is built from pint's own definitions every time: pint's definitions
    cache on disk is a pickle, which a process must never load from a file
    that could have been tampered with, and it saves only about 0.05 s.
    Later runs avoid pint altogether through the unit-factor cache
    (:func:`unit_factor`).
    """
    import pint

    return pint.UnitRegistry()


#: Kinds of quantity: SI unit the physics uses, and an example for messages.
KINDS = {
    "concentration": ("m^-3", "1e17 cm^-3"),
    "grading": ("m^-4", "1e20 cm^-4"),
    "length": ("m", "2 um"),
    "area": ("m^2", "100 um^2"),
    "time": ("s", "1 us"),
    "velocity": ("m/s", "1e3 cm/s"),
    "mobility": ("m^2/(V*s)", "1200 cm^2/(V*s)"),
    "resistivity": ("ohm*m", "1 ohm*cm"),
    "resistance": ("ohm", "0.5 ohm"),
    "current": ("A", "1 mA"),
    "voltage": ("V", "-1 V"),
    "capacitance": ("F", "1 pF"),
    "energy": ("eV", "1.12 eV"),
    "temperature": ("K", "27 degC"),
}

# a decimal number at the start of a quantity; no two unbounded repeats can match the same text
_NUMBER = re.compile(r"[+-]?(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][+-]?[0-9]+)?")
_SPELLINGS = (("Ω", "ohm"), ("µ", "u"), ("μ", "u"), ("·", "*"), ("°C", "degC"), ("°F", "degF"))


@lru_cache(maxsize=1024)
def _unit(text):
    """A parsed pint unit (cached per text within the process)."""
    clean = text
    for a, b in _SPELLINGS:
        clean = clean.replace(a, b)
    return registry().parse_units(clean)


# ---- the unit-factor cache on disk -------------------------------------------------------------
#
# Importing pint and building its registry cost about 0.3 s of the 0.3 s a card takes otherwise, so
# the factors pint gave are kept in one small JSON file per user. The file is trusted only when
# the user's own and writable by nobody else (nor its folder), is keyed by a hash of the code and
# definitions that computed it (this module, pint's version and its definition files), and every
# entry is checked on load; anything else is ignored and pint answers.


@lru_cache(maxsize=1)
def _code_hash():
    """Hash of what a factor depends on: this module, pint's version and pint's definition files."""
    h = hashlib.sha256()
    with open(__file__, "rb") as fh:
        h.update(fh.read())
    h.update(importlib.metadata.version("pint").encode())
    folder = importlib.util.find_spec("pint").submodule_search_locations[0]
    for name in ("default_en.txt", "constants_en.txt"):
        try:
            with open(os.path.join(folder, name), "rb") as fh:
                h.update(fh.read())
        except OSError:
            h.update(name.encode())
    return h.hexdigest()[:20]


def cache_dir():
    """The folder of the unit-factor cache: ``$MODELGEN_CACHE_DIR``, else the user's cache folder.

    None when ``MODELGEN_CACHE_DIR`` is set but empty (no cache on disk).
    """
    env = os.environ.get(CACHE_ENV)
    if env is not None:
        return env or None
    import platformdirs

    return platformdirs.user_cache_dir("modelgen")


def cache_file():
    """The cache file for this code, or None when the cache is off."""
    folder = cache_dir()
    return None if folder is None else os.path.join(folder, f"unit-factors-{_code_hash()}.json")


def _uid():
    return os.geteuid()


def _private(st, *, sticky_ok=False):
    """True if a stat result is owned by this user (or root) and no one else may write there."""
    if st.st_uid not in (_uid(), 0):
        return False
    if st.st_mode & 0o022:
        return sticky_ok and bool(st.st_mode & stat.S_ISVTX) and not stat.S_ISREG(st.st_mode)
    return True


def _trusted_folder(folder):
    """The folder is a real directory of this user, writable by no one else, in a parent that is safe."""
    try:
        st = os.lstat(folder)
        parent = os.stat(os.path.dirname(os.path.abspath(folder)))
    except OSError:
        return False
    return (stat.S_ISDIR(st.st_mode) and st.st_uid == _uid() and not st.st_mode & 0o022
            and _private(parent, sticky_ok=True))


def _valid(data):
    """The factors of a decoded cache file, or None if anything in it is not as this module writes it."""
    targets = {si for si, _ in KINDS.values()}
    if not isinstance(data, dict) or data.get("code") != _code_hash() or not isinstance(data.get("factors"), dict):
        return None
    out = {}
    for key, value in data["factors"].items():
        si, bar, text = key.partition("|")
        if not (bar and si in targets and 0 < len(text) <= MAX_UNIT and isinstance(value, list) and len(value) == 2
                and all(type(x) is float and math.isfinite(x) for x in value) and value[0] > 0
                and (value[1] == 0 or si == "K")):
            return None
        out[key] = tuple(value)
    return out if len(out) <= _CACHE_MAX_ENTRIES else None


def _load(path):
    """Factors from the cache file at ``path``; {} if it is absent, not trusted or not valid."""
    if path is None or not _trusted_folder(os.path.dirname(path)):
        return {}
    try:
        fd = os.open(path, os.O_RDONLY | getattr(os, "O_NOFOLLOW", 0) | getattr(os, "O_CLOEXEC", 0))
    except OSError:
        return {}
    try:
        st = os.fstat(fd)
        if not stat.S_ISREG(st.st_mode) or not _private(st) or st.st_uid != _uid() or st.st_size > _CACHE_MAX_BYTES:
            return {}
        with os.fdopen(fd, "rb", closefd=False) as fh:
            data = json.loads(fh.read(_CACHE_MAX_BYTES + 1))
    except (OSError, ValueError, RecursionError):
        return {}
    finally:
        os.close(fd)
    return _valid(data) or {}


def _save(path, factors):
    """Write the cache file (0600, in a 0700 folder), atomically; a failure costs only speed."""
    folder = os.path.dirname(path)
    tmp = f"{path}.{os.getpid()}.tmp"
    try:
        os.makedirs(folder, mode=0o700, exist_ok=True)
        if not _trusted_folder(folder):
            return
        fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_NOFOLLOW", 0), 0o600)
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            json.dump({"code": _code_hash(), "factors": {k: list(v) for k, v in factors.items()}}, fh,
                      sort_keys=True)
        os.replace(tmp, path)
    except OSError:
        try:
            os.unlink(tmp)
        except OSError:
            pass


_known = {"path": None, "factors": None}


def _known_factors():
    """The cached factors for the current cache file (read once per process and file)."""
    path = cache_file()
    if _known["factors"] is None or _known["path"] != path:
        _known.update(path=path, factors=_load(path))
    return _known["factors"]


def unit_factor(unit_text, kind):
    """Multiplier and offset taking numbers in ``unit_text`` to SI numbers of ``kind``.

    Returns ``(scale, offset)`` with si = value * scale + offset (the offset is
    non-zero only for temperatures in degC or degF). Raises ValueError with a
    readable reason if the unit is longer than :data:`MAX_UNIT` characters,
    does not parse, or has the wrong dimension. Factors pint has given are
    kept in the cache file (:func:`cache_file`), so a later run need not
    import pint.
    """
    if len(unit_text) > MAX_UNIT:
        raise ValueError(f"a unit of {len(unit_text)} characters: at most {MAX_UNIT} are accepted")
    if not printable(unit_text):
        raise ValueError(f"unit {shown(unit_text)} holds a control character")
    key = f"{KINDS[kind][0]}|{unit_text}"  # the SI target and the text: all a factor depends on
    known = _known_factors()
    if key in known:
        return known[key]
    value = _unit_factor(unit_text, kind)
    path = _known["path"]
    if path is not None and len(known) < _CACHE_MAX_ENTRIES:
        known[key] = value
        _save(path, known)
    return value


def _unit_factor(unit_text, kind):
    si, example = KINDS[kind]
    try:
        unit = _unit(unit_text)
    except Exception:
        raise ValueError(f"unknown unit {shown(unit_text)} (expected a unit of {kind}, e.g. \"{example}\")") from None
    ureg = registry()
    target = ureg.parse_units(si.replace("^", "**"))
    if unit.dimensionality != target.dimensionality:
        raise ValueError(f"{shown(unit_text)} is not a unit of {kind} (e.g. \"{example}\")")
    try:
        zero = ureg.Quantity(0.0, unit).to(target).magnitude
        one = ureg.Quantity(1.0, unit).to(target).magnitude
    except Exception:  # an absurd exponent overflows
        zero = one = math.nan
    scale = one - zero
    if not (math.isfinite(scale) and math.isfinite(zero) and 1e-100 < abs(scale) < 1e100):
        raise ValueError(f"{shown(unit_text)} is too far from {si} to convert")
    # pint's conversion factors carry float noise (1e-6 as 9.999999999999999e-07);
    # 15 significant digits keep every exact decimal factor exact
    return float(f"{scale:.15g}"), float(f"{zero:.15g}")


def apply_factor(x, scale, offset=0.0):
    """x * scale + offset, dividing by 1/scale where that is a whole number.

    Dividing by an exact power of ten keeps "10 us" at 1e-5 s exactly rather
    than 9.999999999999999e-06. Works on floats and numpy arrays alike.
    """
    inv = 1.0 / scale
    if scale < 1.0 and abs(inv - round(inv)) <= 1e-12 * inv:
        return x / float(round(inv)) + offset
    return x * scale + offset


def parse_quantity(value, kind, *, key=None, file=None, row=None):
    """Convert a quantity string such as ``"1e17 cm^-3"`` to an SI float.

    Parameters
    ----------
    value : str
        A number followed by a unit.
    kind : str
        A key of :data:`KINDS`.
    key, file, row :
        Where the value came from, for the error message.

    Returns
    -------
    float
        The value in the SI unit of ``kind`` (eV for energies).

    Raises
    ------
    InputError
        A bare number, an unknown unit, a wrong dimension, a non-finite value.
    """
    def bad(msg):
        return InputError(msg, key=key, file=file, row=row)

    si, example = KINDS[kind]
    if isinstance(value, bool) or not isinstance(value, (str, int, float)):
        raise bad(f"expected a quantity string such as \"{example}\", got {type_name(value)}")
    if not isinstance(value, str):
        raise bad(f"a bare number needs a unit: write it as a string such as \"{example}\"")
    text = value.strip()
    if len(text) > MAX_QUANTITY:
        raise bad(f"a quantity of {len(text)} characters: at most {MAX_QUANTITY} are accepted "
                  f"(a number and a unit, e.g. \"{example}\")")
    m = _NUMBER.match(text)
    if not m:
        raise bad(f"{shown(value)} is not a number followed by a unit (e.g. \"{example}\")")
    unit_text = text[m.end():].strip()
    if not unit_text:
        raise bad(f"{shown(value)} has no unit (e.g. \"{example}\")")
    x = float(m.group())
    try:
        scale, offset = unit_factor(unit_text, kind)
    except ValueError as e:
        raise bad(str(e)) from None
    out = apply_factor(x, scale, offset)
    if not math.isfinite(out):
        raise bad(f"{shown(value)} is not a finite number")
    return out

"""Corners chosen by a figure that matters: which Monte Carlo sample stands for "VF at 1 mA, -3 sigma".

Corner specification
--------------------
``[SECTION=]FIGURE:POSITION``, e.g. ``VF@1mA:low``, ``slowleak=IR@-5V:p99``,
``C@-1V:+2.5sigma``:

``FIGURE``
    One of :mod:`modelgen.spread`'s figures (``VF@1mA``, ``IR@-5V``,
    ``C@-1V``, ``BV``, ``TT``) or ``IS`` (the card's saturation current).
``POSITION``
    ``low`` / ``high``: -3 / +3 sigma of the figure, i.e. the standard normal
    distribution's percentiles 0.135 / 99.865; ``typical``: the median;
    ``+Ksigma`` / ``-Ksigma`` (the sign is required, ``|K| <= 6``): the
    normal percentile 100 Phi(K); ``pP``: the P-th percentile, ``0 < P < 100``
    (``p5``, ``p99.5``). A sigma is a position in probability (the
    percentile a normally distributed figure would have there), not a
    multiple of the figure's standard deviation: a skewed figure such as a
    leakage current gets its own tail.
``SECTION``
    The ``.lib`` section's name (a letter, then letters, digits or
    underscores, at most 64 characters); default made from the figure and
    the position (``vf_1ma_low``, ``ir_m5v_p99``). Names are unique in one
    library (SPICE names ignore case).

How a corner is picked
----------------------
From the samples of :func:`modelgen.spread.run` the target is the figure's
percentile over the samples (``numpy.percentile``, linear interpolation).
The *band* holds the samples whose figure lies within :data:`BAND` of the
target in the figure's own normal score (the samples ranked between the
percentiles Phi(z - BAND) and Phi(z + BAND), z the target's normal score: a
band of about 0.05 sigma in the tails and the centre alike, whatever the
figure's scale), and at least the :data:`MIN_BAND` samples nearest the
target in rank. Among the band, the sample whose drawn inputs are most
probable is taken: the smallest sum of squared standardised deviations of
the varied keys from nominal (:func:`deviations`; in log for lognormal keys).

Why: of all input sets that give the figure its target value (the level
set of the figure), the most probable one is the natural representative:
it is the point nearest the nominal in standardised input space, the "most
probable point" of reliability analysis (Hasofer & Lind, J. Eng. Mech. Div.
ASCE 100, 111 (1974)); choosing corner parameter sets this way, rather than
pushing every input to its own extreme, is common practice in statistical
corner modelling. Here the level set is approximated by the band of real
samples, so the corner is a real draw whose card comes from the same
physics as every sample: its parameters stay physically consistent (no
parameter is moved on its own). The achieved value lies within the band,
not exactly on the target; each corner reports its achieved value and
percentile, and the inputs' standardised deviations, in its card's header.

The tails need samples: a target with fewer than :data:`MIN_TAIL` samples
beyond it is flagged (:attr:`Corner.sparse`); raise the sample count.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass

import numpy as np

from . import description, spread
from .errors import InputError, printable, shown

#: Sigma of the ``low`` and ``high`` positions.
LOW_HIGH_SIGMA = 3.0
#: Half-width of the band of candidate samples, in the figure's normal score (standard deviations).
BAND = 0.05
#: Fewest samples in a band (taken nearest the target in rank when the band holds fewer).
MIN_BAND = 10
#: Fewer samples than this beyond a tail target make the corner sparse (flagged, a warning on the command line).
MIN_TAIL = 10
#: Largest |K| of a ``+Ksigma`` position (Phi(-6) = 1e-9: beyond any sample count that runs in seconds).
MAX_SIGMA = 6.0
#: Longest specification accepted.
MAX_SPEC = 200
#: The card parameter accepted as a figure besides :data:`modelgen.spread.FIGURES`.
CARD_FIGURES = ("IS",)
SYNTAX = "[SECTION=]FIGURE:POSITION, e.g. VF@1mA:low, IR@-5V:p99, C@-1V:+2.5sigma, IS:typical"
POSITION_SYNTAX = "low, high, typical, +Ksigma, -Ksigma or pP (a percentile, e.g. p5, p99.5)"

_NUMBER = r"(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)"
_SIGMA = re.compile(rf"([+-]?)({_NUMBER})\s*sigma\Z")
_PERCENTILE = re.compile(rf"p({_NUMBER})\Z")


def _normal_cdf(z):
    from scipy.stats import norm

    return norm.cdf(z)


def _normal_ppf(p):
    from scipy.stats import norm

    return norm.ppf(p)


@dataclass(frozen=True)
class CornerSpec:
    """A parsed corner specification.

    Attributes
    ----------
    text : str
        As given.
    section : str
        The ``.lib`` section's name.
    figure : str
        ``"IS"`` or a figure's text as :func:`modelgen.spread.parse_figure` gives it (``"VF@1mA"``).
    position : str
        As written, lower case (``"low"``, ``"+2.5sigma"``, ``"p99.5"``).
    percentile : float
        The target percentile of the figure over the samples, in (0, 100).
    """

    text: str
    section: str
    figure: str
    position: str
    percentile: float

    def describe(self):
        """``"VF@1mA at -3 sigma (the 0.135th percentile)"``."""
        p = self.percentile
        z = float(_normal_ppf(p / 100))
        if p == 50:
            return f"{self.figure} at the median"
        return f"{self.figure} at {z:+.4g} sigma (the {ordinal(p)} percentile)"


def ordinal(x):
    """5 -> '5th', 1 -> '1st', 2.5 -> '2.5th', 0.135 -> '0.135th' (four significant digits)."""
    text = f"{x:.4g}"
    if text.isdigit() and not 10 <= int(text) % 100 <= 20:
        return text + {1: "st", 2: "nd", 3: "rd"}.get(int(text) % 10, "th")
    return text + "th"


def parse_figure(text, key="--corner"):
    """``"IS"`` or a spread figure's text -> its normalised text; one-line InputError under ``key``."""
    name = text.strip()
    if name.upper() in CARD_FIGURES:
        return name.upper()
    try:
        return spread.parse_figure(name).text
    except InputError as e:
        raise InputError(f"{e.message}, or IS", key=key) from None


def position_percentile(position):
    """A position (``low``, ``high``, ``typical``, ``+Ksigma``, ``pP``) -> percentile in (0, 100); ValueError."""
    pos = position.strip().lower()
    if pos in ("low", "high"):
        return float(100 * _normal_cdf(-LOW_HIGH_SIGMA if pos == "low" else LOW_HIGH_SIGMA))
    if pos == "typical":
        return 50.0
    m = _SIGMA.match(pos)
    if m:
        if not m.group(1):
            raise ValueError(f"write the sign: +{m.group(2)}sigma or -{m.group(2)}sigma")
        k = float(m.group(2))
        if k > MAX_SIGMA:
            raise ValueError(f"at most {MAX_SIGMA:g} sigma")
        return float(100 * _normal_cdf(k if m.group(1) == "+" else -k))
    m = _PERCENTILE.match(pos)
    if m:
        p = float(m.group(1))
        if not 0 < p < 100:
            raise ValueError("a percentile between 0 and 100, both excluded")
        return p
    raise ValueError(f"the position must be {POSITION_SYNTAX}")


def _slug(text):
    """A piece of a section name: lower case, - as m, + and . as p, other characters as _."""
    t = text.lower().replace("-", "m").replace("+", "p").replace(".", "p")
    return re.sub(r"[^a-z0-9]+", "_", t).strip("_")


def parse_spec(text):
    """``[SECTION=]FIGURE:POSITION`` -> :class:`CornerSpec`; one-line InputError (key ``--corner``) naming it."""
    def bad(message):
        return InputError(f"{shown(text)}: {message}; expected {SYNTAX}", key="--corner")

    if not isinstance(text, str):
        raise bad("expected a string")
    if len(text) > MAX_SPEC:
        raise bad(f"longer than {MAX_SPEC} characters")
    if not printable(text):
        raise bad("a control character or line break")
    section, eq, rest = text.partition("=")
    if not eq:
        section, rest = None, text
    else:
        section = section.strip()
        if not description.is_name(section):
            raise bad(f"the section name {shown(section)} must be {description.NAME_RULE}")
    figure_text, colon, position = rest.partition(":")
    if not colon or not position.strip():
        raise bad("no position after ':'")
    try:
        figure = parse_figure(figure_text)
    except InputError as e:
        raise bad(e.message.split("; expected")[0]) from None
    try:
        percentile = position_percentile(position)
    except ValueError as e:
        raise bad(str(e)) from None
    position = position.strip().lower()
    if section is None:
        section = f"{_slug(figure)}_{_slug(position)}"
        if not description.is_name(section):
            raise bad(f"the section name {shown(section)} made from it is not {description.NAME_RULE}: "
                      "give one, SECTION=...")
    return CornerSpec(text, section, figure, position, percentile)


def parse_specs(texts):
    """Several specifications; their sections must differ (ignoring case, as SPICE does)."""
    specs = [parse_spec(t) for t in texts]
    seen = {}
    for s in specs:
        other = seen.setdefault(s.section.lower(), s)
        if other is not s:
            raise InputError(f"{shown(s.text)}: section {s.section} is given twice (also by {shown(other.text)}); "
                             "name one of them: SECTION=FIGURE:POSITION", key="--corner")
    return specs


def figure_values(result, figure):
    """The values of ``figure`` (``"IS"`` or a spread figure's text) over the rows of ``result``, SI."""
    if figure in CARD_FIGURES:
        return np.asarray(result.params[figure], float)
    return spread.figure_values(result, spread.parse_figure(figure))


def figure_unit(figure):
    """The unit of ``figure`` (``"IS"`` or a spread figure's text): V, A, F or s."""
    return "A" if figure in CARD_FIGURES else spread.FIGURES[figure.split("@")[0]][1]


def deviations(nominal, tolerances, rows, kind="both"):
    """Standardised deviations from nominal of every key drawn, over the samples.

    For each key the ``[spread]`` table varies (those of ``kind``), the
    deviation of the drawn value from the nominal in units of its total
    standard deviation, as a standard normal score: ln(v/v0) / s' for a key
    whose entries are all lognormal (s' the root sum of squares of the
    entries' log sigmas), (v - v0) / s for all-normal entries, the normal
    score Phi^-1((u + 1)/2) of the uniform variable u = (v - v0) / (sqrt(3)
    s) for a single uniform entry. Exact for these (a key's global and local
    draws of one distribution add to one draw of the root-sum-square sigma,
    and the most probable split of a value between them has exactly this
    score). A key mixing distributions gets the first-order (v - v0) / s,
    s the root sum of squares of the entries' absolute sigmas.

    Parameters
    ----------
    nominal : Device
        The nominal device (length 1), SI.
    tolerances : modelgen.spread.Tolerances
    rows : Device
        The samples (:func:`modelgen.spread.sample`).
    kind : {"both", "global", "local"}
        Which entries were drawn.

    Returns
    -------
    (keys, z) :
        The keys (sorted) and the scores, shape (samples, keys); a key with
        zero sigma scores 0.
    """
    area = float(nominal.area[0])
    drawn = [t for t in tolerances.entries if kind in ("both", t.shared)]
    keys = sorted({t.key for t in drawn})
    n = len(rows)
    z = np.zeros((n, len(keys)))
    for j, key in enumerate(keys):  # over keys: each column is one vectorised expression over the samples
        entries = [t for t in drawn if t.key == key]
        v0 = float(spread.key_column(nominal, key)[0])
        v = np.asarray(spread.key_column(rows, key), float)
        sigmas = [spread.effective_sigma(tolerances, t, area) for t in entries]
        total = math.sqrt(sum(s * s for s in sigmas))
        if total == 0:
            continue
        kinds = {t.distribution for t in entries}
        if kinds == {"lognormal"}:
            z[:, j] = np.log(v / v0) / (total / abs(v0))
        elif kinds == {"uniform"} and len(entries) == 1:
            u = (v - v0) / (math.sqrt(3.0) * total)
            z[:, j] = _normal_ppf(np.clip((u + 1) / 2, 1e-16, 1 - 1e-16))
        else:
            z[:, j] = (v - v0) / total
    return keys, z


def correlation(tolerances, keys, area, kind="both"):
    """The correlation matrix of the scores of :func:`deviations` for ``keys``, from the [spread] table.

    Each key's score is its draws' sum over the sharings it has, in units of
    their root-sum-square sigma; two keys correlated with rho in a sharing
    both have share rho s_a s_b / (S_a S_b) of covariance, s the sharing's
    effective sigma and S the key's total (in log units for lognormal keys,
    where the score is ln(v/v0) / S). The identity without correlations.
    """
    drawn = [t for t in tolerances.entries if kind in ("both", t.shared)]
    index = {k: j for j, k in enumerate(keys)}
    sig = {}
    for t in drawn:
        sig[(t.key, t.shared)] = spread.effective_sigma(tolerances, t, area)
    total = {k: math.sqrt(sum(v * v for (kk, _), v in sig.items() if kk == k)) for k in keys}
    rho = np.eye(len(keys))
    for a, b, r in tolerances.correlations:
        if a not in index or b not in index or not total[a] or not total[b]:
            continue
        c = sum(r * sig[(a, sh)] * sig[(b, sh)] for sh in spread.SHARINGS if (a, sh) in sig and (b, sh) in sig)
        rho[index[a], index[b]] = rho[index[b], index[a]] = c / (total[a] * total[b])
    return rho


@dataclass(frozen=True)
class Corner:
    """A picked corner: the spec, the sample, and what it achieves.

    Attributes
    ----------
    spec : CornerSpec
    row : int
        The sample's index (0-based) in the Monte Carlo run.
    value, target : float
        The sample's figure value and the samples' percentile asked for (SI).
    percentile : float
        The percentile of the sample's value among the samples (the rank
        ``numpy.percentile`` would interpolate at: 100 r / (n - 1)).
    band : int
        Samples in the band it was chosen from.
    deviations : dict
        Key -> the sample's standardised deviation (:func:`deviations`).
    unit : str
    sparse : bool
        Fewer than :data:`MIN_TAIL` samples lie beyond the target.
    """

    spec: CornerSpec
    row: int
    value: float
    target: float
    percentile: float
    band: int
    deviations: dict
    unit: str
    sparse: bool

    def comment(self, samples, seed, kind):
        """The card's header text: what was asked, which sample, what it achieves, its inputs."""
        s = self.spec
        f = s.figure
        inputs = ", ".join(f"{k} {v:+.3f}" for k, v in self.deviations.items()) or "none varied"
        lines = [f"corner {s.section}: {s.describe()}, asked as {s.text.strip()}",
                 (f"sample {self.row + 1} of {samples} (seed {seed}, variation {kind}): {f} = {self.value:.6g} "
                  f"{self.unit}, the {ordinal(self.percentile)} percentile of the samples (target "
                  f"{self.target:.6g} {self.unit})"),
                 f"inputs in standard deviations from nominal: {inputs}",
                 (f"chosen: the most probable (least sum of squared deviations) of the {self.band} samples whose "
                  f"{f} lies nearest the target (within {BAND:g} sigma in normal score, at least {MIN_BAND}), a "
                  "real sample, so the card's parameters stay consistent")]
        if self.sparse:
            lines.append("few samples lie beyond this target: the corner is uncertain; draw more samples")
        return "\n".join(lines)

    def summary(self):
        """One line for the terminal."""
        s = self.spec
        text = (f"corner {s.section}: {s.figure} = {self.value:.6g} {self.unit} at the {ordinal(self.percentile)} "
                f"percentile (asked: {s.describe()}, {self.target:.6g} {self.unit}), sample {self.row + 1}")
        if self.sparse:
            text += "; few samples beyond the target: draw more (--samples)"
        return text


def pick(values, z, percentile, precision=None):
    """The sample standing for ``percentile`` of ``values``: (row, target, achieved percentile, band size).

    Parameters
    ----------
    values : array_like
        The figure over the samples (finite).
    z : numpy.ndarray
        The samples' standardised input deviations, shape (samples, keys).
    percentile : float
        In (0, 100).
    precision : numpy.ndarray, optional
        The inverse of the scores' correlation matrix (:func:`correlation`):
        the choice then takes the least z^T R^-1 z, the Mahalanobis form of
        the sum of squares (Mahalanobis 1936); default the identity.

    See the module text for the band and the choice in it. Vectorised: one
    sort of the values, one sum over the band's rows.
    """
    v = np.asarray(values, float)
    n = len(v)
    order = np.argsort(v, kind="stable")
    target = float(np.percentile(v, percentile))
    centre = percentile / 100 * (n - 1)
    zt = float(_normal_ppf(percentile / 100))
    lo = math.ceil((n - 1) * float(_normal_cdf(zt - BAND)))
    hi = math.floor((n - 1) * float(_normal_cdf(zt + BAND)))
    if hi - lo + 1 < MIN_BAND:
        size = min(MIN_BAND, n)
        lo = min(max(round(centre - (size - 1) / 2), 0), n - size)
        hi = lo + size - 1
    band = order[lo:hi + 1]
    zb = z[band]
    if not z.shape[1]:
        score = np.zeros(len(band))
    elif precision is None:
        score = np.einsum("ij,ij->i", zb, zb)
    else:
        score = np.einsum("ij,jk,ik->i", zb, precision, zb)
    k = int(np.argmin(score))
    return int(band[k]), target, 100.0 * (lo + k) / max(n - 1, 1), len(band)


def choose(device, tolerances, specs, n, seed, kind="both", *, fork=False):
    """Run the Monte Carlo once and pick every corner of ``specs``.

    Parameters
    ----------
    device : Device
        The nominal device (length 1).
    tolerances : modelgen.spread.Tolerances
    specs : list of CornerSpec
    n, seed, kind, fork :
        As for :func:`modelgen.spread.run`.

    Returns
    -------
    (Spread, list of Corner)

    Raises
    ------
    InputError
        As :func:`modelgen.spread.run`; and a figure not finite for some
        sample (naming the figure and the first such sample).
    """
    figures = list(dict.fromkeys(s.figure for s in specs if s.figure not in CARD_FIGURES))
    run = spread.run(device, tolerances, n, seed, figures, kind, fork=fork)
    keys, z = deviations(device, tolerances, run.rows, kind)
    precision = np.linalg.inv(correlation(tolerances, keys, float(device.area[0]), kind)) if keys else None
    out = []
    for s in specs:  # over corners; each pick is vectorised over the samples
        values = run.figures[s.figure] if s.figure in run.figures else np.asarray(run.params[s.figure], float)
        bad = ~np.isfinite(values)
        if bad.any():
            raise InputError(f"{s.figure} is not finite for sample {int(np.flatnonzero(bad)[0]) + 1} (and "
                             f"{int(bad.sum()) - 1} more) of {n}: no corner can be placed in it",
                             file=tolerances.file, key="--corner")
        row, target, achieved, band = pick(values, z, s.percentile, precision)
        beyond = min(s.percentile, 100 - s.percentile) / 100 * n
        out.append(Corner(s, row, float(values[row]), target, achieved, band,
                          {k: float(z[row, j]) for j, k in enumerate(keys)}, figure_unit(s.figure), beyond < MIN_TAIL))
    return run, out


def library(nominal, run, corners, dialect, *, source="", samples=None, form="model"):
    """The corner library: a ``typical`` section (the nominal card, unless a corner is named so), then one
    section per corner, each defining the nominal device's name.

    Parameters
    ----------
    nominal : modelgen.extraction.Result
        The nominal description derived (one device).
    run : modelgen.spread.Spread
        The Monte Carlo the corners were picked from.
    corners : list of Corner
    dialect : str
        A target with ``.lib`` sections.
    source : str
        The description's file name, for the header.
    form : {"model", "subckt"}
        ``subckt``: each section's card is a ``.subckt`` with the diode and
        the generation source fitted to that card's own physics
        (:func:`modelgen.leakage.closed_form`, to the default reverse bias
        of the fit window), so a corner chosen by leakage leaks in the
        simulator as its physics does (a level-1 card's reverse current is
        its IS alone).

    Raises
    ------
    ValueError
        A dialect without ``.lib`` sections (:func:`modelgen.cards.render`).
    """
    from . import cards

    name = nominal.device.name[0]
    n = len(run) if samples is None else samples
    parts = []
    if not any(c.spec.section.lower() == "typical" for c in corners):
        parts.append(cards.Part(nominal, rows=[0], names=[name], section="typical",
                                comments=["corner typical: the nominal description (no variation drawn)"]))
    parts += [cards.Part(run.derive([c.row]), rows=[0], names=[name], section=c.spec.section,
                         comments=[c.comment(n, run.seed, run.kind)]) for c in corners]
    sections = ", ".join(p.section for p in parts)
    extra = [(f"corners picked from {n} Monte Carlo samples of {source or name}'s [spread] table (seed "
              f"{run.seed}, variation {run.kind}); sections: {sections}"),
             f"every section defines {name}: choose a corner with .lib FILE SECTION"]
    if form == "subckt":
        from dataclasses import replace

        from . import extraction, leakage, targets

        equations = targets.get(dialect).equations
        generated = [leakage.closed_form(p.result, cards.card_columns(p.result, dialect)[1],
                                         extraction.LEAKAGE_BIAS, equations) for p in parts]
        for p in parts:  # the source carries the leakage those findings say a card cannot
            p.result.findings = [f for f in p.result.findings if f.kind not in ("leakage", "numeric-leakage")]
        parts = [replace(p, source=g.values()) for p, g in zip(parts, generated)]
        extra += list(leakage.header_lines(generated))
    return cards.render(parts, dialect, title=f"{name}: corner library", extra=extra)

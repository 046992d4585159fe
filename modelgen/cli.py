"""The modelgen command line. It parses arguments, calls the API and prints.

No physics here: everything goes through :mod:`modelgen.description`,
:mod:`modelgen.extraction` and :mod:`modelgen.cards`, the same API a script
uses.

Exit status: 0 success; 1 a card failed its simulator check; 2 bad input or
usage (one line on stderr, no output file written or touched); 3 no
simulator to check with; 4 a lot table was written with bad rows skipped
(--keep-going); 130, 143 a check interrupted by SIGINT, SIGTERM.
"""

from __future__ import annotations

import os
import sys

import click
from click.core import ParameterSource
import numpy as np

from . import __version__, cards, description, extraction, leakage, targets
from .constants import ZERO_CELSIUS
from .errors import InputError, one_line

EXIT_INPUT = 2
EXIT_MISMATCH = 1
EXIT_NO_SIMULATOR = 3
EXIT_SKIPPED = 4


class _Clock:
    """With MODELGEN_TIMING=1 in the environment, time per stage on stderr (for benchmarks)."""

    def __init__(self):
        import time

        self.now = time.perf_counter
        self.on = os.environ.get("MODELGEN_TIMING") == "1"
        self.stages = {}

    def call(self, stage, fn, *args, **kw):
        """``fn(*args, **kw)``, its time added to ``stage``."""
        t = self.now()
        try:
            return fn(*args, **kw)
        finally:
            self.stages[stage] = self.stages.get(stage, 0.0) + self.now() - t

    def timed(self, stage, iterable):
        """The items of ``iterable``, the time spent making them added to ``stage``."""
        it = iter(iterable)
        while True:
            t = self.now()
            try:
                item = next(it)
            except StopIteration:
                self.stages[stage] = self.stages.get(stage, 0.0) + self.now() - t
                return
            self.stages[stage] = self.stages.get(stage, 0.0) + self.now() - t
            yield item

    def report(self):
        if self.on:
            for stage, t in self.stages.items():
                click.echo(f"modelgen: timing: {stage} {t:.3f} s", err=True)


def _emit(text, output, inputs=()):
    """The text to ``output`` (atomically, never over an input), or to stdout when there is none."""
    if output:
        from .output import write_files

        try:
            write_files({output: text}, inputs=inputs, signals=True)
        except InputError as e:
            _fail(str(e))
    else:
        click.echo(text, nl=False)


class _Dialect(click.ParamType):
    """A target name, checked against the registry when the option is read (a registered one counts)."""

    name = "dialect"

    def get_metavar(self, param, ctx=None):
        return "[" + "|".join(sorted(targets.TARGETS)) + "]"

    def convert(self, value, param, ctx):
        if value in targets.TARGETS:
            return value
        self.fail(f"{value!r} is not one of: {', '.join(sorted(targets.TARGETS))}", param, ctx)


DIALECT = _Dialect()


def _check_output(output, inputs=()):
    """Refuse a bad output path (a folder, a missing folder, an input) before any work: one line, exit 2."""
    if output:
        from .output import check_targets

        try:
            check_targets({"output": output}, inputs)
        except InputError as e:
            _fail(str(e))


def _fail(message):
    click.echo(f"modelgen: error: {message}", err=True)
    sys.exit(EXIT_INPUT)


class _Commands(click.Group):
    """The command group; a usage error (an unknown option, a bad option value) is one line, exit 2.

    Click would print the usage text and a hint over three lines; modelgen
    reports every bad input the same way, as one ``modelgen: error:`` line
    naming what is wrong (``--help`` still gives the full text).
    """

    def main(self, args=None, prog_name=None, complete_var=None, standalone_mode=True, **extra):
        if not standalone_mode:
            return super().main(args, prog_name, complete_var, standalone_mode, **extra)
        try:
            super().main(args, prog_name, complete_var, standalone_mode=False, **extra)
        except click.exceptions.NoArgsIsHelpError as e:
            e.show()  # no command at all: the overview is the useful answer
            sys.exit(EXIT_INPUT)
        except click.UsageError as e:
            where = e.ctx.command_path if e.ctx is not None else "modelgen"
            click.echo(f"modelgen: error: {one_line(e.format_message())} (see '{where} --help')", err=True)
            sys.exit(EXIT_INPUT)
        except click.ClickException as e:
            click.echo(f"modelgen: error: {one_line(e.format_message())}", err=True)
            sys.exit(e.exit_code)
        except click.Abort:
            click.echo("modelgen: interrupted", err=True)
            sys.exit(130)
        sys.exit(0)


@click.group(cls=_Commands, context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="modelgen")
def main():
    """Turn the physics of a pn junction into SPICE diode model cards.

    A device description (a TOML file: doping, thickness, lifetime and area
    of each side) goes in; a .model card comes out, with IS, N, RS, CJO, VJ,
    M, FC, TT, BV, IBV, EG and XTI (and ISR, NR, IKF, sidewall terms where
    the dialect has them) derived from published silicon models and the
    exact finite-width solution of minority-carrier diffusion. 'corners'
    fits the temperature parameters across corners, 'lots' turns a table of
    devices into a library, 'check' runs cards in ngspice and gnucap and compares them with
    modelgen's evaluator of each simulator's own equations.

    A card is a physics estimate: check it against measured devices before
    design sign-off, and derate breakdown figures.

    Exit status: 0 on success, 1 when a card fails its simulator check, 2 on
    bad input or usage, 3 when no simulator is installed to check with, 4
    when a lot was written with bad rows skipped (--keep-going), 130 or 143
    when a check is interrupted (SIGINT, SIGTERM).
    """


def _window_options(f):
    """The fit-window options shared by card and solve (each overrides the description's [fit] key)."""
    f = click.option("--cv-range", nargs=2, metavar="LOW HIGH",
                     help="Bias range of the C-V fit, with units (e.g. \"-5 V\" \"0.3 V\"); default the "
                          "description's [fit] capacitance_low/high, else -5 V .. 0.3 V.")(f)
    f = click.option("--reverse-bias", metavar="V",
                     help="Reverse bias of the reverse I-V and the leakage, with its unit (e.g. \"-10 V\"); "
                          "default the description's [fit] reverse_bias, else -5 V.")(f)
    f = click.option("--current-range", nargs=2, metavar="LOW HIGH",
                     help="Forward current range of the fit, with units (e.g. \"1 nA\" \"100 mA\"); default "
                          "the description's [fit] current_low/high, else from the current at 4 kT/q forward "
                          "bias to 100 mA.")(f)
    return f


def _window(result, file, current_range, reverse_bias, cv_range):
    """The fit window of device 0: the description's [fit], then the command line's values over it."""
    import dataclasses

    from . import numeric
    from .units import parse_quantity

    given = {}
    try:  # the options' own text: an error names the option
        if current_range:
            given["current_low"], given["current_high"] = (parse_quantity(v, "current", key="--current-range")
                                                           for v in current_range)
        if reverse_bias is not None:
            given["reverse_bias"] = parse_quantity(reverse_bias, "voltage", key="--reverse-bias")
        if cv_range:
            given["capacitance_low"], given["capacitance_high"] = (parse_quantity(v, "voltage", key="--cv-range")
                                                                   for v in cv_range)
    except InputError as e:
        _fail(str(e))
    try:  # the description's [fit]: an error names its file and key
        window = numeric.Window.from_device(result.device, 0)
    except InputError as e:
        _fail(str(e.located(file=file)))
    try:
        return dataclasses.replace(window, **given) if given else window
    except InputError as e:
        _fail(f"{str(e)} (the fit window after the command line's options)")


def _numeric(result, file, dialect, window):
    """Sweep and fit device 0 with the solver; a solver failure is one line, exit 2."""
    from . import numeric
    from .physics.driftdiffusion import SolverError

    try:
        sw = numeric.sweep(result, 0, window)
        return sw, numeric.fit(result, 0, sw, dialect)
    except SolverError as e:
        _fail(f"{file}: the numerical solver failed: {e}")


@main.command("card")
@click.argument("device_files", metavar="DEVICE.toml...", nargs=-1, required=True,
                type=click.Path())
@click.option("-o", "--output", type=click.Path(),
              help="Write to this file (atomically: a temporary file, then a rename) instead of stdout.")
@click.option("--format", "fmt", type=click.Choice(["card", "json"]), default="card", show_default=True,
              help="card: SPICE .model text. json: parameters, derived quantities and warnings, all in SI units "
                   "(A, V, F, s, ohm, K, m; EG in eV); a list when several devices are given.")
@click.option("--dialect", type=DIALECT, default="spice3", show_default=True,
              help="Simulator dialect: spice3 (portable SPICE3 level-1 set), ngspice (adds ISR, NR, IKF and "
                   "sidewall terms), gnucap (gnucap's diode set).")
@click.option("--section", metavar="NAME",
              help="Put the cards in a named library section (.lib NAME ... .endl NAME); ngspice dialect only.")
@click.option("--physics", type=click.Choice(["closed", "numeric"]), default="closed", show_default=True,
              help="closed: the closed forms (fast, exact at low injection). numeric: solve each device with "
                   "the built-in drift-diffusion solver and fit IS, N, ISR, NR, IKF, RS, CJO, VJ, M and TT to it "
                   "over the fit window in the dialect's own equations (about 1-2 s a device). A diffused or "
                   "tabulated profile always takes the numeric path.")
@_window_options
@click.option("--form", type=click.Choice(["model", "subckt"]), default="model", show_default=True,
              help="model: a .model card. subckt: a .subckt holding the diode and a behavioural source for the "
                   "depletion region's reverse generation current, which no target's diode equations carry "
                   "(ngspice dialect; instantiate it as X1 anode cathode NAME).")
@click.option("--scalable", is_flag=True,
              help="Write one scalable card (ngspice dialect): IS, ISR, IKF and CJO per m^2, JSW and CJSW per m, "
                   "RS in ohm*m^2, for an instance D1 a k NAME area=<m^2> pj=<m> (ngspice unless --dialect is "
                   "given); the header says what scales "
                   "and where the scaling stops holding. With --form subckt: a subcircuit X1 a k NAME area=<m^2> "
                   "pj=<m> whose diode has the junction area area + pj*xj, so the recombination current and "
                   "the knee scale with the sidewall too (ngspice's ISR and IKF scale with area alone). One "
                   "description, closed-form physics.")
@click.option("-q", "--quiet", is_flag=True, help="Do not repeat the warnings on stderr.")
def card_command(device_files, output, fmt, dialect, section, physics, current_range, reverse_bias, cv_range,
                 form, scalable, quiet):
    """Derive the model card of each device described in DEVICE.toml.

    One file gives one card; several files give one library of cards (for
    .include), optionally inside a named .lib section (--section). The text
    goes to stdout unless -o is given. Warnings (a modelled lifetime,
    reach-through, degenerate doping, ...) are written into each card's
    header and the JSON, and repeated on stderr unless -q.

    With --physics numeric the card is fitted to the numerical solution over
    the fit window (the description's [fit] table, the options below, or
    from 4 kT/q forward bias to 100 mA, -5 V reverse, C-V -5 .. 0.3 V), and its header
    and JSON give the worst error per bias region, of the fitted and of the
    closed-form card.

    \b
    Examples:
      modelgen card examples/switching_diode.toml
      modelgen card examples/thin_epi_rectifier.toml --format json -o rect.json
      modelgen card examples/*.toml --dialect ngspice --section typical -o demo.lib
      modelgen card examples/graded_varactor.toml --dialect ngspice --physics numeric
      modelgen card examples/photodiode.toml --dialect ngspice --form subckt
      modelgen card examples/switching_diode.toml --scalable --form subckt -o scalable.lib
    """
    from . import structures

    _check_output(output, device_files)
    target = targets.get(dialect)
    if scalable:
        if click.get_current_context().get_parameter_source("dialect") is ParameterSource.DEFAULT:
            from .scalable import DIALECTS
            dialect = DIALECTS[0]  # the first dialect with a scalable form, not the portable default
        _scalable_card(device_files, output, dialect, section, physics, form, fmt, quiet)
        return
    if form == "subckt" and target.leakage_template is None:
        _fail(f"--form subckt: the {dialect} dialect has no behavioural source; use --dialect "
              + " or ".join(n for n, t in targets.TARGETS.items() if t.leakage_template))
    loaded = []
    for f in device_files:
        try:
            device, raw = description.load_with_inputs(f)
            loaded.append((extraction.derive(device), raw))
        except InputError as e:
            _fail(str(e.located(file=f)))
    # per device: the Result the card is rendered from, its overrides, header lines, source, JSON extra
    made = []
    for (r, raw), f in zip(loaded, device_files):
        numeric_path = physics == "numeric" or not bool(structures.closed_form_holds(r)[0])
        if numeric_path:
            from . import numeric

            sw, fitted = _numeric(r, f, dialect, _window(r, f, current_range, reverse_bias, cv_range))
            source = None
            if form == "subckt":
                try:
                    source = numeric.generation_source(sw, fitted)
                except ValueError as e:
                    _fail(f"{f}: {e}")
            made.append((numeric.card_result(r, 0, fitted), fitted.params, numeric.header_lines(sw, fitted),
                         source, "the numerical solver", numeric.fit_document(sw, fitted)))
        else:
            source = None
            if form == "subckt":
                window = _window(r, f, current_range, reverse_bias, cv_range)
                try:
                    source = leakage.closed_form(r, cards.card_columns(r, dialect)[1], window.reverse_bias,
                                                 target.equations)
                except ValueError as e:
                    _fail(f"{f}: {e}")
            made.append((r, None, (), source, "the closed forms", {"physics": "closed"}))
    if form == "subckt":  # the source carries the leakage those findings say a card cannot
        for r, *_ in made:
            r.findings = [f for f in r.findings if f.kind not in ("leakage", "numeric-leakage")]
    if len(made) == 1:
        extra = list(made[0][2])
    else:
        fitted_count = sum(bool(m[2]) for m in made)
        extra = [f"physics: {fitted_count} of {len(made)} cards fitted to the numerical (1-D drift-diffusion) "
                 "solver, each with a note giving its window and worst error per region; the others from the "
                 "closed forms"] if fitted_count else []
    sources = [m[3] for m in made]
    if form == "subckt":
        extra += leakage.header_lines(sources, against=" and ".join(dict.fromkeys(m[4] for m in made)))
    if fmt == "json":
        docs = []
        for (r, params, _, source, _, fitdoc) in made:
            doc = cards.row_document(r, 0)
            if params:
                doc["params"].update({k: v for k, v in params.items()})
                doc["params"] = cards.json_safe(doc["params"])
            doc["fit"] = cards.json_safe(fitdoc)
            if source is not None:
                doc["generation_source"] = cards.json_safe({k: float(v[0]) for k, v in source.values().items()}
                                                           | {"worst_error": float(source.worst_error[0])})
            docs.append(doc)
        text = cards.as_json_list(docs)
    elif len(made) == 1 and section is None:
        r, params, _, source, _, _ = made[0]
        text = cards.card(r, 0, dialect=dialect, inputs=loaded[0][1], overrides=params, extra=extra,
                          source=source and source.values())
    else:
        try:
            parts = [cards.Part(r, rows=[0], section=section, inputs=[raw] if raw else None, overrides=params,
                                source=source and source.values())
                     for (r, params, _, source, _, _), (_, raw) in zip(made, loaded)]
            text = cards.render(parts, dialect, title="diode model library", extra=extra)
        except ValueError as e:
            _fail(str(e))
    if not quiet:
        for (r, *_), f in zip(made, device_files):
            prefix = f"{f}: " if len(made) > 1 else ""
            for m in r.findings_for(0):
                if m.severity != "note":
                    click.echo(f"modelgen: {prefix}{m.severity}: {m.text}", err=True)
    _emit(text, output, device_files)


def _scalable_card(device_files, output, dialect, section, physics, form, fmt, quiet):
    """card --scalable: one description's per-area and per-perimeter card (modelgen.scalable)."""
    from . import scalable

    if len(device_files) != 1:
        _fail("--scalable takes one description (one scalable card)")
    for flag, bad in (("--section", section is not None), ("--physics numeric", physics != "closed"),
                      ("--format json", fmt != "card")):
        if bad:
            _fail(f"--scalable does not combine with {flag} yet")
    f = device_files[0]
    try:
        r = extraction.derive(description.load(f))
    except InputError as e:
        _fail(str(e.located(file=f)))
    try:
        text = (scalable.scalable_subckt if form == "subckt" else scalable.scalable_card)(r, 0, dialect)
    except ValueError as e:
        _fail(f"--scalable: {e}")
    if not quiet:
        for m in r.findings_for(0):
            if m.severity != "note":
                click.echo(f"modelgen: {m.severity}: {m.text}", err=True)
    _emit(text, output, device_files)


@main.command("spread")
@click.argument("device_file", metavar="DEVICE.toml", type=click.Path())
@click.option("--samples", type=click.IntRange(min=2, max=10_000_000), default=10_000, show_default=True,
              help="Monte Carlo samples.")
@click.option("--seed", type=click.IntRange(min=0), default=1, show_default=True,
              help="Seed of the random stream (numpy PCG64): the same seed gives the same output, byte for byte.")
@click.option("--figure", "figures", multiple=True, metavar="SPEC",
              help="A figure to give statistics of: VF@1mA (forward voltage at a current), IR@-5V (reverse "
                   "leakage at a bias), C@-1V (capacitance at a bias), BV, TT. Repeat for more; default all "
                   "five at those biases.")
@click.option("--kind", type=click.Choice(["both", "global", "local"]), default="both", show_default=True,
              help="Which variation of the [spread] table to draw: lot to lot (global), device to device "
                   "(local), or both.")
@click.option("--format", "fmt", type=click.Choice(["table", "json"]), default="table", show_default=True,
              help="table: mean, standard deviation and percentiles per card parameter and figure. json: the "
                   "same with p1, p99, min, max and units, all SI.")
@click.option("-o", "--output", type=click.Path(), help="Write to this file (atomically) instead of stdout.")
@click.option("--corner", "corner_specs", multiple=True, metavar="SPEC",
              help="Write a corner library instead of the statistics: one .lib section per corner, SPEC "
                   "[SECTION=]FIGURE:POSITION, FIGURE one of the figures or IS, POSITION low or high (-3 / +3 "
                   "sigma), typical (median), +Ksigma / -Ksigma, or pP (a percentile, p5, p99.5); e.g. "
                   "VF@1mA:low. Each corner is the most probable sample near that percentile of the figure; a "
                   "'typical' section holds the nominal card. Repeat for more.")
@click.option("--dialect", type=DIALECT, default=None,
              help="Dialect of the corner library's cards (with --corner; one with .lib sections; default ngspice).")
@click.option("--form", type=click.Choice(["model", "subckt"]), default=None,
              help="With --corner: model (default) writes .model cards; subckt writes each corner as a .subckt "
                   "with the diode and a behavioural source for its own reverse generation current (as card "
                   "--form subckt), so a corner chosen by leakage leaks in the simulator as its physics does.")
@click.option("--statistical", is_flag=True,
              help="Write a statistical library for ngspice's own Monte Carlo instead: one process variable per "
                   "[spread] entry (global: one draw per run; local: per instance), the card's parameters as "
                   "expressions of them, the linearisation error over --samples samples in its header "
                   "(--format json: that document instead).")
def spread_command(device_file, samples, seed, figures, kind, fmt, output, corner_specs, dialect, form,
                   statistical):
    """Monte Carlo of DEVICE.toml's [spread] table through the closed-form physics.

    Draws the keys the [spread] table names (normal, lognormal or uniform;
    global lot-to-lot or local device-to-device variation, local sigma
    scaled with 1/sqrt(area)), derives the samples vectorised (in chunks;
    two processes from 100,000 samples, with the same numbers as one),
    and prints the statistics of each card parameter and of the figures
    asked for. A draw outside a key's physical range is an error, not
    clipped: use a lognormal distribution or a smaller sigma.

    With --corner it writes a corner library instead (one .lib section per
    corner, each the most probable sample at that percentile of a figure);
    with --statistical, a library for ngspice's own Monte Carlo (the card's
    parameters as expressions of the [spread] table's process variables).

    \b
    Examples:
      modelgen spread DEVICE.toml --samples 100000 --seed 7
      modelgen spread DEVICE.toml --figure VF@1mA --figure IR@-5V --format json -o spread.json
      modelgen spread DEVICE.toml --corner VF@1mA:low --corner VF@1mA:high --corner IR@-5V:high -o corners.lib
      modelgen spread DEVICE.toml --statistical -o statistical.lib
    """
    from . import spread

    _check_output(output, (device_file,))
    if statistical:
        from . import statistical as stat

        if corner_specs:
            _fail("--statistical and --corner write different libraries: give one of them")
        if figures or form:
            _fail("--figure and --form do not apply to --statistical (its header states VF@1mA and C@-1V)")
        dialect = dialect or "ngspice"
        try:
            device, tolerances, _ = spread.load(device_file)
            made = stat.library(device, tolerances, dialect=dialect, kind=kind, samples=samples, seed=seed,
                                source=device_file)
        except InputError as e:
            _fail(str(e.located(file=device_file)) if not e.file and e.key != "--dialect" else str(e))
        _emit(cards.dumps(made.document) if fmt == "json" else made.text, output, (device_file,))
        return
    if corner_specs or dialect or form:
        return _spread_corners(device_file, corner_specs, samples, seed, kind, dialect, fmt, figures, output,
                               form or "model")
    try:
        device, tolerances, _ = spread.load(device_file)
        chosen = tuple(figures) or ("VF@1mA", "IR@-5V", "C@-1V", "BV", "TT")
        for f in chosen:
            spread.parse_figure(f)
        result = spread.run(device, tolerances, samples, seed, chosen, kind, fork=True)
    except InputError as e:
        _fail(str(e.located(file=device_file)) if not e.file else str(e))
    stats = result.statistics()
    if fmt == "json":
        text = cards.dumps(stats)
    else:
        rows = [("quantity", "unit", "mean", "std", "p5", "p50", "p95")]
        for group in ("parameters", "figures"):
            for k, v in stats[group].items():
                rows.append((k, v["unit"], *(f"{v[c]:.5g}" for c in ("mean", "std", "p5", "p50", "p95"))))
        widths = [max(len(r[j]) for r in rows) for j in range(len(rows[0]))]
        text = (f"{stats['samples']} samples, seed {stats['seed']}, variation {stats['kind']}\n"
                + "\n".join("  ".join(c.ljust(widths[j]) for j, c in enumerate(r)).rstrip() for r in rows) + "\n")
    _emit(text, output, (device_file,))


def _spread_corners(device_file, specs, samples, seed, kind, dialect, fmt, figures, output, form):
    """``spread --corner``: the corner library to ``output`` (or stdout), one summary line per corner on stderr."""
    from . import corner_pick, spread

    if not specs:
        _fail("--dialect and --form apply to the corner library: give --corner SPEC")
    if figures or fmt != "table":
        _fail("--figure and --format apply to the statistics; with --corner the output is a .lib library")
    dialect = dialect or "ngspice"
    if form == "subckt" and targets.get(dialect).leakage_template is None:
        _fail(f"--form subckt: the {dialect} dialect has no behavioural source; use --dialect ngspice")
    if not targets.get(dialect).sections:
        _fail(f"--corner: the {dialect} dialect has no .lib sections; a corner library needs a dialect with .lib "
              "sections (ngspice)")
    try:
        chosen = corner_pick.parse_specs(specs)
    except InputError as e:
        _fail(str(e))
    try:
        device, tolerances, _ = spread.load(device_file)
        nominal = extraction.derive(device)
        run, corners = corner_pick.choose(device, tolerances, chosen, samples, seed, kind, fork=True)
    except InputError as e:
        _fail(str(e.located(file=device_file)) if not e.file else str(e))
    try:
        text = corner_pick.library(nominal, run, corners, dialect, source=os.path.basename(device_file), form=form)
    except ValueError as e:
        _fail(f"--form subckt: {e}")
    click.echo(f"modelgen: {len(run)} samples, seed {seed}, variation {kind}", err=True)
    for c in corners:
        click.echo(f"modelgen: {c.summary()}", err=True)
    _emit(text, output, (device_file,))


@main.command("solve")
@click.argument("device_file", metavar="DEVICE.toml", type=click.Path())
@click.option("--dialect", type=DIALECT, default="ngspice", show_default=True,
              help="Whose diode equations evaluate the cards (and which parameters the fitted card may use).")
@_window_options
@click.option("--format", "fmt", type=click.Choice(["table", "json"]), default="table", show_default=True,
              help="table: bias, region, physics, closed-form card and fitted card currents with their errors. "
                   "json: {forward, reverse, capacitance, components, card_error, ...}, all SI.")
@click.option("-o", "--output", type=click.Path(), help="Write to this file (atomically) instead of stdout.")
@click.option("-q", "--quiet", is_flag=True, help="Do not repeat the warnings on stderr.")
def solve_command(device_file, dialect, current_range, reverse_bias, cv_range, fmt, output, quiet):
    """Solve DEVICE.toml numerically and compare the closed-form and the fitted card with it.

    Runs the built-in drift-diffusion solver over the fit window (forward
    I-V up to the top current, reverse I-V, C-V), fits a card to it as
    `card --physics numeric` does, and prints for each bias inside the
    window the physics' current, the closed-form card's and the fitted
    card's (in the dialect's simulator equations) and their errors, then the
    worst error per region. No card is written.

    \b
    Examples:
      modelgen solve examples/switching_diode.toml
      modelgen solve examples/photodiode.toml --reverse-bias "-10 V" --format json -o pd.json
    """
    from . import numeric

    _check_output(output, (device_file,))
    try:
        r = extraction.derive(description.load(device_file))
    except InputError as e:
        _fail(str(e.located(file=device_file)))
    sw, fitted = _numeric(r, device_file, dialect, _window(r, device_file, current_range, reverse_bias, cv_range))
    if fmt == "json":
        text = cards.dumps(numeric.solve_document(r.device.name[0], sw, fitted))
    else:
        text = numeric.solve_table(sw, fitted)
    if not quiet:
        for m in [*r.findings_for(0), *fitted.findings]:
            if m.severity != "note":
                click.echo(f"modelgen: {m.severity}: {m.text}", err=True)
    _emit(text, output, (device_file,))


def _current_option(text, key):
    """A current given on the command line, with its unit."""
    if text is None:
        return None
    from .units import parse_quantity

    try:
        return parse_quantity(text, "current", key=key)
    except InputError as e:
        _fail(str(e))


def _group_name(base, group):
    """The model name of a group's row: the description's name and the group, as a SPICE identifier."""
    import re

    return description.check_name(f"{base}_{re.sub(r'[^A-Za-z0-9_]', '_', group)}"[:64], key="--by")


def _calibrated_table(base, raw, results):
    """The lot table of a --by calibration: one row per group, the description's keys as written, the
    fitted ones (with their standard errors) in SI numbers with units in the header."""
    import csv
    import io

    from .calibration import FITTABLE
    from .units import KINDS

    fitted = list(dict.fromkeys(k for _, cal in results for k in cal.fitted))
    replaced = set(fitted)
    for k in fitted:  # a fitted doping replaces a resistivity, a fitted lifetime a diffusion length
        if k.endswith(".doping"):
            replaced.add(k[0] + ".resistivity")
        if k.endswith(".lifetime"):
            replaced.add(k[0] + ".diffusion_length")
    if str(raw.get("material", "silicon")).lower() != "silicon":
        _fail("--by: the lot table lots reads takes the default material only")
    kept = [k for k in raw if k not in replaced and k not in ("name", "material")]
    units = {k: f" [{KINDS[FITTABLE[k]][0]}]" if FITTABLE[k] in KINDS else "" for k in fitted}
    out = io.StringIO()
    w = csv.writer(out, lineterminator="\n")
    w.writerow(["name", *kept, *[h for k in fitted for h in (f"{k}{units[k]}", f"{k}.stderr{units[k]}")]])
    for group, cal in results:
        row = [_group_name(base, group)] + [raw[k] if isinstance(raw[k], str) else repr(raw[k]) for k in kept]
        for k in fitted:
            f = cal.fitted.get(k)
            row += [repr(f["value"]), repr(f["stderr"])] if f else ["", ""]
        w.writerow(row)
    return out.getvalue()


@main.command("calibrate")
@click.argument("device_file", metavar="DEVICE.toml", type=click.Path())
@click.option("--iv", "iv_file", type=click.Path(), metavar="IV.csv",
              help="Measured I-V: columns V and I with units in brackets (\"V [V]\", \"I [A]\"), optionally T, "
                   "area, perimeter and a group column.")
@click.option("--cv", "cv_file", type=click.Path(), metavar="CV.csv",
              help="Measured C-V: columns V and C with units in brackets (\"V [V]\", \"C [pF]\").")
@click.option("--free", metavar="KEYS",
              help="Comma-separated description keys to fit (e.g. n.doping,n.lifetime,contact_resistance); the "
                   "others are held. Default: what the data can determine (the light side's doping from C-V; "
                   "the dominant lifetime, the recombination lifetime and the contact resistance from I-V "
                   "where the data show them).")
@click.option("--by", "by", metavar="COLUMN",
              help="Calibrate each group of this column (e.g. wafer) and write a lot table, one row per group, "
                   "that modelgen lots reads.")
@click.option("--floor", metavar="CURRENT", help="The instrument's noise floor (e.g. \"1 pA\"); default found.")
@click.option("--compliance", metavar="CURRENT",
              help="The instrument's current compliance (e.g. \"10 mA\"); default found.")
@click.option("--physics", type=click.Choice(["closed", "numeric"]), default="closed", show_default=True,
              help="closed: the closed forms are the model. numeric: the closed forms corrected, round by round, "
                   "by the numerical solver at the fitted values, so that the solver reproduces the data (for "
                   "data at one temperature and geometry; several seconds).")
@click.option("--format", "fmt", type=click.Choice(["toml", "json"]), default="toml", show_default=True,
              help="toml: the calibrated description (or with --by a CSV lot table). json: fitted values with "
                   "standard errors, correlation and residuals per region, all SI.")
@click.option("-o", "--output", type=click.Path(), help="Write to this file (atomically) instead of stdout.")
@click.option("-q", "--quiet", is_flag=True, help="Do not print the fit summary and warnings on stderr.")
def calibrate_command(device_file, iv_file, cv_file, free, by, floor, compliance, physics, fmt, output, quiet):
    """Fit a description's physics to measured I-V and C-V.

    Starts from DEVICE.toml, fits the keys --free names (or what the data can
    determine) by weighted least squares on log current and on capacitance
    with the closed forms as the model, and writes the calibrated description
    that every other command takes: the fitted values with their standard
    errors as comments, the measurement files and the residuals in its header.
    Points at the instrument's compliance or noise floor are left out with a
    note. The fit summary, the correlations and a warning where two
    parameters trade off go to stderr.

    A calibration is a physics estimate from these measurements: confirm it
    on further devices before sign-off.

    \b
    Examples:
      modelgen calibrate examples/measured/testchip.toml --iv examples/measured/testchip_iv.csv \\
          --cv examples/measured/testchip_cv.csv -o calibrated.toml
      modelgen calibrate examples/measured/testchip.toml --iv examples/measured/lot_iv.csv \\
          --cv examples/measured/lot_cv.csv --by wafer -o lot.csv
    """
    from . import calibration, measurements
    from .textio import read_text

    if iv_file is None and cv_file is None:
        _fail("give measured data: --iv IV.csv and/or --cv CV.csv")
    inputs = tuple(f for f in (device_file, iv_file, cv_file) if f)
    _check_output(output, inputs)
    floor_a, compliance_a = _current_option(floor, "--floor"), _current_option(compliance, "--compliance")
    try:
        device, raw = description.load_with_inputs(device_file)
        original = read_text(device_file, "description", description.DESCRIPTION_LIMIT)
        iv = measurements.read_curve(iv_file, "iv", group=by, floor=floor_a, compliance=compliance_a) \
            if iv_file else None
        cv = measurements.read_curve(cv_file, "cv", group=by) if cv_file else None
    except InputError as e:
        _fail(str(e))
    keys = [k.strip() for k in free.split(",") if k.strip()] if free else None
    notes = [*(iv.notes if iv else ()), *(cv.notes if cv else ())]
    if by:
        groups = sorted(set((iv.group if iv else [])) | set((cv.group if cv else [])))
        results = []
        for g in groups:
            try:
                cal = calibration.calibrate(device, iv.take(iv.group == g) if iv else None,
                                            cv.take(cv.group == g) if cv else None, keys,
                                            solver=physics == "numeric")
            except InputError as e:
                _fail(f"{by} {g}: {e}")
            results.append((g, cal))
        if fmt == "json":
            text = cards.dumps({"by": by, "groups": {g: cal.document() for g, cal in results}, "notes": notes})
        else:
            text = _calibrated_table(device.name[0], raw, results)
    else:
        try:
            cal = calibration.calibrate(device, iv, cv, keys, solver=physics == "numeric")
        except InputError as e:
            _fail(str(e))
        results = [("", cal)]
        text = cards.dumps({**cal.document(), "measurement_notes": notes}) if fmt == "json" \
            else cal.description_text(original, [f for f in (iv_file, cv_file) if f])
    if not quiet:
        for m in notes:
            click.echo(f"modelgen: note: {m}", err=True)
        for g, cal in results:
            head = f"{by} {g}: " if by else ""
            for k, f in cal.fitted.items():
                rel = f["stderr"] / f["value"] if f["value"] else float("inf")
                click.echo(f"modelgen: {head}{k} = {f['value']:.4g} +- {f['stderr']:.2g} (SI; {100 * rel:.2g} %)",
                           err=True)
            click.echo(f"modelgen: {head}residuals (model against measured): " + "; ".join(
                f"{k} rms {100 * v['rms']:.2g} % worst {100 * v['worst']:+.2g} % ({v['points']} points)"
                for k, v in cal.residuals.items() if "points" in v), err=True)
            for w in cal.warnings:
                click.echo(f"modelgen: {head}warning: {w}", err=True)
    _emit(text, output, inputs)


@main.command("check")
@click.argument("card_file", metavar="FILE")
@click.option("--simulator", type=click.Choice([*targets.SIMULATORS, "all"]), default=None,
              help="Run every card in this simulator ('all': every one installed). Default: each card in "
                   "the simulators its dialect (from the header modelgen writes) is meant for; a card "
                   "without that header in every one installed.")
@click.option("--temperature", type=float, metavar="DEGC",
              help="Circuit temperature [degC] for simulator and evaluator alike (default each card's TNOM).")
@click.option("--sample", "sample_size", type=click.IntRange(min=1), metavar="N",
              help="Check only N cards of a big library, spread evenly through it (every (cards/N)-th, "
                   "the same on every run).")
@click.option("--timeout", type=click.FloatRange(min=0, min_open=True, max=86400), default=120.0,
              show_default=True, metavar="SECONDS",
              help="Time each simulator run may take (one chunk of cards: "
                   + ", ".join(f"up to {sim.check_chunk} in {name}" for name, sim in targets.SIMULATORS.items())
                   + ").")
def check_command(card_file, simulator, temperature, sample_size, timeout):
    """Run the diode cards of FILE in ngspice and/or gnucap and compare with modelgen's evaluator.

    For each card the simulator computes the DC current from 0.2 V to 0.8 V
    (50 mV steps) and the small-signal capacitance at 0, -1 and -5 V; the
    evaluator computes the same points from the same parameters with that
    simulator's own equations and constants. A card passes when every point
    agrees within 0.1 % and the simulator printed no warning about it. A pass
    means the simulator reads the card as modelgen means it; it does not say
    the card matches a real device (that needs measurements).

    The simulators see only what modelgen rebuilds from the parsed numbers,
    never a line of FILE (comments included).

    \b
    Exit status:
      0  every card checked loads cleanly and agrees
      1  a mismatch, a simulator warning, or a simulator that failed or timed out
      2  FILE is unreadable, holds no diode card, or a card is malformed or implausible
      3  none of the simulators needed is installed
      130, 143  interrupted (SIGINT, SIGTERM); its simulator runs are killed too
    """
    import signal
    import threading
    import time

    from .cards import reader
    from .spice import check
    from .spice.process import SimulatorError

    if temperature is not None and not np.isfinite(temperature):
        _fail(f"--temperature: {temperature!r} is not a finite temperature")
    show = sys.stderr.isatty()
    started = time.monotonic()

    def progress(done, total):
        if show and time.monotonic() - started > 2.0:
            click.echo(f"\rmodelgen: check: {done} of {total} card runs done", err=True, nl=done >= total)

    def stop(signum, frame):
        raise KeyboardInterrupt(signum)

    # SIGTERM becomes an exception, so the simulator runs in progress are killed on the way out
    # (a signal handler can only be set from the main thread; elsewhere the default stays)
    main_thread = threading.current_thread() is threading.main_thread()
    previous = signal.signal(signal.SIGTERM, stop) if main_thread else None
    try:
        text = reader.read_limited(card_file)
        report = check.check_report(text, None if simulator is None else
                                    (list(check.PACKAGES) if simulator == "all" else [simulator]),
                                    file=card_file, temperature_c=temperature, sample_size=sample_size,
                                    timeout=timeout, progress=progress)
    except InputError as e:
        _fail(str(e.located(file=card_file)))
    except SimulatorError as e:
        click.echo(f"modelgen: error: {card_file}: {e}", err=True)
        sys.exit(EXIT_MISMATCH)
    except KeyboardInterrupt as e:
        signum = e.args[0] if e.args and isinstance(e.args[0], int) else signal.SIGINT
        click.echo("modelgen: check interrupted; its simulator runs were stopped", err=True)
        sys.exit(128 + int(signum))
    finally:
        if main_thread:
            signal.signal(signal.SIGTERM, previous)
    for s, n in report.not_installed.items():
        click.echo(f"modelgen: {s} is not installed (Debian package: {check.PACKAGES.get(s, s)}); "
                   f"{n} card{'s' if n != 1 else ''} not checked with it", err=True)
    outcomes = report.outcomes
    if not outcomes:
        click.echo("modelgen: no simulator to check with", err=True)
        sys.exit(EXIT_NO_SIMULATOR)
    click.echo(check.table(outcomes), nl=False)
    bad = [o for o in outcomes if not o.ok]
    used = [s for s in check.PACKAGES if any(o.simulator == s for o in outcomes)]
    if report.checked < report.cards:
        click.echo(f"sample: {report.checked} of {report.cards} cards checked (one in every "
                   f"{round(report.cards / report.checked, 1):g}, spread evenly through the file)")
    at = "each card's TNOM" if temperature is None else f"{temperature:g} degC"
    click.echo(f"{len(outcomes) - len(bad)} of {len(outcomes)} checks passed: {', '.join(used)} against "
               f"modelgen's evaluator of its equations for the same card, at {at} "
               f"(tolerance {check.TOLERANCE:.1%})")
    sys.exit(EXIT_MISMATCH if bad else 0)


def _temperature_c(text, key):
    """A corner temperature: a bare number is degC; otherwise a quantity with its unit."""
    from .units import parse_quantity

    try:
        return float(text)
    except ValueError:
        pass
    try:
        return parse_quantity(text, "temperature", key=key) - ZERO_CELSIUS
    except InputError as e:
        _fail(str(e))


@main.command("corners")
@click.argument("device_file", metavar="DEVICE.toml", type=click.Path())
@click.option("--at", "at", multiple=True, metavar="TEMP",
              help="A corner temperature; degC unless a unit is given (\"300 K\"). Repeat for more. With a "
                   "range, the corners are the union of both.")
@click.option("--from", "t_from", metavar="TEMP", help="First temperature of a range (with --to and --step).")
@click.option("--to", "t_to", metavar="TEMP",
              help="Last temperature of a range, included when a step lands on it (within 1e-9 K).")
@click.option("--step", "t_step", type=float, metavar="K", help="Step of the range [K].")
@click.option("--per-corner", is_flag=True,
              help="One card per temperature, TNOM the corner, in one library: in a .lib section per corner "
                   "(TM40, T27, T125 ...) with the device's own model name where the dialect has sections, "
                   "else with the name suffixed _M40, _27, _125 ... No fit.")
@click.option("--dialect", type=DIALECT, default="spice3", show_default=True,
              help="Simulator dialect; ngspice also fits TCV (BV) and TRS1/TRS2 (RS), which spice3 and gnucap "
                   "cards cannot carry.")
@click.option("--format", "fmt", type=click.Choice(["card", "json"]), default="card", show_default=True,
              help="card: SPICE text. json: every corner's parameters and derived quantities (SI units), and "
                   "the fit with its worst errors in percent.")
@click.option("--max-error", type=click.FloatRange(0, None, min_open=True), default=5.0, show_default=True,
              metavar="PERCENT", help="Warn when the fitted card misses the physics by more than this at a corner.")
@click.option("-o", "--output", type=click.Path(),
              help="Write to this file (atomically) instead of stdout.")
@click.option("-q", "--quiet", is_flag=True, help="Print only errors on stderr.")
def corners_command(device_file, at, t_from, t_to, t_step, per_corner, dialect, fmt, max_error, output, quiet):
    """Cards for temperature corners: one card that scales right, or one per corner.

    The physics is evaluated at each corner (given values such as a lifetime
    or a resistivity hold at the description's nominal temperature; set
    lifetime_temperature_exponent to scale lifetimes). By default one card at
    the nominal temperature is written, with EG and XTI (ngspice: also TCV,
    TRS1, TRS2) least-squares fitted so that the simulator's own temperature
    scaling reproduces the physics at every corner; this needs at least two
    corners besides the nominal temperature. The worst relative error of IS,
    ISR, CJO, BV and RS over the corners is printed and written into the
    card header. With no temperatures given the corners are -40, 27, 85 and
    125 degC.

    \b
    Examples:
      modelgen corners examples/switching_diode.toml --at -40 --at 27 --at 125
      modelgen corners examples/photodiode.toml --from -40 --to 125 --step 15 --dialect ngspice
      modelgen corners examples/switching_diode.toml --per-corner --dialect ngspice -o corners.lib
    """
    from . import corners

    _check_output(output, [device_file])
    at_c = [_temperature_c(a, "--at") for a in at]
    start = _temperature_c(t_from, "--from") if t_from is not None else None
    stop = _temperature_c(t_to, "--to") if t_to is not None else None
    try:
        temps = corners.corner_temperatures(at_c, start, stop, t_step)
        device, raw = description.load_with_inputs(device_file)
        r = corners.run(device, temps, dialect, per_corner=per_corner, max_error=max_error / 100)
        if fmt == "json":
            text = cards.dumps(corners.document(r))
        else:
            text = corners.card_text(r, inputs=raw)
    except InputError as e:
        _fail(str(e.located(file=device_file) if e.key != "--at" else e))
    if not quiet:
        for line in r.fit_lines() + r.warnings():
            click.echo(f"modelgen: {line.strip()}", err=True)
    _emit(text, output, [device_file])


@main.command("lots")
@click.argument("table_file", metavar="TABLE", type=click.Path())
@click.option("-o", "--output", required=True, type=click.Path(),
              help="The library file to write (atomically, with the summary files).")
@click.option("--set", "sets", multiple=True, metavar="KEY=VALUE",
              help="A constant column, e.g. --set temperature=\"27 degC\" --set n.lifetime=\"2 us\".")
@click.option("--name", "name_pattern", metavar="PATTERN",
              help="Model names when the table has no name column: {row} is the line number, {index} the "
                   "0-based row, e.g. \"DLOT{row:05d}\".")
@click.option("--dialect", type=DIALECT, default="spice3", show_default=True,
              help="Simulator dialect of the cards.")
@click.option("--keep-going", is_flag=True,
              help="Write the good rows and list the bad ones (exit status 4) instead of writing nothing.")
@click.option("--summary", "summary_prefix", metavar="PREFIX",
              help="Summary files PREFIX.csv and PREFIX.json; default: the library's name without its "
                   "extension, plus .summary.")
@click.option("--corners", "corner_spec", metavar="SPEC",
              help="Add three corner cards in .lib sections (ngspice dialect), real rows at three percentiles of a "
                   "figure: [FIGURE:]SPEC, SPEC three percentiles (\"5,50,95\") or \"Ksigma\" (-K, 0, +K sigma), "
                   "FIGURE IS (the default; sections slow, typical, fast) or VF@1mA, IR@-5V, C@-1V, BV, TT "
                   "(sections low, typical, high), e.g. \"VF@1mA:3sigma\". The per-row cards then go in section "
                   "'lot'.")
@click.option("--corner-name", default="DCORNER", show_default=True,
              help="Model name of the corner cards (the same in each corner section).")
@click.option("-q", "--quiet", is_flag=True, help="No progress bar or summary line on stderr.")
def lots_command(table_file, output, sets, name_pattern, dialect, keep_going, summary_prefix, corner_spec,
                 corner_name, quiet):
    """Turn a table of devices (one per row) into one model library.

    TABLE is a CSV file whose header names the description's keys flattened
    with dots (p.doping, n.lifetime, area, material.ni, ...), each with an
    optional unit in brackets for the whole column ("p.doping [cm^-3]");
    a column without a unit holds quantity strings ("1e17 cm^-3"). A .toml
    file with [[device]] tables or a .json list of descriptions works too.
    The physics runs over the whole table at once.

    Besides the library, a summary table (CSV, one row per device, every
    parameter and the key derived quantities) and a JSON file (the same
    columns, statistics across rows, the rows skipped) are written.

    Bad rows are reported with their line, column and reason; by default
    nothing is written if any row is bad. Output is deterministic.

    \b
    Examples:
      modelgen lots examples/lot_table.csv -o lot.lib --dialect ngspice --corners 5,50,95
      modelgen lots examples/lot_table.csv -o lot.lib --dialect ngspice --corners VF@1mA:3sigma
    """
    from . import lots

    clock = _Clock()
    set_values = {}
    for item in sets:
        key, eq, value = item.partition("=")
        if not eq:
            _fail(f"--set {item!r}: write KEY=VALUE")
        set_values[key.strip()] = value.strip()
    corner_by = None
    if corner_spec:
        from .description import check_name

        try:
            check_name(corner_name, key="--corner-name")
        except InputError as e:
            _fail(str(e))
        if not targets.get(dialect).sections:
            _fail(f"the {dialect} dialect has no .lib sections; --corners needs a dialect with .lib sections "
                  f"(ngspice)")
        try:
            corner_by = lots.parse_corners(corner_spec)[0]
        except InputError as e:
            _fail(str(e))
    prefix = summary_prefix or os.path.splitext(output)[0] + ".summary"
    paths = {"library": output, "csv": prefix + ".csv", "json": prefix + ".json"}
    errors, n = [], 0
    try:
        with lots.LotWriter(paths, dialect=dialect, inputs=[table_file], fork=True, signals=True,
                            figure=corner_by if corner_by != "IS" else None) as writer, \
                _LotProgress(table_file, quiet) as progress:
            for table in clock.timed("read", lots.read_chunks(table_file, sets=set_values,
                                                                name_pattern=name_pattern, rows=lots.CHUNK)):
                result, good = clock.call("checks and physics", lots.derive, table, chunk=lots.CHUNK)
                n += len(table.lines)
                errors += table.problems.errors()
                if not errors or keep_going:
                    clock.call("library and summary", writer.add, result)
                progress(table)
            if errors and not keep_going:
                for e in errors:
                    click.echo(f"modelgen: error: {e}", err=True)
                click.echo(f"modelgen: {len(np.unique([e.row for e in errors]))} of {n} rows are bad; nothing "
                           f"written (--keep-going writes the good ones)", err=True)
                sys.exit(EXIT_INPUT)
            for e in errors:
                click.echo(f"modelgen: skipped: {e}", err=True)
            if not writer.rows:
                _fail(f"{table_file}: no good rows; nothing written")
            skipped = [{"row": e.row, "key": e.key, "message": e.message} for e in errors]
            whole = writer.result()
            corner_cards = []
            if corner_spec:
                try:
                    corner_cards = lots.corner_cards(whole, corner_spec, corner_name, writer.figure_values())
                except InputError as e:
                    _fail(str(e))
            n_skipped = len(np.unique([e.row for e in errors])) if errors else 0
            clock.call("library and summary", writer.finish,
                       title=f"diode model library from {os.path.basename(table_file)}",
                       extra=[f"{writer.rows} of {n} rows" + (f"; {n_skipped} skipped" if errors else "")],
                       section="lot" if corner_spec else None, corner_cards=corner_cards, skipped=skipped,
                       result=whole)
    except InputError as e:
        _fail(str(e.located(file=table_file)))
    clock.report()
    if not quiet:
        for kind, count in whole.rows_by_kind().items():
            label = extraction.KINDS.get(kind, kind)
            click.echo(f"modelgen: warning: {count} of {writer.rows} rows: {label}", err=True)
        click.echo(f"modelgen: {writer.rows} cards written to {output}; summary in {prefix}.csv and "
                   f"{prefix}.json" + (f"; {len(skipped)} problems, rows skipped" if skipped else ""), err=True)
    sys.exit(EXIT_SKIPPED if errors else 0)


@main.command("report")
@click.argument("input_file", metavar="INPUT", type=click.Path())
@click.option("-o", "--output", required=True, type=click.Path(),
              help="The HTML file to write (atomically; one self-contained file: inline SVG, no network).")
@click.option("--png", "png_dir", type=click.Path(), metavar="DIR",
              help="Also write each figure as DIR/NAME.png (for slides); written with the page, all or none.")
@click.option("--dialect", type=DIALECT, default="ngspice", show_default=True,
              help="Whose card and whose simulator equations the report shows.")
@click.option("--physics", type=click.Choice(["closed", "numeric"]), default="closed", show_default=True,
              help="Device report: the card from the closed forms, or fitted to the numerical solver.")
@click.option("--bias", "profile_bias", metavar="V",
              help="Device report: junction voltage of the excess-carrier profile, with its unit (default 0.6 V, or "
                   "3/4 of VJ where that is lower).")
@click.option("--no-simulator", is_flag=True, help="Device report: do not run ngspice on the card.")
@click.option("--corners", "corner_temps", metavar="TEMPS",
              help="Corners report of the description: temperatures in degC, comma-separated "
                   "(e.g. \"-40,27,85,125\"; at least two besides the nominal).")
@click.option("--iv", "iv_file", type=click.Path(), metavar="IV.csv",
              help="Calibration report of the description against this measured I-V (as modelgen calibrate).")
@click.option("--cv", "cv_file", type=click.Path(), metavar="CV.csv",
              help="Calibration report: the measured C-V.")
@click.option("--free", metavar="KEYS", help="Calibration report: the keys to fit (as modelgen calibrate --free).")
@click.option("--scatter", metavar="X,Y",
              help="Lot report: the two figures of the scatter, e.g. \"VF@1mA,BV\" (summary columns or VF@<current>).")
@click.option("--lot-corners", "corner_spec", metavar="SPEC", default="5,50,95", show_default=True,
              help="Lot report: the corners marked on the scatter, as modelgen lots --corners.")
@click.option("--description", "description_file", type=click.Path(), metavar="DEVICE.toml",
              help="Card file report: the description to compare the card with (default: the file its header "
                   "names, else the card file's name with .toml, beside it).")
@click.option("--section", metavar="NAME", help="Card file report: the .lib section of the card to show.")
def report_command(input_file, output, png_dir, dialect, physics, profile_bias, no_simulator, corner_temps, iv_file,
                   cv_file, free, scatter, corner_spec, description_file, section):
    """Draw a report of INPUT: one self-contained HTML page of figures and tables.

    INPUT is recognised by its content: a device description (TOML) gives
    the device report (forward and reverse I-V, C-V of the physics, the
    solver, the card and ngspice's run of it; excess carriers; field; the
    card); a lot table or the summary that modelgen lots writes gives the lot
    report (histograms, a scatter with the corners, statistics). A
    description with --corners gives the temperature corners report; with
    --iv/--cv the calibration report. A card file (a .model card or a
    library) gives the device report of that card against the physics of
    the description beside it (--description, --section). Progress goes to
    stderr.

    \b
    Examples:
      modelgen report examples/switching_diode.toml -o switching.html --png figures
      modelgen lots examples/lot_table.csv -o lot.lib && modelgen report lot.summary.json -o lot.html
      modelgen report examples/switching_diode.toml --corners=-40,27,85,125 -o corners.html
      modelgen report examples/measured/testchip.toml --iv examples/measured/testchip_iv.csv \\
          --cv examples/measured/testchip_cv.csv -o calibration.html
      modelgen report corners.lib --description examples/switching_diode.toml --section vf_1ma_low -o low.html
    """
    import time

    try:
        from . import report
        from .report import panels  # noqa: F401  (matplotlib: checked before any work)
    except ImportError:
        _fail("modelgen report needs matplotlib, which is not installed: install the 'report' extra "
              "(pip install 'modelgen[report]')")
    inputs = [f for f in (input_file, iv_file, cv_file, description_file) if f]
    _check_output(output, inputs)
    if png_dir is not None and not os.path.isdir(png_dir):
        _fail(f"{png_dir}: --png needs an existing folder to write the figures to")
    started = time.monotonic()

    def progress(text):
        if time.monotonic() - started > 1.0 or text.startswith("solving"):
            click.echo(f"modelgen: report: {text}", err=True)

    options = {"dialect": dialect, "physics": physics, "simulate": not no_simulator, "scatter": scatter,
               "corner_spec": corner_spec, "free": free, "description": description_file, "section": section}
    temps = None
    try:
        if profile_bias is not None:
            from .units import parse_quantity

            options["profile_bias"] = parse_quantity(profile_bias, "voltage", key="--bias")
        if corner_temps is not None:
            temps = []
            for t in corner_temps.split(","):
                try:
                    temps.append(float(t))
                except ValueError:
                    raise InputError(f"{t.strip()!r} is not a temperature in degC", key="--corners") from None
        made = report.build(input_file, corners=temps, iv=iv_file, cv=cv_file, progress=progress, **options)
        progress("writing the page")
        report.write(made, output, png_dir, inputs=inputs, signals=True)
    except InputError as e:
        _fail(str(e) if e.file else str(e.located(file=input_file)))
    click.echo(f"modelgen: {made.kind} report written to {output}" + (f"; figures in {png_dir}" if png_dir else ""),
               err=True)


class _LotProgress:
    """A progress bar over the table's lines on stderr, for long runs on a terminal."""

    def __init__(self, table_file, quiet):
        self.bar = None
        if not quiet and sys.stderr.isatty():
            from . import lots

            try:
                with open(table_file, "rb") as fh:
                    total = sum(block.count(b"\n") for block in iter(lambda: fh.read(1 << 20), b""))
            except OSError:
                total = 0
            if total > lots.CHUNK:
                self.bar = click.progressbar(length=total, label="modelgen: lots", file=sys.stderr)
        self.done = 0

    def __enter__(self):
        if self.bar is not None:
            self.bar.__enter__()
        return self

    def __call__(self, table):
        if self.bar is not None and len(table.lines):
            last = int(table.lines[-1])
            self.bar.update(last - self.done)
            self.done = last

    def __exit__(self, *exc):
        if self.bar is not None:
            self.bar.__exit__(*exc)
        return False


def run():
    """The console entry point: :func:`main`, then an exit that skips freeing memory.

    After a large lot the interpreter would spend a few tenths of a second
    freeing millions of strings at exit; every file is already written and
    closed, so the process ends at once (streams flushed first).
    """
    try:
        main()
        code = 0
    except SystemExit as e:
        code = e.code if isinstance(e.code, int) else (0 if e.code is None else 1)
    sys.stdout.flush()
    sys.stderr.flush()
    os._exit(code)


if __name__ == "__main__":  # pragma: no cover
    run()

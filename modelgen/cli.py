"""The modelgen command line. It parses arguments, calls the API and prints.

No physics here: everything goes through :mod:`modelgen.description`,
:mod:`modelgen.extraction` and :mod:`modelgen.cards`, the same API a script
uses.

Exit status: 0 success; 1 a card failed its simulator check; 2 bad input or
usage (one line on stderr, no output file written or touched); 3 no
simulator to check with.
"""

from __future__ import annotations

import os
import sys
import tempfile

import click

from . import __version__, cards, description, extraction
from .errors import InputError

EXIT_INPUT = 2
EXIT_MISMATCH = 1
EXIT_NO_SIMULATOR = 3


def write_atomic(path, text):
    """Write ``text`` to ``path`` through a temporary file and a rename.

    The file at ``path`` is either left as it was or replaced whole; a
    half-written output never exists under its name.
    """
    path = os.path.abspath(path)
    folder = os.path.dirname(path)
    fd, tmp = tempfile.mkstemp(prefix=".modelgen-", suffix=".tmp", dir=folder)
    try:
        with os.fdopen(fd, "w", encoding="utf-8", newline="\n") as fh:
            fh.write(text)
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise


def _fail(message):
    click.echo(f"modelgen: error: {message}", err=True)
    sys.exit(EXIT_INPUT)


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="modelgen")
def main():
    """Turn the physics of a pn junction into SPICE diode model cards.

    A device description (a TOML file: doping, thickness, lifetime and area
    of each side) goes in; a .model card comes out, with IS, N, RS, CJO, VJ,
    M, FC, TT, BV, IBV, EG and XTI derived from published silicon models and
    the exact finite-width solution of minority-carrier diffusion.

    A card is a physics estimate: check it against measured devices before
    design sign-off, and derate breakdown figures.

    Exit status: 0 on success, 1 when a card fails its simulator check, 2 on
    bad input or usage, 3 when no simulator is installed to check with.
    """


@main.command("card")
@click.argument("device_files", metavar="DEVICE.toml...", nargs=-1, required=True,
                type=click.Path(dir_okay=False))
@click.option("-o", "--output", type=click.Path(dir_okay=False, writable=True),
              help="Write to this file (atomically: a temporary file, then a rename) instead of stdout.")
@click.option("--format", "fmt", type=click.Choice(["card", "json"]), default="card", show_default=True,
              help="card: SPICE .model text. json: parameters, derived quantities and warnings, all in SI units "
                   "(A, V, F, s, ohm, K, m; EG in eV); a list when several devices are given.")
@click.option("--dialect", type=click.Choice(sorted(cards.DIALECTS)), default="spice3", show_default=True,
              help="Simulator dialect: spice3 (portable SPICE3 level-1 set), ngspice (adds ISR, NR, IKF and "
                   "sidewall terms), gnucap (gnucap's diode set).")
@click.option("--section", metavar="NAME",
              help="Put the cards in a named library section (.lib NAME ... .endl NAME); ngspice dialect only.")
@click.option("-q", "--quiet", is_flag=True, help="Do not repeat the warnings on stderr.")
def card_command(device_files, output, fmt, dialect, section, quiet):
    """Derive the model card of each device described in DEVICE.toml.

    One file gives one card; several files give one library of cards (for
    .include), optionally inside a named .lib section (--section). The text
    goes to stdout unless -o is given. Warnings (a modelled lifetime,
    reach-through, degenerate doping, ...) are written into each card's
    header and the JSON, and repeated on stderr unless -q.

    \b
    Examples:
      modelgen card examples/switching_diode.toml
      modelgen card examples/thin_epi_rectifier.toml --format json -o rect.json
      modelgen card examples/*.toml --dialect ngspice --section typical -o demo.lib
    """
    loaded = []
    for f in device_files:
        try:
            device, raw = description.load_with_inputs(f)
            loaded.append((extraction.derive(device), raw))
        except InputError as e:
            _fail(str(e.located(file=f)))
    if fmt == "json":
        texts = [cards.as_json(r, 0) for r, _ in loaded]
        text = texts[0] if len(texts) == 1 else "[\n" + ",\n".join(t.rstrip("\n") for t in texts) + "\n]\n"
    elif len(loaded) == 1 and section is None:
        text = cards.card(loaded[0][0], 0, dialect=dialect, inputs=loaded[0][1])
    else:
        try:
            text = cards.library([(section, r, 0, raw) for r, raw in loaded], dialect=dialect)
        except ValueError as e:
            _fail(str(e))
    if not quiet:
        for (r, _), f in zip(loaded, device_files):
            prefix = f"{f}: " if len(loaded) > 1 else ""
            for w in r.warnings(0):
                if not w.startswith("note:"):
                    kind = "" if w.startswith("caution:") else "warning: "
                    click.echo(f"modelgen: {prefix}{kind}{w}", err=True)
    if output:
        try:
            write_atomic(output, text)
        except OSError as e:
            _fail(f"{output}: cannot write: {e.strerror}")
    else:
        click.echo(text, nl=False)


@main.command("check")
@click.argument("card_file", metavar="FILE", type=click.Path(dir_okay=False))
@click.option("--simulator", type=click.Choice(["ngspice", "gnucap", "all"]), default="all", show_default=True,
              help="Which simulator to run; 'all' runs each one installed.")
def check_command(card_file, simulator):
    """Run every diode card of FILE in real simulators and compare.

    Each card is loaded in each simulator in batch mode; its DC current from
    0.2 V to 0.8 V and its small-signal capacitance at 0, -1 and -5 V are
    compared with modelgen's evaluator of that simulator's diode equations.
    A card passes when every point agrees within 0.1 % and the simulator
    printed no warning about it.

    \b
    Exit status:
      0  every card loads cleanly and agrees
      1  a mismatch, or a simulator warning on load
      2  FILE is unreadable or holds no valid card
      3  none of the requested simulators is installed
    """
    from .cards import reader
    from .spice import check

    wanted = list(check.PACKAGES) if simulator == "all" else [simulator]
    present = [s for s in wanted if check.installed(s)]
    for s in wanted:
        if s not in present:
            click.echo(f"modelgen: {s} is not installed (Debian package: {check.PACKAGES[s]}); "
                       f"not checked with it", err=True)
    if not present:
        click.echo("modelgen: no simulator to check with", err=True)
        sys.exit(EXIT_NO_SIMULATOR)
    try:
        text = reader.read_text(card_file)
        outcomes = check.check_text(text, present, file=card_file)
    except InputError as e:
        _fail(str(e.located(file=card_file)))
    except RuntimeError as e:
        _fail(f"{card_file}: {e}")
    click.echo(check.table(outcomes), nl=False)
    bad = [o for o in outcomes if not o.ok]
    click.echo(f"{len(outcomes) - len(bad)} of {len(outcomes)} checks passed "
               f"(tolerance {check.TOLERANCE:.1%}, simulators: {', '.join(present)})")
    sys.exit(EXIT_MISMATCH if bad else 0)


if __name__ == "__main__":  # pragma: no cover
    main()

"""The modelgen command line. It parses arguments, calls the API and prints.

No physics here: everything goes through :mod:`modelgen.description`,
:mod:`modelgen.extraction` and :mod:`modelgen.cards`, the same API a script
uses.

Exit status: 0 success; 2 bad input or usage (one line on stderr, no output
file written or touched).
"""

from __future__ import annotations

import os
import sys
import tempfile

import click

from . import __version__, cards, description, extraction
from .errors import InputError

EXIT_INPUT = 2


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

    Exit status: 0 on success, 2 on bad input or usage.
    """


@main.command("card")
@click.argument("device_file", metavar="DEVICE.toml", type=click.Path(dir_okay=False))
@click.option("-o", "--output", type=click.Path(dir_okay=False, writable=True),
              help="Write to this file (atomically: a temporary file, then a rename) instead of stdout.")
@click.option("--format", "fmt", type=click.Choice(["card", "json"]), default="card", show_default=True,
              help="card: SPICE .model text. json: parameters, derived quantities and warnings, all in SI units "
                   "(A, V, F, s, ohm, K, m; EG in eV).")
@click.option("--dialect", type=click.Choice(sorted(cards.DIALECTS)), default="spice3", show_default=True,
              help="Simulator dialect of the card.")
@click.option("-q", "--quiet", is_flag=True, help="Do not repeat the warnings on stderr.")
def card_command(device_file, output, fmt, dialect, quiet):
    """Derive the model card of one device described in DEVICE.toml.

    The card goes to stdout unless -o is given. Warnings (a modelled
    lifetime, reach-through, degenerate doping, ...) are written into the
    card's header and the JSON, and repeated on stderr unless -q.

    \b
    Example:
      modelgen card examples/switching_diode.toml
      modelgen card examples/thin_epi_rectifier.toml --format json -o rect.json
    """
    try:
        device, raw = description.load_with_inputs(device_file)
        result = extraction.derive(device)
    except InputError as e:
        _fail(str(e.located(file=device_file)))
    if fmt == "json":
        text = cards.as_json(result, 0)
    else:
        text = cards.card(result, 0, dialect=dialect, inputs=raw)
    if not quiet:
        for w in result.warnings(0):
            if not w.startswith("note:"):
                click.echo(f"modelgen: {w}" if w.startswith("caution:") else f"modelgen: warning: {w}", err=True)
    if output:
        try:
            write_atomic(output, text)
        except OSError as e:
            _fail(f"{output}: cannot write: {e.strerror}")
    else:
        click.echo(text, nl=False)


if __name__ == "__main__":  # pragma: no cover
    main()

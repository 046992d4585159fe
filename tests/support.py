"""Helpers the test modules share (imported as ``support``; pytest puts tests/ on sys.path)."""

from __future__ import annotations

import os
from pathlib import Path

import pytest
from click.testing import CliRunner

#: The repository's root, and its example descriptions.
ROOT = Path(__file__).resolve().parent.parent
EXAMPLES = sorted((ROOT / "examples").glob("*.toml"))
#: Under CI a missing simulator fails the tests that need it instead of skipping them.
IN_CI = os.environ.get("CI", "").lower() == "true"


def need(simulator):
    """Skip (fail under CI) unless ``simulator`` can be run here, naming its Debian package."""
    from modelgen import targets
    from modelgen.spice import check

    if not check.installed(simulator):
        msg = f"{simulator} is not installed (Debian package: {targets.SIMULATORS[simulator].package})"
        if IN_CI:
            pytest.fail(msg)
        pytest.skip(msg)


def run(*args):
    """The command line in this process (click's runner), arguments turned into text."""
    from modelgen.cli import main

    return CliRunner().invoke(main, [str(a) for a in args])

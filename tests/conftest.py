"""Shared test set-up."""

import pytest


@pytest.fixture(autouse=True, scope="session")
def _private_unit_cache(tmp_path_factory):
    """The whole run keeps modelgen's unit-factor cache in a temporary folder, never the user's own.

    Session-wide, so it is in place before any module-scoped fixture parses a description.
    """
    with pytest.MonkeyPatch.context() as mp:
        mp.setenv("MODELGEN_CACHE_DIR", str(tmp_path_factory.mktemp("unit-cache")))
        yield

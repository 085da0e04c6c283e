"""Shared test setup.

The field-solve disk cache (checker/physics/solvecache.py) points at a
fresh folder for the whole session: tests never read or fill the user's own
cache, and solves repeated across tests are still shared within the run.
"""

from __future__ import annotations

import os
import shutil
import tempfile

_CACHE_ENV = "COUPLINT_CACHE_DIR"


def pytest_configure(config) -> None:
    folder = tempfile.mkdtemp(prefix="couplint-test-solves-")
    config._couplint_cache = (folder, os.environ.get(_CACHE_ENV))
    os.environ[_CACHE_ENV] = folder  # subprocesses started by tests inherit it


def pytest_unconfigure(config) -> None:
    folder, before = getattr(config, "_couplint_cache", (None, None))
    if folder is None:
        return
    shutil.rmtree(folder, ignore_errors=True)
    if before is None:
        os.environ.pop(_CACHE_ENV, None)
    else:
        os.environ[_CACHE_ENV] = before


# --------------------------------------------------------------------------
# boards the test modules share

import pytest  # noqa: E402


@pytest.fixture(scope="module")
def demo():
    """The demo board checked with the shipped default rules (one result per
    test module: a module may set its review without touching another's)."""
    from checker.cli import demo_board_path
    from checker.readers import load_board
    from checker.ruleset import default_ruleset
    from checker.runner import check_board

    return check_board(load_board(demo_board_path()), default_ruleset())

"""Shared test options and fixtures.

- ``--runslow`` runs the tests marked ``slow`` (the larger published
  instances); without it they are skipped, so the default run stays quick.
- ``--runlong`` runs the tests marked ``long`` (the largest published
  instances, up to ten minutes each): too long for CI, run them by hand or
  through benchmarks/.
- :func:`shared_reference_dir` / the ``shared_reference`` fixture give the
  published benchmark data in ``../shared/reference`` (beside the repository),
  or skip the test with a clear reason when that folder is absent.
- Runs made by tests are recorded in a temporary run history, never in the
  user's own (``HUBNET_HISTORY``).
"""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path

import pytest

#: The repository root (the parent of tests/).
REPO_ROOT = Path(__file__).resolve().parent.parent

#: Published reference data, kept beside the repository rather than in it.
SHARED_REFERENCE = REPO_ROOT.parent / "shared" / "reference"

SHARED_MISSING_REASON = (
    "../shared/reference not found: published benchmark data is not available here"
)


def pytest_addoption(parser: pytest.Parser) -> None:
    parser.addoption(
        "--runslow",
        action="store_true",
        default=False,
        help="also run the tests marked slow (large published instances)",
    )
    parser.addoption(
        "--runlong",
        action="store_true",
        default=False,
        help="also run the tests marked long (largest published instances, minutes each)",
    )


def pytest_collection_modifyitems(config: pytest.Config, items: list[pytest.Item]) -> None:
    skip_slow = pytest.mark.skip(reason="slow: run with --runslow")
    skip_long = pytest.mark.skip(reason="long (minutes each): run with --runlong")
    for item in items:
        if "long" in item.keywords and not config.getoption("--runlong"):
            item.add_marker(skip_long)
        elif "slow" in item.keywords and not config.getoption("--runslow"):
            item.add_marker(skip_slow)


@pytest.fixture(autouse=True, scope="session")
def _private_run_history(tmp_path_factory: pytest.TempPathFactory) -> Iterator[None]:
    """Record the runs tests make in a temporary history, not in the user's ~/.hubnet.

    Set in the environment, so a ``hubnet`` subprocess inherits it; a test
    that needs another history sets its own.
    """
    patch = pytest.MonkeyPatch()
    patch.setenv("HUBNET_HISTORY", str(tmp_path_factory.mktemp("history") / "history.sqlite"))
    yield
    patch.undo()


def shared_reference_dir() -> Path:
    """The ``../shared/reference`` folder, or skip the calling test with the reason."""
    if not SHARED_REFERENCE.is_dir():
        pytest.skip(SHARED_MISSING_REASON)
    return SHARED_REFERENCE


@pytest.fixture
def shared_reference() -> Path:
    """Path of ``../shared/reference``; the test is skipped when it is absent."""
    return shared_reference_dir()

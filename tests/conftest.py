"""Shared pytest configuration.

Tests marked ``@pytest.mark.slow`` (long statistical checks) are skipped
unless pytest is run with ``--slow``.
"""

from __future__ import annotations

import signal

import pytest

# A suite started in the background of a non-interactive shell (`cmd &`, nohup, some CI runners)
# inherits SIGINT ignored, and the codebench processes the tests start would inherit that too, so
# the Ctrl-C tests would test nothing. Give them the ordinary disposition whatever started pytest.
if signal.getsignal(signal.SIGINT) is signal.SIG_IGN:
    signal.signal(signal.SIGINT, signal.default_int_handler)


def pytest_addoption(parser: pytest.Parser) -> None:
    parser.addoption(
        "--slow",
        action="store_true",
        default=False,
        help="also run tests marked slow (long statistical checks)",
    )


def pytest_configure(config: pytest.Config) -> None:
    config.addinivalue_line("markers", "slow: long statistical checks, run with --slow")


def pytest_collection_modifyitems(config: pytest.Config, items: list[pytest.Item]) -> None:
    if config.getoption("--slow"):
        return
    skip_slow = pytest.mark.skip(reason="slow test: run with --slow")
    for item in items:
        if "slow" in item.keywords:
            item.add_marker(skip_slow)

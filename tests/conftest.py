"""Shared fixtures: the CLI runner and canonical inputs."""

import os

import pytest
from click.testing import CliRunner
from hypothesis import settings

from drainplan.cli import limit_threads

# the suite runs as the command line does: BLAS on one thread (set before numpy loads),
# so a design's independent parts may run in a second process (drainplan._background)
limit_threads()

# CI runs a fixed set of examples (same every run); local runs explore new ones.
settings.register_profile("ci", derandomize=True, print_blob=True)
if os.environ.get("CI"):
    settings.load_profile("ci")


@pytest.fixture
def run():
    """Invoke the drainplan CLI in-process; returns the click Result."""
    from drainplan.cli import cli

    runner = CliRunner()

    def _run(*args):
        return runner.invoke(cli, [str(a) for a in args], catch_exceptions=False)

    return _run

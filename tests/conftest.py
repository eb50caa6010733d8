"""Shared fixtures: the CLI runner and canonical inputs."""

import pytest
from click.testing import CliRunner


@pytest.fixture
def run():
    """Invoke the drainplan CLI in-process; returns the click Result."""
    from drainplan.cli import cli

    runner = CliRunner()

    def _run(*args):
        return runner.invoke(cli, [str(a) for a in args], catch_exceptions=False)

    return _run

"""Start-up of the command line: lazy commands, the help list, the thread limit."""

import os
import subprocess
import sys

import pytest


def _run(code, env=None):
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True, env=env)
    return out.stdout.strip().splitlines()[-1]


def test_help_lists_every_command_with_its_own_short_help():
    """The command list of `drainplan --help` comes from COMMANDS without importing
    the commands; it must say what each command itself says."""
    from click.testing import CliRunner

    from drainplan.cli import COMMANDS, cli

    result = CliRunner().invoke(cli, ["--help"])
    assert result.exit_code == 0
    for name, (module, attr, short) in COMMANDS.items():
        command = cli.get_command(None, name)
        assert command.name == name
        assert command.get_short_help_str(200) == short
        flat = " ".join(result.output.split())        # long lines wrap at the terminal width
        assert f"{name}  " in result.output and short in flat


def test_unknown_command_is_one_line():
    from click.testing import CliRunner

    from drainplan.cli import cli

    result = CliRunner().invoke(cli, ["no-such-command"])
    assert result.exit_code == 2
    assert "No such command" in result.output


def _clean_env(**extra):
    from drainplan.cli import THREAD_VARIABLES

    env = {k: v for k, v in os.environ.items() if k not in THREAD_VARIABLES}
    env.update(extra)
    return env


def test_entry_point_limits_blas_threads_before_numpy_loads():
    code = ("import os, sys\nfrom drainplan.cli import main, THREAD_VARIABLES\n"
            "loaded = 'numpy' in sys.modules\n"
            "try:\n    main(['--version'])\nexcept SystemExit:\n    pass\n"
            "print(loaded, *[os.environ.get(v) for v in THREAD_VARIABLES])")
    words = _run(code, env=_clean_env()).split()
    assert words[0] == "False"              # numpy not loaded yet: the variables take effect
    assert set(words[1:]) == {"1"}


def test_entry_point_keeps_the_users_thread_setting():
    code = ("import os\nfrom drainplan.cli import main\n"
            "try:\n    main(['--version'])\nexcept SystemExit:\n    pass\n"
            "print(os.environ.get('OMP_NUM_THREADS'), os.environ.get('OPENBLAS_NUM_THREADS'))")
    assert _run(code, env=_clean_env(OMP_NUM_THREADS="3")).split() == ["3", "None"]


@pytest.mark.parametrize("environ,applied", [({}, True), ({"MKL_NUM_THREADS": "4"}, False)])
def test_limit_threads(environ, applied):
    from drainplan.cli import THREAD_VARIABLES, limit_threads

    env = dict(environ)
    assert limit_threads(env) is applied
    if applied:
        assert all(env[v] == "1" for v in THREAD_VARIABLES)
    else:
        assert env == environ


def test_allocator_tuning_only_on_glibc_and_not_over_the_user():
    import sys as _sys

    from drainplan.cli import tune_allocator

    assert tune_allocator({"GLIBC_TUNABLES": "glibc.malloc.trim_threshold=1"}) is False
    applied = tune_allocator({})
    if not _sys.platform.startswith("linux"):
        assert applied is False
    else:
        import platform

        assert applied is (platform.libc_ver()[0] == "glibc")

"""Every example in the README runs as shown; CI runs the README's test command."""

import json
import re
import shlex
from pathlib import Path


ROOT = Path(__file__).resolve().parents[1]
README = (ROOT / "README.md").read_text()


def _sh_blocks():
    return re.findall(r"```sh\n(.*?)```", README, re.S)


def _console_commands():
    return [line[2:].strip() for line in README.splitlines() if line.startswith("$ drainplan ")]


def _setup_commands():
    """The two set-up commands: (demo, tests)."""
    blocks = [b.strip() for b in _sh_blocks()]
    assert len(blocks) == 2, "README must give exactly two set-up commands"
    return blocks


def test_two_setup_commands_come_first():
    first_heading = README.index("\n## ")
    for block in _sh_blocks():
        assert README.index(block) < first_heading


def test_ci_runs_the_readme_test_command():
    ci = (ROOT / ".ci" / "run").read_text()
    assert _setup_commands()[1] in ci.splitlines()


def test_readme_commands_run_in_order(run, tmp_path, monkeypatch):
    """Every `$ drainplan ...` line of the README, in order, in one scratch folder that
    holds a link to the demo data (later examples use the files earlier ones wrote)."""
    (tmp_path / "demo_fields").symlink_to(ROOT / "demo_fields")
    monkeypatch.chdir(tmp_path)
    setup = re.search(r"\.venv/bin/(drainplan .*)$", _setup_commands()[0]).group(1)
    commands = [setup] + _console_commands()
    assert len(commands) >= 6
    for command in commands:
        args = shlex.split(command)[1:]
        r = run(*args)
        assert r.exit_code == 0, (command, r.output)
        if args[0] == "spacing":
            if "--json" in args:
                assert json.loads(r.stdout)["spacing_m"] > 0
            else:
                assert "drain spacing" in r.stdout
        for i, a in enumerate(args):
            if a in ("-o", "--output", "--plot", "--gpkg"):
                assert (tmp_path / args[i + 1]).stat().st_size > 0, (command, a)


def test_readme_python_example():
    code = re.search(r"```python\n(.*?)```", README, re.S).group(1)
    ns = {}
    exec(compile(code, "README.md", "exec"), ns)
    assert 20 < ns["L"] < 60 and 0 < ns["d"] < 4

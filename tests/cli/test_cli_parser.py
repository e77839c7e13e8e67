"""The command-line parser: every command registered, summaries in one place, a quick --help."""

from __future__ import annotations

import subprocess
import sys

import pytest

from appraise.cli import COMMANDS, build_parser, main


def _choices(parser):
    sub = next(a for a in parser._actions if a.dest == "command")
    return sub, {c.dest: c.help for c in sub._choices_actions}


def test_every_command_registers_under_its_name_with_the_same_summary():
    _, full = _choices(build_parser(only=None))
    assert full == COMMANDS


@pytest.mark.parametrize("name", list(COMMANDS))
def test_each_command_alone_parses_its_own_help(name, capsys):
    assert main([name, "--help"]) == 0
    assert f"usage: appraise {name}" in capsys.readouterr().out


def test_top_level_help_imports_no_heavy_library():
    code = (
        "import sys\n"
        "from appraise.cli import main\n"
        "rc = main(['--help'])\n"
        "heavy = sorted(m for m in ('pandas', 'statsmodels', 'scipy', 'PySide6') if m in sys.modules)\n"
        "print('HEAVY', ','.join(heavy))\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert "HEAVY \n" in out.stdout or out.stdout.rstrip().endswith("HEAVY")
    assert "demo" in out.stdout and "diagnose" in out.stdout


def test_unknown_command_is_a_usage_error(capsys):
    assert main(["appraize"]) == 2
    assert "invalid choice" in capsys.readouterr().err

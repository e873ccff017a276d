"""The README documents what the code does: every contract column and setting, every CLI command, the caution."""

import pathlib
import re
import subprocess
import sys

import pytest
from click.testing import CliRunner

from lanesolve import contract
from lanesolve.cli import main

ROOT = pathlib.Path(__file__).resolve().parent.parent
README = (ROOT / "README.md").read_text(encoding="utf-8")
sys.path.insert(0, str(ROOT / ".ci"))
from quickstart import quickstart_commands  # noqa: E402


def test_readme_starts_with_one_paragraph_then_quick_start():
    body = README.split("\n", 1)[1].strip()
    first, rest = body.split("\n\n", 1)
    assert not first.startswith("#") and len(first) > 200
    assert rest.lstrip().startswith("## Quick start")


def test_quick_start_has_exactly_two_commands():
    commands = quickstart_commands(README)
    assert len(commands) == 2
    assert "solve example_workbooks/" in commands[0]
    assert "pytest" in commands[1]


@pytest.mark.parametrize("sheet", contract.INPUT_SHEETS, ids=lambda s: s.name)
def test_every_contract_column_is_documented(sheet):
    section = README.split(f"### {sheet.name}", 1)
    assert len(section) == 2, f"README has no section for {sheet.name}"
    text = section[1].split("\n### ", 1)[0]
    for column in sheet.columns:
        assert f"`{column.name}`" in text, f"{sheet.name}.{column.name} missing from README"


def test_every_setting_is_documented():
    text = README.split("### Settings", 1)[1].split("\n### ", 1)[0]
    for setting in contract.SETTINGS_ROWS:
        assert f"| `{setting.name}` |" in text


def test_every_command_has_help_and_is_documented():
    runner = CliRunner()
    for name, command in main.commands.items():
        assert command.help, f"command {name} has no help text"
        assert re.search(rf"^lanesolve {name}\b", README, re.M), f"command {name} missing from README"
        result = runner.invoke(main, [name, "--help"])
        assert result.exit_code == 0


def test_caution_is_in_readme():
    for phrase in ("vehicle weight limits", "driver working-time rules", "hazardous-goods rules",
                   "carrier contracts", "licensed professionals"):
        assert phrase in README


def test_quick_start_solve_command_runs(tmp_path):
    """Run the quick start's solve step exactly as written (the install step is what CI's venv already did)."""
    command = quickstart_commands(README)[0].split("&&", 1)[1].strip()
    args = command.split()
    assert args[:3] == ["python", "-m", "lanesolve"]
    example = ROOT / args[4]
    assert example.exists(), f"quick start names {args[4]}, which is not in the repository"
    (tmp_path / "example_workbooks").mkdir()
    (tmp_path / args[4]).write_bytes(example.read_bytes())
    done = subprocess.run([sys.executable, *args[1:]], cwd=tmp_path, capture_output=True, text=True, timeout=300)
    assert done.returncode == 0, done.stderr
    assert (tmp_path / "example-solved.xlsx").exists()
    assert (tmp_path / "example-solved-summary.html").exists()
    assert (tmp_path / args[4]).read_bytes() == example.read_bytes()

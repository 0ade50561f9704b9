"""docs/cli.md is kept in step with the argument parser (issue: CLI reference kept in sync)."""

from pathlib import Path

from app.cli import COMMANDS
from app.cli.reference import cli_reference_markdown

DOC = Path(__file__).resolve().parents[3] / "docs" / "cli.md"


def test_cli_reference_matches_the_parser():
    generated = cli_reference_markdown()
    assert DOC.read_text(encoding="utf-8") == generated, (
        "docs/cli.md is out of date: run `python -m app.cli.reference > docs/cli.md`"
    )


def test_cli_reference_names_every_command_and_option():
    text = cli_reference_markdown()
    for name in COMMANDS:
        assert f"## `upstroke {name}`" in text
    # options of the contract (CONTRACT.md, command line table)
    for option in ("--json", "--channel", "--sweeps", "--settings", "--ljp", "--out", "--csv",
                   "--summary-csv", "--workers", "--scheduler", "--figures", "--screenshot"):
        assert f"`{option}" in text, option

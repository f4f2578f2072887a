"""The project's promises about itself: README in step with the code, CI runs the README's
test command, the code is lint-clean."""

from __future__ import annotations

import re
import shutil
import subprocess
import sys
from pathlib import Path

import pytest
from repo_paths import REPO

from xlpolicy.contract import ITEM_COLUMNS, SETTINGS
from xlpolicy.docs import render

README = (REPO / "README.md").read_text(encoding="utf-8")


def readme_commands() -> list[str]:
    """The indented command lines on the README's first screen (before the first heading)."""
    first_screen = README.split("\n## ", 1)[0]
    return [ln.strip() for ln in first_screen.splitlines() if ln.startswith("    ")]


def test_readme_first_screen_has_the_two_commands():
    cmds = readme_commands()
    assert len(cmds) == 2
    assert "xlpolicy plan examples/demo-shop.xlsx" in cmds[0]
    assert "pytest" in cmds[1]
    assert (REPO / "examples" / "demo-shop.xlsx").exists()


def test_ci_runs_the_readme_test_command():
    ci = (REPO / ".ci" / "run").read_text()
    assert readme_commands()[1] in ci


def test_readme_tables_are_generated_from_the_contract():
    # `python -m xlpolicy.docs README.md` writes them; editing them by hand fails here
    assert render(README) == README, "run: python -m xlpolicy.docs README.md"
    for col in ITEM_COLUMNS:
        assert f"| {col.title} |" in README
    for s in SETTINGS:
        assert f"| {s.title} |" in README


def test_troubleshooting_table_quotes_real_messages():
    # every message quoted under "When something goes wrong" is one the code can print
    section = README.split("## When something goes wrong", 1)[1].split("\n## ", 1)[0]
    quoted = re.findall(r"^\| `([^`]+)`", section, flags=re.MULTILINE)
    assert len(quoted) >= 5
    source = " ".join(p.read_text() for p in (REPO / "xlpolicy").rglob("*.py"))
    source = re.sub(r'"\s*\n\s*f?"', "", source)  # join implicitly concatenated strings
    for q in quoted:
        for piece in (x.strip() for x in q.split("...")):
            if piece:
                assert piece in source, piece


def test_readme_pictures_exist():
    for name in re.findall(r"\]\((examples/pictures/[^)]+)\)", README):
        assert (REPO / name).stat().st_size > 10_000, name


def test_readme_and_output_carry_the_safety_caution():
    assert "do not replace" in README and "licensed staff" in README


@pytest.mark.skipif(
    shutil.which("ruff") is None and not (Path(sys.executable).parent / "ruff").exists(),
    reason="ruff is installed with the [test] extra",
)
def test_code_is_ruff_clean():
    ruff = shutil.which("ruff") or str(Path(sys.executable).parent / "ruff")
    proc = subprocess.run([ruff, "check", str(REPO)], capture_output=True, text=True)
    assert proc.returncode == 0, proc.stdout + proc.stderr

"""The project's promises about itself: README in step with the code, CI runs the README's
test command, the code is lint-clean."""

from __future__ import annotations

import re
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from xlpolicy.contract import ITEM_COLUMNS, SETTINGS

REPO = Path(__file__).resolve().parent.parent
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


def test_readme_names_every_input_column_and_setting():
    tables = README.split("### Items", 1)[1]
    for col in ITEM_COLUMNS:
        assert re.search(rf"\b{re.escape(col.title)}\b", tables), col.title
    for s in SETTINGS:
        assert f"| {s.title} |" in tables, s.title


def test_readme_and_output_carry_the_safety_caution():
    assert "do not replace" in README and "licensed staff" in README


@pytest.mark.skipif(shutil.which("ruff") is None and not (Path(sys.executable).parent / "ruff")
                    .exists(), reason="ruff is installed with the [test] extra")
def test_code_is_ruff_clean():
    ruff = shutil.which("ruff") or str(Path(sys.executable).parent / "ruff")
    proc = subprocess.run([ruff, "check", str(REPO)], capture_output=True, text=True)
    assert proc.returncode == 0, proc.stdout + proc.stderr

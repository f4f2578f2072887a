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
from xlpolicy.docs import expected

README = (REPO / "README.md").read_text(encoding="utf-8")
DOCS = REPO / "docs"


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


def test_generated_docs_match_the_code():
    # `python -m xlpolicy.docs` writes the contract tables, the command reference and the
    # problem catalogue; editing them by hand, or changing the code without them, fails here
    for path, text in expected(DOCS).items():
        assert path.read_text(encoding="utf-8") == text, f"run: python -m xlpolicy.docs ({path})"
    workbook = (DOCS / "workbook.md").read_text(encoding="utf-8")
    for col in ITEM_COLUMNS:
        assert f"| {col.title} |" in workbook
    for s in SETTINGS:
        assert f"| {s.title} |" in workbook


def test_troubleshooting_table_quotes_real_messages():
    # every message quoted in the troubleshooting table is one the code can print
    section = (DOCS / "troubleshooting.md").read_text(encoding="utf-8")
    quoted = re.findall(r"^\| `([^`]+)`", section, flags=re.MULTILINE)
    assert len(quoted) >= 5
    source = " ".join(p.read_text() for p in (REPO / "xlpolicy").rglob("*.py"))
    source = re.sub(r'"\s*\n\s*f?"', "", source)  # join implicitly concatenated strings
    for q in quoted:
        for piece in (x.strip() for x in q.split("...")):
            if piece:
                assert piece in source, piece


def _slug(heading: str) -> str:
    """The anchor a Markdown renderer gives a heading (lower case, punctuation dropped)."""
    text = re.sub(r"[^\w\- ]", "", heading.strip().lower())
    return text.replace(" ", "-")


def _pages() -> list[Path]:
    return [REPO / "README.md", *sorted(DOCS.glob("*.md"))]


def test_every_link_in_the_docs_resolves():
    # relative links and #anchors in README.md and docs/ point at files and headings that exist
    for page in _pages():
        text = page.read_text(encoding="utf-8")
        for target in re.findall(r"\]\(([^)\s]+)\)", text):
            if re.match(r"[a-z]+:", target):
                continue
            path, _, anchor = target.partition("#")
            dest = (page.parent / path).resolve() if path else page
            assert dest.exists(), f"{page.name}: {target}"
            if dest.suffix == ".png":
                assert dest.stat().st_size > 10_000, f"{page.name}: {target}"
            if anchor and dest.suffix == ".md":
                heads = re.findall(r"^#+ (.+)$", dest.read_text(encoding="utf-8"), re.MULTILINE)
                assert anchor in {_slug(h) for h in heads}, f"{page.name}: {target}"


def test_readme_is_a_short_first_read():
    # the README is for a shop owner: the job, the two commands, the caution, links; the
    # rest lives in docs/ (a five-minute read is about 1,000 words)
    assert len(README.split()) < 1_000
    assert len(README.encode("utf-8")) < 8_000
    for page in ("workbook", "outputs", "method", "cli-reference", "problems"):
        assert f"docs/{page}.md" in README


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


def test_code_type_checks():
    # mypy is in the [test] extra; the settings (which libraries are taken as untyped) are
    # in pyproject.toml's [tool.mypy]. A type error anywhere in the package fails here.
    pytest.importorskip("mypy", reason="mypy is installed with the [test] extra")
    proc = subprocess.run(
        [sys.executable, "-m", "mypy", "xlpolicy"], cwd=REPO, capture_output=True, text=True
    )
    assert proc.returncode == 0, proc.stdout + proc.stderr


def test_the_package_exports_what_its_api_returns():
    # py.typed promises users typed names for what the API hands back
    import typing

    import xlpolicy
    from xlpolicy.report import Report

    assert (REPO / "xlpolicy" / "py.typed").exists()
    assert xlpolicy.Report is Report and "Report" in xlpolicy.__all__
    assert typing.get_type_hints(xlpolicy.analyse)["return"] is Report
    assert typing.get_type_hints(xlpolicy.plan)["return"] is xlpolicy.PlanResult

"""Shared by every layer of the suite: a marker per folder and a few small fixtures.

The suite is arranged by layer, each a folder: ``core`` (the vectorised computations, no
files), ``reading`` (readers and the checks on what they read), ``writing`` (the writer of
each output sheet and the workbook package), ``end_to_end`` (the CLI and the API on
whole workbooks, hostile files, the benchmark's smoke run) and ``page`` (the owner's page
over HTTP and in a browser). The helpers beside this file
(builders.py, sheet_eval.py, sheet_reports.py, repo_paths.py) and tests/data/make_bad.py
are importable from every folder (``pythonpath`` in pyproject.toml).

Each test carries its folder's marker, so ``python -m pytest -m core`` runs one layer;
``slow`` marks the few tests that take seconds each, so ``-m "not slow"`` is the quick run
while changing code. Plain ``python -m pytest`` runs everything.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from pathlib import Path

import pytest
from click.testing import CliRunner, Result
from repo_paths import REPO

LAYERS = ("core", "reading", "writing", "end_to_end", "page")


def pytest_collection_modifyitems(items: list[pytest.Item]) -> None:
    """Mark each test with the layer its file's folder is named for."""
    for item in items:
        layer = item.path.parent.name
        if layer in LAYERS:
            item.add_marker(getattr(pytest.mark, layer))


@pytest.fixture(scope="session")
def repo() -> Path:
    """The repository's root folder."""
    return REPO


@pytest.fixture
def simple_xlsx(tmp_path: Path) -> Path:
    """Three well-formed invented items with a year of weekly history (builders.py)."""
    from builders import simple_workbook

    return simple_workbook(tmp_path / "simple.xlsx")


@pytest.fixture
def good_xlsx(tmp_path: Path) -> Path:
    """The bad-input corpus's good workbook, the one its cases are made from (make_bad.py)."""
    import make_bad

    return make_bad.good_workbook(tmp_path / "good.xlsx")


@pytest.fixture
def cli() -> Callable[[Sequence[str]], Result]:
    """``cli(["plan", path, ...])``: the xlpolicy command in this process (click's runner)."""
    from xlpolicy.cli import main

    def invoke(args: Sequence[str]) -> Result:
        return CliRunner().invoke(main, [str(a) for a in args])

    return invoke

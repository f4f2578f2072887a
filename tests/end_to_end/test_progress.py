"""Progress reports: the API calls back through a whole run; the CLI draws nothing when
its output is not a terminal (so scripts and logs stay clean)."""

from __future__ import annotations

from builders import simple_workbook
from click.testing import CliRunner

import xlpolicy
from xlpolicy.cli import _Bar, main


def test_api_reports_each_stage_in_order(tmp_path):
    calls: list[tuple[str, int, int | None]] = []
    xlpolicy.plan(
        simple_workbook(tmp_path / "w.xlsx"), progress=lambda s, d, t: calls.append((s, d, t))
    )
    stages = list(dict.fromkeys(s for s, _, _ in calls))
    assert stages == [
        "Opening the workbook",
        "Reading Items",
        "Reading History",
        "Planning",
        "Writing w-policy.xlsx",
    ]
    # a sheet's last report says it is complete
    last_history = [c for c in calls if c[0] == "Reading History"][-1]
    assert last_history[2] is not None and last_history[1] == last_history[2]


def test_bar_is_silent_off_a_terminal(tmp_path):
    res = CliRunner().invoke(main, ["plan", str(simple_workbook(tmp_path / "w.xlsx"))])
    assert res.exit_code == 0
    assert "\x1b[K" not in res.output and "[###" not in res.output


def test_bar_draws_and_clears(capsys):
    bar = _Bar()
    bar.enabled = True  # as on a terminal
    bar("Reading History", 50, 100)
    bar.close()
    err = capsys.readouterr().err
    assert "Reading History [############............]  50%" in err
    assert err.endswith("\r\x1b[K")

"""Planning with seasons end to end: the policy for now, --as-of, the Year ahead sheet, JSON.

The workbooks are invented scenarios (a multiplicative seasonal pattern with Poisson noise,
a flat item, a rising one); the checks compare with what the pattern implies, computed in
the test.
"""

from __future__ import annotations

import datetime as dt
import json
from pathlib import Path

import numpy as np
import openpyxl
import pytest
from builders import item_row, write_workbook
from click.testing import CliRunner

from xlpolicy.cli import main

#: Invented: a peak in May, a trough in December (relative to the mean).
PATTERN = np.array([0.5, 0.6, 0.9, 1.4, 2.0, 1.6, 1.2, 1.0, 0.9, 0.8, 0.6, 0.5])
PATTERN = PATTERN / PATTERN.mean()
START = dt.date(2023, 1, 2)
WEEKS = 156


def _shop(tmp_path: Path, settings: dict[str, object] | None = None) -> Path:
    rng = np.random.default_rng(4)
    days = [START + dt.timedelta(days=7 * k + 3) for k in range(WEEKS)]
    month = np.array([d.month - 1 for d in days])
    seasonal = rng.poisson(40.0 * PATTERN[month]).astype(float)
    flat = rng.poisson(40.0, WEEKS).astype(float)
    rising = rng.poisson(10.0 * 1.012 ** np.arange(WEEKS)).astype(float)
    items = [
        item_row("SEAS", lead=14.0, desc="compost bag"),
        item_row("FLAT", lead=14.0, desc="inner tube"),
        item_row("RISE", lead=14.0, desc="e-bike battery"),
    ]
    history = {"SEAS": list(seasonal), "FLAT": list(flat), "RISE": list(rising)}
    return write_workbook(
        tmp_path / "shop.xlsx", items, history=history, start=START, settings=settings
    )


def _plan(src: Path, *extra: str) -> dict[str, object]:
    out = src.with_name(src.stem + "-policy.xlsx")
    js = src.with_suffix(".json")
    res = CliRunner().invoke(
        main,
        ["plan", str(src), "-o", str(out), "--json", str(js), "-q", "--no-simulate", *extra],
        catch_exceptions=False,
    )
    assert res.exit_code == 0, res.output
    return json.loads(js.read_text(encoding="utf-8"))


def _item(doc: dict[str, object], code: str) -> dict[str, object]:
    return next(r for r in doc["items"] if r["item"] == code)  # type: ignore[union-attr,index]


def test_reorder_point_follows_the_season(tmp_path: Path) -> None:
    src = _shop(tmp_path)
    may = _plan(src, "--as-of", "2026-05-01")
    dec = _plan(src, "--as-of", "2026-12-01")
    s_may, s_dec = _item(may, "SEAS"), _item(dec, "SEAS")
    assert s_may["forecast"] in ("seasonal", "seasonal and trend")
    # lead-time demand as of the peak over the quiet month: about the pattern's ratio
    ratio = s_may["lead_time_demand_mean"] / s_dec["lead_time_demand_mean"]
    want = PATTERN[4] / PATTERN[11]
    assert abs(ratio / want - 1) < 0.25, (ratio, want)
    assert s_may["reorder_point"] > 2 * s_dec["reorder_point"]  # safety stock is the same
    # safety stock from the forecast error, not the raw spread swollen by the season
    assert s_may["lead_time_demand_sd"] == pytest.approx(s_may["forecast_error_sd"], rel=1e-9)
    raw_sd = np.sqrt(2.0) * 40 * PATTERN.std()  # the season's swing alone over 2 weeks
    assert s_may["lead_time_demand_sd"] < raw_sd
    # a flat item is planned flat, the same whatever the date
    f_may, f_dec = _item(may, "FLAT"), _item(dec, "FLAT")
    assert f_may["forecast"] == "flat average"
    assert f_may["reorder_point"] == f_dec["reorder_point"]
    assert f_may["forecast_reason"]
    # the season plan in the JSON: the chosen items only, 12 months from the plan's month
    plan = {p["item"]: p["months"] for p in may["season_plan"]}
    assert "FLAT" not in plan and "SEAS" in plan
    months = plan["SEAS"]
    assert len(months) == 12 and months[0]["month"] == "May 2026"
    assert months[0]["reorder_point"] == s_may["reorder_point"]
    rops = [m["reorder_point"] for m in months]
    assert rops.index(max(rops)) in (0, 1)  # May or June
    assert months[7]["month"] == "Dec 2026"
    assert rops.index(min(rops)) in (7, 8)  # December or January, equally quiet


def test_rising_item_gets_a_damped_trend_and_a_note(tmp_path: Path) -> None:
    src = _shop(tmp_path)
    doc = _plan(src, "--as-of", "2026-01-05")
    r = _item(doc, "RISE")
    assert "trend" in r["forecast"]
    # the level at the end is about 10 * 1.012^156 = 64 a week, well above the average 31
    assert r["demand_per_period"] > 1.5 * np.mean(10.0 * 1.012 ** np.arange(WEEKS))
    notes = [p for p in doc["problems"] if p["item"] == "RISE"]
    text = " ".join(p["message"] for p in notes)
    assert "damped" in text and "demand-trend" not in [p["code"] for p in notes]


def test_year_ahead_sheet_reads_back(tmp_path: Path) -> None:
    src = _shop(tmp_path)
    _plan(src, "--as-of", "2026-03-15")
    wb = openpyxl.load_workbook(src.with_name("shop-policy.xlsx"), read_only=True)
    assert "Year ahead" in wb.sheetnames
    rows = [list(r) for r in wb["Year ahead"].iter_rows(values_only=True)]
    head = next(r for r in rows if r and r[0] == "Item")
    assert head[2] == "Figure" and head[3] == "Mar 2026" and head[-1] == "Feb 2027"
    seas = next(i for i, r in enumerate(rows) if r and r[0] == "SEAS")
    assert rows[seas][2] == "Reorder point"
    assert rows[seas + 1][2] == "Order quantity" and rows[seas + 2][2] == "Safety stock"
    assert all(isinstance(v, (int, float)) for v in rows[seas][3:])
    assert not any(r and r[0] == "FLAT" for r in rows)
    text = " ".join(str(c) for r in rows[:4] for c in r if c)
    assert "licensed staff" in text
    summary = [r[0] for r in wb["Summary"].iter_rows(max_row=12, values_only=True) if r[0]]
    assert any(str(s).startswith("Planning with seasons and trends") for s in summary)


def test_plan_as_of_settings_row_and_a_bad_one(tmp_path: Path) -> None:
    good = _shop(tmp_path, settings={"Plan as of": dt.datetime(2026, 5, 1)})
    doc = _plan(good)
    assert doc["settings"]["plan_as_of"] == "2026-05-01"
    assert doc["season_plan"][0]["months"][0]["month"] == "May 2026"
    bad_dir = tmp_path / "bad"
    bad_dir.mkdir()
    bad = _shop(bad_dir, settings={"Plan as of": "next spring"})
    doc = _plan(bad)
    warn = [p for p in doc["problems"] if p["code"] == "setting-plan_as_of"]
    assert warn and warn[0]["sheet"] == "Settings" and warn[0]["cell"] == "B2"

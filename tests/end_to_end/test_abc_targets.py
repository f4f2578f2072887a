"""ABC classes with cut-offs from Settings, and a service target per class.

References: the Pareto (ABC) split by annual spend with 80 / 15 / 5 % of spend is common
practice (Silver, Pyke & Peterson, Inventory Management and Production Planning and
Scheduling, 3rd ed., 1998, ch. 3); classes are checked against a brute-force ranking done
here, and reorder points against scipy.stats.norm.
"""

from __future__ import annotations

import numpy as np
import pytest
from builders import BASE_HEADERS, write_workbook
from click.testing import CliRunner
from scipy import stats

import xlpolicy
from xlpolicy.cli import main

HEADERS = [*BASE_HEADERS, "Annual demand", "Demand sd", "Service target"]
# Spend = annual demand x unit cost (10): 6000, 2500, 900, 400, 200 -> total 10,000.
DEMAND = {"P1": 600, "P2": 250, "P3": 90, "P4": 40, "P5": 20}


def _items(own: dict[str, float] | None = None) -> list[list]:
    own = own or {}
    return [
        [code, "thing", "Acme", 10.0, 20.0, 0.2, 14.0, d, 3.0, own.get(code)]
        for code, d in DEMAND.items()
    ]


def _brute_classes(spend: dict[str, float], a: float, ab: float) -> dict[str, str]:
    """Common practice: an item is A while the spend ranked above it is under the A share."""
    total = sum(spend.values())
    out, before = {}, 0.0
    for code in sorted(spend, key=lambda c: -spend[c]):
        share = before / total
        out[code] = "A" if share < a else "B" if share < ab else "C"
        before += spend[code]
    return out


def _results(tmp_path, settings=None, own=None, **kw):
    path = write_workbook(tmp_path / "w.xlsx", _items(own), headers=HEADERS, settings=settings)
    report = xlpolicy.analyse(path, **kw)
    return report, report.results.set_index("item")


def test_default_cutoffs_are_80_15_5(tmp_path):
    report, r = _results(tmp_path)
    spend = {c: d * 10.0 for c, d in DEMAND.items()}
    assert r["abc_class"].to_dict() == _brute_classes(spend, 0.80, 0.95)
    assert report.settings["abc_cutoffs"] == pytest.approx((0.80, 0.95))


def test_cutoffs_from_settings(tmp_path):
    report, r = _results(tmp_path, settings={"ABC share A": "50%", "ABC share B": 0.3})
    spend = {c: d * 10.0 for c, d in DEMAND.items()}
    expect = _brute_classes(spend, 0.50, 0.80)
    assert r["abc_class"].to_dict() == expect
    assert set(expect.values()) == {"A", "B", "C"}  # the test can tell the cut-offs apart
    assert expect != _brute_classes(spend, 0.80, 0.95)
    assert report.settings["sources"]["abc_cutoffs"].startswith("Settings")


def test_class_targets_apply_where_the_item_gives_none(tmp_path):
    settings = {"Service target A": "99%", "Service target C": 0.80, "Demand model": "normal"}
    _, r = _results(tmp_path, settings=settings, own={"P1": 0.90})
    # P1 (class A) keeps its own 90 %; P3 is B (share before it 85 %; no class target:
    # the 95 % default); P5 is C (share before it 98 %).
    assert r.loc["P1", "service_target"] == pytest.approx(0.90)
    assert r.loc["P1", "service_target_source"] == "item"
    assert r.loc["P2", "service_target"] == pytest.approx(0.99)  # A, from Service target A
    assert r.loc["P3", "abc_class"] == "B"
    assert r.loc["P3", "service_target"] == pytest.approx(0.95)
    assert r.loc["P3", "service_target_source"] == "Settings: Service target"
    assert r.loc["P5", "abc_class"] == "C"
    assert r.loc["P5", "service_target"] == pytest.approx(0.80)
    assert r.loc["P5", "service_target_source"] == "Settings: Service target C"
    # The reorder point meets the class target: smallest whole R with Phi((R - mu)/sd)
    # >= target under the normal model (scipy.stats), checked for a class-C item.
    mu, sd = r.loc["P5", "lead_time_demand_mean"], r.loc["P5", "lead_time_demand_sd"]
    assert r.loc["P5", "model"] == "normal"
    assert r.loc["P5", "reorder_point"] == np.ceil(stats.norm.ppf(0.80, mu, sd) - 1e-9)
    assert r.loc["P5", "cycle_service"] >= 0.80 - 1e-12


def test_class_targets_change_the_reorder_point(tmp_path):
    _, low = _results(tmp_path, settings={"Service target A": 0.80})
    _, high = _results(tmp_path, settings={"Service target A": 0.995})
    assert high.loc["P1", "reorder_point"] > low.loc["P1", "reorder_point"]
    assert high.loc["P5", "reorder_point"] == low.loc["P5", "reorder_point"]  # class C


def test_bad_share_is_reported_by_cell(tmp_path):
    path = write_workbook(
        tmp_path / "w.xlsx", _items(), headers=HEADERS, settings={"ABC share A": 1.5}
    )
    p = [p for p in xlpolicy.check(path) if p.code == "setting-abc_share_a"]
    assert len(p) == 1 and p[0].sheet == "Settings" and p[0].cell.startswith("B")
    assert "between 0 and 1" in p[0].message


def test_shares_over_100_percent_are_reported(tmp_path):
    report, _ = _results(tmp_path, settings={"ABC share A": 0.9, "ABC share B": 0.2})
    p = [p for p in report.problems if p.code == "setting-abc_shares"]
    assert len(p) == 1 and "more than 100%" in p[0].message
    assert report.settings["abc_cutoffs"] == pytest.approx((0.80, 0.95))


def test_bad_class_target_is_reported_by_cell(tmp_path):
    path = write_workbook(
        tmp_path / "w.xlsx", _items(), headers=HEADERS, settings={"Service target B": "120%"}
    )
    p = [p for p in xlpolicy.check(path) if p.code == "setting-service_target_b"]
    assert len(p) == 1 and p[0].sheet == "Settings" and p[0].cell


def test_set_option_on_the_command_line(tmp_path):
    path = write_workbook(tmp_path / "w.xlsx", _items(), headers=HEADERS)
    out = tmp_path / "o.csv"
    res = CliRunner().invoke(
        main, ["plan", str(path), "-q", "--csv", str(out), "--set", "service target a=0.99"]
    )
    assert res.exit_code == 0, res.output
    import pandas as pd

    df = pd.read_csv(out).set_index("item")
    assert df.loc["P1", "service_target"] == pytest.approx(0.99)
    assert df.loc["P1", "abc_class"] == "A"
    bad = CliRunner().invoke(main, ["plan", str(path), "--set", "no such thing=1"])
    assert bad.exit_code == 2 and "unknown setting" in bad.output
    bad = CliRunner().invoke(main, ["plan", str(path), "--set", "Service target A=2"])
    assert bad.exit_code == 2 and "between 0 and 1" in bad.output

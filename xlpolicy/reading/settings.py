"""Reading the optional Settings sheet and resolving every setting to one value.

Precedence, highest first: the command line (or API arguments), the Settings sheet, the
contract's default. Where each value came from is kept, because the summary sheet shows
it to the accountant.
"""

from __future__ import annotations

import datetime as _dt
from typing import Any

from ..contract import (
    CLASS_TARGET_SETTINGS,
    PERIODS,
    PERIODS_PER_YEAR,
    RATE_SETTINGS,
    READ_SETTINGS,
    SERVICE_MEASURES,
    normalise,
)
from ..problems import ProblemLog
from .cells import describe, is_blank, parse_number
from .decimals import Convention, settle
from .workbook import RawSheet, cell_ref

_SETTING_LOOKUP = {name: s.key for s in READ_SETTINGS for name in s.names()}


def _words(table: dict[str, tuple[str, ...]]) -> dict[str, str]:
    """Normalised spelling -> canonical word, for each canonical word and its other names."""
    return {normalise(w): name for name, others in table.items() for w in (name, *others)}


_MEASURE_LOOKUP = _words(
    {
        "cycle service": (
            "cycle service level",
            "csl",
            "type 1",
            "probability of no stockout",
            "alpha",
            "cycle",
        ),
        "fill rate": ("fill", "type 2", "beta", "fill rate service", "unit fill rate"),
        "shortage cost": ("cost", "backorder cost", "stockout cost", "shortage", "penalty cost"),
    }
)
_PERIOD_LOOKUP = _words(
    {
        "day": ("days", "daily", "d"),
        "week": ("weeks", "weekly", "w", "wk"),
        "month": ("months", "monthly", "m", "mo"),
    }
)
_MODEL_LOOKUP = _words(
    {
        "auto": ("automatic", "choose", "best"),
        "normal": ("gaussian", "norm"),
        "poisson": ("pois",),
        "negative binomial": ("negbin", "nb", "neg binomial", "nbinom"),
        "gamma": (),
    }
)
_YES = {"yes", "y", "true", "1", "on"}
_NO = {"no", "n", "false", "0", "off"}


def setting_key(name: Any) -> str | None:
    """The contract key of a setting named loosely ("service target a"), or None."""
    return _SETTING_LOOKUP.get(normalise(name))


def parse_model(value: Any) -> str | None:
    """A demand model name (or "auto"), loosely matched, or None."""
    return _MODEL_LOOKUP.get(normalise(value)) if not is_blank(value) else None


def parse_yes_no(value: Any) -> bool | None:
    """yes/no, true/false, 1/0 (or a real boolean), or None."""
    if isinstance(value, bool):
        return value
    return True if normalise(value) in _YES else False if normalise(value) in _NO else None


def parse_measure(value: Any) -> str | None:
    """A service measure name, loosely matched, or None."""
    return _MEASURE_LOOKUP.get(normalise(value)) if not is_blank(value) else None


def parse_day(value: Any) -> _dt.date | None:
    """A date from a date cell or text such as 2025-03-01 (a time of day is dropped)."""
    if isinstance(value, _dt.datetime):
        return value.date()
    if isinstance(value, _dt.date):
        return value
    text = str(value).strip()[:10]
    try:
        return _dt.date.fromisoformat(text)
    except ValueError:
        return None


def parse_period(value: Any) -> str | None:
    """A period name (day, week, month), loosely matched, or None."""
    return _PERIOD_LOOKUP.get(normalise(value)) if not is_blank(value) else None


def read_settings(sheet: RawSheet | None, log: ProblemLog) -> dict[str, tuple[Any, str]]:
    """Settings found in the sheet: key -> (value, A1 cell of the value).

    Each row names a setting in its first non-empty cell and gives its value in the next.
    A header row ("Setting", "Value") and rows that name no known setting but carry no
    value are skipped; an unknown setting with a value is reported.
    """
    found: dict[str, tuple[Any, str]] = {}
    if sheet is None:
        return found
    for values, rownum in zip(sheet.rows, sheet.row_numbers, strict=True):
        j = next((k for k, v in enumerate(values) if not is_blank(v)), None)
        if j is None:
            continue
        name = values[j]
        value = values[j + 1] if j + 1 < len(values) else None
        key = _SETTING_LOOKUP.get(normalise(name))
        if key is None:
            if normalise(name) in {"setting", "settings", "name", "parameter"} or is_blank(value):
                continue
            log.warning(
                f"Unknown setting {describe(name)}; it was ignored. Known settings: "
                + ", ".join(s.title for s in READ_SETTINGS)
                + ".",
                sheet=sheet.name,
                cell=cell_ref(j, rownum),
                value=name,
                code="setting-unknown",
            )
            continue
        if key in found:
            log.warning(
                f"The setting {describe(name)} appears twice; the first one "
                f"({found[key][1]}) was used. Delete one of them.",
                sheet=sheet.name,
                cell=cell_ref(j, rownum),
                value=name,
                code="setting-duplicate",
            )
            continue
        if is_blank(value):
            continue
        found[key] = (value, cell_ref(j + 1, rownum))
    return found


def resolve_settings(
    sheet_values: dict[str, tuple[Any, str]],
    overrides: dict[str, Any],
    log: ProblemLog,
    sheet_name: str = "Settings",
) -> dict[str, Any]:
    """One value per setting, with ``sources`` saying where each came from.

    A bad value in the sheet is reported and the default used instead; a bad override is a
    usage error the caller checks before (the CLI validates its options).
    """
    out: dict[str, Any] = {}
    sources: dict[str, str] = {}
    for s in READ_SETTINGS:
        out[s.key] = s.default
        sources[s.key] = "default"

    def bad(key: str, raw: Any, cell: str, why: str) -> None:
        log.warning(
            f"Setting '{key.replace('_', ' ')}' = {describe(raw)}: {why}. The default "
            f"({SETTING_DEFAULT_TEXT.get(key, 'none')}) was used.",
            sheet=sheet_name,
            cell=cell,
            value=raw,
            code=f"setting-{key}",
        )

    for key, (raw, cell) in sheet_values.items():
        if key == "period":
            p = parse_period(raw)
            if p is None:
                bad(key, raw, cell, "write day, week or month")
                continue
            out[key] = p
        elif key == "service_measure":
            m = parse_measure(raw)
            if m is None:
                bad(key, raw, cell, "write " + ", ".join(f"'{m}'" for m in SERVICE_MEASURES))
                continue
            out[key] = m
        elif key == "plan_as_of":
            day = parse_day(raw)
            if day is None:
                bad(key, raw, cell, "write a date, e.g. 2025-03-01")
                continue
            out[key] = day
        elif key in ("currency", "history_file"):
            out[key] = str(raw).strip()
        elif key == "demand_model":
            m = parse_model(raw)
            if m is None:
                bad(key, raw, cell, "write auto, normal, poisson, negative binomial or gamma")
                continue
            out[key] = m
        elif key == "exchange_curve" and str(raw).strip().lower() == "auto":
            out[key] = "auto"
        elif key in ("cap_outliers", "exchange_curve"):
            yes = parse_yes_no(raw)
            if yes is None:
                bad(
                    key,
                    raw,
                    cell,
                    "write yes, no or auto" if key == "exchange_curve" else "write yes or no",
                )
                continue
            out[key] = "yes" if yes else "no"
        else:
            x, why = parse_number(raw, rate=key in RATE_SETTINGS)
            if why:
                bad(key, raw, cell, why)
                continue
            assert x is not None
            _, unclear, _ = settle(raw, Convention(None))  # 1.200: one cell, no column
            if unclear is not None:
                log.warning(
                    f"Setting '{key.replace('_', ' ')}' {unclear}",
                    sheet=sheet_name,
                    cell=cell,
                    value=raw,
                    code="number-decimal-mark",
                )
            if key in ("service_target", *CLASS_TARGET_SETTINGS.values()) and not 0 < x < 1:
                bad(
                    key,
                    raw,
                    cell,
                    "a service target must lie strictly between 0 and 1 (write 0.95 or 95%)",
                )
                continue
            if key in ("abc_share_a", "abc_share_b") and not 0 < x < 1:
                bad(
                    key,
                    raw,
                    cell,
                    "a share of spend must lie strictly between 0 and 1 (write 0.8 or 80%)",
                )
                continue
            if key == "holding_rate" and not 0 < x <= 1:
                bad(
                    key,
                    raw,
                    cell,
                    "a yearly holding rate must be more than 0 and at most 1 (write 0.25 or 25%)",
                )
                continue
            if key == "order_cost" and x < 0:
                bad(key, raw, cell, "an order cost cannot be negative")
                continue
            if key == "periods_per_year" and x <= 0:
                bad(key, raw, cell, "periods per year must be more than 0")
                continue
            if key == "review_period_days" and x < 0:
                bad(key, raw, cell, "write the days between reviews, e.g. 7, or 0")
                continue
            if key == "dormant_after" and (x < 1 or not float(x).is_integer()):
                bad(key, raw, cell, "write a whole number of periods, 1 or more")
                continue
            if key in ("stock_budget", "orders_cap") and not x > 0:
                bad(key, raw, cell, "a cap must be more than 0; leave it blank for no cap")
                continue
            out[key] = x
        sources[key] = f"Settings {cell}"

    for key, value in overrides.items():
        if value is None:
            continue
        out[key] = value
        sources[key] = "command line"

    out["sources"] = sources
    _abc_cutoffs(out, sheet_values, log, sheet_name)
    finish_period(out)
    return out


def _abc_cutoffs(
    out: dict[str, Any], sheet_values: dict[str, tuple[Any, str]], log: ProblemLog, sheet_name: str
) -> None:
    """The cumulative ABC cut-offs (A share, A + B share) from the two share settings.

    Shares that add up to more than 100 % leave no room for class C: reported, and the
    common-practice defaults (80 % and 15 %) used for both.
    """
    a, b = float(out["abc_share_a"]), float(out["abc_share_b"])
    sources = out["sources"]
    if a + b > 1.0 + 1e-12:
        cell = sheet_values.get("abc_share_b", sheet_values.get("abc_share_a", (None, "")))[1]
        log.warning(
            f"ABC share A ({a:.0%}) and ABC share B ({b:.0%}) add up to more than "
            "100%. Write shares that leave the rest to class C, e.g. 80% and 15%. "
            "The defaults (80% and 15%) were used.",
            sheet=sheet_name,
            cell=cell,
            value=b,
            code="setting-abc_shares",
        )
        a, b = 0.80, 0.15
        out["abc_share_a"], out["abc_share_b"] = a, b
        sources["abc_share_a"] = sources["abc_share_b"] = "default (shares over 100%)"
    out["abc_cutoffs"] = (a, min(a + b, 1.0))
    given = [sources[k] for k in ("abc_share_a", "abc_share_b") if sources[k] != "default"]
    sources["abc_cutoffs"] = ", ".join(dict.fromkeys(given)) or "default"


def finish_period(settings: dict[str, Any]) -> None:
    """Fill days per period and, unless set by the user, periods per year, from the period.

    Called again when the period is inferred from History dates.
    """
    period = settings["period"]
    settings["days_per_period"] = PERIODS[period]
    if settings["sources"]["periods_per_year"].startswith("default"):
        settings["periods_per_year"] = PERIODS_PER_YEAR[period]
        settings["sources"]["periods_per_year"] = f"default for {period}"


SETTING_DEFAULT_TEXT = {
    "demand_model": "auto",
    "cap_outliers": "no",
    "exchange_curve": "auto",
    "stock_budget": "no cap",
    "orders_cap": "no cap",
    "dormant_after": "about a quarter of a year",
    "period": "week",
    "periods_per_year": "365, 52 or 12 by period",
    "service_measure": "cycle service",
    "service_target": "0.95",
    "abc_share_a": "80%",
    "abc_share_b": "15%",
    "service_target_a": "the Service target",
    "service_target_b": "the Service target",
    "service_target_c": "the Service target",
    "review_period_days": "continuous review",
    "plan_as_of": "the day of the run",
}

"""The Python API: what the command line does, callable from code.

    >>> import xlpolicy
    >>> result = xlpolicy.plan("shop.xlsx")            # writes shop-policy.xlsx beside it
    >>> result.report.results[["item", "order_qty", "reorder_point"]]

Every user mistake ends up as a Problem in ``result.problems``; a workbook that cannot be
used at all raises :class:`UnusableWorkbook` carrying the fatal problems.
"""

from __future__ import annotations

import datetime as _dt
import shutil
import tempfile
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from . import paths
from .contract import READ_SETTINGS, SERVICE_MEASURES
from .errors import OutputError, UsageError
from .macros import declared_macro_enabled
from .problems import Problem, ProblemLog, Severity, UnusableWorkbook
from .progress import Progress, silent
from .reading import guard, history_file_path, read_input
from .reading.cells import parse_number
from .reading.settings import parse_measure, resolve_settings, setting_key
from .reading.sources import KIND_NAMES, source_kind
from .report import Report
from .writing.atomic import atomic_output
from .writing.bulk import CellBlock
from .writing.package import CannotMerge, merge_generated_sheets, user_sheet_names
from .writing.tables import write_csv, write_json

# The planner and the sheet writers bring scipy and the whole computation core (half a
# second of imports): they are imported while the History is still being parsed in its
# thread (see _warm_up), or when first needed.


def _warm_up() -> None:
    """Import the planner and the sheet writers (called while reading waits)."""
    from . import planner  # noqa: F401
    from .writing import sheets  # noqa: F401


@dataclass
class PlanResult:
    """What :func:`plan` did: the report, and the files it wrote."""

    report: Report
    output: Path | None = None
    csv: Path | None = None
    json: Path | None = None
    standalone: bool = False
    sheets: list[str] = field(default_factory=list)

    @property
    def problems(self) -> list[Problem]:
        return self.report.problems


def default_output_path(path: str | Path) -> Path:
    """``<input name>-policy.<ext>`` beside the input (.xlsm keeps its macros and extension).

    Inputs that are not .xlsx/.xlsm give an .xlsx named with their kind, so that shop.xlsx,
    shop.ods, shop.xls and a folder shop/ beside each other never share an output:
    ``shop.ods`` -> ``shop-ods-policy.xlsx``, ``shop.xls`` -> ``shop-xls-policy.xlsx``, the
    folder ``shop/`` -> ``shop-csv-policy.xlsx`` beside it.
    """
    p = Path(path)
    if p.is_dir():
        q = p if p.name else p.resolve()
        return q.with_name(f"{q.name}-csv-policy.xlsx")
    suffix = p.suffix.lower()
    if suffix in (".xlsx", ".xlsm"):
        if suffix == ".xlsx" and declared_macro_enabled(p):  # macros under an .xlsx name
            suffix = ".xlsm"
        return p.with_name(f"{p.stem}-policy{suffix}")
    kind = suffix.lstrip(".") or "input"
    return p.with_name(f"{p.stem}-{kind}-policy.xlsx")


def _has_macros(src: Path) -> bool:
    """An .xlsm, or an .xlsx whose package is declared macro-enabled (see xlpolicy.macros)."""
    return src.is_file() and (src.suffix.lower() == ".xlsm" or declared_macro_enabled(src))


def _overrides(
    service_measure: str | None,
    service_target: float | str | None,
    holding_rate: float | str | None,
    order_cost: float | str | None,
    history: str | Path | None = None,
    **caps: Any,
) -> dict[str, Any]:
    """Check command-line overrides of the Settings; raise UsageError if one is bad."""
    out: dict[str, Any] = _cap_overrides(**caps)
    if history is not None:
        history_path = Path(history).expanduser()
        if not history_path.is_file():
            raise UsageError(f"the history file {history} does not exist")
        out["history_file"] = str(history_path.resolve())
    if service_measure is not None:
        m = parse_measure(service_measure)
        if m is None:
            raise UsageError(
                f"service measure {service_measure!r} is not one of " + ", ".join(SERVICE_MEASURES)
            )
        out["service_measure"] = m
    if service_target is not None:
        t = _number(service_target, "service target", rate=True)
        if not 0 < t < 1:
            raise UsageError("service target must lie strictly between 0 and 1 (e.g. 0.95 or 95%)")
        out["service_target"] = t
    if holding_rate is not None:
        h = _number(holding_rate, "holding rate", rate=True)
        if not 0 < h <= 1:
            raise UsageError("holding rate must be more than 0 and at most 1 (e.g. 0.25 or 25%)")
        out["holding_rate"] = h
    if order_cost is not None:
        c = _number(order_cost, "order cost")
        if c < 0:
            raise UsageError("order cost cannot be negative")
        out["order_cost"] = c
    return out


def _cap_overrides(
    stock_budget: float | str | None = None,
    orders_cap: float | str | None = None,
    exchange_curve: bool | None = None,
) -> dict[str, Any]:
    """The portfolio overrides: a cap on stock value or orders, and the exchange curve."""
    out: dict[str, Any] = {}
    for key, value, what in (
        ("stock_budget", stock_budget, "stock budget"),
        ("orders_cap", orders_cap, "orders cap"),
    ):
        if value is None:
            continue
        x = _number(value, what)
        if not x > 0:
            raise UsageError(f"the {what} must be more than 0")
        out[key] = x
    if exchange_curve is not None:
        out["exchange_curve"] = "yes" if exchange_curve else "no"
    return out


def _named_settings(values: dict[str, Any] | None) -> dict[str, Any]:
    """Settings given by name ({"Service target A": "99%"}), checked like the Settings sheet.

    Names match loosely, as on the sheet; an unknown name or a bad value is a UsageError.
    """
    if not values:
        return {}
    found: dict[str, tuple[Any, str]] = {}
    for name, raw in values.items():
        key = setting_key(name)
        if key is None:
            raise UsageError(
                f"unknown setting {name!r}; known settings: "
                + ", ".join(s.title for s in READ_SETTINGS)
            )
        found[key] = (raw, "")
    log = ProblemLog()
    resolved = resolve_settings(found, {}, log)
    if log.problems:
        raise UsageError(log.problems[0].message.split(" The default")[0])
    return {key: resolved[key] for key in found}


def _simulation_overrides(
    simulate: bool | None, replications: int | str | None, lost_sales: bool
) -> dict[str, Any]:
    """The back-test settings given on the command line or to the API, checked."""
    from .backtest import MAX_RUNS

    out: dict[str, Any] = {"simulate": simulate, "lost_sales": bool(lost_sales) or None}
    if replications is not None:
        x = _number(replications, "replications")
        if not (x == int(x) and 1 <= x <= MAX_RUNS):
            raise UsageError(f"replications must be a whole number from 1 to {MAX_RUNS}")
        out["simulation_runs"] = int(x)
    return out


def _number(value: float | str, what: str, rate: bool = False) -> float:
    """A number given on the command line or to the API, as 0.95 or "95%"."""
    x, why = parse_number(value, rate=rate)
    if why or x is None:
        raise UsageError(f"{what} {value!r} is not a number")
    return x


def analyse(
    path: str | Path,
    *,
    service_measure: str | None = None,
    service_target: float | str | None = None,
    holding_rate: float | str | None = None,
    order_cost: float | str | None = None,
    run_date: _dt.date | None = None,
    progress: Progress = silent,
    allow_large: bool = False,
    stock_budget: float | str | None = None,
    orders_cap: float | str | None = None,
    exchange_curve: bool | None = None,
    history: str | Path | None = None,
    settings: dict[str, Any] | None = None,
    simulate: bool | None = None,
    replications: int | str | None = None,
    lost_sales: bool = False,
    columns: dict[str, str] | None = None,
) -> Report:
    """Read, check and plan a workbook without writing anything.

    Raises UnusableWorkbook when the workbook cannot be used at all. ``progress`` is called
    as the run goes (stage, done, total), for a progress bar. ``allow_large`` raises the
    size limits that protect against zip bombs tenfold (see xlpolicy.reading.guard).
    ``stock_budget`` / ``orders_cap`` cap the average stock value or the orders a year
    across all items, ``exchange_curve`` turns the curve on or off (all three override
    Settings); the results are in ``report.portfolio``. ``history``: a CSV or Parquet
    file of sales history (Item, Period, Quantity) read instead of the History sheet, as
    the Settings row "History file" does. ``settings`` gives any Settings-sheet row by name
    (e.g. {"Service target A": "99%"}); it overrides the sheet, and the named options above
    override it. ``simulate`` (True/False; None: as the Settings sheet says) back-tests
    each policy with ``replications`` runs (default: the Settings value, else 100);
    ``lost_sales`` simulates unmet demand as lost rather than backordered (see
    xlpolicy.backtest).
    """
    paths.check_inputs(paths.input_files(Path(path), _path_or_none(history)))
    log = ProblemLog()
    overrides = {
        **_named_settings(settings),
        **_overrides(
            service_measure,
            service_target,
            holding_rate,
            order_cost,
            stock_budget=stock_budget,
            orders_cap=orders_cap,
            exchange_curve=exchange_curve,
            history=history,
        ),
    }
    overrides.update(_simulation_overrides(simulate, replications, lost_sales))
    if columns:  # {our column: your header}, see xlpolicy.reading.column_map
        overrides["columns"] = dict(columns)
    with guard.allow_large(allow_large), np.errstate(all="ignore"):  # (sums of huge cells)
        data = read_input(Path(path), overrides, log, progress, while_waiting=_warm_up)
    if data is None:
        raise UnusableWorkbook([p for p in log.problems if p.severity is Severity.FATAL])
    progress("Planning", 0, None)
    from .planner import build_report

    with np.errstate(all="ignore"):  # overflows are found and reported, not printed
        report = build_report(data, log, Path(path).name, run_date)
    if report.input_summary["items_planned"] == 0:
        reasons = [p for p in log.sorted() if p.severity in (Severity.ERROR, Severity.WARNING)]
        fatal = Problem(
            Severity.FATAL,
            data.items.sheet,
            "",
            "",
            None,
            f"No item in '{data.items.sheet}' could be planned "
            f"({report.input_summary['items_read']} read). Fix the problems listed "
            "and run again"
            + (f" ({len(reasons)} in all; the first 20 are listed)." if len(reasons) > 20 else "."),
            "no-usable-item",
        )
        raise UnusableWorkbook([fatal, *reasons[:20]])
    return report


def check(path: str | Path, **overrides: Any) -> list[Problem]:
    """Every problem in the workbook, most severe first; nothing is written.

    A workbook that cannot be used gives its fatal problems here rather than raising.
    """
    try:
        return analyse(path, **overrides).problems
    except UnusableWorkbook as exc:
        return exc.problems


def plan(
    path: str | Path,
    output: str | Path | None = None,
    *,
    csv: str | Path | None = None,
    json: str | Path | None = None,
    service_measure: str | None = None,
    service_target: float | str | None = None,
    holding_rate: float | str | None = None,
    order_cost: float | str | None = None,
    write_workbook: bool = True,
    run_date: _dt.date | None = None,
    progress: Progress = silent,
    allow_large: bool = False,
    stock_budget: float | str | None = None,
    orders_cap: float | str | None = None,
    exchange_curve: bool | None = None,
    history: str | Path | None = None,
    settings: dict[str, Any] | None = None,
    simulate: bool | None = None,
    replications: int | str | None = None,
    lost_sales: bool = False,
    columns: dict[str, str] | None = None,
) -> PlanResult:
    """Plan every item in the workbook at ``path`` and write the results.

    The input file is never changed. By default the output is ``<name>-policy.xlsx`` beside
    it: the user's sheets plus the generated ones. Raises UnusableWorkbook or UsageError.
    ``simulate``, ``replications``, ``lost_sales``: the back-test, as for :func:`analyse`.
    """
    src = Path(path)
    out = Path(output) if output is not None else default_output_path(src)
    if write_workbook:
        _check_output_path(src, out)
    outputs = paths.planned_outputs(out if write_workbook else None, csv, json)
    paths.check_outputs(paths.input_files(src, _path_or_none(history)), outputs)
    report = analyse(
        src,
        service_measure=service_measure,
        service_target=service_target,
        holding_rate=holding_rate,
        order_cost=order_cost,
        run_date=run_date,
        progress=progress,
        allow_large=allow_large,
        stock_budget=stock_budget,
        orders_cap=orders_cap,
        exchange_curve=exchange_curve,
        history=history,
        settings=settings,
        simulate=simulate,
        replications=replications,
        lost_sales=lost_sales,
        columns=columns,
    )
    if write_workbook and out.suffix.lower() == ".xlsm" and src.suffix.lower() == ".xlsx":
        report.problems.insert(0, _macro_note(src, out))
    settings_history = history_file_path(src, report.settings)
    if settings_history is not None:  # named by the workbook: known only now, still unwritten
        paths.check_outputs([settings_history], outputs)
    result = PlanResult(report)
    if write_workbook:
        progress(f"Writing {out.name}", 0, None)
        try:
            result.output, result.standalone, result.sheets = write_policy_workbook(
                src, out, report
            )
        except _output_too_large() as exc:
            raise UnusableWorkbook(
                [Problem(Severity.FATAL, "", "", "", None, str(exc), "output-too-large")]
            ) from None
        except OutputError as exc:  # (an intermediate file's failure is the output's)
            raise exc.naming(out) from exc
    if csv is not None:
        write_csv(Path(csv), report)
        result.csv = Path(csv)
    if json is not None:
        write_json(Path(json), report)
        result.json = Path(json)
    return result


def _macro_note(src: Path, out: Path) -> Problem:
    return Problem(
        Severity.WARNING,
        "",
        "",
        "",
        src.name,
        f"{src.name} holds macros although its name ends in .xlsx (spreadsheet programs "
        f"refuse such a file), so the results were written as {out.name}, with the macros "
        "kept. Save your own file as .xlsm too (Excel Macro-Enabled Workbook).",
        "output-macro-enabled",
    )


def _path_or_none(p: str | Path | None) -> Path | None:
    return Path(p).expanduser() if p is not None else None


def _check_output_path(src: Path, out: Path) -> None:
    if out.resolve() == src.resolve():
        raise UsageError(
            f"the output {out} is the input itself; xlpolicy never writes over "
            "your workbook. Choose another name with -o."
        )
    if out.suffix.lower() not in (".xlsx", ".xlsm"):
        raise UsageError(
            f"the output {out.name} must end in .xlsx (or .xlsm for a workbook with macros)"
        )
    if source_kind(src) != "xlsx" and out.suffix.lower() != ".xlsx":
        raise UsageError(
            f"the output {out.name} must end in .xlsx: the results of "
            f"{KIND_NAMES[source_kind(src)]} go to an .xlsx workbook of their own"
        )
    if _has_macros(src) and out.suffix.lower() != ".xlsm":
        raise UsageError(
            f"{src.name} holds macros; its output must end in .xlsm to keep them "
            f"(e.g. {default_output_path(src).name})"
        )
    if out.suffix.lower() == ".xlsm" and not _has_macros(src):
        raise UsageError(
            f"the output {out.name} ends in .xlsm, but {src.name} holds no macros "
            "to keep; name it .xlsx (Excel refuses an .xlsm without macros "
            "inside)"
        )
    if not out.parent.exists():
        raise UsageError(f"the folder {out.parent} does not exist")


def _output_too_large() -> type[Exception]:
    from .writing.sheets import OutputTooLarge

    return OutputTooLarge


def _sheet_names(taken: list[str]) -> dict[str, str]:
    """Generated sheet names that do not clash with the user's own sheets."""
    from .writing.sheets import DEFAULT_SHEET_NAMES

    lower = {t.lower() for t in taken}
    names = {}
    for role, name in DEFAULT_SHEET_NAMES.items():
        candidate, k = name, 2
        while candidate.lower() in lower:
            candidate = f"{name} ({k})"
            k += 1
        names[role] = candidate
        lower.add(candidate.lower())
    return names


def write_policy_workbook(src: Path, out: Path, report: Report) -> tuple[Path, bool, list[str]]:
    """Write the generated sheets into a copy of the user's workbook, or on their own.

    Returns (path written, whether standalone, generated sheet names).
    """
    from .writing.sheets import DEFAULT_SHEET_NAMES, write_generated_workbook

    standalone_reason = None
    kind = source_kind(src)
    taken: list[str] = []
    if kind != "xlsx":
        standalone_reason = ""  # nothing to merge into: the input is not an .xlsx package
    else:
        try:
            taken = user_sheet_names(src)
        except CannotMerge as exc:
            standalone_reason = str(exc)
    with tempfile.TemporaryDirectory(prefix="xlpolicy-") as tmp:
        gen = Path(tmp) / "generated.xlsx"
        if standalone_reason is None:
            names = _sheet_names(taken)
            blocks: dict[int, CellBlock] = {}
            sheets = write_generated_workbook(gen, report, names, deferred=blocks)
            try:
                merge_generated_sheets(src, gen, out, blocks)
                return out, False, sheets
            except CannotMerge as exc:
                standalone_reason = str(exc)
        if kind != "xlsx":
            message = (
                f"Your input is {KIND_NAMES[kind]}, so the results were written to an "
                ".xlsx workbook of their own, without your sheets; your "
                + ("files are" if kind == "csv" else "workbook is")
                + " unchanged."
            )
        else:
            message = (
                f"Your sheets could not be carried over intact ({standalone_reason}), so "
                "the results were written to a workbook of their own; your workbook is "
                "unchanged."
            )
        note = Problem(Severity.WARNING, "", "", "", None, message, "output-standalone")
        report.problems.insert(0, note)
        out = out.with_suffix(".xlsx")
        sheets = write_generated_workbook(
            gen, report, dict(DEFAULT_SHEET_NAMES), link_to_input=False
        )
        with atomic_output(out) as tmp_out:
            shutil.copyfile(gen, tmp_out)
        return out, True, sheets


def demo(folder: str | Path = "xlpolicy-demo", progress: Progress = silent) -> PlanResult:
    """Write the demo workbook of an invented bicycle shop into ``folder`` and plan it.

    The workbook is generated (seeded), so it is the same as examples/demo-shop.xlsx.
    """
    from .demo import build_shop  # lazily: only this command needs the generator

    out = Path(folder)
    out.mkdir(parents=True, exist_ok=True)
    src = out / "demo-shop.xlsx"
    paths.check_outputs([], {"the demo workbook": src, "its policy": default_output_path(src)})
    progress("Writing the demo workbook", 0, None)
    with atomic_output(src) as tmp:
        build_shop(Path(tmp))
    return plan(src, progress=progress)


def template(path: str | Path) -> Path:
    """Write an empty input workbook with the right sheets and headers; return its path."""
    from .template import write_template  # lazily: `python -m xlpolicy.template` runs it too

    p = Path(path)
    paths.check_outputs([], {"the template": p})
    with atomic_output(p) as tmp:
        write_template(Path(tmp))
    return p

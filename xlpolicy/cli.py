"""The command line: a thin layer over xlpolicy.api.

Exit status: 0 when a policy was written (warnings allowed), 1 when the input cannot be
used at all (or the output cannot be written), 2 for a usage error.
"""

from __future__ import annotations

import contextlib
import os
import signal
import sys
import time
import warnings
from pathlib import Path
from typing import Any

import click

from . import __version__, api
from .contract import SERVICE_MEASURES
from .problems import Problem, Severity, UnusableWorkbook
from .report import Report

_SEVERITY_STYLE: dict[Severity, dict[str, Any]] = {
    Severity.FATAL: {"fg": "red", "bold": True},
    Severity.ERROR: {"fg": "red"},
    Severity.WARNING: {"fg": "yellow"},
    Severity.INFO: {"fg": "cyan"},
}


class _Bar:
    """A one-line progress bar on stderr; drawn only on a terminal, never with --quiet."""

    def __init__(self, quiet: bool = False):
        self.enabled = not quiet and sys.stderr.isatty()
        self.last = 0.0
        self.shown = False

    def __call__(self, stage: str, done: int, total: int | None) -> None:
        if not self.enabled:
            return
        now = time.monotonic()
        if now - self.last < 0.1 and done not in (0, total):
            return
        self.last = now
        if total:
            frac = min(max(done / total, 0.0), 1.0)
            filled = int(frac * 24)
            text = f"{stage} [{'#' * filled}{'.' * (24 - filled)}] {frac:4.0%}"
        else:
            text = f"{stage} ..."
        click.echo("\r\x1b[K" + text, nl=False, err=True, color=True)
        self.shown = True

    def close(self) -> None:
        if self.shown:
            click.echo("\r\x1b[K", nl=False, err=True, color=True)
            self.shown = False


def _override_options(f: Any) -> Any:
    """Options that override the workbook's Settings sheet, shared by plan and check."""
    f = click.option(
        "--history",
        "history",
        type=click.Path(path_type=Path, exists=True, dir_okay=False),
        default=None,
        metavar="FILE",
        help="Read the sales history from this CSV or Parquet file (columns Item, "
        "Period, Quantity) instead of the History sheet: for a history "
        "longer than a sheet holds.",
    )(f)
    f = click.option(
        "--order-cost",
        type=str,
        default=None,
        metavar="MONEY",
        help="Cost of one order, for items that leave it blank.",
    )(f)
    f = click.option(
        "--holding-rate",
        type=str,
        default=None,
        metavar="RATE",
        help="Yearly holding cost as a fraction of unit cost, e.g. 0.25 or 25%, for "
        "items that leave it blank.",
    )(f)
    f = click.option(
        "--target",
        "service_target",
        type=str,
        default=None,
        metavar="RATE",
        help="Service target for items that leave it blank, e.g. 0.95 or 95%.",
    )(f)
    f = click.option(
        "--measure",
        "service_measure",
        default=None,
        metavar="MEASURE",
        help="How the reorder point is set: "
        + ", ".join(f"'{m}'" for m in SERVICE_MEASURES)
        + " (or cycle-service, fill-rate, shortage-cost). Default: the "
        "Settings sheet, else 'cycle service'.",
    )(f)
    return f


def _portfolio_options(f: Any) -> Any:
    """--budget, --orders-cap, --curve/--no-curve: decisions across all items (over Settings)."""
    f = click.option(
        "--curve/--no-curve",
        "curve",
        default=None,
        help="Trace the exchange curve on the Summary, or leave it out (a faster "
        "run). Default: the Settings row, else only up to 20,000 items.",
    )(f)
    f = click.option(
        "--orders-cap",
        type=str,
        default=None,
        metavar="N",
        help="Cap on the orders a year, all items together; order quantities "
        "are raised at least cost to meet it.",
    )(f)
    f = click.option(
        "--budget",
        "stock_budget",
        type=str,
        default=None,
        metavar="MONEY",
        help="Cap on the average value of all stock held; order quantities "
        "are lowered at least cost to meet it.",
    )(f)
    return f


def _caps(stock_budget: str | None, orders_cap: str | None, curve: bool | None) -> dict[str, Any]:
    return {"stock_budget": stock_budget, "orders_cap": orders_cap, "exchange_curve": curve}


def _set_option(f: Any) -> Any:
    """--set NAME=VALUE: any Settings row from the command line (repeatable)."""
    return click.option(
        "--set",
        "named",
        multiple=True,
        metavar="NAME=VALUE",
        help="Any setting of the Settings sheet, by name, e.g. "
        "--set 'Service target A=99%'. Repeatable; overrides the sheet.",
    )(f)


def _named(pairs: tuple[str, ...]) -> dict[str, str]:
    """NAME=VALUE pairs as a dict; a pair without '=' is a usage error."""
    out: dict[str, str] = {}
    for pair in pairs:
        name, eq, value = pair.partition("=")
        if not eq or not name.strip():
            raise click.UsageError(f"--set {pair!r}: write NAME=VALUE, e.g. 'Service target A=99%'")
        out[name.strip()] = value.strip()
    return out


def _allow_large_option(f: Any) -> Any:
    """--allow-large: raise the limits that keep zip bombs out (for a trusted, huge file)."""
    return click.option(
        "--allow-large",
        is_flag=True,
        help="Read a trusted workbook that unpacks to more than the safety "
        "limits allow (they keep out files made to exhaust memory); "
        "raises them tenfold. Same as XLPOLICY_ALLOW_LARGE=1.",
    )(f)


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="xlpolicy")
def main() -> None:
    """Order quantities, reorder points and safety stock from a stock workbook.

    Start with 'xlpolicy template items.xlsx', fill in your items and sales history,
    then run 'xlpolicy check items.xlsx' and 'xlpolicy plan items.xlsx'.
    """


@main.command()
@click.argument("workbook", type=click.Path(path_type=Path))
@click.option(
    "-o",
    "--output",
    type=click.Path(path_type=Path),
    default=None,
    help="Where to write the policy workbook (default: <name>-policy.xlsx beside the input).",
)
@click.option(
    "--csv",
    "csv_path",
    type=click.Path(path_type=Path),
    default=None,
    help="Also write the per-item table as CSV.",
)
@click.option(
    "--json",
    "json_path",
    type=click.Path(path_type=Path),
    default=None,
    help="Also write the per-item table, problems and totals as JSON.",
)
@_override_options
@_portfolio_options
@_set_option
@_allow_large_option
@click.option(
    "--simulate/--no-simulate",
    "simulate",
    default=None,
    help="Back-test each policy by simulating it on resamples of the item's own "
    "demand, and warn where it falls short of what it promises. Default: as "
    "the Settings sheet's 'Simulation runs' says (off when blank).",
)
@click.option(
    "--replications",
    type=str,
    default=None,
    metavar="N",
    help="Simulation runs per item for --simulate (default: the Settings value, "
    "else 100); giving it turns the back-test on.",
)
@click.option(
    "--lost-sales",
    is_flag=True,
    help="In the back-test, demand that finds no stock is lost rather than backordered.",
)
@click.option("-q", "--quiet", is_flag=True, help="Print only the path written and errors.")
def plan(
    workbook: Path,
    output: Path | None,
    csv_path: Path | None,
    json_path: Path | None,
    service_measure: str | None,
    service_target: str | None,
    holding_rate: str | None,
    order_cost: str | None,
    history: Path | None,
    stock_budget: str | None,
    orders_cap: str | None,
    curve: bool | None,
    named: tuple[str, ...],
    allow_large: bool,
    simulate: bool | None,
    replications: str | None,
    lost_sales: bool,
    quiet: bool,
) -> None:
    """Compute the policy for every item and write the policy workbook.

    Your WORKBOOK is never changed. The output holds your own sheets plus Policy, Summary,
    Reorder now and Warnings.
    """
    bar = _Bar(quiet)
    given = _named(named)
    result = _run(
        lambda: api.plan(
            workbook,
            output,
            csv=csv_path,
            json=json_path,
            service_measure=service_measure,
            service_target=service_target,
            holding_rate=holding_rate,
            order_cost=order_cost,
            progress=bar,
            allow_large=allow_large,
            history=history,
            settings=given,
            simulate=simulate,
            replications=replications,
            lost_sales=lost_sales,
            **_caps(stock_budget, orders_cap, curve),
        ),
        bar,
    )
    _print_run(result, quiet)


@main.command()
@click.argument("folder", type=click.Path(path_type=Path), default="xlpolicy-demo")
@click.option("-q", "--quiet", is_flag=True, help="Print only the paths written and errors.")
def demo(folder: Path, quiet: bool) -> None:
    """Write the demo workbook of an invented bicycle shop into FOLDER and plan it.

    A quick way to see what xlpolicy makes: open FOLDER/demo-shop-policy.xlsx afterwards.
    The demo holds a few deliberate mistakes, to show the warnings.
    """
    bar = _Bar(quiet)
    result = _run(lambda: api.demo(folder, progress=bar), bar)
    if not quiet:
        click.echo(f"Wrote the demo workbook {folder / 'demo-shop.xlsx'}")
    _print_run(result, quiet)


def _print_run(result: api.PlanResult, quiet: bool) -> None:
    """What a planning run read, found and wrote."""
    report = result.report
    if not quiet:
        _print_read(report)
        _print_problems(report.problems)
        _print_totals(report)
    for p in (result.output, result.csv, result.json):
        if p is not None:
            click.echo(f"Wrote {p}" if not quiet else str(p))
    if result.standalone and not quiet:
        click.echo("Note: your own sheets are not in it (see the first warning).")


@main.command()
@click.argument("workbook", type=click.Path(path_type=Path))
@_override_options
@_portfolio_options
@_set_option
@_allow_large_option
def check(
    workbook: Path,
    service_measure: str | None,
    service_target: str | None,
    holding_rate: str | None,
    order_cost: str | None,
    history: Path | None,
    stock_budget: str | None,
    orders_cap: str | None,
    curve: bool | None,
    named: tuple[str, ...],
    allow_large: bool,
) -> None:
    """Report every problem in WORKBOOK without writing anything.

    Exit status 0 if it can be planned (possibly with warnings), 1 if it cannot.
    """
    bar = _Bar()
    given = _named(named)
    report = _run(
        lambda: api.analyse(
            workbook,
            service_measure=service_measure,
            service_target=service_target,
            holding_rate=holding_rate,
            order_cost=order_cost,
            progress=bar,
            allow_large=allow_large,
            history=history,
            settings=given,
            **_caps(stock_budget, orders_cap, curve),
        ),
        bar,
    )
    _print_read(report)
    _print_problems(report.problems, limit=None)
    if not report.problems:
        click.echo("No problems found.")


@main.command()
@click.argument("path", type=click.Path(path_type=Path), default="xlpolicy-template.xlsx")
@click.option("--force", is_flag=True, help="Replace PATH if it exists.")
def template(path: Path, force: bool) -> None:
    """Write an empty input workbook with the right sheets and headers to PATH."""
    if path.exists() and not force:
        raise click.UsageError(f"{path} exists; use --force to replace it")
    if path.suffix.lower() != ".xlsx":
        raise click.UsageError("the template must be an .xlsx file")
    _run(lambda: api.template(path))
    click.echo(f"Wrote {path}")


def _run(fn: Any, bar: _Bar | None = None) -> Any:
    """Call into the API, turning the user's mistakes into messages and exit codes."""

    def call() -> Any:
        try:
            with warnings.catch_warnings():
                # openpyxl warns about parts of a file it skips (extensions, odd numbers) on
                # stderr with its own source line; what matters reaches the user as problems
                warnings.filterwarnings("ignore", module=r"openpyxl(\.|$)")
                return fn()
        finally:  # clear the progress line before anything else is printed
            if bar is not None:
                bar.close()

    previous = _stop_on_sigterm()
    try:
        return call()
    except KeyboardInterrupt:
        click.echo(
            click.style(
                "Stopped before the end. Nothing half-written was left behind: an output file is "
                "only put in place once complete, and your workbook is unchanged.",
                fg="red",
            ),
            err=True,
        )
        sys.exit(130)
    except api.UsageError as exc:
        raise click.UsageError(str(exc)) from None
    except UnusableWorkbook as exc:
        click.echo(click.style("Cannot use this workbook:", fg="red", bold=True), err=True)
        _print_problems(exc.problems, limit=None, err=True)
        sys.exit(1)
    except OSError as exc:
        name = getattr(exc, "filename", None) or ""
        msg = (
            f"{name}: {exc.strerror or exc}. If the file is open in another program, close it "
            "and try again."
        )
        click.echo(click.style(f"Could not write: {msg}", fg="red"), err=True)
        sys.exit(1)
    except Exception as exc:  # a bug of ours: say so plainly; traceback on request
        if os.environ.get("XLPOLICY_DEBUG"):
            raise
        click.echo(
            click.style(
                f"xlpolicy hit an internal error ({type(exc).__name__}: {exc}). Your workbook was "
                "not changed. Please report this with the workbook if you can; set "
                "XLPOLICY_DEBUG=1 for details.",
                fg="red",
            ),
            err=True,
        )
        sys.exit(1)
    finally:
        _restore_sigterm(previous)


def _stop_on_sigterm() -> Any:
    """Let a termination signal stop the run like Ctrl-C, so temporary files are removed."""

    def stop(signum: int, frame: Any) -> None:
        raise KeyboardInterrupt

    try:
        return signal.signal(signal.SIGTERM, stop)
    except (ValueError, OSError):  # not the main thread: leave signals alone
        return None


def _restore_sigterm(previous: Any) -> None:
    if previous is not None:
        with contextlib.suppress(ValueError, OSError):
            signal.signal(signal.SIGTERM, previous)


def _print_read(report: Report) -> None:
    s = report.input_summary
    layout = s.get("history_layout")
    hist = (
        (
            f"History: {s.get('history_items', 0)} items x {s.get('periods', 0)} "
            f"{s.get('period', 'period')}s ({layout} layout)"
        )
        if layout != "none"
        else ("no History sheet")
    )
    click.echo(f"Read {s.get('file')}: {s.get('items_read')} items; {hist}.")
    click.echo(
        f"Planned {s.get('items_planned')} items, skipped {s.get('items_skipped')}; "
        f"service measure: {report.settings['service_measure']}."
    )


def _print_problems(problems: list[Problem], limit: int | None = 10, err: bool = False) -> None:
    if not problems:
        return
    counts = {sev: sum(1 for p in problems if p.severity is sev) for sev in Severity}
    parts = [f"{n} {sev.value}{'s' if n != 1 else ''}" for sev, n in counts.items() if n]
    click.echo("Problems: " + ", ".join(parts), err=err)
    shown = problems if limit is None else problems[:limit]
    for p in shown:
        where = p.where()
        item = f" [{p.item}]" if p.item else ""
        click.echo(
            "  "
            + click.style(f"{p.severity.value:<7}", **_SEVERITY_STYLE[p.severity])
            + f" {where}{item}: {p.message}",
            err=err,
        )
    if limit is not None and len(problems) > limit:
        click.echo(f"  ... and {len(problems) - limit} more: see the Warnings sheet.", err=err)


def _print_totals(report: Report) -> None:
    t = report.totals
    cur = report.settings.get("currency") or ""

    def money(x: float) -> str:
        return f"{cur}{x:,.2f}" if len(cur) <= 1 else f"{x:,.2f} {cur}"

    rows = [
        ("Annual ordering cost", money(t["annual_ordering_cost"])),
        (
            "Annual holding cost (cycle + safety)",
            money(t["annual_cycle_holding_cost"] + t["annual_safety_holding_cost"]),
        ),
        ("Annual shortage cost", money(t["annual_shortage_cost"])),
        ("Annual total cost", money(t["annual_total_cost"])),
        ("Average inventory value", money(t["average_inventory_value"])),
        ("Items to reorder now", f"{int(t['items_to_reorder'])} ({money(t['reorder_value'])})"),
    ]
    cap = (report.portfolio or {}).get("cap")
    if cap is not None and cap.binding:
        rows.append(("Yearly cost of keeping to the cap", money(cap.cost_of_cap)))
    if t.get("items_simulated"):
        rows.append(
            (
                "Meet their target in simulation",
                f"{int(t['items_meeting_target_in_simulation'])} of "
                f"{int(t['items_with_target_simulated'])}",
            )
        )
    width = max(len(k) for k, _ in rows)
    for k, v in rows:
        click.echo(f"  {k:<{width}}  {v:>16}")


if __name__ == "__main__":  # pragma: no cover
    main()

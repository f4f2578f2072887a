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
from .backtest import AUTO_MAX_ITEMS, DEFAULT_RUNS
from .contract import CAUTION, SERVICE_MEASURES
from .errors import UsageError, XlpolicyError
from .problems import Problem, Severity, UnusableWorkbook
from .report import Report
from .writing.sheets import DEFAULT_SHEET_NAMES, SHEET_ORDER

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


def _plan_help() -> str:
    """plan's help, its facts taken from the code that applies them."""
    names = DEFAULT_SHEET_NAMES
    sheets = ", ".join(names[k] for k in SHEET_ORDER)
    return (
        "Compute the policy for every item and write the policy workbook.\n\n"
        "Your WORKBOOK is never changed. The output (default: <name>-policy.xlsx beside it; "
        "<name>-ods-policy.xlsx and the like for other kinds of input) holds your own "
        f"sheets plus {sheets}; {names['seasons']} when some item is planned with its season "
        f"or trend, and {names['trace']} when the back-test runs. The back-test "
        f"runs by default ({DEFAULT_RUNS} runs an item) for up to {AUTO_MAX_ITEMS:,} items, "
        "unless the Settings sheet's 'Simulation runs' or --simulate/--no-simulate say "
        "otherwise."
    )


_PLAN_HELP = _plan_help()


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
    """--set NAME=VALUE: any Settings row from the command line (repeatable); --as-of DATE:
    the Settings row 'Plan as of'."""
    f = click.option(
        "--as-of",
        metavar="DATE",
        expose_value=False,
        callback=_keep_as_of,
        help="Plan as of this date (e.g. 2025-03-01): items planned with their season or "
        "trend get the policy for the lead time from then. Default: today.",
    )(f)
    return click.option(
        "--set",
        "named",
        multiple=True,
        metavar="NAME=VALUE",
        help="Any setting of the Settings sheet, by name, e.g. "
        "--set 'Service target A=99%'. Repeatable; overrides the sheet.",
    )(f)


def _keep_as_of(ctx: click.Context, param: click.Parameter, value: str | None) -> None:
    if value is not None:
        ctx.meta["xlpolicy_as_of"] = value


def _named(pairs: tuple[str, ...]) -> dict[str, str]:
    """NAME=VALUE pairs as a dict (with --as-of as 'Plan as of'); a pair without '=' is a
    usage error."""
    out: dict[str, str] = {}
    ctx = click.get_current_context(silent=True)
    if ctx is not None and ctx.meta.get("xlpolicy_as_of") is not None:
        out["Plan as of"] = str(ctx.meta["xlpolicy_as_of"]).strip()
    for pair in pairs:
        name, eq, value = pair.partition("=")
        if not eq or not name.strip():
            raise click.UsageError(f"--set {pair!r}: write NAME=VALUE, e.g. 'Service target A=99%'")
        out[name.strip()] = value.strip()
    return out


def _column_option(f: Any) -> Any:
    """--column 'OURS=YOURS': read the owner's header as one of our columns (repeatable)."""
    return click.option(
        "--column",
        "column_names",
        multiple=True,
        metavar="OURS=YOURS",
        help="Read your column YOURS as our column OURS, e.g. --column 'Lead time "
        "days=Supplier LT (wks)' (a unit in your header is still read). Repeatable; "
        "the same as a row of a 'Column names' sheet, which it overrides.",
    )(f)


def _columns(pairs: tuple[str, ...]) -> dict[str, str]:
    """OURS=YOURS pairs as a dict; a pair without '=' is a usage error."""
    out: dict[str, str] = {}
    for pair in pairs:
        ours, eq, yours = pair.partition("=")
        if not eq or not ours.strip() or not yours.strip():
            raise click.UsageError(
                f"--column {pair!r}: write OURS=YOURS, e.g. 'Unit cost=Cost price'"
            )
        out[ours.strip()] = yours.strip()
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


@main.command(help=_PLAN_HELP)
@click.argument("workbook", type=click.Path(path_type=Path))
@click.option(
    "-o",
    "--output",
    type=click.Path(path_type=Path),
    default=None,
    help="Where to write the policy workbook (default: <name>-policy.xlsx beside the "
    "input; <name>-ods-policy.xlsx for an .ods, and so on, so inputs never share one).",
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
@_column_option
@_allow_large_option
@click.option(
    "--simulate/--no-simulate",
    "simulate",
    default=None,
    help="Back-test each policy by simulating it on resamples of the item's own "
    "demand, and warn where it falls short of what it promises. Default: as "
    f"the Settings sheet's 'Simulation runs' says; when blank, {DEFAULT_RUNS} runs an "
    f"item for up to {AUTO_MAX_ITEMS:,} items and none above.",
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
    column_names: tuple[str, ...],
    allow_large: bool,
    simulate: bool | None,
    replications: str | None,
    lost_sales: bool,
    quiet: bool,
) -> None:
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
            columns=_columns(column_names),
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
    from .demo import PLANTED

    bar = _Bar(quiet)
    result = _run(lambda: api.demo(folder, progress=bar), bar)
    if not quiet:
        click.echo(f"Wrote the demo workbook {folder / 'demo-shop.xlsx'}")
    planted = [p for p in result.problems if (p.item, p.code) in set(PLANTED)]
    _print_run(result, quiet, planted=planted)


def _print_run(result: api.PlanResult, quiet: bool, planted: list[Problem] | None = None) -> None:
    """What a planning run read, found and wrote. ``planted``: the demo's deliberate
    mistakes, shown as such rather than among the problems."""
    report = result.report
    if not quiet:
        _print_read(report)
        if planted:
            click.echo(
                f"{_count(len(planted), 'mistake')} planted in the demo on purpose, to show "
                "how problems are reported (each is on the Warnings sheet too):"
            )
            for mistake in planted:
                where = mistake.where() + (f" [{mistake.item}]" if mistake.item else "")
                click.echo(f"  - {where}: {mistake.message}")
        ids = {id(m) for m in planted or []}
        rest = [q for q in report.problems if id(q) not in ids]
        if planted and rest:
            click.echo("Besides those:")
        _print_problems(rest)
        _print_totals(report)
    for p in (result.output, result.csv, result.json):
        if p is not None:
            click.echo(f"Wrote {p}" if not quiet else str(p))
    if result.standalone and not quiet:
        click.echo("Note: your own sheets are not in it (see the first warning).")
    if not quiet:
        click.echo(CAUTION)


@main.command()
@click.argument("workbook", type=click.Path(path_type=Path))
@_override_options
@_portfolio_options
@_set_option
@_column_option
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
    column_names: tuple[str, ...],
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
            columns=_columns(column_names),
            **_caps(stock_budget, orders_cap, curve),
        ),
        bar,
    )
    _print_read(report)
    _print_problems(report.problems, limit=None)
    if not [p for p in report.problems if not p.code.startswith(_READ_AS)]:
        click.echo("No problems found.")
    click.echo(
        f"Next: 'xlpolicy plan {workbook}' writes the policy workbook "
        f"({api.default_output_path(workbook).name} unless you give -o)."
    )


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
    click.echo(
        "Next: fill in Items (one row per item) and History (your sales), replacing the "
        f"example rows, then run 'xlpolicy check {path}'."
    )


@main.command("open")
@click.option("--port", type=int, default=0, help="Port on 127.0.0.1 (default: any free one).")
@click.option("--no-browser", is_flag=True, help="Only print the page's address.")
@_allow_large_option
def open_page(port: int, no_browser: bool, allow_large: bool) -> None:
    """Open the owner's page in your browser: drop a workbook there, see what to order.

    The page lives on this computer only (127.0.0.1) and answers only the address printed
    here, which holds a key made at each start. Stop it with Ctrl-C.
    """
    try:
        from .page.server import serve
    except ImportError as exc:
        raise click.UsageError(
            f"the page needs its extra packages ({exc.name} is missing): "
            "pip install 'xlpolicy[page]'"
        ) from None

    def announce(started: Any) -> None:
        click.echo(f"The page is at {started.url}")
        click.echo("Keep this window open while you use it; Ctrl-C stops it.")

    try:
        serve(port=port, open_browser=not no_browser, allow_large=allow_large, announce=announce)
    except OSError as exc:
        raise click.UsageError(f"cannot listen on 127.0.0.1 port {port}: {exc.strerror}") from None
    except KeyboardInterrupt:
        pass
    click.echo("Stopped; the uploaded files are removed.")


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
    except XlpolicyError as exc:  # anything the user or their machine caused
        _explain(exc)
    except OSError as exc:  # a file system failure outside the output's writing
        name = getattr(exc, "filename", None) or ""
        click.echo(
            click.style(f"Could not read or write {name}: {exc.strerror or exc}.", fg="red"),
            err=True,
        )
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


def _explain(exc: XlpolicyError) -> None:
    """The message and exit status for an error of the user's or their machine's making."""
    if isinstance(exc, UsageError):
        raise click.UsageError(str(exc)) from None
    if isinstance(exc, UnusableWorkbook):
        click.echo(click.style("Cannot use this workbook:", fg="red", bold=True), err=True)
        _print_problems(exc.problems, limit=None, err=True)
        click.echo("Fix what is listed above, then run the same command again.", err=True)
        sys.exit(1)
    click.echo(click.style(str(exc), fg="red"), err=True)
    sys.exit(1)


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


def _count(n: int, word: str) -> str:
    """'1 item', '2 items', '1,200 items'."""
    return f"{n:,} {word}{'' if n == 1 else 's'}"


#: What the console calls each sheet's role.
_ROLE_WORDS = {
    "Items": "items",
    "History": "sales history",
    "Settings": "settings",
    "Price breaks": "price breaks",
    "Column names": "your column names",
}

#: Problems that say how the workbook was read (units, sheets, columns not used): printed
#: together under the Read line, not among the problems.
_READ_AS = "read-as-"


def _print_read(report: Report) -> None:
    s = report.input_summary
    layout = s.get("history_layout")
    hist = (
        (
            f"History: {_count(int(s.get('history_items') or 0), 'item')} x "
            f"{_count(int(s.get('periods') or 0), str(s.get('period') or 'period'))} "
            f"({layout} layout)"
        )
        if layout != "none"
        else "no sales history"
    )
    click.echo(f"Read {s.get('file')}: {_count(int(s.get('items_read') or 0), 'item')}; {hist}.")
    roles = report.settings.get("sheet_roles") or {}
    found = report.settings.get("sheet_found") or {}
    if roles:
        click.echo(
            "Sheets used: "
            + "; ".join(
                f"{_ROLE_WORDS.get(r, r)} from '{n}'"
                + (" (found by what it holds)" if found.get(r) == "by what it holds" else "")
                for r, n in roles.items()
            )
            + "."
        )
    notes = [p for p in report.problems if p.code.startswith(_READ_AS)]
    if notes:
        click.echo("How your workbook was read:")
        for p in notes:
            where = p.where()
            click.echo(f"  {where + ': ' if where else ''}{p.message}")
    click.echo(
        f"Planned {_count(int(s.get('items_planned') or 0), 'item')}, skipped "
        f"{int(s.get('items_skipped') or 0):,}; service measure: "
        f"{report.settings['service_measure']}."
    )


def _print_problems(
    problems: list[Problem],
    limit: int | None = 10,
    err: bool = False,
    plain: bool = False,
) -> None:
    """The problems, most severe first; alike ones (same message, other items) on one line,
    and '... and N more' when the list is cut. ``plain``: no colours (the demo's planted
    mistakes are no alarm)."""
    problems = [p for p in problems if not p.code.startswith(_READ_AS)]
    if not problems:
        return
    counts = {sev: sum(1 for p in problems if p.severity is sev) for sev in Severity}
    parts = [_count(n, sev.word) for sev, n in counts.items() if n]
    click.echo("Problems: " + ", ".join(parts), err=err)
    groups: list[list[Problem]] = []
    for p in problems:
        last = groups[-1][0] if groups else None
        if (
            last is not None
            and last.message == p.message
            and last.severity is p.severity
            and last.code == p.code
        ):
            groups[-1].append(p)
        else:
            groups.append([p])
    shown = groups if limit is None else groups[:limit]
    for group in shown:
        p = group[0]
        where = p.where() + (f" [{p.item}]" if p.item else "")
        word = f"{p.severity.word:<7}"
        head = word if plain else click.style(word, **_SEVERITY_STYLE[p.severity])
        alike = ""
        if len(group) > 1:
            others = [q.item or q.where() for q in group[1:]]
            listed = ", ".join(others[:5]) + (
                f" ... and {len(others) - 5} more" if len(others) > 5 else ""
            )
            alike = f" (the same for {len(others)} more: {listed})"
        click.echo(
            "  " + head + (f" {where}:" if where.strip() else "") + f" {p.message}{alike}",
            err=err,
        )
    if limit is not None and len(groups) > limit:
        rest = sum(len(g) for g in groups[limit:])
        click.echo(f"  ... and {rest} more: see the Warnings sheet.", err=err)


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

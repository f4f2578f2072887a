"""The "How it works" sheet: the method in plain words, the settings used, the cautions.

Kept apart from the Summary so the Summary stays a page of results; the Summary points
here. Every number's origin is explained: which settings were used and where each came
from, how the demand model is chosen, which Policy columns are formulas and which are
values from a model, how ABC classes are cut.
"""

from __future__ import annotations

from typing import Any

from xlsxwriter.worksheet import Worksheet

from .. import contract
from .policy_sheet import FORMULAS, POLICY_COLUMNS, VALUE_NOTES
from .portfolio_block import method_sentences as portfolio_sentences
from .sheetkit import MUTED, PERCENT, Context, clean_text, finite

_WIDTH = 4  # columns A..D
_CHARS = 40 + 24 + 30 + 30


def write_method(ctx: Context, ws: Worksheet) -> None:
    """Method, model choice, formulas, ABC classes, settings and cautions, in that order."""
    ws.set_column(0, 0, 40)
    ws.set_column(1, 1, 24)
    ws.set_column(2, 3, 30)
    ctx.w.text(ws, 0, 0, "How the numbers are made", bold=True, font_size=15)
    ctx.w.text(
        ws,
        1,
        0,
        f"Stock policy for {clean_text(ctx.report.source_name) or ''}, run on {ctx.run_text()}",
        font_color=MUTED,
    )
    row = 3
    row = _paragraphs(ctx, ws, row, "The method, step by step", method_sentences(ctx))
    row = _paragraphs(ctx, ws, row + 1, "How the demand model is chosen", model_rule())
    row = _formulas(ctx, ws, row + 1)
    row = _paragraphs(ctx, ws, row + 1, "ABC classes", abc_sentences(ctx))
    row = _paragraphs(ctx, ws, row + 1, "Across all items", portfolio_sentences(ctx))
    buyer = buyer_sentences(ctx)
    if buyer:
        row = _paragraphs(ctx, ws, row + 1, "Price breaks, shelf life and review periods", buyer)
    if (ctx.report.totals or {}).get("items_simulated"):
        row = _paragraphs(ctx, ws, row + 1, "The back-test", backtest_sentences(ctx))
    read = reading_sentences(ctx)
    if read:
        row = _paragraphs(ctx, ws, row + 1, "What was read, and how", read)
    row = _settings(ctx, ws, row + 1)
    row = _paragraphs(ctx, ws, row + 1, "Cautions", cautions(ctx))
    ws.hide_gridlines(2)
    ctx.print_setup(ws, ctx.names["method"], -1, row, _WIDTH - 1, landscape=False)


def _paragraphs(ctx: Context, ws: Worksheet, row: int, title: str, sentences: list[str]) -> int:
    row = ctx.block_title(ws, row, title, _WIDTH)
    for text in sentences:
        row = ctx.paragraph(ws, row, text, _WIDTH, _CHARS)
    return row


def method_sentences(ctx: Context) -> list[str]:
    """How each number is made, for the measure in use."""
    measure = str((ctx.report.settings or {}).get("service_measure") or contract.CYCLE_SERVICE)
    service = {
        contract.CYCLE_SERVICE: (
            "cycle service, the chance of getting through the wait for an order without "
            "running out. The reorder point is the smallest whole number of units whose "
            "chance of covering the lead-time demand meets the target."
        ),
        contract.FILL_RATE: (
            "fill rate, the share of demand met straight from the shelf. With the order "
            "quantity fixed, the reorder point is the smallest one whose expected units "
            "short per order (from the normal loss function, Silver, Pyke & Peterson "
            "1998) keep the fill rate at or above the target."
        ),
        contract.SHORTAGE_COST: (
            "shortage cost. No service target is set; the order quantity and reorder "
            "point are found together so that the cost of units short balances the "
            "cost of holding more stock (Hadley & Whitin 1963)."
        ),
    }
    others = {
        contract.CYCLE_SERVICE: "cycle service",
        contract.FILL_RATE: "fill rate (normal loss function, Silver, Pyke & Peterson 1998)",
        contract.SHORTAGE_COST: "shortage cost (Hadley & Whitin 1963)",
    }
    chosen = service.get(measure, f"{clean_text(measure)}.")
    rest = " and ".join(v for k, v in others.items() if k != measure)
    return [
        "Order quantity: the economic order quantity (EOQ, Harris 1913; Wilson 1934), "
        "which balances the yearly cost of placing orders against the yearly cost of "
        "holding stock, then rounded to the pack size and raised to the minimum order, "
        "taking whichever rounding costs less.",
        "Lead-time demand: the mean and spread of demand while an order is on its way, "
        "from each item's demand history and lead time (Silver, Pyke & Peterson 1998, "
        "ch. 7). Each item's history counts from its first sale. Intermittent and lumpy "
        "items (Syntetos, Boylan & Croston 2005 classes) use the Syntetos-Boylan "
        "correction of Croston's estimate for the demand rate.",
        "Reorder point: order when the inventory position (on hand + on order - "
        "backordered) falls to this level. It is set from the lead-time demand so that "
        "the service measure is met.",
        f"Service measure used: {chosen} The other measures, chosen in Settings, are {rest}.",
        "Safety stock is the reorder point minus the mean lead-time demand: the stock "
        "kept for demand above average while waiting for an order.",
        "Yearly costs: ordering = orders per year x order cost; cycle stock holding = "
        "half the order quantity x unit cost x holding rate; safety stock holding = "
        "safety stock x unit cost x holding rate; shortage = expected units short per "
        "year x shortage cost. The total adds these four; purchase cost is shown apart.",
        "Cycle service and fill rate achieved are those the rounded policy gives under "
        "the demand model named for each item.",
        "Today's policy (where Items gives today's order quantity and reorder point) is "
        "costed the same way, with the same demand model, so the comparison is like for "
        "like.",
    ]


def model_rule() -> list[str]:
    """The rule that picks each item's lead-time demand model, with its thresholds."""
    try:
        from ..core import history as _h

        min_mean = float(getattr(_h, "NORMAL_MIN_MEAN", 20.0))
        max_cv = float(getattr(_h, "NORMAL_MAX_CV", 0.5))
        alpha = float(getattr(_h, "DISPERSION_ALPHA", 0.05))
    except ImportError:  # pragma: no cover - the core is always there
        min_mean, max_cv, alpha = 20.0, 0.5, 0.05
    return [
        "1. A model set in Items (column 'Demand model') or in Settings is used as given.",
        f"2. Normal: when at least {min_mean:g} units are expected over the lead time, the "
        f"spread (sd / mean over the lead time) is below {max_cv:g} and demand is steady "
        "(a smooth or erratic pattern).",
        "3. Otherwise, for whole-unit sales: Poisson when the variance is close to the mean "
        f"(the dispersion test does not reject it at the {alpha:g} level) and the lead time "
        "is fixed, or when the variance is not above the mean; negative binomial when the "
        "variance is clearly above the mean or the lead time varies.",
        "4. Otherwise (fractional quantities): gamma, matching the mean and variance.",
        "The model and the reason for it are shown for each item on the Policy sheet "
        "('Demand model', 'Why this model').",
    ]


def _formulas(ctx: Context, ws: Worksheet, row: int) -> int:
    row = ctx.block_title(ws, row, "What the Policy sheet's columns are", _WIDTH)
    sub = ctx.styles.get(italic=True, font_color=MUTED)
    ws.write_string(row, 0, "Column", sub)
    ws.write_string(row, 1, "Kind", sub)
    ws.write_string(row, 2, "How it is made", sub)
    row += 1
    titles = {c.key: c.title for c in POLICY_COLUMNS}
    wrap = {"text_wrap": True, "valign": "top"}
    entries: list[tuple[str, str, str]] = []
    for key, (_t, _n, _f, words) in FORMULAS.items():
        entries.append((titles[key], "formula", words))
    for key, note in VALUE_NOTES.items():
        entries.append((titles[key], "value", note.split(": ", 1)[-1]))
    for title, kind, words in entries:
        ctx.w.text(ws, row, 0, title, **wrap)
        ctx.w.text(ws, row, 1, kind, **wrap)
        ws.merge_range(row, 2, row, 3, "", ctx.styles.get(**wrap))
        ctx.w.text(ws, row, 2, words[:1].upper() + words[1:], **wrap)
        lines = max(1, -(-len(words) // 56))
        ws.set_row(row, 15 * lines + 3)
        row += 1
    row = ctx.paragraph(
        ws,
        row,
        (
            "Formula cells carry the tool's own number as their saved result; where a formula "
            "could not reproduce that number exactly, the number itself is written instead. "
            "Change an input (say the order cost) and the formula columns follow; the model "
            "values (reorder point, service, units short) do not, so run the tool again after "
            "changing the inputs."
        ),
        _WIDTH,
        _CHARS,
        font_color=MUTED,
    )
    return row


def abc_sentences(ctx: Context) -> list[str]:
    """How the ABC classes are cut, with the cut-offs used."""
    cut = (ctx.report.settings or {}).get("abc_cutoffs") or (0.8, 0.95)
    try:
        a, b = float(cut[0]), float(cut[1])
    except (TypeError, ValueError, IndexError):
        a, b = 0.8, 0.95
    return [
        "Items are ranked by annual purchase cost (annual demand x unit cost), largest "
        f"first. Class A: the items that make up the first {a:.0%} of the total; class B: "
        f"the next {b - a:.0%}; class C: the last {1 - b:.0%}. Skipped items have no class "
        "(common practice; Silver, Pyke & Peterson 1998, ch. 3).",
        "A items deserve the closest watch: review their policies and stock most often.",
        *_class_target_sentences(ctx),
    ]


def buyer_sentences(ctx: Context) -> list[str]:
    """How price breaks, shelf lives and review periods shaped this run (only those used)."""
    df = ctx.results

    def count(key: str, test: Any = None) -> int:
        if key not in df.columns:
            return 0
        col = df[key]
        return int((col.notna() if test is None else test(col)).sum())

    out = []
    n_breaks = count("discount_saving")
    if n_breaks:
        out.append(
            f"Price breaks ({n_breaks} item(s)): with all-units discounts, the order quantity "
            "is the allowed one (whole packs, at least the minimum) with the lowest ordering "
            "+ cycle holding + purchase cost a year: the EOQ at each price, moved up to the "
            "price's break where it lies below it, each costed at the price it earns "
            "(Nahmias, Production and Operations Analysis, ch. 4; Chopra & Meindl, Supply "
            "Chain Management, ch. 11). Holding and purchase costs then use the price paid, "
            "and the reorder point follows from that quantity. The saving is against the "
            "plain EOQ at the Unit cost, at the price that quantity earns."
        )
    n_life = count("shelf_life_cost")
    if n_life:
        out.append(
            f"Shelf life ({n_life} item(s)): the order quantity is at most the demand "
            "expected over the shelf life, in whole packs; its yearly cost is the ordering + "
            "cycle holding (+ purchase) cost of the capped quantity minus that without the "
            "cap. Safety stock ages too: check items with a tight shelf life by hand."
        )
    n_per = count("review", lambda c: c.astype(str) == "periodic")
    if n_per:
        out.append(
            f"Periodic review ({n_per} item(s)): every review period T, order up to the level "
            "S, set for the demand over T + lead time under the item's demand model (Silver, "
            "Pyke & Peterson 1998, ch. 7); one order per review, the average order being "
            "the demand over T."
        )
    return out


def _class_target_sentences(ctx: Context) -> list[str]:
    """Which service target each class gets (Settings: Service target A, B, C)."""
    settings = ctx.report.settings or {}
    given = {
        cls: target
        for cls, key in contract.CLASS_TARGET_SETTINGS.items()
        if (target := finite(settings.get(key))) is not None
    }
    if not given:
        return []
    parts = ", ".join(f"class {cls} {v:.1%}" for cls, v in given.items())
    return [
        f"Service targets by class: {parts}. The classes are set first, from annual demand "
        "x unit cost, which does not depend on the target; an item's own Service target "
        "still wins, and the column 'Service target from' on the Policy sheet says which "
        "applied."
    ]


def _settings(ctx: Context, ws: Worksheet, row: int) -> int:
    settings = dict(ctx.report.settings or {})
    sources = settings.get("sources") or {}
    row = ctx.block_title(ws, row, "Settings used", _WIDTH)
    sub = {"italic": True, "font_color": MUTED}
    for c, t in enumerate(("Setting", "Value", "Where it came from")):
        ws.write_string(row, c, t, ctx.styles.get(**sub))
    row += 1
    entries: list[tuple[str, str]] = [(s.key, s.title) for s in contract.SETTINGS]
    entries += [("days_per_period", "Days per period"), ("abc_cutoffs", "ABC cut-offs")]
    known = {k for k, _ in entries} | {"sources"}
    entries += [(k, k.replace("_", " ").capitalize()) for k in settings if k not in known]
    for key, title in entries:
        if key not in settings and key in ("abc_cutoffs",):
            continue
        ctx.w.text(ws, row, 0, title)
        _setting_value(ctx, ws, row, key, settings.get(key))
        source = sources.get(key, "")
        if not source and key == "abc_cutoffs":
            source = "default"
        ctx.w.text(ws, row, 2, source, font_color=MUTED)
        row += 1
    return row


def _setting_value(ctx: Context, ws: Worksheet, row: int, key: str, value: Any) -> None:
    if isinstance(value, (tuple, list)):
        parts = [f"{float(v):.0%}" if finite(v) is not None else str(v) for v in value]
        ctx.w.text(ws, row, 1, " / ".join(parts), align="left")
    elif finite(value) is None and not isinstance(value, str) and clean_text(value) is None:
        ctx.w.text(ws, row, 1, "not set", font_color=MUTED, align="left")
    elif key in contract.RATE_SETTINGS and finite(value) is not None:
        ctx.w.number(ws, row, 1, value, num_format=PERCENT, align="left")
    elif key == "order_cost" and finite(value) is not None:
        ctx.w.number(ws, row, 1, value, num_format=ctx.money, align="left")
    elif finite(value) is not None:
        f = finite(value)
        fmt = "#,##0" if f is not None and f.is_integer() else "#,##0.00"
        ctx.w.number(ws, row, 1, value, num_format=fmt, align="left")
    else:
        ctx.w.any(ws, row, 1, value, align="left")


def backtest_sentences(ctx: Context) -> list[str]:
    """What the back-test did, in plain words (xlpolicy.core.simulate has the detail)."""
    settings = ctx.report.settings or {}
    runs = settings.get("simulation_runs")
    unmet = settings.get("simulation_unmet_demand") or "backordered"
    return [
        f"Each policy was simulated {runs} times on the item's own demand: an item with "
        "History on resampled copies of it (blocks of consecutive periods, drawn at random, "
        "so runs of busy and quiet periods stay together), an item with annual figures on "
        "draws from its demand model. Each run covers the history's length, at least two "
        f"years; demand that finds no stock is {unmet}.",
        "The stock is checked at the end of every period and the order quantity ordered "
        "(several times over if need be) when the position is at or below the reorder "
        "point; orders arrive after the lead time. Service is counted the way the promise "
        "is made: each order as placed when the position reached the reorder point.",
        "The band is where the simulated service lies with 95 % confidence, from the spread "
        "across runs. Where the promised service lies below the band by more than a point, "
        "the item is warned about: its demand does not behave as its model assumes, and "
        "the reorder point should be raised. The 'history as it was' column replays the "
        "actual history once; with few orders in it, it is a rough check only.",
    ]


#: What the method sheet calls each sheet's role.
_ROLES = {
    "Items": "The items",
    "History": "The sales history",
    "Settings": "The settings",
    "Price breaks": "The price breaks",
    "Column names": "Your own column names",
}


def reading_sentences(ctx: Context) -> list[str]:
    """Which sheet was read for what (and how it was found), and the units and column
    names read from the headers, as the console said them."""
    settings = ctx.report.settings or {}
    roles = settings.get("sheet_roles") or {}
    how = settings.get("sheet_found") or {}
    out = [
        f"{_ROLES.get(role, role)}: the sheet '{clean_text(name)}' (found "
        f"{how.get(role, 'by its name')})."
        for role, name in roles.items()
    ]
    for p in ctx.report.problems or []:
        if str(p.code).startswith("read-as-") and p.code != "read-as-sheet":
            where = f"{p.sheet}!{p.cell}" if p.sheet and p.cell else p.sheet
            out.append(f"{where}: {p.message}" if where else p.message)
    return out


def cautions(ctx: Context) -> list[str]:
    """What the numbers cannot know."""
    return [
        "These policies are estimates from past demand and the costs entered; they are "
        "no better than those figures.",
        "New, promoted, seasonal or discontinued items, and items with a short history, "
        "need judgement: the past may not describe the months ahead.",
        "Where the stock is medicine, food or anything safety-critical, running short "
        "can hurt people: these numbers support, and do not replace, the judgement of "
        "licensed staff and local rules.",
        f"Read the {ctx.names['warnings']} sheet before acting on a number.",
    ]

"""The workbook contract in code: input sheets, columns, settings and output keys.

This module is the single source of truth that the reader, the validator, the template
writer, the output writers and the README tables are built from, so they cannot drift
apart: a sheet, column, setting or output key is named here and nowhere else.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

# ---------------------------------------------------------------------------
# Header matching
# ---------------------------------------------------------------------------

_BRACKET_UNIT = re.compile(r"[\(\[\{]([^\)\]\}]*)[\)\]\}]\s*$")


def normalise(text: object) -> str:
    """Fold a header or setting name for loose matching.

    Case, spaces, underscores and punctuation are ignored: "Lead time days" and
    "LEAD_TIME-DAYS" both give "leadtimedays".
    """
    return re.sub(r"[^0-9a-z]", "", str(text).lower())


def header_forms(text: object) -> tuple[str, str, str]:
    """The ways a header can match, and its unit.

    Returns (without the bracketed unit, with it, the unit itself), all normalised, so
    "Lead time (days)" matches both "lead time" and "lead time days" and its unit is "days".
    A "%" unit is kept as "%" so that percent columns can be recognised.
    """
    raw = str(text).strip()
    m = _BRACKET_UNIT.search(raw)
    if not m:
        n = normalise(raw)
        return n, n, ""
    unit_raw = m.group(1).strip()
    unit = "%" if "%" in unit_raw else normalise(unit_raw)
    base = normalise(raw[: m.start()])
    return base, base + normalise(unit_raw), unit


def spellings(key: str, title: str, aliases: tuple[str, ...]) -> set[str]:
    """The normalised names (key, title, aliases) that select a column or a setting."""
    return {normalise(key), normalise(title), *(normalise(a) for a in aliases)}


# ---------------------------------------------------------------------------
# Units in headers and cells
# ---------------------------------------------------------------------------

#: Days in one unit of time, for the columns measured in days. A month is a twelfth of a
#: 365-day year (as for the history period). Working days count five to a calendar week
#: (common practice for a Monday-to-Friday supplier), so 5 working days are 7 days.
DURATION_UNITS: dict[str, float] = {
    "days": 1.0,
    "weeks": 7.0,
    "months": 365.0 / 12.0,
    "working days": 7.0 / 5.0,
}

#: How people write each unit, normalised (see :func:`normalise`) -> the unit's name.
UNIT_SPELLINGS: dict[str, str] = {
    **dict.fromkeys(("d", "day", "days", "dys", "calendar days", "cal days"), "days"),
    **dict.fromkeys(("w", "wk", "wks", "week", "weeks"), "weeks"),
    **dict.fromkeys(("mo", "mos", "mth", "mths", "mnth", "mnths", "month", "months"), "months"),
    **dict.fromkeys(
        (
            "working days",
            "working day",
            "work days",
            "workdays",
            "business days",
            "business day",
            "wd",
        ),
        "working days",
    ),
    **dict.fromkeys(("pct", "percent", "per cent", "percentage"), "%"),
    **dict.fromkeys(
        ("units", "unit", "pcs", "pc", "pieces", "piece", "each", "ea", "per unit", "per item"),
        "units",
    ),
}

#: Currency signs and codes a money header may carry -> the symbol or code shown.
CURRENCY_SPELLINGS: dict[str, str] = {
    "$": "$",
    "€": "€",
    "£": "£",
    "¥": "¥",
    "₹": "₹",
    **{
        code: code.upper()
        for code in (
            "usd",
            "eur",
            "gbp",
            "chf",
            "cad",
            "aud",
            "nzd",
            "sek",
            "nok",
            "dkk",
            "pln",
            "czk",
            "huf",
            "inr",
            "zar",
            "jpy",
            "cny",
            "sgd",
            "hkd",
            "mxn",
            "brl",
        )
    },
    "euro": "€",
    "euros": "€",
    "pounds": "£",
    "dollars": "$",
}

#: Units of time we do not convert: a header naming one is refused, never ignored.
UNSUPPORTED_TIME_UNITS: frozenset[str] = frozenset(
    {
        "hours",
        "hour",
        "hrs",
        "hr",
        "h",
        "minutes",
        "mins",
        "years",
        "year",
        "yrs",
        "yr",
        "fortnights",
        "fortnight",
        "quarters",
        "quarter",
        "qtr",
        "seconds",
    }
)

#: Columns measured in days: a header or cell unit of days, weeks, months or working days
#: is converted to days.
DURATION_KEYS: frozenset[str] = frozenset(
    {"lead_time_days", "lead_time_sd_days", "shelf_life_days", "review_period_days"}
)
#: Columns holding money: a currency in the header is shown in the outputs.
MONEY_KEYS: frozenset[str] = frozenset({"unit_cost", "order_cost", "shortage_cost", "unit_price"})

#: Header words that name a column only with a per-cent unit: "Holding cost (%)" is the
#: holding rate, but "Holding cost" alone may as well be money per unit, so it is not read.
PERCENT_ONLY_ALIASES: dict[str, tuple[str, ...]] = {
    "holding_rate": ("holding cost", "carrying cost", "storage cost", "holding cost per year"),
}


# ---------------------------------------------------------------------------
# Input columns
# ---------------------------------------------------------------------------

TEXT = "text"
NUMBER = "number"
RATE = "rate"  # a fraction; accepts 0.14, 14 % formatted, "14%"


def _words(text: str) -> tuple[str, ...]:
    """Aliases written as one text, separated by semicolons (the vocabulary stays readable)."""
    return tuple(w.strip() for w in text.split(";") if w.strip())


@dataclass(frozen=True)
class Column:
    """One input column: its key, the header the template writes, and how to read it."""

    key: str
    title: str
    kind: str
    required: str  # "yes", "no", or "unless set in Settings"
    meaning: str
    aliases: tuple[str, ...] = ()

    def names(self) -> set[str]:
        """Every normalised spelling that selects this column."""
        return spellings(self.key, self.title, self.aliases)


ITEM_COLUMNS: tuple[Column, ...] = (
    Column(
        "item",
        "Item",
        TEXT,
        "yes",
        "The item's code, unique. Kept as text: 000123 stays 000123.",
        _words(
            "sku; item code; item no; item number; code; product code; part number; part no; "
            "article; stock code; item id; product id; product no; product number; sku code; "
            "stock no; stock number; article number; art no; barcode; ean; plu; ref; "
            "reference; catalogue number; cat no"
        ),
    ),
    Column(
        "description",
        "Description",
        TEXT,
        "no",
        "What the item is; carried to the output.",
        _words(
            "item description; item name; name; product name; product; product description; "
            "desc; article name; item desc; title; plant name; variety"
        ),
    ),
    Column(
        "category",
        "Category",
        TEXT,
        "no",
        "A group for the summary; carried to the output.",
        _words(
            "group; product group; department; family; type; product type; section; range; "
            "product category; item group; category name"
        ),
    ),
    Column(
        "supplier",
        "Supplier",
        TEXT,
        "no",
        "Who it is bought from; the reorder list groups by it.",
        _words(
            "vendor; supplier name; vendor name; supplied by; wholesaler; distributor; "
            "preferred supplier; main supplier"
        ),
    ),
    Column(
        "unit_cost",
        "Unit cost",
        NUMBER,
        "yes",
        "What one unit costs to buy, more than 0.",
        _words(
            "cost; cost per unit; unit price paid; purchase price; buy price; cost price; "
            "cost each; unit cost price; cost per item; purchase cost; buying price; buy "
            "cost; cost ex vat; net cost; trade price; wholesale price; landed cost; item "
            "cost; price paid; our cost"
        ),
    ),
    Column(
        "order_cost",
        "Order cost",
        NUMBER,
        "unless set in Settings",
        "Cost of placing and receiving one order (admin, delivery), 0 or more.",
        _words(
            "ordering cost; cost per order; setup cost; order handling cost; cost to order; "
            "order charge; delivery charge; delivery cost; shipping cost; carriage; cost of "
            "ordering; order fee; admin cost per order"
        ),
    ),
    Column(
        "holding_rate",
        "Holding rate",
        RATE,
        "unless set in Settings",
        "Yearly cost of keeping stock, as a fraction of unit cost (0.25 or 25%).",
        _words(
            "carrying rate; holding cost rate; carrying cost rate; annual holding rate; "
            "holding; holding percent; holding pct; carrying cost rate per year; storage "
            "rate; inventory carrying rate; holding rate per year"
        ),
    ),
    Column(
        "lead_time_days",
        "Lead time days",
        NUMBER,
        "yes",
        "Days from placing an order to having the goods on the shelf, more than 0.",
        _words(
            "lead time; leadtime; lt days; supplier lead time; delivery days; delivery time; "
            "delivery lead time; lt; time to deliver; days to deliver; replenishment time; "
            "order lead time; lead days; supplier lead time days; turnaround"
        ),
    ),
    Column(
        "lead_time_sd_days",
        "Lead time sd days",
        NUMBER,
        "no",
        "How much the lead time varies: its standard deviation in days, 0 or more.",
        _words(
            "lead time sd; lead time std dev; lead time standard deviation; lead time std; lt "
            "sd; lead time variation; lead time spread; lt std dev; lead time stdev; delivery "
            "time sd; lead time variability"
        ),
    ),
    Column(
        "service_target",
        "Service target",
        RATE,
        "no",
        "Target for the service measure, between 0 and 1 (0.95 or 95%). "
        "Blank: the Settings default.",
        _words(
            "service level; target service; service; target; service level target; target "
            "service level; availability target; in stock target"
        ),
    ),
    Column(
        "shortage_cost",
        "Shortage cost",
        NUMBER,
        "no",
        "Cost of each unit short; used when the service measure is 'shortage cost'.",
        _words(
            "stockout cost; backorder cost; cost per unit short; penalty cost; cost of a "
            "shortage; shortage penalty; lost sale cost; cost per stockout; out of stock cost"
        ),
    ),
    Column(
        "pack_size",
        "Pack size",
        NUMBER,
        "no",
        "Orders come in whole multiples of this many units (a case, a box).",
        _words(
            "case size; pack qty; case qty; order multiple; units per pack; pack; carton; "
            "carton qty; carton size; pack of; case; units per case; units per carton; box "
            "qty; box size; pack quantity; case quantity; order in multiples of; multiple; "
            "outer; sold in packs of"
        ),
    ),
    Column(
        "minimum_order",
        "Minimum order",
        NUMBER,
        "no",
        "Smallest quantity the supplier accepts, in units.",
        _words(
            "moq; min order; minimum order qty; minimum order quantity; min order qty; min "
            "order quantity; smallest order; minimum buy; min buy; minimum purchase"
        ),
    ),
    Column(
        "on_hand",
        "On hand",
        NUMBER,
        "no",
        "Units on the shelf now; for the reorder list.",
        _words(
            "stock; qty on hand; stock on hand; in stock; soh; stock level; current stock; "
            "qty in stock; stock qty; quantity on hand; on shelf; stock count; units in "
            "stock; qoh; instock; in store"
        ),
    ),
    Column(
        "on_order",
        "On order",
        NUMBER,
        "no",
        "Units ordered but not yet received.",
        _words(
            "open orders; qty on order; incoming; ordered; on order qty; quantity on order; "
            "due in; in transit; outstanding orders; open purchase orders"
        ),
    ),
    Column(
        "backordered",
        "Backordered",
        NUMBER,
        "no",
        "Units customers are waiting for.",
        _words(
            "backorders; back orders; owed to customers; customer backorders; owed; customer "
            "orders waiting; back ordered; awaiting stock"
        ),
    ),
    Column(
        "current_order_qty",
        "Current order qty",
        NUMBER,
        "no",
        "The order quantity used today, for comparison.",
        _words(
            "current order quantity; current q; order qty now; order qty; usual order; order "
            "quantity; reorder qty; reorder quantity; normal order"
        ),
    ),
    Column(
        "current_reorder_point",
        "Current reorder point",
        NUMBER,
        "no",
        "The reorder point used today, for comparison.",
        _words(
            "current rop; reorder point now; current reorder level; reorder point; reorder "
            "level; min stock; minimum stock; reorder at; rop; order point; min level"
        ),
    ),
    Column(
        "annual_demand",
        "Annual demand",
        NUMBER,
        "no",
        "Units sold per year, for an item with no history.",
        _words(
            "demand per year; yearly demand; annual usage; annual sales; annual sales units; "
            "sales per year; units per year; yearly sales; annual qty; annual volume; usage "
            "per year"
        ),
    ),
    Column(
        "demand_sd",
        "Demand sd",
        NUMBER,
        "no",
        "Standard deviation of demand per period (see Settings: period), "
        "for an item with no history.",
        _words("demand sd per period; demand std dev; demand standard deviation; sd of demand"),
    ),
    Column(
        "demand_model",
        "Demand model",
        TEXT,
        "no",
        "Force the lead-time demand model: normal, poisson, negative binomial or gamma. "
        "Blank or auto: chosen from the history.",
        ("demand distribution", "lead time demand model", "distribution"),
    ),
    Column(
        "history_start",
        "History start",
        TEXT,
        "no",
        "The period (a date or label, as in History) from which this item's history counts. "
        "Blank: its first sale.",
        _words(
            "first period; launch date; start date; introduced; history from; first sold; "
            "first sale; date added; in range since"
        ),
    ),
    Column(
        "shelf_life_days",
        "Shelf life days",
        NUMBER,
        "no",
        "Days a unit stays usable after it arrives, more than 0. The order quantity is "
        "capped at the demand expected over that time. Blank: it keeps.",
        _words(
            "shelf life; usable life days; usable life; days to expiry; expiry days; best "
            "before days; expiry; use within days; sell by days; shelf life days"
        ),
    ),
    Column(
        "review_period_days",
        "Review period days",
        NUMBER,
        "no",
        "Periodic review: look at the item every this many days and order up to a level. "
        "0: continuous review (order when stock falls to the reorder point). Blank: the "
        "Settings value, else continuous.",
        _words(
            "review period; review every days; review cycle days; review interval days; "
            "review interval; check every; count every; review frequency"
        ),
    ),
)

ITEM_COLUMN_BY_KEY = {c.key: c for c in ITEM_COLUMNS}

HISTORY_LONG_COLUMNS: tuple[Column, ...] = (
    Column("item", "Item", TEXT, "yes", "The item's code, as in Items.", ITEM_COLUMNS[0].aliases),
    Column(
        "period",
        "Period",
        TEXT,
        "yes",
        "A date (the period's first day) or a period number or label.",
        _words(
            "date; week; month; day; period start; week starting; month starting; sale date; "
            "date sold; transaction date; date of sale; invoice date; order date; week "
            "commencing; week beginning; sales date; posting date; period"
        ),
    ),
    Column(
        "quantity",
        "Quantity",
        NUMBER,
        "yes",
        "Units sold (demanded) in that period.",
        _words(
            "qty; units; demand; sales; units sold; quantity sold; sold; qty sold; number "
            "sold; quantity; sales qty; sales units; sold qty; amount sold; count; volume; "
            "pcs sold; items sold; used; usage; issued; qty issued; units out"
        ),
    ),
)

#: The optional "Price breaks" sheet (all-units quantity discounts), one row per break.
PRICE_BREAK_COLUMNS: tuple[Column, ...] = (
    Column("item", "Item", TEXT, "yes", "The item's code, as in Items.", ITEM_COLUMNS[0].aliases),
    Column(
        "min_qty",
        "Minimum quantity",
        NUMBER,
        "yes",
        "Order size from which this price applies, more than 0: an order of at least this "
        "many units pays the price on every unit (all-units discount).",
        _words(
            "from quantity; break quantity; quantity from; min qty; break qty; order from; from qty"
        ),
    ),
    Column(
        "unit_price",
        "Unit price",
        NUMBER,
        "yes",
        "What each unit costs in such an order, more than 0. Below the smallest break the "
        "item's Unit cost applies.",
        _words("price; discounted price; price per unit; break price; discount price"),
    ),
)

# ---------------------------------------------------------------------------
# Settings
# ---------------------------------------------------------------------------

CYCLE_SERVICE = "cycle service"
FILL_RATE = "fill rate"
SHORTAGE_COST = "shortage cost"
SERVICE_MEASURES = (CYCLE_SERVICE, FILL_RATE, SHORTAGE_COST)

PERIODS = {"day": 1.0, "week": 7.0, "month": 365.0 / 12.0}
PERIODS_PER_YEAR = {"day": 365.0, "week": 52.0, "month": 12.0}


@dataclass(frozen=True)
class Setting:
    """One row of the Settings sheet."""

    key: str
    title: str
    default: object
    meaning: str
    aliases: tuple[str, ...] = ()

    def names(self) -> set[str]:
        """Every normalised spelling that selects this setting."""
        return spellings(self.key, self.title, self.aliases)


SETTINGS: tuple[Setting, ...] = (
    Setting(
        "period",
        "Period",
        "week",
        "Length of one history period: day, week or month. "
        "Inferred from dates where History has them.",
        ("history period", "period length", "bucket"),
    ),
    Setting(
        "periods_per_year",
        "Periods per year",
        None,
        "For turning per-period demand into yearly demand. Blank: 365, 52 or 12 by period.",
        ("periods a year",),
    ),
    Setting(
        "service_measure",
        "Service measure",
        CYCLE_SERVICE,
        "How the reorder point is set: 'cycle service', 'fill rate' or 'shortage cost'.",
        ("service type", "service metric", "measure"),
    ),
    Setting(
        "service_target",
        "Service target",
        0.95,
        "Target for items that leave theirs blank, between 0 and 1.",
        ("service level", "default service target", "target"),
    ),
    Setting(
        "holding_rate",
        "Holding rate",
        None,
        "Yearly holding cost as a fraction of unit cost, for items that leave it blank.",
        ("carrying rate", "default holding rate", "holding cost rate"),
    ),
    Setting(
        "order_cost",
        "Order cost",
        None,
        "Cost of one order, for items that leave it blank.",
        ("ordering cost", "default order cost", "cost per order"),
    ),
    Setting(
        "demand_model",
        "Demand model",
        "auto",
        "Lead-time demand model for all items: auto (chosen per item from its history), "
        "normal, poisson, negative binomial or gamma.",
        ("demand distribution", "lead time demand model", "distribution"),
    ),
    Setting(
        "cap_outliers",
        "Cap outliers",
        "no",
        "yes: a single period far above the rest is capped before estimating demand "
        "(it is always reported).",
        ("outlier capping", "cap outlier periods"),
    ),
    Setting(
        "dormant_after",
        "Dormant after",
        None,
        "Periods without a sale after which an item is reported as possibly discontinued. "
        "Blank: about a quarter of a year.",
        ("dormant periods", "no sale periods"),
    ),
    Setting(
        "currency",
        "Currency",
        None,
        "Symbol or code shown in money formats, e.g. $, EUR, £.",
        ("currency symbol", "money"),
    ),
    Setting(
        "history_file",
        "History file",
        None,
        "A CSV or Parquet file with the sales history (columns Item, Period, Quantity), "
        "read instead of the History sheet: for a history longer than a sheet holds. "
        "A path relative to the workbook's folder.",
        ("history path", "sales history file", "history csv"),
    ),
    Setting(
        "stock_budget",
        "Stock budget",
        None,
        "A cap on the average value of all stock held (money, at unit cost). Where the "
        "policy would hold more, order quantities (and, under 'shortage cost', reorder "
        "points) are lowered at least cost to meet it. Blank: no cap.",
        ("inventory budget", "stock value cap", "budget"),
    ),
    Setting(
        "orders_cap",
        "Orders a year cap",
        None,
        "A cap on the orders placed a year, all items together. Where the policy would "
        "place more, order quantities are raised at least cost to meet it. Blank: no cap.",
        ("orders per year cap", "order limit", "max orders per year"),
    ),
    Setting(
        "exchange_curve",
        "Exchange curve",
        "auto",
        "yes: the Summary shows what other service targets (or shortage costs) would cost "
        "in safety stock and give in shortages; no: leave it out (a faster run); auto: "
        "yes for up to 20,000 items (each point is a whole policy calculation).",
        ("tradeoff curve", "service curve"),
    ),
    # ABC classes by annual spend, and a service target per class
    Setting(
        "abc_share_a",
        "ABC share A",
        0.80,
        "Class A: the largest items by annual spend (annual demand x unit cost) that make "
        "up this share of the total (common practice: 80%).",
        ("class a share", "a class share", "abc cutoff a"),
    ),
    Setting(
        "abc_share_b",
        "ABC share B",
        0.15,
        "Class B: the next items, making up this share of the total (common practice: "
        "15%); class C is the rest (5%).",
        ("class b share", "b class share", "abc cutoff b"),
    ),
    Setting(
        "service_target_a",
        "Service target A",
        None,
        "Service target for class A items that leave theirs blank. Blank: Service target.",
        ("class a service target", "service level a", "target a"),
    ),
    Setting(
        "service_target_b",
        "Service target B",
        None,
        "Service target for class B items that leave theirs blank. Blank: Service target.",
        ("class b service target", "service level b", "target b"),
    ),
    Setting(
        "service_target_c",
        "Service target C",
        None,
        "Service target for class C items that leave theirs blank. Blank: Service target.",
        ("class c service target", "service level c", "target c"),
    ),
    Setting(
        "review_period_days",
        "Review period days",
        None,
        "Periodic review for items that leave the column blank: every this many days, "
        "order up to a level. Blank or 0: continuous review.",
        ("review period", "review every days", "review interval days"),
    ),
    Setting(
        "simulation_runs",
        "Simulation runs",
        None,
        "Back-test each policy by simulating it this many times on resamples of the "
        "item's own demand. 0: no back-test. Blank: 100 runs for up to 5,000 items, "
        "none above (it would cost more than a few seconds).",
        ("simulate", "simulation", "back test runs", "simulation replications"),
    ),
)

#: Settings read as rates (0.95, 95%, "95%").
RATE_SETTINGS: frozenset[str] = frozenset(
    {
        "service_target",
        "holding_rate",
        "abc_share_a",
        "abc_share_b",
        "service_target_a",
        "service_target_b",
        "service_target_c",
    }
)
#: The per-class service target settings, by class.
CLASS_TARGET_SETTINGS: dict[str, str] = {
    "A": "service_target_a",
    "B": "service_target_b",
    "C": "service_target_c",
}

#: The season planning's settings (xlpolicy.seasons), read like the others.
SEASON_SETTINGS: tuple[Setting, ...] = (
    Setting(
        "plan_as_of",
        "Plan as of",
        None,
        "The date the policy is planned for: items planned with their season or trend get "
        "the reorder point and order quantity for the lead time from that date, and the "
        "season plan starts in its month. Blank: the day of the run.",
        ("as of", "plan date", "planning date"),
    ),
)
#: Every setting a Settings sheet (or --set) may give.
READ_SETTINGS: tuple[Setting, ...] = SETTINGS + SEASON_SETTINGS


# ---------------------------------------------------------------------------
# Output keys (CSV, JSON and the per-item policy sheet)
# ---------------------------------------------------------------------------

#: The contract's keys, in the contract's order. More may follow (EXTRA_RESULT_KEYS).
RESULT_KEYS: tuple[str, ...] = (
    "item",
    "status",
    "model",
    "annual_demand",
    "demand_per_period",
    "demand_sd_per_period",
    "lead_time_days",
    "lead_time_demand_mean",
    "lead_time_demand_sd",
    "service_measure",
    "service_target",
    "order_qty",
    "reorder_point",
    "safety_stock",
    "cycle_service",
    "fill_rate",
    "orders_per_year",
    "annual_ordering_cost",
    "annual_cycle_holding_cost",
    "annual_safety_holding_cost",
    "annual_shortage_cost",
    "annual_total_cost",
)

#: Keys after the contract's, for the reader and the accountant.
EXTRA_RESULT_KEYS: tuple[str, ...] = (
    "description",
    "category",
    "supplier",
    "unit_cost",
    "order_cost",
    "holding_rate",
    "shortage_cost",
    "pack_size",
    "minimum_order",
    "demand_source",
    "history_periods",
    "eoq",
    "expected_units_short_per_cycle",
    "annual_purchase_cost",
    "average_inventory_value",
    "inventory_position",
    "order_now_qty",
    "demand_class",
    "model_reason",
    "rate_method",
    "adi",
    "cv2",
    "history_start",
    "abc_class",
    "current_order_qty",
    "current_reorder_point",
    "current_safety_stock",
    "current_cycle_service",
    "current_fill_rate",
    "current_units_short_per_cycle",
    "current_annual_ordering_cost",
    "current_annual_cycle_holding_cost",
    "current_annual_safety_holding_cost",
    "current_annual_shortage_cost",
    "current_annual_total_cost",
    "annual_saving",
    "rounding_cost_ratio",
    "rounding_penalty",
    "uncapped_order_qty",
    "uncapped_reorder_point",
    "uncapped_annual_total_cost",
    "service_target_source",
    "unit_price",
    "price_break_qty",
    "plain_eoq_qty",
    "discount_saving",
    "shelf_life_days",
    "shelf_life_max_qty",
    "shelf_life_cost",
    "review",
    "review_period_days",
    "order_up_to_level",
    "protection_demand_mean",
    "protection_demand_sd",
    # the forecast with seasons and trend (xlpolicy.seasons)
    "forecast",
    "forecast_reason",
    "forecast_mae_ratio",
    "forecast_error_sd",
    "season_backtest_service",
    "season_backtest_flat_service",
    "season_backtest_stock",
    "season_backtest_flat_stock",
    # the back-test (only with a simulation; see xlpolicy.backtest)
    "simulation_source",
    "simulated_cycle_service",
    "simulated_cycle_service_low",
    "simulated_cycle_service_high",
    "simulated_fill_rate",
    "simulated_fill_rate_low",
    "simulated_fill_rate_high",
    "replayed_cycle_service",
    "simulated_average_on_hand",
    "simulated_orders_per_year",
    "simulated_annual_total_cost",
    "simulated_target_reorder_point",
    "simulated_target_extra_holding_cost",
    "simulation_check",
)

#: The back-test's result keys (a run without simulation leaves them out of the sheets).
SIMULATION_RESULT_KEYS: tuple[str, ...] = EXTRA_RESULT_KEYS[
    EXTRA_RESULT_KEYS.index("simulation_source") :
]

#: How the template marks its example rows (the description starts with it), so a run can
#: say when they were left in.
EXAMPLE_PREFIX = "EXAMPLE -"

#: Result keys that hold text; every other result key is a number (NaN when empty).
TEXT_RESULT_KEYS: frozenset[str] = frozenset(
    {
        "item",
        "status",
        "model",
        "service_measure",
        "description",
        "category",
        "supplier",
        "demand_source",
        "demand_class",
        "model_reason",
        "rate_method",
        "history_start",
        "abc_class",
        "service_target_source",
        "review",
        "simulation_source",
        "simulation_check",
        "forecast",
        "forecast_reason",
    }
)

#: Lead-time demand models (core.models.MODEL_NAMES) and the word for "choose per item".
DEMAND_MODELS: tuple[str, ...] = ("normal", "poisson", "negative binomial", "gamma")
AUTO_MODEL = "auto"

ALL_RESULT_KEYS: tuple[str, ...] = RESULT_KEYS + EXTRA_RESULT_KEYS

#: The caution shown where people look: printed once by plan and demo, at the top of the
#: Summary and on the printed Reorder now page (the How it works sheet says more).
CAUTION = (
    "Caution: these are estimates from past sales; new, promoted, seasonal or ending items "
    "need your judgement. For medicine, food or anything safety-critical they support, and "
    "do not replace, licensed judgement and your local rules."
)

STATUS_OK = "ok"
STATUS_WARNING = "warning"
STATUS_SKIPPED = "skipped"

# --- plausibility: thresholds past which a number is reported, not planned in silence ------

#: An order quantity lasting longer than this many years of the item's demand is reported:
#: it usually comes from a unit cost or holding rate typed far too small (our own rule of
#: thumb; stock bought for more than five years ages, and its costs are no longer the ones
#: the order quantity formula assumes).
MAX_ORDER_YEARS = 5.0
#: A lead time longer than this many days is reported: usually a typing slip (days for
#: weeks, an extra zero). Two years; our own rule of thumb.
MAX_LEAD_TIME_DAYS = 730.0
#: Any amount (money or units) an item's plan reaches beyond this is reported and the item
#: left out of every total: past about 9e15 (2**53) a double-precision number no longer
#: holds every whole unit, let alone cents, so a total would silently round or overflow.
MAX_PLAN_AMOUNT = 1e15

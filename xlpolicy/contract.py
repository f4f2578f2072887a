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
# Input columns
# ---------------------------------------------------------------------------

TEXT = "text"
NUMBER = "number"
RATE = "rate"  # a fraction; accepts 0.14, 14 % formatted, "14%"


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
        (
            "sku",
            "item code",
            "item no",
            "item number",
            "code",
            "product code",
            "part number",
            "part no",
            "article",
            "stock code",
        ),
    ),
    Column(
        "description",
        "Description",
        TEXT,
        "no",
        "What the item is; carried to the output.",
        ("item description", "item name", "name", "product name"),
    ),
    Column(
        "category",
        "Category",
        TEXT,
        "no",
        "A group for the summary; carried to the output.",
        ("group", "product group", "department", "family"),
    ),
    Column(
        "supplier",
        "Supplier",
        TEXT,
        "no",
        "Who it is bought from; the reorder list groups by it.",
        ("vendor", "supplier name", "vendor name"),
    ),
    Column(
        "unit_cost",
        "Unit cost",
        NUMBER,
        "yes",
        "What one unit costs to buy, more than 0.",
        ("cost", "cost per unit", "unit price paid", "purchase price", "buy price"),
    ),
    Column(
        "order_cost",
        "Order cost",
        NUMBER,
        "unless set in Settings",
        "Cost of placing and receiving one order (admin, delivery), 0 or more.",
        ("ordering cost", "cost per order", "setup cost", "order handling cost"),
    ),
    Column(
        "holding_rate",
        "Holding rate",
        RATE,
        "unless set in Settings",
        "Yearly cost of keeping stock, as a fraction of unit cost (0.25 or 25%).",
        (
            "carrying rate",
            "holding cost rate",
            "carrying cost rate",
            "annual holding rate",
            "holding",
        ),
    ),
    Column(
        "lead_time_days",
        "Lead time days",
        NUMBER,
        "yes",
        "Days from placing an order to having the goods on the shelf, more than 0.",
        ("lead time", "leadtime", "lt days", "supplier lead time", "delivery days"),
    ),
    Column(
        "lead_time_sd_days",
        "Lead time sd days",
        NUMBER,
        "no",
        "How much the lead time varies: its standard deviation in days, 0 or more.",
        (
            "lead time sd",
            "lead time std dev",
            "lead time standard deviation",
            "lead time std",
            "lt sd",
        ),
    ),
    Column(
        "service_target",
        "Service target",
        RATE,
        "no",
        "Target for the service measure, between 0 and 1 (0.95 or 95%). "
        "Blank: the Settings default.",
        ("service level", "target service", "service", "target"),
    ),
    Column(
        "shortage_cost",
        "Shortage cost",
        NUMBER,
        "no",
        "Cost of each unit short; used when the service measure is 'shortage cost'.",
        ("stockout cost", "backorder cost", "cost per unit short", "penalty cost"),
    ),
    Column(
        "pack_size",
        "Pack size",
        NUMBER,
        "no",
        "Orders come in whole multiples of this many units (a case, a box).",
        ("case size", "pack qty", "case qty", "order multiple", "units per pack", "pack"),
    ),
    Column(
        "minimum_order",
        "Minimum order",
        NUMBER,
        "no",
        "Smallest quantity the supplier accepts, in units.",
        ("moq", "min order", "minimum order qty", "minimum order quantity", "min order qty"),
    ),
    Column(
        "on_hand",
        "On hand",
        NUMBER,
        "no",
        "Units on the shelf now; for the reorder list.",
        ("stock", "qty on hand", "stock on hand", "in stock", "soh"),
    ),
    Column(
        "on_order",
        "On order",
        NUMBER,
        "no",
        "Units ordered but not yet received.",
        ("open orders", "qty on order", "incoming"),
    ),
    Column(
        "backordered",
        "Backordered",
        NUMBER,
        "no",
        "Units customers are waiting for.",
        ("backorders", "back orders", "owed to customers"),
    ),
    Column(
        "current_order_qty",
        "Current order qty",
        NUMBER,
        "no",
        "The order quantity used today, for comparison.",
        ("current order quantity", "current q", "order qty now"),
    ),
    Column(
        "current_reorder_point",
        "Current reorder point",
        NUMBER,
        "no",
        "The reorder point used today, for comparison.",
        ("current rop", "reorder point now", "current reorder level"),
    ),
    Column(
        "annual_demand",
        "Annual demand",
        NUMBER,
        "no",
        "Units sold per year, for an item with no history.",
        ("demand per year", "yearly demand", "annual usage", "annual sales"),
    ),
    Column(
        "demand_sd",
        "Demand sd",
        NUMBER,
        "no",
        "Standard deviation of demand per period (see Settings: period), "
        "for an item with no history.",
        ("demand sd per period", "demand std dev", "demand standard deviation", "sd of demand"),
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
        ("first period", "launch date", "start date", "introduced", "history from"),
    ),
    Column(
        "shelf_life_days",
        "Shelf life days",
        NUMBER,
        "no",
        "Days a unit stays usable after it arrives, more than 0. The order quantity is "
        "capped at the demand expected over that time. Blank: it keeps.",
        (
            "shelf life",
            "usable life days",
            "usable life",
            "days to expiry",
            "expiry days",
            "best before days",
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
        (
            "review period",
            "review every days",
            "review cycle days",
            "review interval days",
            "review interval",
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
        ("date", "week", "month", "day", "period start", "week starting", "month starting"),
    ),
    Column(
        "quantity",
        "Quantity",
        NUMBER,
        "yes",
        "Units sold (demanded) in that period.",
        ("qty", "units", "demand", "sales", "units sold", "quantity sold", "sold"),
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
        (
            "from quantity",
            "break quantity",
            "quantity from",
            "min qty",
            "break qty",
            "order from",
            "from qty",
        ),
    ),
    Column(
        "unit_price",
        "Unit price",
        NUMBER,
        "yes",
        "What each unit costs in such an order, more than 0. Below the smallest break the "
        "item's Unit cost applies.",
        ("price", "discounted price", "price per unit", "break price", "discount price"),
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
    }
)

#: Lead-time demand models (core.models.MODEL_NAMES) and the word for "choose per item".
DEMAND_MODELS: tuple[str, ...] = ("normal", "poisson", "negative binomial", "gamma")
AUTO_MODEL = "auto"

ALL_RESULT_KEYS: tuple[str, ...] = RESULT_KEYS + EXTRA_RESULT_KEYS

STATUS_OK = "ok"
STATUS_WARNING = "warning"
STATUS_SKIPPED = "skipped"

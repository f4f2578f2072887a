"""The demo workbooks of an invented shop, Spoke & Sprocket Cycles.

The shop, its suppliers, items, prices and sales are invented for the demo; the sales are drawn
from a seeded random generator, so writing them again gives the same cell values. The module
lives in the package so that `xlpolicy demo` works from an installed copy.

    python examples/make_demo.py            # writes examples/demo-shop.xlsx and demo-wide.xlsx
    python examples/make_demo.py OUT_DIR    # writes them to OUT_DIR instead

demo-shop.xlsx holds a handful of deliberate data mistakes (see examples/README.md);
demo-wide.xlsx is a small clean workbook with History in the wide layout.
Written with openpyxl, so that the files look like workbooks a person made.
"""

from __future__ import annotations

import sys
from dataclasses import dataclass
from datetime import datetime, timedelta
from pathlib import Path

import numpy as np
from openpyxl import Workbook
from openpyxl.styles import Alignment, Font, PatternFill
from openpyxl.utils import get_column_letter

SEED = 20250106
SHOP = "Spoke & Sprocket Cycles"
WEEKS = 104
FIRST_MONDAY = datetime(2023, 1, 2)  # 104 Mondays: 2023-01-02 .. 2024-12-23
COUNT_DATE = "30 Dec 2024"
FIXED_TIME = datetime(2025, 1, 6, 8, 30)  # document dates, so the files do not change per run


@dataclass(frozen=True)
class Supplier:
    name: str
    order_cost: float | None  # None: the item leaves it blank and Settings gives it
    lead_days: int
    lead_sd: float | None
    minimum_order: int | None


SUPPLIERS = {
    "NCW": Supplier("Northgate Cycle Wholesale", 18.0, 5, None, None),
    "RIM": Supplier("Rimrock Parts Co.", 25.0, 10, 3.0, None),
    "LUM": Supplier("Lumen Trail Lighting", 30.0, 14, 4.0, 10),
    "BNB": Supplier("Bench & Bolt Tools", 40.0, 21, 6.0, 4),
    "GRS": Supplier("Greaseworks Supply", 12.0, 4, None, None),
}


@dataclass(frozen=True)
class Spec:
    code: str
    description: str
    category: str
    supplier: str  # key of SUPPLIERS
    unit_cost: float
    pattern: str  # fast, medium, slow, lumpy, seasonal (winter), summer, new, annual,
    #               rising, spike, fading
    rate: float  # mean units per week (for "annual": units per year)
    pack: int | None = None


TT, BR, DT = "Tubes & tyres", "Brake parts", "Chains & drivetrain"
LT, TL, AC, WS = "Lights", "Tools", "Accessories", "Workshop consumables"

ITEMS: tuple[Spec, ...] = (
    Spec("000411", "Inner tube 700x25-32c, presta 48 mm", TT, "NCW", 4.20, "fast", 44, 10),
    Spec("000412", "Inner tube 700x35-43c, presta 48 mm", TT, "NCW", 4.60, "medium", 14, 10),
    Spec("000415", "Inner tube 26x1.9-2.125, schrader", TT, "NCW", 4.10, "fast", 23, 10),
    Spec("000417", "Inner tube 29x2.1-2.4, presta", TT, "NCW", 5.60, "medium", 11, 10),
    Spec("000418", "Inner tube 20x1.75, schrader (kids)", TT, "NCW", 3.80, "slow", 1.6, 10),
    Spec("000420", "Tyre 700x28c road, folding", TT, "NCW", 24.50, "medium", 6),
    Spec("000421", "Tyre 700x35c hybrid, puncture belt", TT, "NCW", 21.00, "medium", 7.5),
    Spec("000424", "Tyre 29x2.3 trail", TT, "NCW", 38.00, "slow", 1.8),
    Spec("000426", "Puncture repair kit, 6 patches", TT, "NCW", 2.10, "medium", 10, 25),
    Spec("000427", "Tyre levers, pair", TT, "NCW", 1.20, "medium", 7, 50),
    Spec("000429", "Tubeless sealant 500 ml", TT, "NCW", 9.80, "new", 4.5, 6),
    Spec("BR-101", "Disc brake pads, resin compound", BR, "RIM", 7.40, "medium", 11, 4),
    Spec("BR-102", "Disc brake pads, sintered", BR, "RIM", 9.20, "medium", 5, 4),
    Spec("BR-110", "Rim brake pads, road, pair", BR, "RIM", 3.60, "medium", 6.5),
    Spec("BR-111", "V-brake pads 70 mm, pair", BR, "RIM", 2.90, "medium", 8.5),
    Spec("BR-120", "Brake cable inner 1.6 x 2000 mm", BR, "RIM", 1.10, "medium", 12, 25),
    Spec("BR-121", "Brake cable outer housing, per metre", BR, "RIM", 1.90, "medium", 8),
    Spec("BR-130", "Disc rotor 160 mm, 6-bolt", BR, "RIM", 14.50, "slow", 1.2),
    Spec("DT-201", "Chain 8-speed, 116 links", DT, "RIM", 11.50, "medium", 9),
    Spec("DT-202", "Chain 10-speed, 116 links", DT, "RIM", 19.90, "medium", 5.5),
    Spec("DT-203", "Chain 11-speed, 116 links", DT, "RIM", 27.00, "medium", 4.5),
    Spec("DT-205", "Quick link 11-speed, pair", DT, "RIM", 3.40, "medium", 7.5, 10),
    Spec("DT-210", "Cassette 8-speed 11-32", DT, "RIM", 18.50, "slow", 1.6),
    Spec("DT-211", "Cassette 11-speed 11-34", DT, "RIM", 46.00, "slow", 0.8),
    Spec("DT-220", "Gear cable inner 1.2 x 2100 mm", DT, "RIM", 0.95, "fast", 21, 25),
    Spec("DT-225", "Bottom bracket, threaded 68 mm", DT, "RIM", 22.00, "annual", 55),
    Spec("LT-301", "Front light, USB, 400 lumen", LT, "LUM", 24.00, "seasonal", 6),
    Spec("LT-302", "Rear light, USB", LT, "LUM", 12.50, "seasonal", 8),
    Spec("LT-305", "Light set front + rear, battery", LT, "LUM", 15.00, "seasonal", 5),
    Spec("LT-310", "Light bracket, spare", LT, "LUM", 3.20, "slow", 1.4, 10),
    Spec("TL-401", "Multi-tool, 14 functions", TL, "BNB", 13.00, "medium", 4),
    Spec("TL-402", "Mini pump with gauge", TL, "BNB", 17.50, "medium", 4.5),
    Spec("TL-405", "Floor pump, workshop grade", TL, "BNB", 48.00, "annual", 26),
    Spec("TL-410", "Chain wear gauge", TL, "BNB", 6.80, "slow", 0.9),
    Spec("AC-220", "Bottle cage, alloy", AC, "NCW", 4.90, "medium", 7),
    Spec("AC-221", "Water bottle 750 ml", AC, "NCW", 3.10, "medium", 12, 20),
    Spec("AC-228", "Mudguard set 700c", AC, "NCW", 19.00, "slow", 2),
    Spec("AC-230", "Cable lock 1.8 m", AC, "NCW", 11.00, "medium", 4),
    Spec("AC-231", "D-lock, 13 mm shackle", AC, "NCW", 32.00, "slow", 1.7),
    Spec("AC-233", "Hi-vis vest, adult", AC, "NCW", 6.50, "lumpy", 0),
    Spec("000501", "Chain lube, wet, 100 ml", WS, "GRS", 3.90, "fast", 27, 12),
    Spec("000502", "Degreaser 1 L", WS, "GRS", 7.20, "medium", 5, 6),
    Spec("000503", "Assembly grease, 500 g tub", WS, "GRS", 11.40, "slow", 0.9),
    Spec("000505", "Nitrile gloves, box of 100", WS, "GRS", 8.50, "slow", 2),
    # Patterns a planner should comment on (issue: demand as real histories have it).
    Spec("DT-230", "E-bike chain, 136 links", DT, "RIM", 29.00, "rising", 2.0),
    Spec("AC-240", "Phone mount, handlebar", AC, "NCW", 9.50, "spike", 3.0),
    Spec("AC-236", "Reflective ankle bands, pair", AC, "NCW", 2.40, "fading", 3.0),
) + tuple(
    # The rest of the catalogue: (code, description, category, supplier, cost, pattern,
    # units a week, pack). Invented, like everything here.
    Spec(*row)
    for row in (
        ("000431", "Inner tube 27.5x2.1-2.4, presta", TT, "NCW", 5.40, "medium", 9, 10),
        ("000432", "Inner tube 700x18-25c, presta 60 mm", TT, "NCW", 4.90, "medium", 6, 10),
        ("000433", "Inner tube 16x1.75, schrader (kids)", TT, "NCW", 3.60, "slow", 1.1, 10),
        ("000434", "Inner tube 24x1.75, schrader", TT, "NCW", 3.90, "slow", 1.5, 10),
        ("000436", "Tyre 700x25c road, wire bead", TT, "NCW", 16.50, "medium", 4.5, None),
        ("000437", "Tyre 26x2.1 urban slick", TT, "NCW", 19.00, "slow", 1.9, None),
        ("000438", "Tyre 27.5x2.35 trail", TT, "NCW", 36.00, "slow", 1.4, None),
        ("000439", "Tyre 20x1.95 BMX", TT, "NCW", 14.00, "slow", 0.9, None),
        ("000440", "Tubeless valves, pair", TT, "NCW", 8.90, "medium", 3.5, None),
        ("000441", "Rim tape 700c, 18 mm", TT, "NCW", 2.70, "medium", 4, 10),
        ("000442", "Patch kit, glueless", TT, "NCW", 3.20, "medium", 6, 20),
        ("000443", "CO2 cartridges 16 g, 2 pack", TT, "NCW", 4.40, "medium", 5, 10),
        ("BR-103", "Disc brake pads, e-bike compound", BR, "RIM", 11.80, "rising", 2.0, 4),
        ("BR-104", "Disc brake pads, hydraulic 4-piston", BR, "RIM", 12.90, "slow", 1.6, 4),
        ("BR-112", "Cantilever brake pads, pair", BR, "RIM", 4.10, "slow", 1.0, None),
        ("BR-122", "Brake lever, hybrid, left", BR, "RIM", 9.50, "slow", 0.8, None),
        ("BR-123", "Brake lever, hybrid, right", BR, "RIM", 9.50, "slow", 0.9, None),
        ("BR-131", "Disc rotor 180 mm, 6-bolt", BR, "RIM", 16.00, "slow", 0.9, None),
        ("BR-132", "Disc rotor 160 mm, centre lock", BR, "RIM", 18.50, "slow", 0.7, None),
        ("BR-140", "Mineral brake fluid 100 ml", BR, "RIM", 6.90, "medium", 2.5, None),
        ("BR-141", "Brake bleed kit", BR, "RIM", 24.00, "slow", 0.4, None),
        ("BR-150", "Caliper brake, road, front", BR, "RIM", 21.00, "slow", 0.6, None),
        ("DT-206", "Quick link 10-speed, pair", DT, "RIM", 3.20, "medium", 5, 10),
        ("DT-207", "Quick link 8-speed, pair", DT, "RIM", 2.80, "medium", 4.5, 10),
        ("DT-212", "Cassette 10-speed 11-36", DT, "RIM", 39.00, "slow", 0.9, None),
        ("DT-213", "Freewheel 7-speed 14-28", DT, "RIM", 14.50, "slow", 1.3, None),
        ("DT-215", "Chainring 38T, 104 BCD", DT, "RIM", 24.50, "slow", 0.6, None),
        ("DT-216", "Jockey wheels, pair", DT, "RIM", 8.90, "slow", 1.2, None),
        ("DT-221", "Gear cable outer housing, per metre", DT, "RIM", 1.60, "medium", 7, None),
        ("DT-222", "Cable end caps, bag of 100", DT, "RIM", 3.50, "medium", 2.5, None),
        ("DT-226", "Bottom bracket, press-fit 86 mm", DT, "RIM", 27.00, "slow", 0.5, None),
        ("DT-227", "Pedals, flat, alloy", DT, "RIM", 22.00, "medium", 2.5, None),
        ("DT-228", "Pedals, clipless, road", DT, "RIM", 48.00, "slow", 0.8, None),
        ("DT-231", "Rear derailleur 8-speed", DT, "RIM", 26.00, "slow", 0.9, None),
        ("DT-232", "Rear derailleur 11-speed", DT, "RIM", 62.00, "slow", 0.4, None),
        ("DT-233", "Gear shifter 8-speed, right", DT, "RIM", 18.00, "slow", 1.0, None),
        ("LT-303", "Front light, USB, 1000 lumen", LT, "LUM", 46.00, "seasonal", 2.0, None),
        ("LT-304", "Rear light, radar-ready mount", LT, "LUM", 19.50, "seasonal", 2.5, None),
        ("LT-306", "Spoke reflectors, set of 4", LT, "LUM", 2.90, "seasonal", 3.0, 10),
        ("LT-307", "Helmet light, clip-on", LT, "LUM", 13.00, "seasonal", 1.5, None),
        ("LT-311", "CR2032 batteries, 5 pack", LT, "LUM", 4.50, "medium", 4, 10),
        ("LT-312", "USB-C charging cable 1 m", LT, "LUM", 3.80, "medium", 3, 10),
        ("LT-315", "Dynamo hub light, front", LT, "LUM", 38.00, "slow", 0.5, None),
        ("TL-403", "Tyre pressure gauge, digital", TL, "BNB", 12.00, "slow", 1.1, None),
        ("TL-404", "Hex key set, 9 pieces", TL, "BNB", 9.50, "medium", 2.2, None),
        ("TL-406", "Torque wrench 2-24 Nm", TL, "BNB", 54.00, "slow", 0.4, None),
        ("TL-407", "Chain tool", TL, "BNB", 11.00, "slow", 1.3, None),
        ("TL-408", "Cassette lockring tool", TL, "BNB", 7.50, "slow", 0.6, None),
        ("TL-409", "Cable cutter", TL, "BNB", 21.00, "slow", 0.5, None),
        ("TL-411", "Spoke key, multi-size", TL, "BNB", 5.20, "slow", 1.0, None),
        ("TL-412", "Pedal spanner 15 mm", TL, "BNB", 13.50, "slow", 0.4, None),
        ("TL-415", "Repair stand, home", TL, "BNB", 79.00, "slow", 0.3, None),
        ("AC-222", "Water bottle 600 ml, insulated", AC, "NCW", 9.90, "medium", 3.5, 10),
        ("AC-223", "Bottle cage, plastic", AC, "NCW", 2.90, "medium", 4.5, 10),
        ("AC-224", "Bell, brass, ding-dong", AC, "NCW", 7.50, "medium", 3, None),
        ("AC-225", "Bell, mini, alloy", AC, "NCW", 3.40, "medium", 4, 10),
        ("AC-226", "Grips, lock-on, black", AC, "NCW", 14.50, "medium", 2.5, None),
        ("AC-227", "Handlebar tape, cork", AC, "NCW", 11.00, "medium", 2.2, None),
        ("AC-229", "Mudguard set 26in", AC, "NCW", 15.00, "slow", 1.2, None),
        ("AC-232", "Frame lock, wheel-mounted", AC, "NCW", 28.00, "slow", 0.8, None),
        ("AC-234", "Pannier, 20 L, waterproof", AC, "NCW", 42.00, "slow", 0.9, None),
        ("AC-235", "Rear rack, alloy", AC, "NCW", 29.00, "slow", 1.0, None),
        ("AC-237", "Saddle, comfort, gel", AC, "NCW", 24.00, "medium", 2, None),
        ("AC-238", "Saddle bag, small", AC, "NCW", 12.50, "slow", 1.6, None),
        ("AC-239", "Kickstand, adjustable", AC, "NCW", 13.00, "slow", 1.4, None),
        ("AC-241", "Child seat, rear", AC, "NCW", 85.00, "slow", 0.3, None),
        ("AC-242", "Helmet, adult, M", AC, "NCW", 45.00, "medium", 2, None),
        ("AC-243", "Helmet, kids", AC, "NCW", 29.00, "slow", 1.5, None),
        ("AC-244", "Cycling gloves, fingerless, L", AC, "NCW", 16.00, "summer", 1.5, None),
        ("AC-245", "Winter gloves, full finger, L", AC, "NCW", 24.00, "seasonal", 1.2, None),
        ("AC-246", "Phone bag, top tube", AC, "NCW", 18.00, "new", 2.5, None),
        ("000506", "Chain cleaner brush set", WS, "GRS", 6.50, "medium", 2, None),
        ("000507", "Shop rags, 1 kg bag", WS, "GRS", 5.90, "medium", 3, None),
        ("000508", "Chain lube, dry, 100 ml", WS, "GRS", 4.20, "medium", 9, 12),
        ("000509", "Carbon assembly paste 20 g", WS, "GRS", 8.80, "slow", 0.8, None),
        ("000510", "Disc brake cleaner 500 ml", WS, "GRS", 7.90, "medium", 2.5, 6),
        ("000511", "Threadlock, medium, 10 ml", WS, "GRS", 6.40, "slow", 0.7, None),
        ("000512", "Bike wash concentrate 1 L", WS, "GRS", 9.50, "summer", 2.0, 6),
        ("000513", "Frame protection tape", WS, "GRS", 12.00, "lumpy", 0, None),
    )
)

# Items whose stock is deliberately low (below any sensible reorder point, nothing on order).
LOW_STOCK = {"000415", "BR-101", "DT-220", "LT-301", "LT-302", "AC-221", "000501", "DT-202"}
# Items whose Holding rate cell is filled in (others use the Settings default of 25%).
HOLDING = {
    "LT-301": 0.30,
    "LT-302": 0.30,
    "LT-305": 0.30,
    "LT-310": 0.30,
    "000501": 0.20,
    "000502": 0.20,
    "000505": 0.20,
}
HOLDING_AS_TEXT = {"000503": "20%"}  # typed as text: the contract accepts it
SERVICE = {
    "000411": 0.98,
    "000415": 0.98,
    "DT-220": 0.98,
    "000501": 0.98,
    "DT-211": 0.90,
    "000424": 0.90,
}
SHORTAGE = {"000411": 6.0, "DT-201": 10.0, "BR-101": 8.0, "000501": 4.0}
ANNUAL_SD = {"DT-225": 1.1, "TL-405": 0.7}  # demand sd per week for the "annual" items

# The deliberate mistakes (documented in examples/README.md).
MISTAKE_TEXT_COST = "BR-130"  # unit cost typed as "n/a"
MISTAKE_TARGET = "DT-203"  # service target 1.5
MISTAKE_LEAD = "AC-231"  # lead time -10 days
DUPLICATE = Spec(
    "000421", "Tyre 700x35c hybrid, reflective sidewall", TT, "NCW", 22.50, "medium", 0
)  # a second row with the same code as "000421"
UNKNOWN_CODE = "000422"  # sold in History, but not listed in Items
#: The mistakes above as (item, the code of the problem each should raise), so the console
#: can present them as planted rather than as the demo's own faults.
PLANTED: tuple[tuple[str, str], ...] = (
    (MISTAKE_TEXT_COST, "unit_cost-not-number"),
    (MISTAKE_TARGET, "service_target-out-of-range"),
    (MISTAKE_LEAD, "lead_time_days-out-of-range"),
    (DUPLICATE.code, "item-duplicate"),
    (UNKNOWN_CODE, "history-unknown-item"),
)

WIDE_ITEMS = (
    "000411",
    "000415",
    "000420",
    "BR-101",
    "DT-201",
    "DT-220",
    "LT-301",
    "AC-220",
    "000501",
)

TITLE_FONT = Font(bold=True, size=14)
HEADER_FONT = Font(bold=True)
HEADER_FILL = PatternFill("solid", fgColor="DCE6D2")  # a soft sage


def mondays(n: int, first: datetime = FIRST_MONDAY) -> list[datetime]:
    """n consecutive Mondays from `first`."""
    return [first + timedelta(weeks=k) for k in range(n)]


def simulate(rng: np.random.Generator) -> dict[str, np.ndarray]:
    """Weekly sales per item with history, WEEKS long (NaN before a new item's launch)."""
    weeks = mondays(WEEKS)
    doy = np.array([d.timetuple().tm_yday for d in weeks], dtype=float)
    summer = 1.0 + 0.25 * np.cos(2 * np.pi * (doy - 190.0) / 365.0)  # riding season
    winter = 1.0 + 0.75 * np.cos(2 * np.pi * (doy - 330.0) / 365.0)  # dark evenings
    sales: dict[str, np.ndarray] = {}
    for spec in ITEMS:
        if spec.pattern == "annual":
            continue
        if spec.pattern == "lumpy":
            # Bought in batches by school and club rides a few times a year.
            batch = rng.random(WEEKS) < 0.07
            qty = np.where(batch, rng.integers(10, 31, WEEKS), rng.poisson(0.15, WEEKS))
            sales[spec.code] = qty.astype(float)
            continue
        mean = np.full(WEEKS, spec.rate)
        if spec.pattern == "rising":
            # e-bikes are catching on: demand climbs to about 3.5 times over two years
            mean = spec.rate * (1.0 + 2.5 * np.arange(WEEKS) / WEEKS)
        if spec.category == TT:
            mean = mean * summer
        if spec.pattern == "seasonal":
            mean = spec.rate * winter
        if spec.pattern == "summer":
            mean = spec.rate * (1.0 + 0.7 * (summer - 1.0) / 0.25)  # riding season, stronger
        qty = rng.poisson(mean).astype(float)
        if spec.pattern == "new":
            qty[: WEEKS - 12] = np.nan  # launched 12 weeks before the stock count
        if spec.pattern == "spike":
            qty[61] = 60  # one club bought a batch for its members: not ordinary demand
        if spec.pattern == "fading":
            qty[-20:] = 0  # the maker stopped supplying it; the shelf ran empty
        sales[spec.code] = qty
    return sales


def plan_stock(rng: np.random.Generator, sales: dict[str, np.ndarray]) -> dict[str, dict]:
    """On hand, on order and today's policy figures, roughly as a shop would have them."""
    out: dict[str, dict] = {}
    for spec in ITEMS:
        sup = SUPPLIERS[spec.supplier]
        if spec.code in sales:
            recent = sales[spec.code][-26:]
            weekly = float(np.nanmean(recent))
        else:
            weekly = spec.rate / 52.0
        lead_weeks = sup.lead_days / 7.0
        cover = weekly * lead_weeks + 2.0 * np.sqrt(max(weekly, 0.2) * lead_weeks)
        pack = spec.pack or 1
        row: dict = {}
        if spec.code in LOW_STOCK:
            row["on_hand"] = int(np.floor(cover * rng.uniform(0.15, 0.5)))
            row["on_order"] = 0
        else:
            row["on_hand"] = int(round(cover * rng.uniform(0.9, 3.0))) + 1
            has_order = rng.random() < 0.25
            lot = max(pack, sup.minimum_order or 1)
            row["on_order"] = lot * int(rng.integers(1, 4)) if has_order else 0
        if rng.random() < 0.5:
            # What the owner orders today: about a month's sales in whole packs, and a
            # reorder point of about two weeks' sales.
            q = max(pack, pack * int(round(4.0 * weekly / pack)))
            row["current_order_qty"] = q
            row["current_reorder_point"] = int(round(2.0 * weekly))
        out[spec.code] = row
    return out


def _lead(spec: Spec, rng: np.random.Generator) -> tuple[int, float | None]:
    sup = SUPPLIERS[spec.supplier]
    days = int(sup.lead_days + rng.integers(-1, 3))
    return max(days, 2), sup.lead_sd


def _header(ws, row: int, titles: list[str], widths: dict[int, float]) -> None:
    for col, title in enumerate(titles, start=1):
        cell = ws.cell(row=row, column=col, value=title)
        cell.font = HEADER_FONT
        cell.fill = HEADER_FILL
        cell.alignment = Alignment(wrap_text=True, vertical="top")
        ws.column_dimensions[get_column_letter(col)].width = widths.get(col, 12)


def _fix_dates(wb: Workbook) -> None:
    wb.properties.creator = SHOP
    wb.properties.created = FIXED_TIME
    wb.properties.modified = FIXED_TIME


ITEM_HEADERS = [
    "Item code",
    "Description",
    "Category",
    "Supplier",
    "Unit cost ($)",
    "Order cost ($)",
    "Holding rate (%)",
    "Lead time (days)",
    "Lead time SD (days)",
    "Service target",
    "Shortage cost ($/unit)",
    "Pack size",
    "Min order",
    "On hand",
    "On order",
    "Current order qty",
    "Current reorder point",
    "Annual demand",
    "Demand SD (per week)",
    "Shelf life (days)",
    "Review every (days)",
]

#: Invented buyer's details: a shelf life, periodic review for one supplier's workshop
#: consumables, and a few all-units price breaks (item, from units, unit price).
SHELF_LIFE = {"000429": 60}
REVIEW_DAYS = {"000502": 14, "000503": 14, "000505": 14}
PRICE_BREAKS = (
    ("000411", 500, 3.95),
    ("000411", 1000, 3.80),
    ("000501", 288, 3.60),
    ("DT-220", 1000, 0.85),
)

# The wide demo spells its headers with everyday aliases, to show that they are recognised.
WIDE_ITEM_HEADERS = [
    "SKU",
    "Item name",
    "Category",
    "Vendor",
    "Cost per unit",
    "Cost per order",
    "Carrying rate",
    "Lead time",
    "Lead time std dev",
    "Service level",
    "Stockout cost",
    "Case size",
    "MOQ",
    "Stock on hand",
    "Qty on order",
    "Current order quantity",
    "Current ROP",
]


def _item_row(spec: Spec, rng: np.random.Generator, stock: dict) -> list:
    sup = SUPPLIERS[spec.supplier]
    lead, lead_sd = _lead(spec, rng)
    holding = HOLDING_AS_TEXT.get(spec.code, HOLDING.get(spec.code))
    annual = spec.rate if spec.pattern == "annual" else None
    return [
        spec.code,
        spec.description,
        spec.category,
        sup.name,
        spec.unit_cost,
        sup.order_cost,
        holding,
        lead,
        lead_sd,
        SERVICE.get(spec.code),
        SHORTAGE.get(spec.code),
        spec.pack,
        sup.minimum_order,
        stock.get("on_hand"),
        stock.get("on_order"),
        stock.get("current_order_qty"),
        stock.get("current_reorder_point"),
        annual,
        ANNUAL_SD.get(spec.code),
        SHELF_LIFE.get(spec.code),
        REVIEW_DAYS.get(spec.code),
    ]


def _write_item_rows(ws, first_row: int, rows: list[list]) -> None:
    for r, values in enumerate(rows, start=first_row):
        for c, value in enumerate(values, start=1):
            if value is None:
                continue
            cell = ws.cell(row=r, column=c, value=value)
            if c == 1:
                cell.number_format = "@"
            elif c in (5, 6, 11):
                cell.number_format = "#,##0.00" if isinstance(value, float) else "General"
            elif c in (7, 10) and isinstance(value, float):
                cell.number_format = "0%"


def _settings(wb: Workbook, rows: list[tuple[str, object]]) -> None:
    ws = wb.create_sheet("Settings")
    _header(ws, 1, ["Setting", "Value"], {1: 20, 2: 16})
    for r, (name, value) in enumerate(rows, start=2):
        ws.cell(row=r, column=1, value=name)
        cell = ws.cell(row=r, column=2, value=value)
        if name in ("Service target", "Holding rate", "Service target A"):
            cell.number_format = "0%"
        elif isinstance(value, datetime):
            cell.number_format = "yyyy-mm-dd"


def build_shop(path: Path) -> None:
    """Write demo-shop.xlsx: 44 items, 104 weeks of long History, and planted mistakes."""
    rng = np.random.default_rng(SEED)
    sales = simulate(rng)
    stock = plan_stock(rng, sales)

    wb = Workbook()
    _fix_dates(wb)
    ws = wb.active
    ws.title = "Items"
    ws["A1"] = f"{SHOP} - stock list, counted {COUNT_DATE}"
    ws["A1"].font = TITLE_FONT
    _header(ws, 3, ITEM_HEADERS, {1: 11, 2: 38, 3: 20, 4: 26})
    ws.freeze_panes = "B4"

    rows = [_item_row(spec, rng, stock[spec.code]) for spec in ITEMS]
    index = {spec.code: i for i, spec in enumerate(ITEMS)}
    rows[index[MISTAKE_TEXT_COST]][4] = "n/a"
    rows[index[MISTAKE_TARGET]][9] = 1.5
    rows[index[MISTAKE_LEAD]][7] = -10
    dup = _item_row(DUPLICATE, rng, {"on_hand": 4, "on_order": 0})
    rows.insert(index["000429"] + 1, dup)  # added later, at the end of its category
    _write_item_rows(ws, 4, rows)

    hist = wb.create_sheet("History")
    _header(hist, 1, ["Item code", "Week starting", "Units sold"], {1: 11, 2: 14, 3: 11})
    hist.freeze_panes = "A2"
    weeks = mondays(WEEKS)
    extra = {WEEKS - 9: 3, WEEKS - 6: 2, WEEKS - 2: 5}  # sales of the unlisted code
    r = 2
    for w, day in enumerate(weeks):
        for spec in ITEMS:
            if spec.code not in sales:
                continue
            qty = sales[spec.code][w]
            if np.isnan(qty):
                continue
            if qty == 0 and rng.random() < 0.75:
                continue  # most zero weeks simply have no row
            hist.cell(row=r, column=1, value=spec.code).number_format = "@"
            hist.cell(row=r, column=2, value=day).number_format = "dd/mm/yyyy"
            hist.cell(row=r, column=3, value=int(qty))
            r += 1
        if w in extra:
            hist.cell(row=r, column=1, value=UNKNOWN_CODE).number_format = "@"
            hist.cell(row=r, column=2, value=day).number_format = "dd/mm/yyyy"
            hist.cell(row=r, column=3, value=extra[w])
            r += 1

    _settings(
        wb,
        [
            ("Period", "week"),
            ("Service measure", "cycle service"),
            ("Service target", 0.95),
            ("Holding rate", 0.25),
            ("Currency", "$"),
            ("Service target A", 0.97),
            # the owner runs the plan in early spring, ahead of the riding season
            ("Plan as of", datetime(2025, 3, 3)),
        ],
    )
    breaks = wb.create_sheet("Price breaks")
    _header(breaks, 1, ["Item code", "From quantity", "Unit price ($)"], {1: 11, 2: 14, 3: 14})
    for r, (code, qty, price) in enumerate(PRICE_BREAKS, start=2):
        breaks.cell(row=r, column=1, value=code).number_format = "@"
        breaks.cell(row=r, column=2, value=qty)
        breaks.cell(row=r, column=3, value=price).number_format = "#,##0.00"
    path.parent.mkdir(parents=True, exist_ok=True)
    wb.save(path)


def build_wide(path: Path) -> None:
    """Write demo-wide.xlsx: nine of the shop's items, 52 weeks of History in wide layout."""
    rng = np.random.default_rng(SEED)
    sales = simulate(rng)
    stock = plan_stock(rng, sales)
    all_rows = [_item_row(spec, rng, stock[spec.code]) for spec in ITEMS]
    specs = [spec for spec in ITEMS if spec.code in WIDE_ITEMS]

    wb = Workbook()
    _fix_dates(wb)
    ws = wb.active
    ws.title = "Items"
    _header(ws, 1, WIDE_ITEM_HEADERS, {1: 11, 2: 38, 3: 20, 4: 26})
    ws.freeze_panes = "B2"
    rows = [row[: len(WIDE_ITEM_HEADERS)] for row in all_rows if row[0] in WIDE_ITEMS]
    _write_item_rows(ws, 2, rows)

    hist = wb.create_sheet("History")
    weeks = mondays(52, FIRST_MONDAY + timedelta(weeks=WEEKS - 52))
    hist.cell(row=1, column=1, value="Item code").font = HEADER_FONT
    hist.column_dimensions["A"].width = 11
    for c, day in enumerate(weeks, start=2):
        cell = hist.cell(row=1, column=c, value=day)
        cell.font = HEADER_FONT
        cell.number_format = "d mmm yy"
        hist.column_dimensions[get_column_letter(c)].width = 9
    hist.freeze_panes = "B2"
    for r, spec in enumerate(specs, start=2):
        hist.cell(row=r, column=1, value=spec.code).number_format = "@"
        for c, qty in enumerate(sales[spec.code][-52:], start=2):
            if qty > 0:
                hist.cell(row=r, column=c, value=int(qty))  # an empty cell is a zero week

    _settings(
        wb,
        [
            ("Period", "week"),
            ("Service measure", "fill rate"),
            ("Service target", 0.98),
            ("Holding rate", 0.25),
            ("Currency", "$"),
        ],
    )
    path.parent.mkdir(parents=True, exist_ok=True)
    wb.save(path)


def main(argv: list[str] | None = None) -> int:
    """Write both demo workbooks to the folder given, or to the repository's examples/."""
    args = sys.argv[1:] if argv is None else argv
    out = Path(args[0]) if args else Path(__file__).resolve().parent.parent / "examples"
    build_shop(out / "demo-shop.xlsx")
    build_wide(out / "demo-wide.xlsx")
    print(f"wrote {out / 'demo-shop.xlsx'} and {out / 'demo-wide.xlsx'}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())

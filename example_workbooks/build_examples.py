"""Write the bundled example workbooks: the blank template and an invented regional distributor.

Run from anywhere::

    python example_workbooks/build_examples.py            # writes into example_workbooks/
    python example_workbooks/build_examples.py --out DIR  # writes into DIR

Everything in the example is invented: the company (Orvale Larder Supply), its towns, their coordinates (laid out on
a made-up 300 km x 220 km grid and placed in open ocean, so they match no real place) and every cost. Costs follow
simple distance rates with a little seeded noise, so the build is deterministic and the optimum has few ties.

The data is chosen so the plan is worth reading:

- supply (2,550 pallets) is comfortably above demand (1,880), but Quistmoor depot is the cheapest source in the
  east and its supply binds;
- the direct lane Quistmoor -> Harrowquay is capped below Harrowquay's demand and its capacity binds;
- Mellisford hub has a capacity, and it binds; Vantry hub has none;
- two lanes carry fixed charges: the Orlenby -> Vantry hub rail shuttle saves more than its charge and is opened,
  the Tarrowick -> Mellisford hub rail shuttle does not and stays shut;
- Runnelby, at the far corner, has an unmet-demand penalty: the capped lane through Vantry hub is worth using, the
  long direct haul costs more than the penalty, so part of its demand is rationally left undelivered;
- Orlenby -> Dapplemere is marked inactive (a closed bridge), Tarrowick -> Quistmoor is a depot-to-depot transfer;
- a "notes" column shows that extra columns are kept;
- a Scenarios sheet tries five what-ifs: peak season (+20 % demand), diesel up 8 %, Mellisford hub closed, a carrier
  halving the Quistmoor -> Harrowquay capacity, and peak season with the Tarrowick rail shuttle's charge cut to a
  quarter.
"""

from __future__ import annotations

import argparse
import math
import random
import sys
from pathlib import Path

import openpyxl
from openpyxl.styles import Font, PatternFill

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))  # run from a clone without installing

from lanesolve import contract  # noqa: E402
from lanesolve.write.template import GUIDE_SHEET, number_format_for, save_atomically, write_template  # noqa: E402

SEED = 20240611
EXAMPLE_NAME = "orvale_larder_supply.xlsx"
TEMPLATE_NAME = "blank_template.xlsx"

#: Grid origin of the invented map, in decimal degrees (open ocean, far from any coast).
ORIGIN_LAT, ORIGIN_LON = 1.0, -25.0
KM_PER_DEGREE = 111.0  # near the equator a degree of latitude or longitude is about 111 km (common practice)

# name: (x km, y km, supply pallets, handling cost per pallet)
DEPOTS = {
    "Orlenby depot": (20, 30, 1000, 1.20),
    "Quistmoor depot": (230, 40, 450, 0.90),
    "Tarrowick depot": (120, 200, 1100, 1.50),
}
# name: (x km, y km, capacity pallets or None, handling cost per pallet)
HUBS = {
    "Mellisford hub": (110, 90, 420, 0.60),
    "Vantry hub": (250, 150, None, 0.80),
}
# name: (x km, y km, demand pallets, unmet penalty per pallet or None)
CUSTOMERS = {
    "Brimlecote": (40, 70, 120, None),
    "Corvennick": (60, 15, 90, None),
    "Dapplemere": (90, 40, 150, None),
    "Eskelwyn": (140, 60, 110, None),
    "Fennowick": (180, 20, 130, None),
    "Gildmarrow": (210, 80, 100, None),
    "Harrowquay": (260, 20, 140, None),
    "Istlebrook": (280, 90, 80, None),
    "Jorvelle": (230, 130, 120, None),
    "Kellimount": (290, 170, 90, None),
    "Lissendown": (200, 190, 110, None),
    "Morrowfen": (150, 160, 100, None),
    "Nettlebray": (80, 170, 130, None),
    "Ostermoss": (40, 140, 90, None),
    "Pellinhythe": (100, 120, 120, None),
    "Quillerton": (170, 110, 140, None),
    "Runnelby": (300, 215, 60, 95.0),
}

# Distance rates per pallet (invented): a fixed part for loading and paperwork plus a part per km.
ROAD_DIRECT = (6.0, 0.55)  # part loads straight to the customer
ROAD_TRUNK = (2.5, 0.22)  # full loads depot -> hub or depot -> depot
ROAD_LOCAL = (3.0, 0.50)  # hub -> customer delivery runs
RAIL_TRUNK = (1.2, 0.10)  # rail shuttle to a hub, cheap per pallet but with a fixed charge per period

#: Lanes with a special role, by (origin, destination, mode): capacity, fixed charge, active, note.
SPECIAL = {
    ("Quistmoor depot", "Harrowquay", "road"): dict(capacity=100, note="carrier contract capped at 100 pallets"),
    ("Vantry hub", "Runnelby", "road"): dict(capacity=35, note="one weekly run, 35 pallets"),
    ("Orlenby depot", "Vantry hub", "rail"): dict(fixed_cost=1200, note="rail shuttle, charged per period"),
    ("Tarrowick depot", "Mellisford hub", "rail"): dict(fixed_cost=9000, note="rail shuttle, charged per period"),
    ("Orlenby depot", "Dapplemere", "road"): dict(active=False, note="bridge closed for repairs"),
    ("Tarrowick depot", "Quistmoor depot", "road"): dict(capacity=150, note="transfer between depots"),
}


def distance(a: tuple, b: tuple) -> float:
    return math.hypot(a[0] - b[0], a[1] - b[1])


def coordinates(x: float, y: float) -> tuple[float, float]:
    return round(ORIGIN_LAT + y / KM_PER_DEGREE, 5), round(ORIGIN_LON + x / KM_PER_DEGREE, 5)


def lane_rows(rng: random.Random) -> list[dict]:
    """Every lane of the example, in a stable order."""
    places = {**{k: v[:2] for k, v in DEPOTS.items()}, **{k: v[:2] for k, v in HUBS.items()},
              **{k: v[:2] for k, v in CUSTOMERS.items()}}
    pairs: list[tuple[str, str, str, tuple[float, float]]] = []
    for depot in DEPOTS:
        for hub in HUBS:
            pairs.append((depot, hub, "road", ROAD_TRUNK))
    pairs.append(("Orlenby depot", "Vantry hub", "rail", RAIL_TRUNK))
    pairs.append(("Tarrowick depot", "Mellisford hub", "rail", RAIL_TRUNK))
    pairs.append(("Tarrowick depot", "Quistmoor depot", "road", ROAD_TRUNK))
    for customer, spot in CUSTOMERS.items():
        # Direct lanes from the two nearest depots; delivery runs from the nearer hub, and from both hubs for
        # customers roughly between them.
        nearest = sorted(DEPOTS, key=lambda d: distance(DEPOTS[d][:2], spot[:2]))
        for depot in nearest[:2]:
            pairs.append((depot, customer, "road", ROAD_DIRECT))
        hubs = sorted(HUBS, key=lambda h: distance(HUBS[h][:2], spot[:2]))
        far = distance(HUBS[hubs[1]][:2], spot[:2]) / max(distance(HUBS[hubs[0]][:2], spot[:2]), 1.0)
        for hub in hubs if far < 1.6 else hubs[:1]:
            pairs.append((hub, customer, "road", ROAD_LOCAL))
    if ("Orlenby depot", "Dapplemere", "road") not in {p[:3] for p in pairs}:
        pairs.append(("Orlenby depot", "Dapplemere", "road", ROAD_DIRECT))
    rows = []
    for origin, destination, mode, (base, per_km) in pairs:
        km = distance(places[origin], places[destination])
        noise = rng.uniform(0.97, 1.03)  # carrier quotes differ a little from the rate card; avoids exact ties
        row = {"origin": origin, "destination": destination, "cost_per_unit": round((base + per_km * km) * noise, 2),
               "mode": mode, "capacity": None, "fixed_cost": None, "active": None, "notes": None}
        special = SPECIAL.get((origin, destination, mode), {})
        row["capacity"] = special.get("capacity")
        row["fixed_cost"] = special.get("fixed_cost")
        if special.get("active") is False:
            row["active"] = "no"
        row["notes"] = special.get("note")
        rows.append(row)
    return rows


def _write_rows(ws, sheet: contract.Sheet, records: list[dict], extra: tuple[str, ...] = ()) -> None:
    names = [c.name for c in sheet.columns]
    header_style = ws.cell(row=1, column=len(names))
    for offset, name in enumerate(extra, start=len(names) + 1):
        cell = ws.cell(row=1, column=offset, value=name)
        cell.font = Font(bold=True, color=header_style.font.color)
        cell.fill = PatternFill("solid", fgColor=header_style.fill.fgColor)
        ws.column_dimensions[openpyxl.utils.get_column_letter(offset)].width = 40
    for row, record in enumerate(records, start=2):
        for index, name in enumerate(names + list(extra), start=1):
            value = record.get(name)
            if value is None:
                continue
            cell = ws.cell(row=row, column=index, value=value)
            if index <= len(names) and sheet.columns[index - 1].kind == contract.NUMBER:
                cell.number_format = number_format_for(sheet.columns[index - 1].unit)
    width = max(len(str(r.get(sheet.columns[0].name, ""))) for r in records) + 2
    ws.column_dimensions["A"].width = max(ws.column_dimensions["A"].width or 0, width)


#: What-ifs a planner at the distributor would try; each row is one change, rows with one name make one scenario.
SCENARIOS = (
    ("peak season", "Customers", "*", "demand", "scale", 1.2),
    ("diesel up 8 %", "Lanes", "*", "cost_per_unit", "scale", 1.08),
    ("Mellisford hub closed", "Hubs", "Mellisford hub", "capacity", "set", 0),
    ("carrier cuts Quistmoor-Harrowquay", "Lanes", "Quistmoor depot>Harrowquay", "capacity", "scale", 0.5),
    ("peak with rail shuttle cheaper", "Customers", "*", "demand", "scale", 1.2),
    ("peak with rail shuttle cheaper", "Lanes", "Tarrowick depot>Mellisford hub>rail", "fixed_cost", "scale", 0.25),
)


def _write_scenarios(book: openpyxl.Workbook) -> None:
    """Fill the template's Scenarios sheet (see README "Scenarios") with the distributor's what-ifs, keeping its
    header notes and drop-downs; the template's two example rows are replaced."""
    ws = book["Scenarios"]
    if ws.max_row > 1:
        ws.delete_rows(2, ws.max_row - 1)
    for record in SCENARIOS:
        ws.append(record)
    for column, width in zip("ABCDEF", (34, 12, 36, 16, 10, 10)):
        ws.column_dimensions[column].width = width


def build_example(path: Path) -> None:
    """Write the invented distributor's workbook to ``path`` on top of the blank template."""
    rng = random.Random(SEED)
    write_template(path, force=True)  # this script owns the example: it rebuilds it on every run
    book = openpyxl.load_workbook(path)

    depots = []
    for name, (x, y, supply, handling) in DEPOTS.items():
        lat, lon = coordinates(x, y)
        depots.append({"depot": name, "supply": supply, "handling_cost": handling, "latitude": lat, "longitude": lon})
    hubs = []
    for name, (x, y, capacity, handling) in HUBS.items():
        lat, lon = coordinates(x, y)
        hubs.append({"hub": name, "capacity": capacity, "handling_cost": handling, "latitude": lat,
                     "longitude": lon})
    customers = []
    for name, (x, y, demand, penalty) in CUSTOMERS.items():
        lat, lon = coordinates(x, y)
        customers.append({"customer": name, "demand": demand, "unmet_penalty": penalty, "latitude": lat,
                          "longitude": lon, "notes": "remote; may be short-shipped" if penalty else None})
    _write_rows(book[contract.DEPOTS.name], contract.DEPOTS, depots)
    _write_rows(book[contract.HUBS.name], contract.HUBS, hubs)
    _write_rows(book[contract.CUSTOMERS.name], contract.CUSTOMERS, customers, extra=("notes",))
    lanes = lane_rows(rng)
    _write_rows(book[contract.LANES.name], contract.LANES, lanes, extra=("notes",))
    for column, width in (("A", 18), ("B", 18)):
        book[contract.LANES.name].column_dimensions[column].width = width

    settings = book[contract.SETTINGS.name]
    for row in range(2, settings.max_row + 1):
        name = settings.cell(row=row, column=1).value
        if name == "units":
            settings.cell(row=row, column=2, value="pallets")
        elif name == "currency":
            settings.cell(row=row, column=2, value="EUR")

    _write_scenarios(book)

    guide = book[GUIDE_SHEET]
    row = guide.max_row + 2
    guide.cell(row=row, column=1, value="About this example").font = Font(bold=True, size=12)
    guide.cell(row=row + 1, column=1, value=(
        "Orvale Larder Supply is an invented regional distributor: its company name, towns, coordinates and costs "
        "are made up for this example and describe no real business or place. Its Scenarios sheet holds the "
        "distributor's own five what-ifs in place of the template's two example rows."))
    save_atomically(book, path)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, default=HERE, help="folder to write into (default: this folder)")
    args = parser.parse_args(argv)
    args.out.mkdir(parents=True, exist_ok=True)
    write_template(args.out / TEMPLATE_NAME, force=True)
    build_example(args.out / EXAMPLE_NAME)
    print(f"wrote {args.out / TEMPLATE_NAME} and {args.out / EXAMPLE_NAME}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())

"""Seeded generator of invented transshipment networks, written as lanesolve workbooks, for the benchmarks.

The network has three tiers in an invented square region of about 1,200 km a side:

- depots (``D0001`` ...) that ship, with total supply 25 % above total demand;
- hubs (``H001`` ...), cross-docks that receive truckloads from every depot (road, and rail on some pairs);
- customers (``C00001`` ...), each served from its nearest hubs and directly (dearer per km) from its nearest depots.

Some lanes and some hubs have capacities, a few non-essential lanes are inactive. Feasibility holds by construction:
the uncapacitated "core" hubs take uncapacitated road lanes from every depot and each customer always has an
uncapacitated, active lane from its nearest core hub, so any depot can reach any customer without limit, and total
supply exceeds total demand.

By default the instances are **pure LPs** (no fixed charges), so that lanesolve's solve can be compared with a bare
HiGHS LP solve of the same matrix. ``fixed_charges=True`` (``--fixed-charges``) adds a fixed charge to about 2 % of
the lanes, which makes the instance a MIP; such a workbook is written under a different cache name.

Sizes are given as lane counts (``10k``, ``100k``, ``500k``); the generated workbook has exactly that many lanes.
Workbooks are written with openpyxl's write-only mode and cached in ``benchmarks/cache/`` together with a pickle of
the same data as a :class:`lanesolve.model.network.Network` (for the bare-solver baseline, which does not read workbooks).

Usage::

    python benchmarks/generate.py --sizes 10k,100k,500k [--seed 7] [--fixed-charges] [--force]
"""

from __future__ import annotations

import argparse
import math
import pickle
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd

CACHE = Path(__file__).resolve().parent / "cache"
DEFAULT_SEED = 7

# Rates per unit and km (invented, in the currency label of the workbook). Truckload trunk lanes into hubs are cheaper
# per km than direct deliveries, which is what makes hubs worth using -- common practice in network design.
_TRUNK_ROAD_RATE = 0.010
_TRUNK_RAIL_RATE = 0.006
_DELIVERY_RATE = 0.030
_DIRECT_RATE = 0.022


def parse_size(text: str) -> int:
    """Turn ``"10k"``, ``"1.5m"`` or ``"2500"`` into a lane count.

    >>> parse_size("100k"), parse_size("2500")
    (100000, 2500)
    """
    text = text.strip().lower()
    factor = 1
    if text.endswith("k"):
        factor, text = 1_000, text[:-1]
    elif text.endswith("m"):
        factor, text = 1_000_000, text[:-1]
    return int(round(float(text) * factor))


def size_label(lanes: int) -> str:
    """``100000`` -> ``"100k"`` (the inverse of :func:`parse_size` for round sizes)."""
    if lanes % 1_000_000 == 0:
        return f"{lanes // 1_000_000}m"
    if lanes % 1_000 == 0:
        return f"{lanes // 1_000}k"
    return str(lanes)


def node_counts(lanes: int) -> tuple[int, int, int]:
    """Depots, hubs and customers for a network of about ``lanes`` lanes (20 lanes per customer)."""
    customers = max(20, lanes // 20)
    depots = max(4, round(math.sqrt(lanes) / 6))
    hubs = max(5, round(math.sqrt(lanes) / 8))
    return depots, hubs, customers


def _distance_km(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Road distance between every point of ``a`` and of ``b`` (x, y in km): straight line times a detour factor.

    1.25 is a typical road-to-straight-line ratio (common practice, recalled from memory), plus 10 km so short hops
    still cost something.
    """
    diff = a[:, None, :] - b[None, :, :]
    return 1.25 * np.sqrt((diff ** 2).sum(axis=2)) + 10.0


def generate_network(lanes: int, seed: int = DEFAULT_SEED, fixed_charges: bool = False) -> dict[str, pd.DataFrame]:
    """Generate the four input tables of an invented network with exactly ``lanes`` lanes.

    Parameters
    ----------
    lanes : int
        Number of lane rows (at least 2,000).
    seed : int
        Seed of the random generator; the same seed and size give the same network.
    fixed_charges : bool
        Put a fixed charge on about 2 % of the lanes (makes the instance a MIP).

    Returns
    -------
    dict
        ``depots``, ``hubs``, ``customers``, ``lanes`` DataFrames with the contract's column names (``depot``,
        ``supply``, ...); a blank cell is NaN.

    Raises
    ------
    ValueError
        ``lanes`` is too small for the three-tier layout.
    """
    if lanes < 2_000:
        raise ValueError(f"lanes={lanes}: the generator needs at least 2,000 lanes (hint: use 2k or more)")
    rng = np.random.default_rng(seed)
    n_depots, n_hubs, n_customers = node_counts(lanes)

    side = 1_200.0
    depot_xy = rng.uniform(0, side, size=(n_depots, 2))
    # Hubs sit nearer the middle of the region, customers cluster around a few invented towns.
    hub_xy = rng.uniform(0.15 * side, 0.85 * side, size=(n_hubs, 2))
    towns = rng.uniform(0, side, size=(max(8, n_customers // 400), 2))
    town_of = rng.integers(0, len(towns), size=n_customers)
    customer_xy = np.clip(towns[town_of] + rng.normal(0, 60, size=(n_customers, 2)), 0, side)

    demand = np.clip(np.round(rng.lognormal(mean=4.0, sigma=0.8, size=n_customers)), 1, 5_000)
    total_demand = demand.sum()
    share = rng.uniform(0.5, 1.5, size=n_depots)
    supply = np.ceil(1.25 * total_demand * share / share.sum())

    # Hub capacities: about a third of the hubs are limited to a share of the total demand; the rest are "core".
    capacitated_hub = rng.random(n_hubs) < 0.35
    capacitated_hub[0] = False  # at least one core hub
    hub_capacity = np.where(capacitated_hub, np.round(total_demand * rng.uniform(0.02, 0.08, n_hubs)), np.nan)
    core = np.flatnonzero(~capacitated_hub)

    lane_parts = []

    # Tier 1: every depot to every hub by road; rail on about 30 % of the pairs.
    dist_dh = _distance_km(depot_xy, hub_xy)
    d_idx, h_idx = np.meshgrid(np.arange(n_depots), np.arange(n_hubs), indexing="ij")
    d_idx, h_idx = d_idx.ravel(), h_idx.ravel()
    km = dist_dh[d_idx, h_idx]
    road = pd.DataFrame({
        "o": d_idx, "o_kind": "D", "d": h_idx, "d_kind": "H", "mode": "road",
        "cost": np.round(km * _TRUNK_ROAD_RATE * rng.uniform(0.9, 1.1, km.size), 2),
        # Road trunk lanes into a core hub stay unlimited (the feasibility guarantee); others sometimes limited.
        "cap": np.where(~capacitated_hub[h_idx] | (rng.random(km.size) > 0.15), np.nan,
                        np.round(rng.uniform(0.2, 0.6, km.size) * supply[d_idx])),
        "essential": ~capacitated_hub[h_idx],
    })
    rail_pick = rng.random(km.size) < 0.30
    rail = pd.DataFrame({
        "o": d_idx[rail_pick], "o_kind": "D", "d": h_idx[rail_pick], "d_kind": "H", "mode": "rail",
        "cost": np.round(km[rail_pick] * _TRUNK_RAIL_RATE * rng.uniform(0.9, 1.1, rail_pick.sum()) + 0.8, 2),
        "cap": np.round(rng.uniform(0.1, 0.4, rail_pick.sum()) * supply[d_idx[rail_pick]]),
        "essential": False,
    })
    lane_parts += [road, rail]

    # Tier 2: each customer from its nearest hubs, always including its nearest core hub (unlimited, essential).
    dist_hc = _distance_km(customer_xy, hub_xy)  # customers x hubs
    per_customer_hubs = min(6, n_hubs)
    nearest_hubs = np.argsort(dist_hc, axis=1)[:, :per_customer_hubs]
    nearest_core = core[np.argmin(dist_hc[:, core], axis=1)]
    hub_sets = [np.unique(np.append(row, nc)) for row, nc in zip(nearest_hubs, nearest_core)]
    c_idx = np.concatenate([np.full(len(s), i) for i, s in enumerate(hub_sets)])
    h_idx = np.concatenate(hub_sets)
    km = dist_hc[c_idx, h_idx]
    essential = h_idx == nearest_core[c_idx]
    lane_parts.append(pd.DataFrame({
        "o": h_idx, "o_kind": "H", "d": c_idx, "d_kind": "C", "mode": "road",
        "cost": np.round(km * _DELIVERY_RATE * rng.uniform(0.85, 1.15, km.size), 2),
        "cap": np.where(essential | (rng.random(km.size) > 0.10), np.nan,
                        np.round(demand[c_idx] * rng.uniform(0.3, 0.8, km.size))),
        "essential": essential,
    }))

    # Tier 3: direct depot -> customer lanes to the nearest depots, as many as needed to hit the lane count exactly.
    so_far = sum(len(p) for p in lane_parts)
    remaining = lanes - so_far
    if remaining < n_customers:
        raise ValueError(f"lanes={lanes}: too few for direct lanes (hint: use a larger size)")
    per = np.full(n_customers, remaining // n_customers)
    per[rng.choice(n_customers, remaining % n_customers, replace=False)] += 1
    if per.max() > n_depots:
        raise ValueError(f"lanes={lanes}: more direct lanes per customer than depots")
    dist_dc = _distance_km(customer_xy, depot_xy)  # customers x depots
    order = np.argsort(dist_dc, axis=1)
    take = np.arange(n_depots)[None, :] < per[:, None]
    c_idx = np.nonzero(take)[0]
    d_idx = order[take]
    km = dist_dc[c_idx, d_idx]
    lane_parts.append(pd.DataFrame({
        "o": d_idx, "o_kind": "D", "d": c_idx, "d_kind": "C", "mode": "road",
        "cost": np.round(km * _DIRECT_RATE * rng.uniform(0.85, 1.15, km.size) + 1.5, 2),
        "cap": np.where(rng.random(km.size) > 0.05, np.nan, np.round(demand[c_idx] * rng.uniform(0.2, 0.6, km.size))),
        "essential": False,
    }))

    raw = pd.concat(lane_parts, ignore_index=True)
    assert len(raw) == lanes, (len(raw), lanes)
    names = {
        "D": np.array([f"D{i + 1:04d}" for i in range(n_depots)], dtype=object),
        "H": np.array([f"H{i + 1:03d}" for i in range(n_hubs)], dtype=object),
        "C": np.array([f"C{i + 1:05d}" for i in range(n_customers)], dtype=object),
    }

    def ids(index: pd.Series, kind: pd.Series) -> np.ndarray:
        out = np.empty(len(index), dtype=object)
        for k, table in names.items():
            mask = (kind == k).to_numpy()
            out[mask] = table[index.to_numpy()[mask]]
        return out

    inactive = (~raw["essential"]) & (rng.random(lanes) < 0.005)
    fixed = np.zeros(lanes)
    if fixed_charges:
        pick = (~raw["essential"]).to_numpy() & (rng.random(lanes) < 0.02)
        fixed[pick] = np.round(rng.uniform(50, 400, pick.sum()))
    lane_frame = pd.DataFrame({
        "origin": ids(raw["o"], raw["o_kind"]),
        "destination": ids(raw["d"], raw["d_kind"]),
        "mode": raw["mode"].to_numpy(dtype=object),
        "cost_per_unit": raw["cost"].to_numpy(),
        "capacity": raw["cap"].to_numpy(),
        "fixed_cost": fixed,
        "active": np.where(inactive, "no", "yes").astype(object),
    })
    # Shuffle so the sheet is not sorted by tier, as an exported rate table would not be.
    lane_frame = lane_frame.iloc[rng.permutation(lanes)].reset_index(drop=True)

    def km_to_degrees(xy: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        # An invented region placed at 45 N, 5 E; 111 km per degree of latitude (recalled from memory).
        lat = 45.0 + (xy[:, 1] - side / 2) / 111.0
        lon = 5.0 + (xy[:, 0] - side / 2) / (111.0 * math.cos(math.radians(45.0)))
        return np.round(lat, 4), np.round(lon, 4)

    d_lat, d_lon = km_to_degrees(depot_xy)
    h_lat, h_lon = km_to_degrees(hub_xy)
    c_lat, c_lon = km_to_degrees(customer_xy)
    return {
        "depots": pd.DataFrame({"depot": names["D"], "supply": supply,
                                "handling_cost": np.round(rng.uniform(0.3, 1.5, n_depots), 2),
                                "latitude": d_lat, "longitude": d_lon}),
        "hubs": pd.DataFrame({"hub": names["H"], "capacity": hub_capacity,
                              "handling_cost": np.round(rng.uniform(0.5, 2.5, n_hubs), 2),
                              "latitude": h_lat, "longitude": h_lon}),
        "customers": pd.DataFrame({"customer": names["C"], "demand": demand, "latitude": c_lat, "longitude": c_lon}),
        "lanes": lane_frame,
    }


SETTINGS_ROWS = [("units", "pallets"), ("currency", "EUR"), ("time_limit_s", 1800)]


def _cell(value):
    """A cell value for openpyxl: NaN becomes an empty cell; whole floats stay floats (the reader sees numbers)."""
    if isinstance(value, float) and math.isnan(value):
        return None
    return value


def write_workbook(tables: dict[str, pd.DataFrame], path: Path) -> None:
    """Write the tables as a workbook to the contract (sheets Depots, Customers, Hubs, Lanes, Settings).

    Uses openpyxl's write-only mode, which streams rows instead of holding every cell object.
    """
    import openpyxl

    book = openpyxl.Workbook(write_only=True)
    for sheet_name, key in (("Depots", "depots"), ("Customers", "customers"), ("Hubs", "hubs"), ("Lanes", "lanes")):
        frame = tables[key]
        sheet = book.create_sheet(sheet_name)
        sheet.append(list(frame.columns))
        for row in frame.itertuples(index=False, name=None):
            sheet.append([_cell(v) for v in row])
    settings = book.create_sheet("Settings")
    settings.append(["setting", "value"])
    for row in SETTINGS_ROWS:
        settings.append(list(row))
    tmp = path.with_suffix(".tmp.xlsx")
    book.save(tmp)
    tmp.replace(path)


def to_network(tables: dict[str, pd.DataFrame]):
    """The same data as a :class:`lanesolve.model.network.Network` (defaults filled as the validator would)."""
    from lanesolve.model.network import Settings, make_network

    lanes = tables["lanes"].rename(columns={})
    lanes = lanes.assign(active=lanes["active"] == "yes")
    return make_network(
        tables["depots"].rename(columns={"depot": "id"}),
        tables["customers"].rename(columns={"customer": "id"}),
        lanes,
        hubs=tables["hubs"].rename(columns={"hub": "id"}),
        settings=Settings(units="pallets", currency="EUR", time_limit_s=1800.0),
    )


def cache_paths(lanes: int, seed: int = DEFAULT_SEED, fixed_charges: bool = False) -> tuple[Path, Path]:
    """Paths of the cached workbook and network pickle for one instance."""
    stem = f"lanes-{size_label(lanes)}-s{seed}" + ("-fixed" if fixed_charges else "")
    return CACHE / f"{stem}.xlsx", CACHE / f"{stem}.network.pkl"


def ensure_instance(lanes: int, seed: int = DEFAULT_SEED, fixed_charges: bool = False, force: bool = False,
                    log=print) -> tuple[Path, Path]:
    """Generate and cache one instance unless it is cached already; return (workbook path, network pickle path)."""
    book_path, net_path = cache_paths(lanes, seed, fixed_charges)
    if book_path.exists() and net_path.exists() and not force:
        return book_path, net_path
    CACHE.mkdir(parents=True, exist_ok=True)
    tick = time.perf_counter()
    tables = generate_network(lanes, seed, fixed_charges)
    with open(net_path, "wb") as fh:
        pickle.dump(to_network(tables), fh, protocol=pickle.HIGHEST_PROTOCOL)
    write_workbook(tables, book_path)
    log(f"generated {book_path.name} ({lanes:,} lanes, {sum(len(tables[k]) for k in ('depots', 'hubs', 'customers')):,}"
        f" nodes) in {time.perf_counter() - tick:.1f} s", file=sys.stderr)
    return book_path, net_path


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--sizes", default="10k,100k,500k", help="comma-separated lane counts (10k, 100k, 500k)")
    parser.add_argument("--seed", type=int, default=DEFAULT_SEED)
    parser.add_argument("--fixed-charges", action="store_true", help="add fixed charges to ~2%% of lanes (a MIP)")
    parser.add_argument("--force", action="store_true", help="regenerate even when cached")
    args = parser.parse_args(argv)
    for size in args.sizes.split(","):
        book, _ = ensure_instance(parse_size(size), args.seed, args.fixed_charges, args.force)
        print(book)
    return 0


if __name__ == "__main__":
    sys.exit(main())

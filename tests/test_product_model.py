"""Several products on one network (lanesolve/model/product_model.py): the model against an independent SciPy
formulation of the multi-commodity min-cost flow written here from the workbook contract, and the separation of
products that a one-product plan gets wrong."""

import math

import numpy as np
import pytest
from scipy.optimize import Bounds, LinearConstraint, milp

from lanesolve.model.network import make_network
from lanesolve.model.product_data import make_products
from lanesolve.model.product_model import build_product_model
from lanesolve.model.result import SolveStatus
from lanesolve.model.solve import solve

PRODUCTS = ("ale", "bran", "cider")


def random_case(seed: int, fixed_charges: bool):
    """An invented network of 2-3 depots, 0-2 hubs, 2-4 customers and 1-3 products, with random lanes (some
    allowed to carry only some products), capacities, capacity uses, supplies, demands and penalties."""
    rng = np.random.default_rng(seed)
    n_products = int(rng.integers(1, 4))
    products = [{"id": PRODUCTS[k], "capacity_use": float(rng.choice([1.0, 2.0, 0.5]))} for k in range(n_products)]
    depots = [{"id": f"D{i}", "supply": float(rng.integers(5, 40)) if rng.random() < 0.6 else math.inf,
               "handling_cost": float(rng.integers(0, 3))} for i in range(int(rng.integers(2, 4)))]
    hubs = [{"id": f"H{i}", "capacity": float(rng.integers(5, 60)) if rng.random() < 0.5 else math.inf,
             "handling_cost": float(rng.integers(0, 2))} for i in range(int(rng.integers(0, 3)))]
    customers = [{"id": f"C{i}", "demand": 0.0} for i in range(int(rng.integers(2, 5)))]
    nodes = [d["id"] for d in depots] + [h["id"] for h in hubs] + [c["id"] for c in customers]
    lanes, allowed, seen = [], {}, set()
    for _ in range(int(rng.integers(6, 16))):
        origin, destination = rng.choice(nodes, 2, replace=False).tolist()
        if (origin, destination) in seen or destination.startswith("D"):
            continue
        seen.add((origin, destination))
        lane = {"origin": origin, "destination": destination, "cost_per_unit": float(rng.integers(1, 10)),
                "capacity": float(rng.integers(3, 30)) if rng.random() < 0.5 else math.inf}
        if fixed_charges and rng.random() < 0.4:
            lane["fixed_cost"] = float(rng.integers(5, 40))
        if rng.random() < 0.3:
            allowed[len(lanes)] = tuple(p["id"] for p in products if rng.random() < 0.6)
        lanes.append(lane)
    supply = [{"depot": d["id"], "product": p["id"], "supply": float(rng.integers(0, 25))}
              for d in depots for p in products if rng.random() < 0.7]
    demand = [{"customer": c["id"], "product": p["id"], "demand": float(rng.integers(1, 12)),
               "unmet_penalty": float(rng.integers(20, 60)) if rng.random() < 0.5 else math.nan}
              for c in customers for p in products if rng.random() < 0.7]
    net = make_network(depots, customers, lanes, hubs=hubs)
    net.products = make_products(products, demand, supply if rng.random() < 0.8 else None, allowed,
                                 n_lanes=len(lanes))
    return net


def independent_optimum(net):
    """The multi-commodity min-cost flow of the workbook contract, written with SciPy's ``milp`` (HiGHS) directly
    from the sheets, sharing no code with lanesolve's model. Returns the optimal cost, or None if infeasible."""
    data = net.products
    ids = data.ids
    use = dict(zip(ids, data.capacity_use))
    lanes = net.lanes
    pairs = [(l, k) for l in lanes.index for k in ids
             if data.lane_products[l] is None or k in data.lane_products[l]]
    demand_rows = list(data.demand.itertuples(index=False))
    soft = [r for r in demand_rows if not math.isnan(r.unmet_penalty) and r.demand > 0]
    charged = [l for l in lanes.index if lanes.at[l, "fixed_cost"] > 0]
    n = len(pairs) + len(soft) + len(charged)
    cost = np.zeros(n)
    handling = {**dict(zip(net.depots["id"], net.depots["handling_cost"]))}
    hub_handling = dict(zip(net.hubs["id"], net.hubs["handling_cost"]))
    for j, (l, k) in enumerate(pairs):
        rate = lanes.at[l, "cost_per_unit"] + handling.get(lanes.at[l, "origin"], 0.0) + hub_handling.get(
            lanes.at[l, "destination"], 0.0)
        cost[j] = rate * use[k]
    for j, r in enumerate(soft):
        cost[len(pairs) + j] = r.unmet_penalty
    for j, l in enumerate(charged):
        cost[len(pairs) + len(soft) + j] = lanes.at[l, "fixed_cost"]
    rows, lo, hi = [], [], []

    def row(entries, low, high):
        vector = np.zeros(n)
        for j, v in entries:
            vector[j] += v
        rows.append(vector), lo.append(low), hi.append(high)

    def net_out(node, k=None):
        out = [(j, 1.0 if k else use[p]) for j, (l, p) in enumerate(pairs) if lanes.at[l, "origin"] == node
               and (k is None or p == k)]
        into = [(j, -1.0 if k else -use[p]) for j, (l, p) in enumerate(pairs) if lanes.at[l, "destination"] == node
                and (k is None or p == k)]
        return out + into

    for d, overall in zip(net.depots["id"], net.depots["supply"]):
        for k in ids:
            if data.supply is not None:
                listed = data.supply[(data.supply["depot"] == d) & (data.supply["product"] == k)]["supply"].sum()
                row(net_out(d, k), -np.inf, float(listed))
        if math.isfinite(overall):
            units = [(j, 1.0 if lanes.at[pairs[j][0], "origin"] == d else -1.0) for j, _ in net_out(d)]
            row(units, -np.inf, overall)
    for c in net.customers["id"]:
        for k in ids:
            q = sum(r.demand for r in demand_rows if r.customer == c and r.product == k)
            entries = [(j, -v) for j, v in net_out(c, k)]
            entries += [(len(pairs) + i, 1.0) for i, r in enumerate(soft) if r.customer == c and r.product == k]
            row(entries, q, q)
    for h, capacity in zip(net.hubs["id"], net.hubs["capacity"]):
        for k in ids:
            row(net_out(h, k), 0.0, 0.0)
        if math.isfinite(capacity):
            row([(j, use[p]) for j, (l, p) in enumerate(pairs) if lanes.at[l, "destination"] == h], -np.inf,
                capacity)
    big = sum(use[r.product] * r.demand for r in demand_rows)  # every lane carries at most all demand (in capacity)
    for l in lanes.index:
        entries = [(j, use[p]) for j, (lane, p) in enumerate(pairs) if lane == l]
        if l in charged:
            entries.append((len(pairs) + len(soft) + charged.index(l), -min(big, lanes.at[l, "capacity"])))
            row(entries, -np.inf, 0.0)
        if math.isfinite(lanes.at[l, "capacity"]):
            row([(j, use[p]) for j, (lane, p) in enumerate(pairs) if lane == l], -np.inf, lanes.at[l, "capacity"])
    upper = np.full(n, np.inf)
    for j, r in enumerate(soft):
        upper[len(pairs) + j] = r.demand
    integrality = np.zeros(n)
    integrality[len(pairs) + len(soft):] = 1
    upper[len(pairs) + len(soft):] = 1
    constraints = [LinearConstraint(np.array(rows), lo, hi)] if rows else []
    answer = milp(cost, constraints=constraints, bounds=Bounds(np.zeros(n), upper), integrality=integrality)
    return answer.fun if answer.status == 0 else None


def flows_feasible(net, result):
    """Every customer gets each product's demand less its shortfall, and every hub passes each product on."""
    flows = result.product_flows
    shortfall = result.product_nodes.set_index(["node", "product"])["unmet"]
    for r in net.products.demand.itertuples(index=False):
        got = flows[(flows.destination == r.customer) & (flows["product"] == r.product)]["flow"].sum() - flows[
            (flows.origin == r.customer) & (flows["product"] == r.product)]["flow"].sum()
        short = shortfall.get((r.customer, r.product), 0.0)
        assert got + short == pytest.approx(r.demand, abs=1e-6)
    for h in net.hubs["id"]:
        for k in net.products.ids:
            into = flows[(flows.destination == h) & (flows["product"] == k)]["flow"].sum()
            out = flows[(flows.origin == h) & (flows["product"] == k)]["flow"].sum()
            assert into == pytest.approx(out, abs=1e-6)


@pytest.mark.parametrize("seed", range(100))
def test_random_multi_product_lp_matches_scipy(seed):
    # Reference: SciPy milp (HiGHS) on the formulation written in this test; tolerance 1e-6 relative.
    net = random_case(seed, fixed_charges=False)
    expected = independent_optimum(net)
    result = solve(net, solver="cbc" if seed % 2 else "highs")
    if expected is None:
        assert result.status is SolveStatus.INFEASIBLE
        return
    assert result.status is SolveStatus.OPTIMAL
    assert result.total_cost == pytest.approx(expected, rel=1e-6, abs=1e-6)
    flows_feasible(net, result)


@pytest.mark.parametrize("seed", range(100, 130))
def test_random_multi_product_fixed_charges_match_scipy_milp(seed):
    # Reference: SciPy milp (HiGHS branch and bound) with its own yes/no per charged lane; mip_gap 1e-4 allowed.
    net = random_case(seed, fixed_charges=True)
    net.settings.mip_gap = 0.0
    expected = independent_optimum(net)
    result = solve(net, solver="highs")
    if expected is None:
        assert result.status is SolveStatus.INFEASIBLE
        return
    assert result.total_cost == pytest.approx(expected, rel=1e-6, abs=1e-6)
    flows_feasible(net, result)


def separation_network():
    """Invented: Ashby depot makes only ale, close to the customer; Brill depot makes only bran, far away."""
    net = make_network([{"id": "Ashby", "supply": 10}, {"id": "Brill", "supply": 10}], [{"id": "Cobham", "demand": 5}],
                       [{"origin": "Ashby", "destination": "Cobham", "cost_per_unit": 1},
                        {"origin": "Brill", "destination": "Cobham", "cost_per_unit": 4}])
    return net


def test_one_product_plan_is_cheaper_and_wrong():
    # Arithmetic: as one product the customer's 5 units come from Ashby at 1 each (5); but Cobham needs bran, which
    # only Brill makes, at 4 each (20). The cheaper one-product plan ships ale for a bran order.
    net = separation_network()
    single = solve(net)
    assert single.total_cost == pytest.approx(5.0)
    assert single.flows["origin"].tolist() == ["Ashby"]
    net.products = make_products([{"id": "ale"}, {"id": "bran"}], [{"customer": "Cobham", "product": "bran",
                                                                    "demand": 5}],
                                 supply=[{"depot": "Ashby", "product": "ale", "supply": 10},
                                         {"depot": "Brill", "product": "bran", "supply": 10}], n_lanes=2)
    multi = solve(net)
    assert multi.total_cost == pytest.approx(20.0)
    assert multi.product_flows[["origin", "product", "flow"]].values.tolist() == [["Brill", "bran", 5.0]]


def test_lane_products_column_keeps_a_product_off_a_lane():
    # Arithmetic: the cheap lane may carry only ale; the bran order takes the dear one (5 x 4 = 20).
    net = separation_network()
    net.products = make_products([{"id": "ale"}, {"id": "bran"}], [{"customer": "Cobham", "product": "bran",
                                                                    "demand": 5}], n_lanes=2,
                                 lane_products={0: ("ale",)})
    assert solve(net).total_cost == pytest.approx(20.0)


def test_capacity_use_shares_lane_capacity():
    # Arithmetic: the cheap lane holds 10 capacity units; bran takes 2 each, so 4 bran (8) + 2 ale (2) fit and the
    # remaining 1 bran goes the dear way: 10 x 1 + 2 x 4 = 18 (capacity units are charged at the lane's rate).
    net = make_network([{"id": "Ashby", "supply": 100}], [{"id": "Cobham", "demand": 0}],
                       [{"origin": "Ashby", "destination": "Cobham", "cost_per_unit": 1, "capacity": 10},
                        {"origin": "Ashby", "destination": "Cobham", "mode": "rail", "cost_per_unit": 4}])
    net.products = make_products([{"id": "ale"}, {"id": "bran", "capacity_use": 2}],
                                 [{"customer": "Cobham", "product": "ale", "demand": 2},
                                  {"customer": "Cobham", "product": "bran", "demand": 5}], n_lanes=2)
    result = solve(net)
    assert result.total_cost == pytest.approx(18.0)


def test_single_sourcing_is_per_customer_and_product():
    # Arithmetic: Cobham is single-sourced; ale may come only from Ashby and bran only from Brill, so two inbound
    # lanes are used (one per product), which a per-customer rule would forbid: cost 3 x 1 + 2 x 2 = 7.
    net = make_network([{"id": "Ashby", "supply": 10}, {"id": "Brill", "supply": 10}],
                       [{"id": "Cobham", "demand": 0, "single_source": True}],
                       [{"origin": "Ashby", "destination": "Cobham", "cost_per_unit": 1},
                        {"origin": "Brill", "destination": "Cobham", "cost_per_unit": 2}])
    net.products = make_products([{"id": "ale"}, {"id": "bran"}],
                                 [{"customer": "Cobham", "product": "ale", "demand": 3},
                                  {"customer": "Cobham", "product": "bran", "demand": 2}],
                                 supply=[{"depot": "Ashby", "product": "ale", "supply": 10},
                                         {"depot": "Brill", "product": "bran", "supply": 10}], n_lanes=2)
    result = solve(net)
    assert result.status is SolveStatus.OPTIMAL
    assert result.total_cost == pytest.approx(7.0)
    assert "single_source_product_0_0" in build_product_model(net).row_names


def test_carrier_commitment_and_minimum_charge_count_capacity_units_with_products():
    # Arithmetic: ale (use 1) and bran (use 2) must reach Cobham: 3 ale + 2 bran = 7 capacity units. Carrier Kestrel
    # runs the cheap lane (rate 1) and may carry at most 5 capacity units; the rail lane costs 3 each but at least its
    # minimum charge of 10 once used. With x units on Kestrel's lane the cost is x + max(10, 3 (7 - x)), x <= 5:
    # least at x = 11/3 (rail's 10/3 units cost exactly the minimum charge), 11/3 + 10 = 41/3.
    import pandas as pd

    net = make_network([{"id": "Ashby", "supply": 100}], [{"id": "Cobham", "demand": 0}],
                       [{"origin": "Ashby", "destination": "Cobham", "cost_per_unit": 1, "carrier": "Kestrel"},
                        {"origin": "Ashby", "destination": "Cobham", "mode": "rail", "cost_per_unit": 3,
                         "minimum_charge": 10}])
    net.carriers = pd.DataFrame({"id": ["Kestrel"], "min_volume": [math.nan], "max_volume": [5.0],
                                 "max_share": [math.nan], "row": [2]})
    net.products = make_products([{"id": "ale"}, {"id": "bran", "capacity_use": 2}],
                                 [{"customer": "Cobham", "product": "ale", "demand": 3},
                                  {"customer": "Cobham", "product": "bran", "demand": 2}], n_lanes=2)
    result = solve(net, solver="highs")
    assert result.status is SolveStatus.OPTIMAL
    assert result.total_cost == pytest.approx(41 / 3, abs=1e-6)
    assert result.flows["flow"].sum() == pytest.approx(7.0, abs=1e-6)

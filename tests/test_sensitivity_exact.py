"""The sensitivity figures against re-solves: every figure equals the cost change of the same LP solved again with
the bound moved by one unit, by SciPy's ``linprog`` (HiGHS), written here independently of lanesolve's model.

Reference: SciPy ``scipy.optimize.linprog(method="highs")`` on the LP stated in lanesolve's model docstring (depot
net outflow <= supply; customer inflow - outflow + unmet = demand, 0 <= unmet <= demand with a penalty; hub inflow =
outflow <= capacity; 0 <= flow <= lane capacity; cost per unit plus the origin depot's and destination hub's
handling). All data are whole units, so the optimal cost is linear between whole-unit changes and a one-sided
derivative equals the ±1 difference exactly (Ahuja, Magnanti & Orlin, Network Flows, 1993, ch. 9).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.optimize import linprog

from lanesolve.model.analyse import solve_and_analyse
from lanesolve.model.network import make_network
from lanesolve.model.result import SolveStatus
from lanesolve.model.sensitivity import analyse_plan
from lanesolve.model.solve import solve

TOL = 1e-7


class ReferenceLp:
    """``net``'s LP as linprog matrices, built once; :meth:`cost` re-solves it with one bound moved."""

    def __init__(self, net, lane_bounds=None):
        depots, customers, hubs, lanes = net.depots, net.customers, net.hubs, net.active_lanes
        handling = dict(zip(depots["id"], depots["handling_cost"])) | dict(zip(hubs["id"], hubs["handling_cost"]))
        depot_ids, hub_ids = set(depots["id"]), set(hubs["id"])
        origins, destinations = list(lanes["origin"]), list(lanes["destination"])
        n_lanes = self.n_lanes = len(lanes)
        cost = [c + (handling[o] if o in depot_ids else 0.0) + (handling[d] if d in hub_ids else 0.0)
                for c, o, d in zip(lanes["cost_per_unit"], origins, destinations)]
        penalised = [k for k, p in enumerate(customers["unmet_penalty"]) if not math.isnan(p)]
        n = n_lanes + len(penalised)
        self.objective = np.array(cost + [customers["unmet_penalty"].iloc[k] for k in penalised], dtype=float)
        self.lane_bounds = lane_bounds or [(0.0, float(u)) for u in lanes["capacity"]]

        def row(node, sign_in, sign_out):
            r = np.zeros(n)
            for k in range(n_lanes):
                r[k] += sign_in * (destinations[k] == node) + sign_out * (origins[k] == node)
            return r

        a_ub, self.b_ub, a_eq, self.b_eq, self.ub_row, self.eq_row = [], [], [], [], {}, {}
        for d, s in zip(depots["id"], depots["supply"]):
            self.ub_row[d] = len(a_ub)
            a_ub.append(row(d, -1.0, 1.0))
            self.b_ub.append(float(s))
        self.unmet_column = {}
        for k, (c, q) in enumerate(zip(customers["id"], customers["demand"])):
            r = row(c, 1.0, -1.0)
            if k in penalised:
                self.unmet_column[c] = n_lanes + penalised.index(k)
                r[self.unmet_column[c]] = 1.0
            self.eq_row[c] = len(a_eq)
            a_eq.append(r)
            self.b_eq.append(float(q))
        for h, cap in zip(hubs["id"], hubs["capacity"]):
            a_eq.append(row(h, 1.0, -1.0))
            self.b_eq.append(0.0)
            if math.isfinite(cap):
                self.ub_row[h] = len(a_ub)
                a_ub.append(row(h, 1.0, 0.0))
                self.b_ub.append(float(cap))
        self.a_ub = np.array(a_ub) if a_ub else None
        self.a_eq = np.array(a_eq) if a_eq else None

    def cost(self, demand=None, capacity=None, lane_cap=None, force_lane=None) -> float:
        """Optimal cost with a customer's demand, a depot's supply or hub's capacity (``capacity``), a lane's
        capacity (``lane_cap`` = (lane position, value)) set, or a lane forced to carry one unit; inf if none."""
        b_ub, b_eq = list(self.b_ub), list(self.b_eq)
        bounds = list(self.lane_bounds) + [(0.0, self.b_eq[self.eq_row[c]]) for c in self.unmet_column]
        for node, value in (capacity or {}).items():
            b_ub[self.ub_row[node]] = value
        for node, value in (demand or {}).items():
            b_eq[self.eq_row[node]] = value
            if node in self.unmet_column:
                bounds[self.unmet_column[node]] = (0.0, value)
        if lane_cap is not None:
            bounds[lane_cap[0]] = (bounds[lane_cap[0]][0], lane_cap[1])
        if force_lane is not None:
            bounds[force_lane] = (1.0, bounds[force_lane][1])
        if any(lo > hi for lo, hi in bounds):
            return math.inf
        bounds = [(lo, None if math.isinf(hi) else hi) for lo, hi in bounds]
        answer = linprog(self.objective, A_ub=self.a_ub, b_ub=b_ub or None, A_eq=self.a_eq, b_eq=b_eq or None,
                         bounds=bounds, method="highs")
        if answer.status == 2:
            return math.inf
        assert answer.status == 0, answer.message
        return float(answer.fun)


def random_network(seed: int):
    """Small invented networks: transportation or transshipment, capacities, penalties, forwarding customers,
    whole-unit data, costs from a few values (ties on purpose), sometimes supply = demand."""
    rng = np.random.default_rng(seed)
    n_d, n_c, n_h = rng.integers(1, 4), rng.integers(2, 6), rng.integers(0, 3) if seed % 3 else 0
    depots = [{"id": f"D{k}", "supply": float(rng.integers(0, 30)), "handling_cost": float(rng.choice([0, 0, 1]))}
              for k in range(n_d)]
    customers = [{"id": f"C{k}", "demand": float(rng.integers(0, 15)),
                  "unmet_penalty": float(rng.choice([3, 8, 20])) if rng.random() < 0.4 else math.nan}
                 for k in range(n_c)]
    if seed % 5 == 0:  # supply = demand exactly
        total = sum(c["demand"] for c in customers)
        share = np.diff(np.r_[0, np.sort(rng.integers(0, total + 1, n_d - 1)), total]) if n_d > 1 else [total]
        for d, s in zip(depots, share):
            d["supply"] = float(s)
    hubs = [{"id": f"H{k}", "capacity": float(rng.integers(5, 25)) if rng.random() < 0.6 else math.inf,
             "handling_cost": float(rng.choice([0, 1]))} for k in range(n_h)]
    ids = {"D": [d["id"] for d in depots], "C": [c["id"] for c in customers], "H": [h["id"] for h in hubs]}
    pairs = set()
    for c in ids["C"]:
        for source in rng.choice(ids["D"] + ids["H"], size=min(2, len(ids["D"]) + len(ids["H"])), replace=False):
            pairs.add((str(source), c))
    for h in ids["H"]:
        pairs.update((d, h) for d in ids["D"])
    for _ in range(rng.integers(0, 4)):  # customers forwarding goods, depot-to-depot transfers
        kind = rng.choice(["CC", "DD", "HC"])
        pool_a = ids["C"] if kind[0] == "C" else ids["D"] if kind[0] == "D" else ids["H"] or ids["D"]
        pool_b = ids["C"] if kind[1] == "C" else ids["D"]
        a, b = str(rng.choice(pool_a)), str(rng.choice(pool_b))
        if a != b:
            pairs.add((a, b))
    lanes = [{"origin": o, "destination": d, "cost_per_unit": float(rng.choice([1, 2, 2, 3, 4, 5, 10])),
              "capacity": float(rng.integers(3, 20)) if rng.random() < 0.35 else math.inf}
             for o, d in sorted(pairs)]
    return make_network(depots, customers, lanes, hubs)


def check_figures(net, fast: bool = False) -> int:
    """Every figure of ``net``'s plan against the ±1 re-solves; returns the number of figures checked."""
    result = solve(net) if fast else solve_and_analyse(net)
    if result.status is not SolveStatus.OPTIMAL:
        return -1
    if fast:  # what solve_and_analyse does for an optimal plan, without diagnosing the infeasible ones
        result.sensitivity = analyse_plan(net, result)
    reference = ReferenceLp(net)
    base = reference.cost()
    assert result.total_cost == pytest.approx(base, abs=1e-6)
    frame = result.sensitivity
    lanes = net.active_lanes
    label = {(f"{o} -> {d}"): k for k, (o, d) in enumerate(zip(lanes["origin"], lanes["destination"]))}
    flows = {f"{o} -> {d}": x for o, d, x in zip(result.flows["origin"], result.flows["destination"],
                                                 result.flows["flow"])}
    cap = list(lanes["capacity"])

    def same(figure, expected):
        if math.isinf(expected):
            assert math.isinf(figure), (figure, expected)
        else:
            assert figure == pytest.approx(expected, abs=TOL), (figure, expected)

    for r in frame.itertuples(index=False):
        if r.figure == "marginal_cost":
            q = float(net.customers.set_index("id").at[r.item, "demand"])
            same(r.value_up, reference.cost(demand={r.item: q + 1}) - base)
            if q >= 1:
                same(r.value_down, base - reference.cost(demand={r.item: q - 1}))
        elif r.figure == "supply_value":
            s = float(net.depots.set_index("id").at[r.item, "supply"])
            same(r.value_up, base - reference.cost(capacity={r.item: s + 1}))
            same(r.value_down, reference.cost(capacity={r.item: s - 1}) - base)
        elif r.figure == "hub_capacity_value":
            k = float(net.hubs.set_index("id").at[r.item, "capacity"])
            same(r.value_up, base - reference.cost(capacity={r.item: k + 1}))
            same(r.value_down, reference.cost(capacity={r.item: k - 1}) - base)
        elif r.figure == "lane_capacity_value":
            k = label[r.item]
            same(r.value_up, base - reference.cost(lane_cap=(k, cap[k] + 1)))
            same(r.value_down, reference.cost(lane_cap=(k, cap[k] - 1)) - base)
        elif r.figure == "reduced_cost":
            assert flows.get(r.item, 0.0) == 0.0
            same(r.value_up, reference.cost(force_lane=label[r.item]) - base)
        else:
            raise AssertionError(f"unexpected figure {r.figure}")
        # Both sides shown where they differ, one number where they agree.
        if r.figure != "reduced_cost":
            agree = (math.isfinite(r.value_up) and math.isfinite(r.value_down)
                     and abs(r.value_up - r.value_down) <= 1e-9 * max(1.0, abs(r.value_up)))
            assert bool(r.unique) == agree
            assert (r.value == pytest.approx(r.value_up)) if agree else math.isnan(r.value)
    # Nothing hidden: every customer, and every unused lane, has its row.
    assert set(frame.loc[frame["figure"] == "marginal_cost", "item"]) == set(net.customers["id"])
    unused = {lab for lab in label if flows.get(lab, 0.0) == 0.0 and cap[label[lab]] > 0}
    assert set(frame.loc[frame["figure"] == "reduced_cost", "item"]) == unused
    at_capacity = {lab for lab in label if math.isfinite(cap[label[lab]]) and cap[label[lab]] > 0
                   and flows.get(lab, 0.0) >= cap[label[lab]] - 1e-9}
    assert set(frame.loc[frame["figure"] == "lane_capacity_value", "item"]) == at_capacity
    return len(frame)


def _run(seeds) -> tuple[int, int]:
    networks = figures = 0
    for seed in seeds:
        checked = check_figures(random_network(seed), fast=True)
        if checked >= 0:
            networks += 1
            figures += checked
    return networks, figures


def test_every_figure_equals_the_plus_minus_one_resolve_on_150_random_networks():
    networks, figures = _run(range(210))
    assert networks >= 150 and figures > 1400


@pytest.mark.slow
def test_every_figure_equals_the_plus_minus_one_resolve_on_850_more_random_networks():
    networks, _ = _run(range(1000, 2200))
    assert networks >= 850  # 907 of these 1,200 seeds have a plan


def test_textbook_transportation_figures_are_all_shown():
    """Dantzig's transportation example (1963) with the data of GLPK's ``transp.mod``: plants Seattle 350 and
    San-Diego 600, markets New-York 325, Chicago 300, Topeka 275, distances in thousands of miles, freight 90 $ per
    case per thousand miles. The published duals (GLPK/GAMS documentation, recalled from memory): demand New-York
    0.225, Chicago 0.153, Topeka 0.126; reduced costs Seattle -> Topeka 0.036, San-Diego -> Chicago 0.009. They are
    checked below against our own ±1 linprog re-solves, not trusted blindly. The optimum has alternative plans
    (New-York costs the same from both plants); the figures hold whichever one the solver returns."""
    distance = {("Seattle", "New-York"): 2.5, ("Seattle", "Chicago"): 1.7, ("Seattle", "Topeka"): 1.8,
                ("San-Diego", "New-York"): 2.5, ("San-Diego", "Chicago"): 1.8, ("San-Diego", "Topeka"): 1.4}
    net = make_network([{"id": "Seattle", "supply": 350}, {"id": "San-Diego", "supply": 600}],
                       [{"id": "New-York", "demand": 325}, {"id": "Chicago", "demand": 300},
                        {"id": "Topeka", "demand": 275}],
                       [{"origin": o, "destination": d, "cost_per_unit": 90 * km / 1000}
                        for (o, d), km in distance.items()])
    result = solve_and_analyse(net)
    assert result.total_cost == pytest.approx(153.675, abs=1e-9)  # GLPK transp.mod optimum, thousands of $
    figures = result.sensitivity.set_index(["figure", "item"])
    for customer, dual in (("New-York", 0.225), ("Chicago", 0.153), ("Topeka", 0.126)):
        row = figures.loc[("marginal_cost", customer)]
        assert row["unique"] and row["value"] == pytest.approx(dual, abs=1e-12)
        assert "0.15 " not in row["text"]
    assert figures.loc[("reduced_cost", "Seattle -> Topeka"), "value"] == pytest.approx(0.036, abs=1e-12)
    assert figures.loc[("reduced_cost", "San-Diego -> Chicago"), "value"] == pytest.approx(0.009, abs=1e-12)
    assert "0.153" in figures.loc[("marginal_cost", "Chicago"), "text"]
    assert check_figures(net) >= 5  # and every figure equals our own ±1 re-solve


def test_penalised_customer_that_forwards_goods_costs_its_penalty_not_the_lane():
    """A customer short under its own penalty 3 that forwards goods on a lane costing 10: one more unit of its
    demand simply goes short at 3 (checked by the ±1 re-solve)."""
    net = make_network([{"id": "D", "supply": 10}],
                       [{"id": "A", "demand": 8, "unmet_penalty": 3}, {"id": "B", "demand": 4}],
                       [{"origin": "D", "destination": "A", "cost_per_unit": 1},
                        {"origin": "A", "destination": "B", "cost_per_unit": 10}])
    result = solve_and_analyse(net)
    row = result.sensitivity.set_index("item").loc["A"]
    assert row["value_up"] == pytest.approx(3.0) and row["value_down"] == pytest.approx(3.0)
    check_figures(net)


def test_a_side_with_no_plan_is_said_so():
    net = make_network([{"id": "D", "supply": 5}], [{"id": "C", "demand": 5}],
                       [{"origin": "D", "destination": "C", "cost_per_unit": 2}])
    frame = solve_and_analyse(net).sensitivity.set_index(["figure", "item"])
    demand = frame.loc[("marginal_cost", "C")]
    assert math.isinf(demand["value_up"]) and demand["value_down"] == pytest.approx(2.0)
    assert "no plan delivers it" in demand["text"] and "one less saves 2.00" in demand["text"]
    supply = frame.loc[("supply_value", "D")]
    assert math.isinf(supply["value_down"]) and "no plan" in supply["text"]

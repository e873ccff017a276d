"""Figures on a meshed network, where the root's two trees settle few distances and the rest are searched: the
unused lanes nearest to paying are found exactly without searching every lane, and every figure found later (all of
them, or the few above a threshold) equals the full computation, whose figures tests/test_sensitivity_exact.py checks
against ±1 re-solves with SciPy's linprog."""

from __future__ import annotations

import numpy as np
import pytest

from lanesolve.model.network import make_network
from lanesolve.model.sensitivity import analyse_plan, plan_figures
from lanesolve.model.solve import solve


def meshed(seed: int, tight: bool = False):
    """Depots and customers joined through a mesh of hubs with random lanes between hubs (invented network).
    ``tight``: the depots' supplies add up to the demand, so every depot sends all it has (as in a NETGEN network)
    and no path leaves the root: its trees then settle no distance between two nodes of the mesh."""
    rng = np.random.default_rng(seed)
    hubs = [f"H{i:02d}" for i in range(40)]
    customers = [{"id": f"C{i}", "demand": int(rng.integers(5, 25))} for i in range(6)]
    total = sum(c["demand"] for c in customers)
    depots = [{"id": f"D{i}", "supply": (total // 3 + (i < total % 3)) if tight else 60} for i in range(3)]
    lanes = [{"origin": d["id"], "destination": h, "cost_per_unit": int(rng.integers(1, 30))}
             for d in depots for h in rng.choice(hubs, 4, replace=False)]
    lanes += [{"origin": h, "destination": c["id"], "cost_per_unit": int(rng.integers(1, 30))}
              for c in customers for h in rng.choice(hubs, 4, replace=False)]
    # Cheap direct lanes of small capacity: full in the plan, and one more unit of them saves money.
    lanes += [{"origin": d["id"], "destination": c["id"], "cost_per_unit": int(rng.integers(1, 4)),
               "capacity": int(rng.integers(2, 6))} for d in depots for c in customers if rng.random() < 0.5]
    pairs = {(a, b) for a, b in rng.choice(hubs, (300, 2)) if a != b}
    pairs |= {(b, a) for a, b in pairs}  # both ways: the cheapest way back stays in the mesh, off the root
    lanes += [{"origin": a, "destination": b, "cost_per_unit": int(rng.integers(1, 30)),
               "capacity": int(rng.integers(5, 40))} for a, b in sorted(pairs)]
    return make_network(depots, customers, lanes, hubs=[{"id": h} for h in hubs])


@pytest.mark.parametrize("seed", range(6))
def test_nearest_unused_lanes_and_the_rest_equal_the_full_computation(seed):
    net = meshed(seed)
    result = solve(net)
    full = analyse_plan(net, result)
    unused = full[full["figure"] == "reduced_cost"].reset_index(drop=True)
    shown = 5
    frame, more = plan_figures(net, result, unused_rows=shown)
    assert more is not None and len(more) == len(unused) - shown
    # The trees left figures to search, and the nearest five were found without searching all of them.
    assert not more.exact.all(), "the mesh should leave figures to search; the test would prove nothing"
    near = frame[frame["figure"] == "reduced_cost"].reset_index(drop=True)
    columns = ["item", "value", "value_up", "text"]
    assert near[columns].equals(unused[columns].head(shown))
    # A few above a threshold (the near-miss advice), then every lane (--all-figures): as the full computation.
    threshold = float(unused["value_up"].iloc[shown])
    few = more.nearest_above(threshold, 3)
    expected = unused.iloc[shown:]
    expected = expected[expected["value_up"] > threshold]
    cut = np.sort(expected["value_up"].to_numpy())[:3].max()
    assert sorted(few["item"]) == sorted(expected.loc[expected["value_up"] <= cut, "item"])
    rest = more.rows().reset_index(drop=True)
    assert rest[columns].equals(unused[columns].iloc[shown:].reset_index(drop=True))
    assert more.exact.all()


def test_capacity_figures_on_a_mesh_equal_the_uncapped_search(monkeypatch):
    # The saving of one more unit of a full lane searches only up to the lane's own cost; the figures must equal
    # those of searches without that cap.
    from lanesolve.model import sensitivity

    original = sensitivity._Graph.distance
    compared = 0
    for seed in range(8):
        net = meshed(seed)
        result = solve(net)
        monkeypatch.setattr(sensitivity._Graph, "distance", original)
        capped = analyse_plan(net, result)
        monkeypatch.setattr(sensitivity._Graph, "distance", lambda self, a, b, cap=None: original(self, a, b))
        uncapped = analyse_plan(net, result)
        columns = ["figure", "item", "value", "value_up", "value_down", "text"]
        assert capped[columns].equals(uncapped[columns])
        full = capped["figure"].isin(["lane_capacity_value", "hub_capacity_value"])
        compared += int((full & (capped["value_up"] > 0)).sum())
    assert compared >= 5, "too few full lanes that save money in these meshes: the test would prove little"


def test_near_miss_advice_needs_no_search_beyond_the_rows_when_they_settle_it(monkeypatch):
    # The advice names the three unused lanes nearest to paying; when the rows shown already hold three figures
    # strictly below their last one, no lane beyond can enter, so the lanes beyond are not searched. The advice
    # must still equal the one made from the full computation.
    import dataclasses

    from lanesolve.model.figure_text import UnusedLanes
    from lanesolve.report import advice

    net = meshed(3)
    result = solve(net)
    full = analyse_plan(net, result)
    expected = advice._near_misses(dataclasses.replace(result, sensitivity=full, more_figures=None), "units", "")
    frame, more = plan_figures(net, result, unused_rows=40)
    shown = dataclasses.replace(result, sensitivity=frame, more_figures=more)

    def refuse(self, *args):
        raise AssertionError("searched beyond the rows although they settle the advice")

    monkeypatch.setattr(UnusedLanes, "nearest_above", refuse)
    assert len(expected) == advice.TOP
    assert advice._near_misses(shown, "units", "") == expected


def _plan_graph(monkeypatch, net):
    """The plan's graph that :func:`analyse_plan` builds for ``net``'s plan."""
    from lanesolve.model import sensitivity

    kept = []
    finish = sensitivity._Graph.finish

    def keep(self):
        finish(self)
        kept.append(self)

    monkeypatch.setattr(sensitivity._Graph, "finish", keep)
    analyse_plan(net, solve(net))
    return kept[-1]


def _networkx_distances(graph, sources):
    """Residual distances from each of ``sources`` by networkx's Bellman-Ford on the residual arcs and their own
    costs (no potentials, no reduced costs): the reference, independent of lanesolve's searches."""
    import networkx as nx

    residual = nx.DiGraph()
    residual.add_nodes_from(range(graph.n_nodes))
    for t, h, c in zip(graph.r_tail.tolist(), graph.r_head.tolist(), graph.r_cost.tolist()):
        if not residual.has_edge(t, h) or residual[t][h]["weight"] > c:  # parallel arcs: the cheapest counts
            residual.add_edge(t, h, weight=c)
    return {s: nx.single_source_bellman_ford_path_length(residual, s) for s in sources}


@pytest.mark.parametrize("seed", range(4))
def test_searches_shared_by_a_class_of_zero_reduced_cost_equal_networkx(monkeypatch, seed):
    # Searches run between classes of nodes joined both ways by zero reduced cost; every distance found so
    # must equal the residual distance networkx's Bellman-Ford finds from the end itself.
    graph = _plan_graph(monkeypatch, meshed(seed))
    rng = np.random.default_rng(seed)
    label = graph.label
    size = np.bincount(label)
    joined = np.flatnonzero(size[label] > 1)
    # Pairs from nodes of classes of several nodes (the rule at work) and from any node, to any node.
    a = np.concatenate([rng.choice(joined, 30), rng.integers(0, graph.n_nodes, 10)])
    b = rng.integers(0, graph.n_nodes, len(a))
    assert len(joined) >= 10, "too few nodes in classes of several nodes: the test would prove little"
    first = np.unique(label, return_index=True)[1]  # one node of each class
    inside = joined[first[label[joined]] != joined][:20]
    reference = _networkx_distances(graph, np.unique(np.concatenate([a, b, inside])).tolist())
    for s, t in ((a, b), (b, a)):  # searched forward from a and backward from b, whichever has fewer classes
        want = np.array([reference[u].get(v, np.inf) for u, v in zip(s.tolist(), t.tolist())])
        found = graph.searched(s, t, np.full(len(s), np.inf))
        reached = np.isfinite(want)
        assert reached.sum() >= 10, "too few pairs joined by a residual path: the test would prove little"
        assert (np.isfinite(found) == reached).all()
        np.testing.assert_allclose(found[reached], want[reached], rtol=0, atol=1e-9)
        # With a cap (the searches stop at it): found at a cap equal to the distance, beyond a cap one unit less.
        capped = graph.searched(s[reached], t[reached], np.full(reached.sum(), np.inf), want[reached])
        np.testing.assert_allclose(capped, want[reached], rtol=0, atol=1e-9)
        assert np.isinf(graph.searched(s[reached], t[reached], np.full(reached.sum(), np.inf), want[reached] - 1)).all()
    assert len(inside) >= 5, "too few nodes beside another of their class: the test would prove little"
    # Within a class the residual distance between two nodes is the difference of potentials (zero reduced cost).
    for u in inside.tolist():
        v = int(first[label[u]])
        assert reference[u][v] == pytest.approx(graph.potentials[v] - graph.potentials[u], abs=1e-9)


@pytest.mark.parametrize("seed", range(4))
def test_landmark_bounds_hold_against_networkx(monkeypatch, seed):
    # The trees of landmarks in the mesh bound every distance from both sides (triangle inequalities); a pair
    # they call exact must equal the residual distance networkx's Bellman-Ford finds.
    graph = _plan_graph(monkeypatch, meshed(seed, tight=True))
    rng = np.random.default_rng(100 + seed)
    a, b = rng.integers(0, graph.n_nodes, 60), rng.integers(0, graph.n_nodes, 60)
    graph.trees, graph.landmarked = graph.trees[:1], True  # the root's trees alone first
    root_lower, root_upper, root_exact = graph.bounds(a, b)
    graph._add_landmarks()
    assert len(graph.trees) > 1
    lower, upper, exact = graph.bounds(a, b)
    reference = _networkx_distances(graph, np.unique(a).tolist())
    want = np.array([reference[u].get(v, np.inf) for u, v in zip(a.tolist(), b.tolist())])
    reached = np.isfinite(want)
    assert (lower[reached] <= want[reached] + 1e-9).all()
    assert (upper >= want - 1e-9).all()  # inf where no path: an upper bound can only be a path
    np.testing.assert_allclose(upper[exact], want[exact], rtol=0, atol=1e-9)
    # The landmarks must settle or tighten pairs the root's trees left open, else the test would prove little.
    assert (exact & ~root_exact).sum() >= 5 and (lower > root_lower + 1e-9).any()


@pytest.mark.parametrize("seed,tight", [(0, False), (1, True), (2, True), (5, False)])
def test_potentials_equal_networkx_distances_from_a_virtual_source(monkeypatch, seed, tight):
    # Bellman-Ford relaxes, after its first round, only arcs whose tail moved; the potentials must still be the
    # shortest distances from a virtual source joined to every node at cost 0, as networkx's Bellman-Ford finds.
    import networkx as nx

    graph = _plan_graph(monkeypatch, meshed(seed, tight=tight))
    residual = nx.DiGraph()
    residual.add_edges_from((-1, v, {"weight": 0.0}) for v in range(graph.n_nodes))
    for t, h, c in zip(graph.r_tail.tolist(), graph.r_head.tolist(), graph.r_cost.tolist()):
        if not residual.has_edge(t, h) or residual[t][h]["weight"] > c:
            residual.add_edge(t, h, weight=c)
    reference = nx.single_source_bellman_ford_path_length(residual, -1)
    want = np.array([reference[v] for v in range(graph.n_nodes)])
    assert (want < -1).sum() >= 10, "too few nodes below the virtual source's 0: the test would prove little"
    np.testing.assert_allclose(graph.potentials, want, rtol=0, atol=1e-9)


@pytest.mark.parametrize("seed,tight", [(0, True), (1, True), (2, False), (3, True)])
def test_searches_from_either_end_pair_by_pair_equal_networkx(monkeypatch, seed, tight):
    # Each pair is searched forward from its start or backward from its end, as the trees suggest; whichever end
    # each pair is searched from, with the bounds and caps the figures use, the distance must be the residual
    # distance networkx's Bellman-Ford finds from the start itself (inf beyond a cap).
    from lanesolve.model import sensitivity

    graph = _plan_graph(monkeypatch, meshed(seed, tight=tight))
    rng = np.random.default_rng(200 + seed)
    a, b = rng.integers(0, graph.n_nodes, 80), rng.integers(0, graph.n_nodes, 80)
    if not graph.landmarked:
        graph._add_landmarks()
    _, upper, _ = graph.bounds(a, b)
    reference = _networkx_distances(graph, np.unique(a).tolist())
    want = np.array([reference[u].get(v, np.inf) for u, v in zip(a.tolist(), b.tolist())])
    reached = np.isfinite(want)
    assert reached.sum() >= 20, "too few pairs joined by a residual path: the test would prove little"
    # Caps: at the distance (found), a unit below (beyond: inf), none.
    caps = np.where(rng.random(len(a)) < 0.5, want, want - 1)
    caps = np.where(rng.random(len(a)) < 0.2, np.inf, caps)
    expected = np.where(want <= caps, want, np.inf)
    searched_from = sensitivity._searched_from
    graphs = []

    def spy(csr, sources, targets, reach):
        graphs.append((csr is graph.forward, len(sources)))
        return searched_from(csr, sources, targets, reach)

    monkeypatch.setattr(sensitivity, "_searched_from", spy)
    # The trees' own choice, then a coin per pair says which end it is searched from.
    for turn in (None, rng.random(len(a)) < 0.5):
        if turn is not None:
            def coin(self, start, end, reach, turn=turn):
                backward = turn[:len(start)].astype(np.int64)
                return backward, 1 - backward  # the end with the smaller count is searched from
            monkeypatch.setattr(sensitivity._Graph, "_fan_out", coin)
        graphs.clear()
        found = graph.searched(a, b, upper, caps)
        if turn is not None:
            assert sorted(forward for forward, count in graphs if count) == [False, True], \
                "the coins left one end unused: the test would prove little"
        assert (np.isfinite(found) == np.isfinite(expected)).all()
        np.testing.assert_allclose(found[np.isfinite(found)], expected[np.isfinite(expected)], rtol=0, atol=1e-9)
        uncapped = graph.searched(a, b, upper)
        assert (np.isfinite(uncapped) == reached).all()
        np.testing.assert_allclose(uncapped[reached], want[reached], rtol=0, atol=1e-9)


@pytest.mark.parametrize("seed", range(3))
def test_fan_out_counts_classes_every_search_must_visit(monkeypatch, seed):
    # The counts that choose a search's end are sure lower bounds: a search from a pair's start (end) within its
    # bound visits at least ``ahead`` (``behind``) classes. The reference counts the classes within the bound by
    # networkx's Dijkstra on the graph between classes (reduced costs, as the searches use).
    import networkx as nx

    graph = _plan_graph(monkeypatch, meshed(seed, tight=True))
    if not graph.landmarked:
        graph._add_landmarks()
    rng = np.random.default_rng(300 + seed)
    a, b = rng.integers(0, graph.n_nodes, 60), rng.integers(0, graph.n_nodes, 60)
    _, upper, _ = graph.bounds(a, b)
    phi = graph.potentials
    reach = upper + phi[a] - phi[b]
    keep = np.isfinite(reach)
    start, end, reach = graph.label[a[keep]], graph.label[b[keep]], reach[keep]
    ahead, behind = graph._fan_out(start, end, reach)
    visited = 0
    for csr, sources, counts in ((graph.forward, start, ahead), (graph.backward, end, behind)):
        classes = nx.DiGraph()
        classes.add_nodes_from(range(csr.shape[0]))
        coo = csr.tocoo()
        for t, h, w in zip(coo.row.tolist(), coo.col.tolist(), coo.data.tolist()):
            if not classes.has_edge(t, h) or classes[t][h]["weight"] > w:
                classes.add_edge(t, h, weight=w)
        for s, r, count in zip(sources.tolist(), reach.tolist(), counts.tolist()):
            within = nx.single_source_dijkstra_path_length(classes, s, cutoff=r + 1e-9)
            assert count <= len(within)
            visited += count > 1
    assert visited >= 10, "too few searches pass a tree's node: the test would prove little"


@pytest.mark.parametrize("seed,tight", [(0, True), (1, False), (2, True), (4, True)])
def test_nearest_unused_lanes_equal_networkx_figures(monkeypatch, seed, tight):
    # End to end on random meshes: the figures of the unused lanes nearest to paying (one round of searches at the
    # count-th upper bound, each pair from the end the trees choose) must be the smallest of c_ij + d(j, i) over the
    # unused lanes, with d the residual distance networkx's Bellman-Ford finds on the plan's residual arcs (Ahuja,
    # Magnanti & Orlin, Network Flows, 1993, section 9.4: an unused lane pays once its cost falls by that much).
    net = meshed(seed, tight=tight)
    graph = _plan_graph(monkeypatch, net)
    tail, head, cost, _, high, flow = graph.parts[0]  # the lanes' arcs, added first
    unused = (flow <= 1e-7) & (high > 0)
    reference = _networkx_distances(graph, np.unique(head[unused]).tolist())
    want = np.sort([max(0.0, c + reference[j].get(i, np.inf))
                    for i, j, c in zip(tail[unused].tolist(), head[unused].tolist(), cost[unused].tolist())])
    shown = 12
    frame, more = plan_figures(net, solve(net), unused_rows=shown)
    near = frame.loc[frame["figure"] == "reduced_cost", "value_up"].to_numpy()
    assert more is not None and not more.exact.all(), "the mesh should leave figures to search"
    np.testing.assert_allclose(near, want[:shown], rtol=0, atol=1e-9)
    rest = more.rows()["value_up"].to_numpy()
    np.testing.assert_allclose(np.sort(rest), want[shown:], rtol=0, atol=1e-9)

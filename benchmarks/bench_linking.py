"""Do the per-lane linking inequalities pay? Root LP bound, solve time and branch-and-bound nodes with and without.

Run::

    python benchmarks/bench_linking.py [--sizes 8x30 12x50] [--seeds 3] [--time-limit 60]

Each instance is an invented capacitated facility-location network: D candidate depots (status decide, a fixed
cost each, supply a share of total demand) serving C customers directly over every depot-customer lane. The model
is built twice by :func:`lanesolve.model.formulation.build_sparse_model`: ``linking=True`` (aggregate rows plus
``x_l <= M_l * open``) and ``linking=False`` (aggregate rows only). For each the table shows the LP relaxation's
bound (the root bound: the same arrays with integrality relaxed, solved by the bundled CBC), its gap to the optimum,
the MIP solve time and the nodes CBC reports (both through :func:`lanesolve.model.cbc.solve_with_cbc`, the path
``lanesolve solve`` takes). Ratios are of "without" over "with".
"""

from __future__ import annotations

import argparse
import dataclasses
import random
import re
import sys
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))
from lanesolve.model.cbc import solve_with_cbc  # noqa: E402
from lanesolve.model.formulation import build_sparse_model  # noqa: E402
from lanesolve.model.network import make_network  # noqa: E402

_NODES = re.compile(r"Enumerated nodes:\s*(\d+)")


def instance(depots: int, customers: int, seed: int):
    rng = random.Random(seed)
    cust = [{"id": f"C{j}", "demand": rng.randint(5, 35)} for j in range(customers)]
    total = sum(c["demand"] for c in cust)
    where = {c["id"]: (rng.random(), rng.random()) for c in cust}
    deps = []
    for i in range(depots):
        deps.append({"id": f"D{i}", "supply": int(total * rng.uniform(0.25, 0.5)),
                     "fixed_cost": rng.randint(400, 1200)})
        where[f"D{i}"] = (rng.random(), rng.random())
    lanes = []
    for d in deps:
        for c in cust:
            (x1, y1), (x2, y2) = where[d["id"]], where[c["id"]]
            lanes.append({"origin": d["id"], "destination": c["id"],
                          "cost_per_unit": round(1 + 20 * ((x1 - x2) ** 2 + (y1 - y2) ** 2) ** 0.5, 2)})
    return make_network(deps, cust, lanes)


def run(network, linking: bool, time_limit: float):
    """(root bound, MIP objective, MIP seconds, branch-and-bound nodes, rows) of one build."""
    model = build_sparse_model(network, linking=linking)
    relaxed = dataclasses.replace(model, integer=np.zeros(model.n_columns, dtype=bool))
    root = float(relaxed.cost @ solve_with_cbc(relaxed).value) + model.objective_constant
    answer = solve_with_cbc(model, time_limit=time_limit, gap=1e-6)
    objective = float(model.cost @ answer.value) + model.objective_constant
    found = _NODES.findall(answer.log)
    return root, objective, answer.seconds, int(found[-1]) if found else 0, model.n_rows


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--sizes", nargs="+", default=["8x30", "12x50"])
    parser.add_argument("--seeds", type=int, default=3)
    parser.add_argument("--time-limit", type=float, default=60.0)
    args = parser.parse_args(argv)
    head = (f"{'instance':<12}{'rows w/o':>9}{'rows with':>10}{'optimum':>11}{'root gap w/o':>13}"
            f"{'root gap with':>14}{'s w/o':>8}{'s with':>8}{'nodes w/o':>10}{'nodes with':>11}{'time ratio':>11}")
    print(head)
    print("-" * len(head))
    for size in args.sizes:
        depots, customers = map(int, size.split("x"))
        for seed in range(args.seeds):
            net = instance(depots, customers, seed)
            weak = run(net, False, args.time_limit)
            strong = run(net, True, args.time_limit)
            best = min(weak[1], strong[1])
            gap = lambda root: (best - root) / best  # noqa: E731
            print(f"{size + '/s' + str(seed):<12}{weak[4]:>9}{strong[4]:>10}{best:>11.1f}{gap(weak[0]):>13.2%}"
                  f"{gap(strong[0]):>14.2%}{weak[2]:>8.2f}{strong[2]:>8.2f}{weak[3]:>10}{strong[3]:>11}"
                  f"{weak[2] / max(strong[2], 1e-9):>11.2f}")


if __name__ == "__main__":
    main()

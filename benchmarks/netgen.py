"""NETGEN min-cost flow networks as lanesolve workbooks, for the pure-flow benchmark (``pure_flow.py --netgen``).

NETGEN is the classic generator of network flow test problems (D. Klingman, A. Napier and J. Stutz, "NETGEN: A
program for generating large scale capacitated assignment, transportation, and minimum cost flow network problems",
Management Science 20(5), 1974, 814-821). The instances here are drawn by PyNETGEN (``pip install pynetgen``, MIT
licence, Adam Rumpf; its NETGEN follows Norbert Schlenker's C implementation and, with ``rng=0``, NETGEN's own
pseudorandom generator), written in the DIMACS min-cost flow format to ``benchmarks/cache/`` (git-ignored) and read
back here. Nothing is downloaded at run time: PyNETGEN generates from its parameters.

Parameters (our choice, in the style of the "NETGEN-8" family used in published min-cost flow benchmarks: 8 arcs per
node, costs 1-10,000, capacities 1-1,000 -- that family's rule is recalled from memory, and these are not its
instance files): ``nodes`` nodes, ``8 * nodes`` arcs, ``nodes / 128`` sources and as many sinks, total supply
``1,000 * sources``, every arc capacitated.

How a DIMACS network becomes a workbook (same optimum):

- a sink (negative supply) is a customer with that demand; customers may forward goods, so its outgoing arcs stay;
- every other node is a hub without capacity or handling cost, and a source also gets a depot with its supply and
  a lane depot -> hub at cost 0 without capacity (a depot takes no incoming lanes, a hub does);
- every arc is a lane (cost per unit = arc cost, capacity = arc capacity); parallel arcs get modes ``road``,
  ``road 2``, ... so each lane is distinct; NETGEN's supplies and demands balance, so hard demand forces every depot
  to send all its supply, as the DIMACS problem requires.

Usage::

    python benchmarks/netgen.py --nodes 16384          # 131,072 arcs; prints the cached workbook's path
"""

from __future__ import annotations

import argparse
import pickle
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
import generate  # noqa: E402  (benchmarks/ is a folder of scripts, not a package)

DEFAULT_SEED = 14001


def parameters(nodes: int, seed: int = DEFAULT_SEED) -> dict:
    """PyNETGEN's keyword arguments for a network of ``nodes`` nodes (module docstring)."""
    ends = max(1, nodes // 128)
    return {"seed": seed, "nodes": nodes, "sources": ends, "sinks": ends, "density": 8 * nodes, "mincost": 1,
            "maxcost": 10_000, "supply": 1_000 * ends, "tsources": 0, "tsinks": 0, "hicost": 0, "capacitated": 100,
            "mincap": 1, "maxcap": 1_000, "rng": 0}


def read_dimacs(path: Path) -> tuple[dict[int, int], pd.DataFrame]:
    """(supply by node, arcs ``tail, head, low, cap, cost``) of a DIMACS ``p min`` file."""
    supply: dict[int, int] = {}
    arcs = []
    with open(path, encoding="ascii") as fh:
        for line in fh:
            if line.startswith("n "):
                _, node, amount = line.split()
                supply[int(node)] = int(amount)
            elif line.startswith("a "):
                arcs.append(tuple(int(v) for v in line.split()[1:6]))
    frame = pd.DataFrame(arcs, columns=["tail", "head", "low", "cap", "cost"])
    if (frame["low"] != 0).any():
        raise ValueError(f"{path}: arcs with a lower bound are not mapped (NETGEN writes none)")
    return supply, frame


def to_tables(supply: dict[int, int], arcs: pd.DataFrame) -> dict[str, pd.DataFrame]:
    """The workbook tables of generate.py's layout for a DIMACS network (module docstring)."""
    nodes = sorted(set(supply) | set(arcs["tail"]) | set(arcs["head"]))
    sinks = {n for n, b in supply.items() if b < 0}
    sources = sorted(n for n, b in supply.items() if b > 0)

    def name(node: int) -> str:
        return f"C{node:05d}" if node in sinks else f"N{node:05d}"

    arcs = arcs[arcs["tail"] != arcs["head"]]  # a loop carries nothing in a min-cost flow with costs >= 1
    tails = [name(n) for n in arcs["tail"].tolist()]
    heads = [name(n) for n in arcs["head"].tolist()]
    repeat = pd.DataFrame({"o": tails, "d": heads}).groupby(["o", "d"]).cumcount().to_numpy()
    modes = np.where(repeat == 0, "road", "road " + (repeat + 1).astype(str)).astype(object)
    lanes = pd.DataFrame({"origin": tails, "destination": heads, "mode": modes,
                          "cost_per_unit": arcs["cost"].to_numpy(dtype=float),
                          "capacity": arcs["cap"].to_numpy(dtype=float),
                          "fixed_cost": 0.0, "active": "yes"})
    feeds = pd.DataFrame({"origin": [f"D{n:05d}" for n in sources], "destination": [name(n) for n in sources],
                          "mode": "road", "cost_per_unit": 0.0, "capacity": np.nan, "fixed_cost": 0.0,
                          "active": "yes"})
    hubs = [name(n) for n in nodes if n not in sinks]
    return {
        "depots": pd.DataFrame({"depot": [f"D{n:05d}" for n in sources],
                                "supply": [float(supply[n]) for n in sources]}),
        "hubs": pd.DataFrame({"hub": hubs, "capacity": np.nan, "handling_cost": 0.0}),
        "customers": pd.DataFrame({"customer": [name(n) for n in sorted(sinks)],
                                   "demand": [float(-supply[n]) for n in sorted(sinks)]}),
        "lanes": pd.concat([feeds, lanes], ignore_index=True),
    }


def ensure_instance(nodes: int, seed: int = DEFAULT_SEED) -> tuple[Path, Path, int]:
    """Generate (once) and cache one NETGEN network: (workbook path, network pickle path, arc count)."""
    import pynetgen

    stem = f"netgen-{nodes}-s{seed}"
    dimacs, book, pickled = (generate.CACHE / f"{stem}{suffix}" for suffix in (".min", ".xlsx", ".network.pkl"))
    generate.CACHE.mkdir(parents=True, exist_ok=True)
    if not dimacs.exists():
        tick = time.perf_counter()
        pynetgen.netgen_generate(**parameters(nodes, seed), fname=str(dimacs))
        print(f"generated {dimacs.name} in {time.perf_counter() - tick:.1f} s", file=sys.stderr)
    supply, arcs = read_dimacs(dimacs)
    if not (book.exists() and pickled.exists()):
        tables = to_tables(supply, arcs)
        with open(pickled, "wb") as fh:
            pickle.dump(generate.to_network(tables), fh, protocol=pickle.HIGHEST_PROTOCOL)
        generate.write_workbook(tables, book)
    return book, pickled, len(arcs)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--nodes", type=int, default=16_384)
    parser.add_argument("--seed", type=int, default=DEFAULT_SEED)
    args = parser.parse_args(argv)
    book, _, arcs = ensure_instance(args.nodes, args.seed)
    print(f"{book} ({arcs:,} arcs)")
    return 0


if __name__ == "__main__":
    sys.exit(main())

"""Cheap pre-solve checks on carrier commitments: certain reasons no plan can exist, before any model is built.

Like :mod:`lanesolve.model.checks`, every check here is *certain*: when it fires, the model is infeasible.

1. A carrier whose active lanes together cannot carry its ``min_volume`` (the sum of their capacities, a lane at a
   closed node counting 0, is below it; a carrier no active lane names has capacity 0).
2. Minimum volumes above demand: for carriers whose every active lane ends at a customer that ships nothing on
   (no active lane out of it), each unit on their lanes stays at a customer, so together they carry at most the
   demand of the customers they reach. Their minimums, alone or summed, above that demand cannot be met.
3. Largest shares summing under 1: when every active lane into a customer belongs to a carrier with a
   ``max_share`` and some demand must be delivered (a customer without an unmet penalty), the units delivered
   :math:`D > 0` all arrive on those lanes, so :math:`D \\le \\sum_k \\mathrm{volume}_k \\le (\\sum_k \\sigma_k) D`,
   impossible when :math:`\\sum_k \\sigma_k < 1`.

Examples
--------
>>> from lanesolve.model.network import make_network
>>> net = make_network([{"id": "D", "supply": 50}], [{"id": "C", "demand": 40}],
...                    [{"origin": "D", "destination": "C", "cost_per_unit": 1, "carrier": "K", "capacity": 30}],
...                    carriers=[{"id": "K", "min_volume": 35}])
>>> print(presolve_checks(net)[0])  # doctest: +NORMALIZE_WHITESPACE
Carrier K must carry at least 35 units (Carriers row 2), but its active lanes can carry at most 30 units
together (raise their capacity on Lanes, name the carrier on more lanes, or lower its min_volume).
"""

from __future__ import annotations

import math

import numpy as np

from lanesolve.model.formulation import customer_penalties, effective_capacity
from lanesolve.model.checks import plain_number
from lanesolve.model.network import Network


def presolve_checks(network: Network) -> list[str]:
    """Reasons, in plain sentences, why the carrier commitments cannot all be met; empty when none is found.

    Parameters
    ----------
    network : Network
        A validated network.

    Returns
    -------
    list of str
        One sentence per finding, naming carriers, Carriers rows and numbers, with a hint.
    """
    carriers = network.carriers
    if carriers.empty:
        return []
    units = network.settings.units or "units"
    lanes = network.active_lanes
    capacity = effective_capacity(network)
    carrier = lanes["carrier"].to_numpy(dtype=object)
    reasons: list[str] = []

    minimum = carriers["min_volume"].to_numpy(dtype=float)
    for k, name in enumerate(carriers["id"].tolist()):
        if not minimum[k] > 0:
            continue
        can = float(capacity[carrier == name].sum())
        if can < minimum[k]:
            row = int(carriers["row"].iloc[k])
            reasons.append(f"Carrier {name} must carry at least {plain_number(minimum[k])} {units} (Carriers row {row}), but "
                           f"its active lanes can carry at most {plain_number(can)} {units} together (raise their capacity "
                           f"on Lanes, name the carrier on more lanes, or lower its min_volume).")

    customers = network.customers
    demand = dict(zip(customers["id"], customers["demand"].astype(float)))
    forwarding = set(lanes["origin"].unique()) & set(demand)
    ends_at_customer = lanes["destination"].isin(demand).to_numpy() & ~lanes["destination"].isin(forwarding).to_numpy()
    direct = []
    for k, name in enumerate(carriers["id"].tolist()):
        mine = carrier == name
        if minimum[k] > 0 and mine.any() and ends_at_customer[mine].all():
            direct.append((name, minimum[k], set(lanes["destination"].to_numpy()[mine])))
    for name, least, reached in direct:
        most = sum(demand[c] for c in reached)
        if least > most:
            reasons.append(f"Carrier {name} must carry at least {plain_number(least)} {units}, but its lanes only reach "
                           f"customers needing {plain_number(most)} {units} in all (lower its min_volume, or name it on "
                           f"lanes to more customers).")
    if len(direct) > 1:
        together = sum(least for _, least, _ in direct)
        reached = set().union(*(r for _, _, r in direct))
        most = sum(demand[c] for c in reached)
        if together > most:
            names = ", ".join(name for name, _, _ in direct)
            reasons.append(f"Carriers {names} must carry at least {plain_number(together)} {units} together, but their "
                           f"lanes reach customers needing {plain_number(most)} {units} in all (lower their min_volume).")

    share = dict(zip(carriers["id"], carriers["max_share"].astype(float)))
    hard = float(customers["demand"].to_numpy(dtype=float)[np.isnan(customer_penalties(network))].sum())
    into = lanes["destination"].isin(demand).to_numpy()
    if hard > 0 and into.any():
        owners = set(carrier[into].tolist())
        if all(not math.isnan(share.get(owner, math.nan)) for owner in owners):
            total = sum(share[owner] for owner in owners)
            if total < 1:
                reasons.append(f"Every lane into a customer belongs to a carrier with a max_share "
                               f"({', '.join(sorted(owners))}), but their shares add up to {total:.4g}, under 1: "
                               f"they cannot carry all the goods delivered together (raise a max_share on Carriers, "
                               f"or add a lane into the customers without a share limit).")
    return reasons

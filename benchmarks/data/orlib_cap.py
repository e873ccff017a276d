"""Read published capacitated facility-location instances and write them as lanesolve workbooks.

Two text formats are read (provenance of every file: ``README.md`` beside this module):

* **OR-Library "cap" format** (J.E. Beasley's capacitated warehouse location instances cap41 … cap134 and
  capa/capb/capc). Whitespace-separated numbers, line breaks carry no meaning::

      m n
      capacity_i fixed_cost_i                      (m times)
      demand_j  cost_1j cost_2j … cost_mj          (n times; cost_ij = cost of sending ALL of j's demand from i)

  In capa, capb and capc the capacities are the literal word ``capacity``: each file stands for four instances
  whose capacity is chosen by the user (the four values are listed in ``capopt.txt``).
* **Holmberg, Rönnqvist & Yuan (1999) single-source format** (p1 … p71)::

      m n
      capacity_i fixed_cost_i                      (m times)
      demand_1 … demand_n
      cost_i1 … cost_in                            (m rows of n; cost of sending ALL of j's demand from i)

Both read into the same plain dict: ``capacity`` and ``fixed_cost`` (length m), ``demand`` (length n) and
``cost[j][i]``, the cost of serving customer ``j``'s whole demand from warehouse ``i``. A split allocation costs
pro rata, so the cost per unit on lane ``i → j`` is ``cost[j][i] / demand[j]`` (0 for a customer without demand).

:func:`to_workbook` writes an instance to the lanesolve workbook contract (sheets Depots, Customers, Lanes,
Settings; column names as in the project README, section "The workbook").
"""

from __future__ import annotations

import gzip
import json
import os
from pathlib import Path

HERE = Path(__file__).resolve().parent
#: Folder holding ``orlib_cap/`` and ``holmberg/``: this module's folder, or ``$ORLIB_DATA_DIR`` when set (for a
#: copy of the instance files kept outside the repository; see README.md).
DATA_DIR = Path(os.environ.get("ORLIB_DATA_DIR") or HERE)
CAP_DIR = DATA_DIR / "orlib_cap"
HOLMBERG_DIR = DATA_DIR / "holmberg"


class InstanceFormatError(ValueError):
    """The file does not hold an instance in the expected format (message names the file and what is wrong)."""


def _tokens(path: Path) -> list[str]:
    opener = gzip.open if path.suffix == ".gz" else open
    with opener(path, "rt", encoding="ascii") as handle:
        text = handle.read()
    # 37 of the Holmberg files end in a block of NUL bytes (padding); in p47 the block is followed by 17 stray
    # numbers left over from an older file. The data end at the first NUL; the exact count of numbers checked by
    # the readers and p47's published optimum (check_orlib.py p47) confirm that nothing is lost.
    return text.split("\x00", 1)[0].split()


def _number(token: str, path: Path, what: str) -> float:
    try:
        return float(token)
    except ValueError:
        raise InstanceFormatError(f"{path.name}: {what} is {token!r}, not a number") from None


def _sizes(tokens: list[str], path: Path) -> tuple[int, int]:
    if len(tokens) < 2:
        raise InstanceFormatError(f"{path.name}: empty file, expected 'm n' on the first line")
    m, n = (_number(t, path, "the header") for t in tokens[:2])
    if m != int(m) or n != int(n) or m < 1 or n < 1:
        raise InstanceFormatError(f"{path.name}: header '{tokens[0]} {tokens[1]}' is not two positive integers")
    return int(m), int(n)


def read_cap(path: str | Path, capacity: float | str | None = None) -> dict:
    """Read an OR-Library capacitated warehouse location file (``cap41.txt`` … ``capc.txt``, optionally ``.gz``).

    Parameters
    ----------
    path : str or Path
        The instance file.
    capacity : float, optional
        Capacity of every warehouse, required for capa/capb/capc whose capacities are the word ``capacity``;
        ignored (must be None) for files with numeric capacities. ``"u"`` gives every warehouse the total demand:
        the uncapacitated variant (no capacity can bind), named ``capa-u`` and so on.

    Returns
    -------
    dict
        ``capacity``, ``fixed_cost`` (lists of m floats), ``demand`` (list of n floats) and ``cost`` (n lists of
        m floats: ``cost[j][i]`` is the cost of allocating all of customer j's demand to warehouse i), plus
        ``name`` (the file name without extensions).

    Raises
    ------
    InstanceFormatError
        Header not two positive integers, a token that is not a number, a count of numbers that does not match
        ``m`` and ``n``, or a ``capacity`` placeholder without the ``capacity`` argument (or the reverse).
    """
    path = Path(path)
    tokens = _tokens(path)
    m, n = _sizes(tokens, path)
    expected = 2 + 2 * m + n * (1 + m)
    if len(tokens) != expected:
        raise InstanceFormatError(f"{path.name}: {len(tokens)} numbers, expected {expected} for m={m}, n={n} "
                                  f"(2 + 2m + n(1+m))")
    head = tokens[2:2 + 2 * m]
    placeholders = sum(1 for t in head[0::2] if t.lower() == "capacity")
    if placeholders and capacity is None:
        raise InstanceFormatError(f"{path.name}: capacities are the word 'capacity'; pass capacity=… "
                                  f"(the values of the four instances are in capopt.txt)")
    if capacity is not None and placeholders != m:
        raise InstanceFormatError(f"{path.name}: has numeric capacities; capacity= applies only to capa/capb/capc")
    uncapacitated = isinstance(capacity, str) and capacity.lower() == "u"
    caps = [0.0 if uncapacitated else float(capacity) if placeholders else
            _number(t, path, f"capacity of warehouse {i + 1}") for i, t in enumerate(head[0::2])]
    fixed = [_number(t, path, f"fixed cost of warehouse {i + 1}") for i, t in enumerate(head[1::2])]
    body = tokens[2 + 2 * m:]
    demand, cost = [], []
    for j in range(n):
        row = body[j * (m + 1):(j + 1) * (m + 1)]
        demand.append(_number(row[0], path, f"demand of customer {j + 1}"))
        cost.append([_number(t, path, f"cost of customer {j + 1} at warehouse {i + 1}") for i, t in enumerate(row[1:])])
    if uncapacitated:
        caps = [float(sum(demand))] * m
    name = path.name.split(".")[0] + ("-u" if uncapacitated else f"-{float(capacity):g}" if placeholders else "")
    return {"name": name, "capacity": caps, "fixed_cost": fixed, "demand": demand, "cost": cost}


def read_holmberg(path: str | Path) -> dict:
    """Read a Holmberg, Rönnqvist & Yuan (1999) single-source instance (``p1`` … ``p71``).

    Returns the same dict as :func:`read_cap` (``cost[j][i]`` per customer row), transposing the file's
    warehouse-by-customer cost matrix.

    Raises
    ------
    InstanceFormatError
        As for :func:`read_cap`: bad header, a non-number, or a count of numbers other than ``2 + 2m + n + mn``.
    """
    path = Path(path)
    tokens = _tokens(path)
    m, n = _sizes(tokens, path)
    expected = 2 + 2 * m + n + m * n
    if len(tokens) != expected:
        raise InstanceFormatError(f"{path.name}: {len(tokens)} numbers, expected {expected} for m={m}, n={n} "
                                  f"(2 + 2m + n + mn)")
    values = [_number(t, path, f"number {k + 3}") for k, t in enumerate(tokens[2:])]
    caps, fixed = values[0:2 * m:2], values[1:2 * m:2]
    demand = values[2 * m:2 * m + n]
    flat = values[2 * m + n:]
    cost = [[flat[i * n + j] for i in range(m)] for j in range(n)]
    return {"name": path.name.split(".")[0], "capacity": caps, "fixed_cost": fixed, "demand": demand, "cost": cost}


def instance_path(name: str) -> Path:
    """Path of a shipped instance by name: ``cap41``, ``capa`` (the .gz file) or ``p1``."""
    if name.startswith("cap"):
        for candidate in (CAP_DIR / f"{name}.txt", CAP_DIR / f"{name}.txt.gz"):
            if candidate.exists():
                return candidate
        raise FileNotFoundError(f"no {name}.txt or {name}.txt.gz in {CAP_DIR}")
    candidate = HOLMBERG_DIR / name
    if not candidate.exists():
        raise FileNotFoundError(f"no {name} in {HOLMBERG_DIR}")
    return candidate


def load_optima() -> dict:
    """The published optima: ``{"cap": {...}, "holmberg": {...}}`` from the JSON files beside this module."""
    out = {"cap": json.loads((HERE / "cap_optima.json").read_text(encoding="utf-8"))["optima"]}
    holmberg = HERE / "holmberg_optima.json"
    if holmberg.exists():
        out["holmberg"] = json.loads(holmberg.read_text(encoding="utf-8"))["optima"]
    return out


def to_workbook(instance: dict, path: str | Path, *, time_limit_s: float = 60, mip_gap: float = 0.0,
                single_source: bool = False) -> Path:
    """Write ``instance`` (from :func:`read_cap` or :func:`read_holmberg`) as a lanesolve workbook (.xlsx).

    Depots ``W1`` … ``Wm`` (supply = capacity, fixed_cost, status ``decide``), customers ``K1`` … ``Kn`` (demand),
    one lane from every depot to every customer with ``cost_per_unit = cost[j][i] / demand[j]`` (0 for a
    customer with demand 0), and Settings ``time_limit_s`` and ``mip_gap`` (the contract accepts any gap ≥ 0).
    With ``single_source`` the Settings also say ``single_source = yes`` (each customer served by one lane, the
    Holmberg problem); the OR-Library cap problems allow split deliveries and leave it out.

    The workbook's optimum equals the instance's published optimum: a split of customer j's demand over the
    warehouses at fractions x_ij costs Σ_i x_ij · cost[j][i], which is the flow d_j·x_ij times the cost per unit.
    """
    from openpyxl import Workbook

    path = Path(path)
    caps, fixed, demand, cost = instance["capacity"], instance["fixed_cost"], instance["demand"], instance["cost"]
    book = Workbook(write_only=True)
    depots = book.create_sheet("Depots")
    depots.append(["depot", "supply", "fixed_cost", "status"])
    for i, (capacity, charge) in enumerate(zip(caps, fixed), start=1):
        depots.append([f"W{i}", capacity, charge, "decide"])
    customers = book.create_sheet("Customers")
    customers.append(["customer", "demand"])
    for j, amount in enumerate(demand, start=1):
        customers.append([f"K{j}", amount])
    lanes = book.create_sheet("Lanes")
    lanes.append(["origin", "destination", "cost_per_unit"])
    for j, (amount, row) in enumerate(zip(demand, cost), start=1):
        for i, whole in enumerate(row, start=1):
            lanes.append([f"W{i}", f"K{j}", whole / amount if amount > 0 else 0.0])
    settings = book.create_sheet("Settings")
    settings.append(["setting", "value"])
    settings.append(["time_limit_s", time_limit_s])
    settings.append(["mip_gap", mip_gap])
    if single_source:
        settings.append(["single_source", "yes"])
    book.save(path)
    return path

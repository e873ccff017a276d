"""Plain data for several products on one network and for the plan's emissions, handed from the validator to the
model and the reports.

A :class:`~lanesolve.model.network.Network` carries a :class:`ProductData` when the workbook has a Products sheet
and an :class:`EmissionData` when emissions are asked for (a carbon price, an emissions cap, or any emission factor
given); both are ``None`` otherwise, and the network is planned exactly as a single-product one.

ProductData frames (default RangeIndex, ``row`` is the spreadsheet row):

products  id, weight_per_unit (tonnes per unit, blank filled from Settings ``tonnes_per_unit``, NaN if neither),
          capacity_use (capacity units one unit takes on lanes, hubs and trips), row
supply    depot, product, supply, row -- or ``None`` without a Supply sheet (every depot may ship every product,
          within its overall Depots ``supply``)
demand    customer, product, demand, unmet_penalty (resolved: own, else the customer's, else Settings; NaN = hard),
          row
lane_products  per lane index of ``network.lanes``: a tuple of allowed product ids, or ``None`` for every product

EmissionData (per lane index of ``network.lanes``, per hub row):

lane_km        distance in km (typed, converted from miles, or great circle x circuity); NaN when unknown
lane_factor    kg CO2e per tonne-km, well-to-wheel (the lane's own, else its mode's); NaN when unknown
lane_factor_source  where the factor came from (``"lane"``, the Modes ``source`` text, or ``""``)
hub_per_tonne  kg CO2e per tonne handled at each hub (0 when not given)
tonnes_per_unit  the Settings ``tonnes_per_unit`` (weight of a unit without products), NaN when not given
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

PRODUCT_COLUMNS = ["id", "weight_per_unit", "capacity_use", "row"]
SUPPLY_COLUMNS = ["depot", "product", "supply", "row"]
DEMAND_COLUMNS = ["customer", "product", "demand", "unmet_penalty", "row"]


@dataclass
class ProductData:
    """The products of a network, what each depot makes and what each customer needs (module docstring)."""

    products: pd.DataFrame
    supply: pd.DataFrame | None
    demand: pd.DataFrame
    lane_products: pd.Series

    @property
    def ids(self) -> list[str]:
        return self.products["id"].tolist()

    @property
    def capacity_use(self) -> np.ndarray:
        return self.products["capacity_use"].to_numpy(dtype=float)

    @property
    def weight(self) -> np.ndarray:
        return self.products["weight_per_unit"].to_numpy(dtype=float)


@dataclass
class EmissionData:
    """Distances, emission factors and hub intensities (module docstring)."""

    lane_km: pd.Series
    lane_factor: pd.Series
    lane_factor_source: pd.Series
    hub_per_tonne: np.ndarray
    tonnes_per_unit: float = float("nan")
    mode_factors: pd.DataFrame = field(default_factory=lambda: pd.DataFrame(
        {"mode": pd.Series(dtype=object), "emission_factor": pd.Series(dtype=float),
         "source": pd.Series(dtype=object)}))


def make_products(products: list[dict], demand: list[dict], supply: list[dict] | None = None,
                  lane_products: dict[int, tuple[str, ...]] | None = None, n_lanes: int = 0,
                  tonnes_per_unit: float | None = None) -> ProductData:
    """Build :class:`ProductData` from plain records (tests and the Python API); no validation.

    Examples
    --------
    >>> data = make_products([{"id": "A"}, {"id": "B", "capacity_use": 2}],
    ...                      [{"customer": "C", "product": "B", "demand": 3}], n_lanes=1)
    >>> data.ids, data.capacity_use.tolist(), data.lane_products.tolist()
    (['A', 'B'], [1.0, 2.0], [None])
    """
    frame = pd.DataFrame(products)
    default_weight = np.nan if tonnes_per_unit is None else float(tonnes_per_unit)
    frame["weight_per_unit"] = (frame["weight_per_unit"].astype(float).fillna(default_weight)
                                if "weight_per_unit" in frame else default_weight)
    frame["capacity_use"] = frame["capacity_use"].astype(float).fillna(1.0) if "capacity_use" in frame else 1.0
    frame["row"] = range(2, len(frame) + 2)
    demand_frame = pd.DataFrame(demand)
    for column in ("customer", "product", "demand"):
        if column not in demand_frame:
            demand_frame[column] = pd.Series(dtype=float if column == "demand" else object)
    if "unmet_penalty" not in demand_frame:
        demand_frame["unmet_penalty"] = np.nan
    demand_frame["row"] = range(2, len(demand_frame) + 2)
    supply_frame = None
    if supply is not None:
        supply_frame = pd.DataFrame(supply, columns=["depot", "product", "supply"])
        supply_frame["row"] = range(2, len(supply_frame) + 2)
    allowed = pd.Series([None] * n_lanes, dtype=object)
    for lane, ids in (lane_products or {}).items():
        allowed.at[lane] = tuple(ids)
    demand_frame["demand"] = demand_frame["demand"].astype(float)
    demand_frame["unmet_penalty"] = demand_frame["unmet_penalty"].astype(float)
    return ProductData(frame[PRODUCT_COLUMNS].reset_index(drop=True), supply_frame,
                       demand_frame[DEMAND_COLUMNS].reset_index(drop=True), allowed)

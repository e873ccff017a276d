"""The plan's greenhouse-gas emissions in the model: tonnes CO2e per column, the carbon price and the cap.

Method (ISO 14083:2023; GLEC Framework): emissions of a transport leg are its tonne-km times a well-to-wheel
emission intensity; hub (transshipment) operations count too, per tonne handled.

- lane :math:`l`: :math:`E_l = \\sum_k x_{lk}\\, w_k\\, d_l\\, \\varepsilon_l / 1000` tonnes CO2e, with :math:`w_k`
  the product's tonnes per unit (Settings ``tonnes_per_unit`` for a single-product network), :math:`d_l` the lane's
  km and :math:`\\varepsilon_l` its factor in kg CO2e per tonne-km (the lane's own, else its mode's);
- hub :math:`h`: tonnes coming in times ``emission_per_tonne`` (kg) / 1000, counted on the lanes into the hub;
- plan: :math:`E = \\sum_l E_l + \\sum_h E_h`.

A lane with no known factor contributes nothing to :math:`E` and is counted as *unknown* in every report (never
silently taken as clean). With a ``carbon_price`` :math:`\\pi` the objective gains the component ``carbon``,
:math:`\\pi E`; with an ``emissions_cap`` :math:`\\bar E` the model gains the row ``emissions_cap``:
:math:`E \\le \\bar E`.

Examples
--------
>>> from lanesolve.model.network import make_network, Settings
>>> from lanesolve.model.formulation import build_sparse_model
>>> net = make_network([{"id": "D", "supply": 9}], [{"id": "C", "demand": 4}],
...                    [{"origin": "D", "destination": "C", "cost_per_unit": 2}],
...                    settings=Settings(tonnes_per_unit=0.5, carbon_price=100.0))
>>> net.emissions = lane_emission_data(net, km=[200.0], factor=[0.1])
>>> model = with_emissions(build_sparse_model(net), net)
>>> model.emission.tolist(), model.costs["carbon"].tolist()  # 0.5 t x 200 km x 0.1 kg/tkm = 10 kg per unit
([0.01], [1.0])
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from lanesolve.model.arrays import Block, SparseModel
from lanesolve.model.network import Network
from lanesolve.model.product_data import EmissionData


def lane_emission_data(network: Network, km, factor, hub_per_tonne=None, source: str = "given") -> EmissionData:
    """:class:`EmissionData` from plain per-lane lists (tests and the Python API)."""
    index = network.lanes.index
    factor = pd.Series(np.asarray(factor, dtype=float), index=index)
    hubs = np.zeros(len(network.hubs)) if hub_per_tonne is None else np.asarray(hub_per_tonne, dtype=float)
    tonnes = network.settings.tonnes_per_unit
    return EmissionData(lane_km=pd.Series(np.asarray(km, dtype=float), index=index), lane_factor=factor,
                        lane_factor_source=pd.Series(np.where(factor.notna(), source, ""), index=index, dtype=object),
                        hub_per_tonne=hubs, tonnes_per_unit=float("nan") if tonnes is None else float(tonnes))


def lane_intensity(network: Network) -> tuple[np.ndarray, np.ndarray]:
    """Per active lane: tonnes CO2e per tonne carried (0 where unknown), and whether its factor is known.

    The tonne moved on the lane into a hub also carries the hub's handling emissions.
    """
    data = network.emissions
    lanes = network.active_lanes
    km = data.lane_km.reindex(lanes.index).to_numpy(dtype=float)
    factor = data.lane_factor.reindex(lanes.index).to_numpy(dtype=float)
    known = np.isfinite(km) & np.isfinite(factor)
    per_tonne = np.where(known, km * np.where(known, factor, 0.0), 0.0) / 1000.0
    hub = dict(zip(network.hubs["id"], np.asarray(data.hub_per_tonne, dtype=float) / 1000.0))
    per_tonne = per_tonne + lanes["destination"].map(hub).fillna(0.0).to_numpy(dtype=float)
    return per_tonne, known


def column_emissions(model: SparseModel, network: Network) -> np.ndarray:
    """Tonnes CO2e per unit of each column of ``model`` (zeros except on the columns that move goods)."""
    per_tonne, _ = lane_intensity(network)
    emission = np.zeros(model.n_columns)
    pairs = model.product_columns
    if pairs is None:
        weight = network.emissions.tonnes_per_unit
        flow = model.columns("flow_")
        emission[flow] = per_tonne * (weight if np.isfinite(weight) else 0.0)
    else:
        weight = np.nan_to_num(network.products.weight, nan=0.0)
        emission[model.columns("product_flow_")] = per_tonne[pairs.lane_position] * weight[pairs.product]
    return emission


def with_emissions(model: SparseModel, network: Network, cap: float | None = None) -> SparseModel:
    """Add the emissions of the module docstring to ``model`` (in place) and return it.

    Parameters
    ----------
    model : SparseModel
        Built from ``network``.
    network : Network
        With :attr:`~lanesolve.model.network.Network.emissions`; without them ``model`` is returned unchanged.
    cap : float, optional
        Tonnes CO2e the plan may emit; overrides the ``emissions_cap`` setting (the trade-off curve and the cap's
        value re-solve at other caps).
    """
    if network.emissions is None:
        return model
    settings = network.settings
    model.emission = column_emissions(model, network)
    if settings.carbon_price:
        model.costs["carbon"] = float(settings.carbon_price) * model.emission
    cap = settings.emissions_cap if cap is None else cap
    if cap is not None:
        import scipy.sparse as sp  # here, not at the top: see lanesolve.model.arrays

        row = sp.csr_matrix(model.emission.reshape(1, -1))
        model.row_blocks["emissions_cap"] = Block("emissions_cap", model.n_rows, np.array([""], dtype=object))
        model.matrix = sp.vstack([model.matrix, row], format="csr")
        model.row_lower = np.append(model.row_lower, -np.inf)
        model.row_upper = np.append(model.row_upper, float(cap))
    return model

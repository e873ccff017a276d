"""Which model a network needs, built once: single-product (:mod:`lanesolve.model.formulation`) or several
products (:mod:`lanesolve.model.product_model`), with the plan's emissions added when asked for
(:mod:`lanesolve.model.emissions`)."""

from __future__ import annotations

from lanesolve.model.arrays import SparseModel
from lanesolve.model.emissions import with_emissions
from lanesolve.model.formulation import build_sparse_model
from lanesolve.model.network import Network
from lanesolve.model.product_model import build_product_model


def build_model(network: Network, linking: bool = True, cap: float | None = None,
                single_product=build_sparse_model) -> SparseModel:
    """The one model of ``network`` every solver reads.

    Parameters
    ----------
    network : Network
    linking : bool
        As for :func:`lanesolve.model.formulation.build_sparse_model`.
    cap : float, optional
        Emissions cap in tonnes CO2e overriding the ``emissions_cap`` setting.
    single_product : callable
        The single-product builder (:func:`~lanesolve.model.formulation.build_sparse_model`); the solve stage
        passes the one it imported, so a test can stand in for it there.

    Examples
    --------
    >>> from lanesolve.model.network import make_network
    >>> net = make_network([{"id": "D", "supply": 8}], [{"id": "C", "demand": 5}],
    ...                    [{"origin": "D", "destination": "C", "cost_per_unit": 2}])
    >>> build_model(net).row_names
    ['supply_0', 'balance_0']
    """
    if network.products is not None:
        model = build_product_model(network, linking=linking)
    else:
        model = single_product(network, linking=linking)
    return with_emissions(model, network, cap)

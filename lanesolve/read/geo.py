"""Lane rates from distance: great-circle distances between nodes and per-unit costs computed from a rate.

When a lane's ``cost_per_unit`` is blank, its cost is ``rate_per_distance`` × distance, where the distance is the
lane's own ``distance`` when given, else the great-circle distance between its two nodes × ``circuity_factor`` (road
distance over great-circle distance; around 1.2 is common practice, a value recalled from memory -- measure it on
your own network when you can). The computed distance and where the cost came from are returned so the results can
show them.

The great-circle distance uses the haversine formula on a sphere. On the WGS84 ellipsoid the true geodesic differs
from it by up to about 0.5 % (the sphere cannot follow the flattening); that is far below the uncertainty of a
circuity factor, and the tests check the bound against geographiclib.
"""

from __future__ import annotations

import math
from collections.abc import Mapping

import numpy as np
import pandas as pd

from lanesolve.errors import Problem

#: Mean Earth radius R1 = (2a + b) / 3 of the GRS80 ellipsoid, in km, as recommended by the IUGG
#: (H. Moritz, "Geodetic Reference System 1980", Journal of Geodesy 74 (2000) 128-133).
EARTH_RADIUS_KM = 6371.0088

#: Kilometres in one international mile: exact by definition (international yard and pound agreement, 1959).
KM_PER_MILE = 1.609344

#: Distance units accepted by the ``distance_unit`` setting and how many km one unit is.
DISTANCE_UNITS = {"km": 1.0, "mi": KM_PER_MILE}

#: Where a lane's ``cost_per_unit`` came from (the ``cost_source`` column).
COST_GIVEN, COST_FROM_DISTANCE, COST_FROM_GREAT_CIRCLE = "given", "rate x distance", "rate x great circle x circuity"


def great_circle_km(lat1, lon1, lat2, lon2):
    """Great-circle distance in km between points given in decimal degrees (haversine formula).

    Parameters
    ----------
    lat1, lon1, lat2, lon2 : float or array_like
        Latitudes and longitudes in decimal degrees; arrays broadcast against each other.

    Returns
    -------
    float or numpy.ndarray
        Distance along the sphere of radius :data:`EARTH_RADIUS_KM`; NaN where any input is NaN.

    Notes
    -----
    The haversine form is used rather than the spherical law of cosines because it stays accurate for points close
    together (R. W. Sinnott, "Virtues of the Haversine", Sky and Telescope 68 (1984) 159). The central angle is taken
    as ``2 atan2(sqrt(h), sqrt(1 - h))`` rather than ``2 asin(sqrt(h))``: the same value, but it keeps full precision
    for nearly antipodal points, where the arcsine's slope is infinite; ``h`` is clipped to [0, 1] so rounding cannot
    produce NaN.

    Examples
    --------
    >>> round(float(great_circle_km(0.0, 0.0, 0.0, 1.0)), 3)  # one degree of the equator: R * pi / 180
    111.195
    """
    phi1, lam1, phi2, lam2 = (np.radians(np.asarray(v, dtype=float)) for v in (lat1, lon1, lat2, lon2))
    half = np.sin((phi2 - phi1) / 2.0) ** 2 + np.cos(phi1) * np.cos(phi2) * np.sin((lam2 - lam1) / 2.0) ** 2
    half = np.clip(half, 0.0, 1.0)
    distance = 2.0 * EARTH_RADIUS_KM * np.arctan2(np.sqrt(half), np.sqrt(1.0 - half))
    return distance if distance.ndim else float(distance)


def node_coordinates(network) -> pd.DataFrame:
    """The ``latitude`` and ``longitude`` of every node of a :class:`~lanesolve.model.network.Network`, indexed by id."""
    frames = [frame[["id", "latitude", "longitude"]] for frame in (network.depots, network.customers, network.hubs)]
    return pd.concat(frames, ignore_index=True).set_index("id")


def _coordinate_table(node_coords) -> pd.DataFrame:
    if isinstance(node_coords, pd.DataFrame):
        table = node_coords.set_index("id") if "id" in node_coords.columns else node_coords
        return table[["latitude", "longitude"]].astype(float)
    if isinstance(node_coords, Mapping):
        return pd.DataFrame.from_dict({k: tuple(v) for k, v in node_coords.items()}, orient="index",
                                      columns=["latitude", "longitude"]).astype(float)
    raise TypeError("node_coords must be a DataFrame (id, latitude, longitude) or a mapping id -> (lat, lon)")


def lane_costs_from_distance(
    network_lanes_frame: pd.DataFrame,
    node_coords,
    rate_per_distance: float | None,
    distance_unit: str = "km",
    circuity_factor: float = 1.0,
) -> tuple[pd.DataFrame, list[Problem]]:
    """Fill blank lane costs from distance.

    Parameters
    ----------
    network_lanes_frame : DataFrame
        Lanes with at least ``origin``, ``destination``, ``cost_per_unit`` (NaN where blank) and ``row``; an optional
        ``distance`` column (NaN where blank) is the lane's own distance in ``distance_unit``.
    node_coords : DataFrame or mapping
        Node coordinates: a frame with ``id`` (or the id as index), ``latitude``, ``longitude`` such as
        :func:`node_coordinates` returns, or a mapping ``id -> (latitude, longitude)``.
    rate_per_distance : float or None
        Cost per unit moved per distance unit (the ``rate_per_distance`` setting). Needed only when a cost is blank.
    distance_unit : {"km", "mi"}
        Unit of ``distance`` and of the rate.
    circuity_factor : float
        Road distance over great-circle distance, at least 1.

    Returns
    -------
    filled : DataFrame
        Same index as the input, columns ``cost_per_unit`` (given or computed; NaN where it cannot be computed),
        ``distance`` (in ``distance_unit``: given, or computed for lanes whose cost was blank; NaN otherwise) and
        ``cost_source`` (one of :data:`COST_GIVEN`, :data:`COST_FROM_DISTANCE`, :data:`COST_FROM_GREAT_CIRCLE`).
    problems : list of Problem
        One per lane whose cost cannot be computed (no rate, a node without coordinates, a negative distance),
        naming the Lanes row, and one per unusable setting.

    Examples
    --------
    >>> lanes = pd.DataFrame({"origin": ["A"], "destination": ["B"], "cost_per_unit": [float("nan")], "row": [2]})
    >>> filled, problems = lane_costs_from_distance(lanes, {"A": (0.0, 0.0), "B": (0.0, 1.0)}, 0.5, "km", 1.2)
    >>> round(float(filled.loc[0, "distance"]), 2), round(float(filled.loc[0, "cost_per_unit"]), 2), problems
    (133.43, 66.72, [])
    """
    lanes = network_lanes_frame
    problems: list[Problem] = []
    cost = lanes["cost_per_unit"].to_numpy(dtype=float)
    given_distance = (lanes["distance"].to_numpy(dtype=float) if "distance" in lanes.columns
                      else np.full(len(lanes), math.nan))
    source = np.full(len(lanes), COST_GIVEN, dtype=object)
    distance = given_distance.copy()
    blank = np.isnan(cost)
    if not blank.any():
        return _filled(lanes, cost, distance, source), problems

    rows = lanes["row"].to_numpy()
    sheets = lanes["sheet"].to_numpy() if "sheet" in lanes.columns else np.full(len(lanes), "Lanes", dtype=object)
    if rate_per_distance is None or not math.isfinite(rate_per_distance) or rate_per_distance < 0:
        # One problem for the setting; the validator names each lane row itself before it gets here.
        problems.append(Problem("Settings", None, "value", rate_per_distance,
                                f"{int(blank.sum())} lane(s) have a blank cost_per_unit, so the setting "
                                "rate_per_distance is needed and must be a number >= 0",
                                "add a Settings row rate_per_distance, or fill in the lanes' cost_per_unit"))
        return _filled(lanes, cost, distance, source), problems
    unit = str(distance_unit).strip().lower()
    settings_ok = True
    if unit not in DISTANCE_UNITS:
        problems.append(Problem("Settings", None, "value", distance_unit, "distance_unit must be km or mi",
                                "write km or mi"))
        settings_ok = False
    if not math.isfinite(circuity_factor) or circuity_factor < 1:
        # A road can never be shorter than the great circle between its ends.
        problems.append(Problem("Settings", None, "value", circuity_factor,
                                "circuity_factor must be a number >= 1 (road distance over great-circle distance)",
                                "around 1.2 is common practice"))
        settings_ok = False

    negative = blank & (given_distance < 0)
    for pos in np.flatnonzero(negative):
        problems.append(Problem(sheets[pos], int(rows[pos]), "distance", float(given_distance[pos]),
                                f"lane {lanes['origin'].iat[pos]} > {lanes['destination'].iat[pos]}: distance "
                                "must be >= 0", "correct the distance"))
    need_geometry = blank & np.isnan(given_distance)
    coords = _coordinate_table(node_coords)
    # Look coordinates up only for the lanes that need them: one vectorised reindex per end.
    ends = {}
    for end in ("origin", "destination"):
        ids = lanes[end].to_numpy()[need_geometry].astype(str)
        ends[end] = coords.reindex(ids).to_numpy().reshape(-1, 2)
    missing = {end: np.isnan(values).any(axis=1) for end, values in ends.items()}
    geometry_pos = np.flatnonzero(need_geometry)
    for k in np.flatnonzero(missing["origin"] | missing["destination"]):
        pos = geometry_pos[k]
        names = " and ".join(f"{end} '{lanes[end].iat[pos]}'" for end in ("origin", "destination")
                             if missing[end][k])
        problems.append(Problem(sheets[pos], int(rows[pos]), "cost_per_unit", None,
                                f"lane {lanes['origin'].iat[pos]} > {lanes['destination'].iat[pos]} has no "
                                f"cost_per_unit and no distance, and its {names} has no latitude/longitude, so its "
                                "cost cannot be computed",
                                "fill in cost_per_unit or distance, or the node's latitude and longitude"))
    if not settings_ok:
        return _filled(lanes, cost, distance, source), problems

    km = np.atleast_1d(great_circle_km(ends["origin"][:, 0], ends["origin"][:, 1],
                                       ends["destination"][:, 0], ends["destination"][:, 1]))
    # Circuity turns a great-circle distance into an estimated road distance; a distance typed in is already one.
    distance[geometry_pos] = km / DISTANCE_UNITS[unit] * circuity_factor
    from_given = blank & ~need_geometry & ~negative
    source[from_given] = COST_FROM_DISTANCE
    source[geometry_pos] = COST_FROM_GREAT_CIRCLE
    computed = from_given.copy()
    computed[geometry_pos] = True
    cost = np.where(computed, rate_per_distance * distance, cost)
    # Lanes with a problem keep a NaN cost (and the validator raises); their source stays "given" only in name.
    return _filled(lanes, cost, distance, source), problems


def _filled(lanes: pd.DataFrame, cost, distance, source) -> pd.DataFrame:
    return pd.DataFrame({"cost_per_unit": cost, "distance": distance, "cost_source": source}, index=lanes.index)

"""The Products, Supply, Demand and Modes sheets, the Lanes ``products`` and ``emission_factor`` columns and the
Hubs ``emission_per_tonne`` column: checked across sheets and turned into
:class:`~lanesolve.model.product_data.ProductData` and :class:`~lanesolve.model.product_data.EmissionData`.

Every problem joins the one pass of :func:`lanesolve.read.validate.validate`, naming sheet, row and column.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pandas as pd

from lanesolve import contract
from lanesolve.model.product_data import (DEMAND_COLUMNS, PRODUCT_COLUMNS, SUPPLY_COLUMNS, EmissionData,
                                          ProductData)
from lanesolve.model.network import Settings
from lanesolve.read import geo
from lanesolve.read.cells import default_values
from lanesolve.read.findings import Findings, did_you_mean
from lanesolve.read.sheets import Table

_P, _S, _D, _M = (contract.PRODUCTS.name, contract.SUPPLY.name, contract.DEMAND.name, contract.MODES.name)


def _optional(spec: contract.Sheet, column: str) -> contract.Sheet:
    """``spec`` with ``column`` no longer required (blank allowed)."""
    return dataclasses.replace(spec, columns=tuple(dataclasses.replace(c, required=False) if c.name == column else c
                                                   for c in spec.columns))


def sheet_specs(matched: dict) -> dict[str, contract.Sheet]:
    """The contract sheets to read: with a Supply sheet the Depots ``supply`` may be blank (no overall cap); with a
    Demand sheet the Customers ``demand`` is read only to report a value typed there."""
    specs = {spec.name: spec for spec in contract.INPUT_SHEETS}
    if _S in matched:
        specs[contract.DEPOTS.name] = _optional(contract.DEPOTS, "supply")
    if _D in matched:
        specs[contract.CUSTOMERS.name] = _optional(contract.CUSTOMERS, "demand")
    return specs


def _values(table: Table, name: str) -> pd.Series:
    """Column ``name`` of ``table`` as parsed, or what blanks parse to when the sheet lacks the column."""
    values = table.values.get(name)
    return values if values is not None else default_values(table.spec.column(name), len(table))


def _present(table: Table) -> bool:
    return table.sheet_name is not None and len(table) > 0


def _usable(table: Table, *names: str) -> np.ndarray:
    keep = np.ones(len(table), dtype=bool)
    for name in names:
        keep &= ~table.invalid.get(name, np.ones(len(table), dtype=bool))
    return keep


def _check_ids(table: Table, column: str, known: set[str], kind: str, sheet_hint: str, found: Findings) -> None:
    """Report every value of ``column`` that is not one of ``known`` (did-you-mean from ``known``)."""
    values = table.values.get(column)
    if values is None:
        return
    folded = {k.casefold(): k for k in known}
    for pos in np.flatnonzero(_usable(table, column)):
        value = values.iloc[pos]
        if value in known:
            continue
        near = folded.get(value.casefold()) or did_you_mean(value, {k: k for k in known})
        sheet, row, header = table.where(pos, column)
        found.add(sheet, row, header, value, f"'{value}' is not a {kind} on the {sheet_hint} sheet",
                  f"did you mean '{near}'?" if near else f"add it to the {sheet_hint} sheet, or correct the id")
        table.invalid[column][pos] = True


def _check_pairs(table: Table, first: str, found: Findings) -> None:
    """A (node, product) pair listed twice is an error at the second row."""
    keep = _usable(table, first, "product")
    frame = pd.DataFrame({"a": table.values[first], "p": table.values["product"]})[keep]
    rows = table.rows[keep]
    seen: dict[tuple, int] = {}
    for (a, p), row in zip(frame.itertuples(index=False, name=None), rows.tolist()):
        if (a, p) in seen:
            found.add(table.sheet_name, row, table.column_label("product"), p,
                      f"{first} '{a}' and product '{p}' are already listed in row {seen[(a, p)]}",
                      "keep one row per pair (add the figures together), or delete the repeated row")
        else:
            seen[(a, p)] = row


def _lane_products(lanes: Table, product_ids: set[str] | None, found: Findings) -> pd.Series:
    """The Lanes ``products`` column as a tuple of ids per record (None: every product)."""
    values = lanes.values.get("products")
    allowed = pd.Series([None] * len(lanes), dtype=object)
    if values is None:
        return allowed
    texts = values.to_numpy(dtype=object)
    filled = np.array([isinstance(t, str) and bool(t.strip()) for t in texts], dtype=bool)
    for pos in np.flatnonzero(_usable(lanes, "products") & filled):
        text = texts[pos]
        sheet, row, header = lanes.where(pos, "products")
        if product_ids is None:
            found.add(sheet, row, header, text, "the lane lists products, but the workbook has no Products sheet",
                      "add a Products sheet listing every product id, or clear this cell")
            continue
        ids = tuple(dict.fromkeys(part.strip() for part in text.split(",") if part.strip()))
        unknown = [i for i in ids if i not in product_ids]
        if unknown:
            near = did_you_mean(unknown[0], {k: k for k in product_ids})
            found.add(sheet, row, header, text,
                      f"{', '.join(repr(u) for u in unknown)} {'is not a product' if len(unknown) == 1 else 'are not products'} "
                      "on the Products sheet",
                      (f"did you mean '{near}'? " if near else "") + "list product ids separated by commas, or "
                      "leave the cell blank for every product")
            continue
        allowed.iat[pos] = ids
    return allowed


def read_goods(tables: dict[str, Table], frames: dict[str, pd.DataFrame] | None, lane_sources: pd.DataFrame | None,
               settings: Settings, found: Findings) -> tuple[ProductData | None, EmissionData | None]:
    """Check the product and emission inputs and build their data (see the module docstring).

    Parameters
    ----------
    tables : dict of str to Table
        Every contract sheet as read.
    frames : dict of str to DataFrame or None
        The node and lane frames (None when a sheet could not be read: only the table checks run). The Depots and
        Customers frames are updated in place: a blank overall supply becomes no limit, and a customer's demand
        with a Demand sheet is the sum of its products' demands.
    lane_sources : DataFrame or None
        :attr:`~lanesolve.model.network.Network.lane_sources` (typed and computed distances).
    settings : Settings
    found : Findings
        Problems join it. Causes: a Supply or Demand sheet or a Lanes ``products`` cell without a Products sheet; a
        duplicate product or mode; an unknown depot, customer or product id; a pair listed twice; a value in
        Customers ``demand`` beside a Demand sheet; several products and no Demand sheet; a product with demand and
        no supply anywhere; a factor without a source; a weight missing while emissions are asked for; a lane with
        no distance and no coordinates while emissions are asked for.
    """
    products_t, supply_t, demand_t, modes_t = tables[_P], tables[_S], tables[_D], tables[_M]
    lanes_t = tables[contract.LANES.name]
    has_products = _present(products_t)
    product_ids: set[str] | None = None
    if has_products:
        ids = products_t.values["product"]
        keep = _usable(products_t, "product")
        seen: dict[str, int] = {}
        for pos in np.flatnonzero(keep):
            value, row = ids.iloc[pos], int(products_t.rows[pos])
            if value in seen:
                found.add(products_t.sheet_name, row, products_t.column_label("product"), value,
                          f"product '{value}' is already listed in row {seen[value]}",
                          "give each product its own id, or delete the repeated row")
                products_t.invalid["product"][pos] = True
            else:
                seen[value] = row
        product_ids = set(seen)
    else:
        for table in (supply_t, demand_t):
            if _present(table):
                found.add(table.sheet_name, None, None, None,
                          f"the {table.spec.name} sheet needs a Products sheet listing the products",
                          "add a Products sheet (column product), or delete this sheet")
    allowed = _lane_products(lanes_t, product_ids, found)

    depot_ids = _ids(tables[contract.DEPOTS.name], "depot")
    customer_ids = _ids(tables[contract.CUSTOMERS.name], "customer")
    if has_products:
        for table, node, kind, sheet in ((supply_t, "depot", "depot", "Depots"),
                                         (demand_t, "customer", "customer", "Customers")):
            if _present(table) and table.complete:
                if depot_ids is not None and customer_ids is not None:
                    _check_ids(table, node, depot_ids if node == "depot" else customer_ids, kind, sheet, found)
                _check_ids(table, "product", product_ids, "product", "Products", found)
                _check_pairs(table, node, found)
        customers_t = tables[contract.CUSTOMERS.name]
        typed = customers_t.values.get("demand")
        if _present(demand_t) and typed is not None:
            for pos in np.flatnonzero(typed.notna().to_numpy() & _usable(customers_t, "demand")):
                sheet, row, header = customers_t.where(pos, "demand")
                found.add(sheet, row, header, float(typed.iloc[pos]),
                          "with a Demand sheet, demand by product lives there; this cell must be blank",
                          "move the figure to the Demand sheet (customer, product, demand) and clear this cell")
        if not _present(demand_t) and len(product_ids) > 1:
            found.add(products_t.sheet_name, None, None, None,
                      f"there are {len(product_ids)} products but no Demand sheet saying which product each customer "
                      "needs", "add a Demand sheet (customer, product, demand), or keep one product")
        if _present(supply_t) and _present(demand_t):
            _check_demand_has_supply(supply_t, demand_t, found)

    emissions_asked = _emissions_asked(tables, settings)
    _check_modes(modes_t, found)
    if frames is None:
        return None, None
    products = None
    if has_products:
        products = _product_data(tables, frames, allowed, settings)
        if emissions_asked:
            for pos in np.flatnonzero(_values(products_t, "weight_per_unit").isna().to_numpy()
                                      & _usable(products_t, "product")):
                if settings.tonnes_per_unit is None:
                    sheet, row, header = products_t.where(pos, "weight_per_unit")
                    found.add(sheet, row, header, None,
                              "emissions are asked for but this product has no weight_per_unit and the Settings "
                              "give no tonnes_per_unit", "enter the product's tonnes per unit, or the Settings row "
                              "tonnes_per_unit")
    elif emissions_asked and settings.tonnes_per_unit is None:
        found.add(contract.SETTINGS.name, None, "tonnes_per_unit", None,
                  "emissions are asked for (a carbon price, a cap or an emission factor) but the weight of a unit "
                  "is not known", "add the Settings row tonnes_per_unit (tonnes per unit), or a Products sheet "
                                  "with weight_per_unit")
    emissions = _emission_data(tables, frames, lane_sources, settings, found) if emissions_asked else None
    return products, emissions


def _ids(table: Table, column: str) -> set[str] | None:
    """The readable ids of a node sheet, or None when its id column could not be read."""
    values = table.values.get(column)
    return None if values is None or not table.complete else set(values[_usable(table, column)].tolist())


def _check_demand_has_supply(supply_t: Table, demand_t: Table, found: Findings) -> None:
    supplied = pd.Series(supply_t.values["supply"].to_numpy(dtype=float))[_usable(supply_t, "product", "supply")]
    products = supply_t.values["product"][_usable(supply_t, "product", "supply")]
    total = supplied.groupby(products.to_numpy()).sum()
    reported = set()
    keep = _usable(demand_t, "product", "demand")
    for pos in np.flatnonzero(keep):
        product = demand_t.values["product"].iloc[pos]
        if demand_t.values["demand"].iloc[pos] > 0 and total.get(product, 0.0) <= 0 and product not in reported:
            reported.add(product)
            sheet, row, header = demand_t.where(pos, "product")
            found.add(sheet, row, header, product,
                      f"customers need product '{product}' but no depot supplies it on the Supply sheet",
                      "add Supply rows for the depots that make it, or correct the product id")


def _check_modes(modes_t: Table, found: Findings) -> None:
    if not _present(modes_t):
        return
    factor, source = _values(modes_t, "emission_factor"), _values(modes_t, "source")
    seen: dict[str, int] = {}
    for pos in np.flatnonzero(_usable(modes_t, "mode")):
        key = modes_t.values["mode"].iloc[pos].casefold()
        if key in seen:
            sheet, row, header = modes_t.where(pos, "mode")
            found.add(sheet, row, header, modes_t.values["mode"].iloc[pos],
                      f"mode '{modes_t.values['mode'].iloc[pos]}' is already listed in row {seen[key]}",
                      "keep one row per mode (case is ignored)")
        else:
            seen[key] = int(modes_t.rows[pos])
        if not math.isnan(factor.iloc[pos]) and not str(source.iloc[pos] or "").strip():
            sheet, row, header = modes_t.where(pos, "source")
            found.add(sheet, row, header, None, "an emission factor is given without its source",
                      "name the publication, table and version it comes from (e.g. the GLEC Framework's default "
                      "intensities, with its version)")


def _emissions_asked(tables: dict[str, Table], settings: Settings) -> bool:
    """A carbon price, a cap, or any factor given: a lane's, a hub's per tonne, or a mode's that a lane uses (the
    template's default factors for modes no lane uses ask for nothing)."""
    if settings.carbon_price is not None or settings.emissions_cap is not None:
        return True
    modes_t, lanes_t = tables[_M], tables[contract.LANES.name]
    if _present(modes_t) and len(lanes_t):
        factor = _values(modes_t, "emission_factor").to_numpy(dtype=float)
        given = {str(m).casefold() for m, f in zip(modes_t.values["mode"].tolist(), factor) if f == f}
        used = {str(m).strip().casefold() for m in _values(lanes_t, "mode").tolist()}
        if given & used:
            return True
    for sheet, column in ((contract.LANES.name, "emission_factor"), (contract.HUBS.name, "emission_per_tonne")):
        values = tables[sheet].values.get(column)
        if values is not None and len(values) and (pd.to_numeric(values, errors="coerce").fillna(0) > 0).any():
            return True
    return False


def _product_data(tables, frames, allowed: pd.Series, settings: Settings) -> ProductData:
    products_t, supply_t, demand_t = tables[_P], tables[_S], tables[_D]
    weight = _values(products_t, "weight_per_unit").to_numpy(dtype=float)
    if settings.tonnes_per_unit is not None:
        weight = np.where(np.isnan(weight), float(settings.tonnes_per_unit), weight)
    keep = _usable(products_t, "product")
    first = ~products_t.values["product"].duplicated().to_numpy()
    keep &= first
    products = pd.DataFrame({"id": products_t.values["product"].to_numpy(dtype=object), "weight_per_unit": weight,
                             "capacity_use": _values(products_t, "capacity_use").to_numpy(dtype=float),
                             "row": products_t.rows})[keep][PRODUCT_COLUMNS].reset_index(drop=True)
    depots, customers = frames[contract.DEPOTS.name], frames[contract.CUSTOMERS.name]
    supply = None
    if _present(supply_t):
        supply = pd.DataFrame({"depot": supply_t.values["depot"].to_numpy(dtype=object),
                               "product": supply_t.values["product"].to_numpy(dtype=object),
                               "supply": supply_t.values["supply"].to_numpy(dtype=float),
                               "row": supply_t.rows})[SUPPLY_COLUMNS].reset_index(drop=True)
        depots["supply"] = depots["supply"].fillna(math.inf)
    own_penalty = dict(zip(customers["id"], customers["unmet_penalty"]))
    if _present(demand_t):
        demand = pd.DataFrame({"customer": demand_t.values["customer"].to_numpy(dtype=object),
                               "product": demand_t.values["product"].to_numpy(dtype=object),
                               "demand": demand_t.values["demand"].to_numpy(dtype=float),
                               "unmet_penalty": _values(demand_t, "unmet_penalty").to_numpy(dtype=float),
                               "row": demand_t.rows})
        # The customer's own penalty already holds the Settings default where it was blank.
        demand["unmet_penalty"] = demand["unmet_penalty"].fillna(demand["customer"].map(own_penalty))
        totals = demand.groupby("customer")["demand"].sum()
        customers["demand"] = customers["id"].map(totals).fillna(0.0).astype(float)
    else:  # one product: the Customers demand is its demand
        demand = pd.DataFrame({"customer": customers["id"], "product": products["id"].iloc[0] if len(products) else "",
                               "demand": customers["demand"], "unmet_penalty": customers["unmet_penalty"],
                               "row": customers["row"]})
    return ProductData(products, supply, demand[DEMAND_COLUMNS].reset_index(drop=True),
                       allowed.reset_index(drop=True))


def _emission_data(tables, frames, lane_sources, settings: Settings, found: Findings) -> EmissionData:
    lanes = frames[contract.LANES.name]
    lanes_t, modes_t = tables[contract.LANES.name], tables[_M]
    modes = pd.DataFrame({"mode": pd.Series(dtype=object), "emission_factor": pd.Series(dtype=float),
                          "source": pd.Series(dtype=object)})
    if _present(modes_t):
        modes = pd.DataFrame({"mode": modes_t.values["mode"].to_numpy(dtype=object),
                              "emission_factor": _values(modes_t, "emission_factor").to_numpy(dtype=float),
                              "source": _values(modes_t, "source").fillna("").astype(str).to_numpy(dtype=object)})
        modes = modes[_usable(modes_t, "mode")].drop_duplicates("mode")
    by_mode = {m.casefold(): (f, s) for m, f, s in modes.itertuples(index=False, name=None) if not math.isnan(f)}
    own = lanes_t.values.get("emission_factor")
    own = own.to_numpy(dtype=float) if own is not None else np.full(len(lanes), math.nan)
    mode_key = lanes["mode"].astype(str).str.strip().str.casefold()
    factor = np.where(np.isnan(own), mode_key.map(lambda m: by_mode.get(m, (math.nan, ""))[0]).to_numpy(dtype=float),
                      own)
    source = np.where(np.isnan(own), mode_key.map(lambda m: by_mode.get(m, (math.nan, ""))[1]).to_numpy(dtype=object),
                      "Lanes emission_factor")
    per_km = geo.DISTANCE_UNITS.get(settings.distance_unit, 1.0)
    km = (lane_sources["distance"].to_numpy(dtype=float) * per_km if lane_sources is not None
          else np.full(len(lanes), math.nan))
    if np.isnan(km).any():
        nodes = pd.concat([frames[name][["id", "latitude", "longitude"]] for name in
                           (contract.DEPOTS.name, contract.CUSTOMERS.name, contract.HUBS.name)]).drop_duplicates("id")
        coords = nodes.set_index("id")
        a = coords.reindex(lanes["origin"].to_numpy())
        b = coords.reindex(lanes["destination"].to_numpy())
        circle = geo.great_circle_km(a["latitude"].to_numpy(), a["longitude"].to_numpy(), b["latitude"].to_numpy(),
                                     b["longitude"].to_numpy()) * float(settings.circuity_factor)
        km = np.where(np.isnan(km), circle, km)
    missing = np.isnan(km) & lanes["active"].to_numpy(dtype=bool)
    for pos in np.flatnonzero(missing):
        sheet, row, header = lanes_t.where(pos, "distance")
        found.add(sheet, row, header, None,
                  f"emissions are asked for, but lane {lanes.at[pos, 'origin']} > {lanes.at[pos, 'destination']} has "
                  "no distance and its ends lack coordinates",
                  "enter the lane's distance, or the latitude and longitude of both ends")
    hubs = frames[contract.HUBS.name]
    per_tonne = tables[contract.HUBS.name].values.get("emission_per_tonne")
    hub_rate = (per_tonne.fillna(0.0).to_numpy(dtype=float) if per_tonne is not None else np.zeros(len(hubs)))
    return EmissionData(lane_km=pd.Series(km, index=lanes.index), lane_factor=pd.Series(factor, index=lanes.index),
                        lane_factor_source=pd.Series(source, index=lanes.index, dtype=object),
                        hub_per_tonne=hub_rate[:len(hubs)],
                        tonnes_per_unit=math.nan if settings.tonnes_per_unit is None else float(
                            settings.tonnes_per_unit), mode_factors=modes.reset_index(drop=True))

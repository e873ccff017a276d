"""The default emission factors the template's Modes sheet ships with, each with its published source.

Only values read from the publication they cite are listed. The mode labels say what each default is an average
of; a lane uses a default when its ``mode`` is that label (or when the planner renames the row to the label the lanes
use), so a workbook made from the template asks for no emissions until a planner chooses a factor. Modes with no verified default (rail, barge, sea,
air) are still listed with a blank factor, so their lanes show as *unknown* until the planner enters a factor:
ISO 14083:2023 prefers carrier-specific figures over any default, and defaults are averages.

The UK rows are the *Grand Total GHG* column (direct plus indirect emissions, i.e. well-to-wheel) of the UK
Government's 2012 Guidelines to Defra / DECC's GHG Conversion Factors for Company Reporting, Annex 7 (Freight
Transport Conversion Tables, last updated April 2012), Table 7e "Diesel HGV Road Freight Conversion Factors (UK
Average Vehicle Loads): Tonne.km Basis".
"""

from __future__ import annotations

_UK_2012 = ("UK Government, 2012 Guidelines to Defra / DECC's GHG Conversion Factors for Company Reporting, Annex 7 "
            "(last updated Apr-12), Table 7e, row '{row}', column Grand Total GHG (direct + indirect, "
            "well-to-wheel), kg CO2e per tonne.km")
_NO_DEFAULT = ("no default shipped: enter your carrier's well-to-wheel factor (kg CO2e per tonne-km) with its source; "
               "until then lanes of this mode emit 'unknown'")

#: (mode, kg CO2e per tonne-km or None, source) rows of the template's Modes sheet.
DEFAULT_MODE_FACTORS: tuple[tuple[str, float | None, str], ...] = (
    ("road HGV UK average", 0.14993, _UK_2012.format(row="ALL HGVs UK average")),
    ("road articulated UK average", 0.10700, _UK_2012.format(row="All artics UK average")),
    ("road rigid UK average", 0.30139, _UK_2012.format(row="All rigids UK average")),
    ("rail", None, _NO_DEFAULT),
    ("barge", None, _NO_DEFAULT),
    ("sea", None, _NO_DEFAULT),
    ("air", None, _NO_DEFAULT),
)

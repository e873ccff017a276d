"""The default emission factors the template's Modes sheet ships with, each with its published source.

Only values read from the publication they cite are listed. The mode labels say what each default is an average
of; a lane uses a default when its ``mode`` is that label (or when the planner renames the row to the label the lanes
use, ``rail`` say), so a workbook made from the template asks for no emissions until a planner chooses a factor.
Defaults are averages: ISO 14083:2023 prefers carrier-specific figures over any default. A mode with no verified
default (barge: the publication below has no inland-waterway factor) is listed with a blank factor, so its lanes
show as *unknown* until the planner enters one.

Every factor is from one edition: the UK Government's GHG Conversion Factors for Company Reporting 2025
(Department for Energy Security and Net Zero / Defra, flat-file format, column "GHG Conversion Factor 2025", unit
tonne.km, "kg CO2e"). That edition gives each freight mode's emissions in two sheets, tank-to-wheel on *Freighting
goods* and well-to-tank on *WTT- delivery vehs & freight*, under the same row labels; a default here is their sum,
the well-to-wheel intensity the Modes sheet asks for. The air rows are the *Without RF* ones (radiative forcing of
aviation's non-CO2 effects left out; the publication's *With RF* rows add it).
"""

from __future__ import annotations

_SOURCE = ("UK Government GHG Conversion Factors for Company Reporting 2025 (DESNZ / Defra), flat file, column "
           "'GHG Conversion Factor 2025', kg CO2e per tonne.km, row '{row}': sheet 'Freighting goods' {ttw} "
           "(tank-to-wheel) + sheet 'WTT- delivery vehs & freight' {wtt} (well-to-tank) = {wtw} well-to-wheel")
_NO_DEFAULT = ("no default shipped: enter your carrier's well-to-wheel factor (kg CO2e per tonne-km) with its source; "
               "until then lanes of this mode emit 'unknown'")

#: (mode label, published row as Level 2 > Level 3 > Level 4 / Column Text, tank-to-wheel, well-to-tank) as read in
#: the 2025 edition: the first number from sheet *Freighting goods*, the second from *WTT- delivery vehs & freight*.
PUBLISHED_2025: tuple[tuple[str, str, float, float], ...] = (
    ("road HGV UK average", "HGV (all diesel) > All HGVs > Average laden", 0.10163, 0.02359),
    ("road articulated UK average", "HGV (all diesel) > All artics > Average laden", 0.07800, 0.01823),
    ("road rigid UK average", "HGV (all diesel) > All rigids > Average laden", 0.19748, 0.04332),
    ("rail freight train UK average", "Rail > Freight train", 0.02779, 0.00691),
    ("sea container ship average", "Cargo ship > Container ship > Average", 0.01612, 0.00365),
    ("sea bulk carrier average", "Cargo ship > Bulk carrier > Average", 0.00353, 0.00080),
    ("air freight short-haul", "Freight flights > Short-haul, to/from UK > Without RF", 0.75539, 0.20515),
    ("air freight long-haul", "Freight flights > Long-haul, to/from UK > Without RF", 0.53130, 0.13516),
)

#: Modes listed without a factor: no default lanesolve could verify.
WITHOUT_DEFAULT: tuple[str, ...] = ("barge",)


def _row(mode: str, row: str, ttw: float, wtt: float) -> tuple[str, float, str]:
    # The published figures have five decimals; rounding the sum to five drops the binary-fraction noise only.
    wtw = round(ttw + wtt, 5)
    return mode, wtw, _SOURCE.format(row=row, ttw=f"{ttw:.5f}", wtt=f"{wtt:.5f}", wtw=f"{wtw:.5f}")


#: (mode, kg CO2e per tonne-km or None, source) rows of the template's Modes sheet.
DEFAULT_MODE_FACTORS: tuple[tuple[str, float | None, str], ...] = (
    *(_row(*published) for published in PUBLISHED_2025),
    *((mode, None, _NO_DEFAULT) for mode in WITHOUT_DEFAULT),
)

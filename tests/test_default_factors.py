"""The default emission factors the template's Modes sheet ships, read back from a written template and compared
with the published values, each quoted with its source beside it."""

import math

import openpyxl
import pytest

from lanesolve.write.template import write_template

# Source of every value below: UK Government GHG Conversion Factors for Company Reporting 2025 (Department for Energy
# Security and Net Zero / Defra), flat-file format, column "GHG Conversion Factor 2025", UOM "tonne.km", GHG/Unit
# "kg CO2e". Tank-to-wheel from sheet (Level 1) "Freighting goods", well-to-tank from "WTT- delivery vehs & freight".
# Read in the public copy of that flat file split by sheet in github.com/scope3emissiontest-oss/JulesProject at
# commit 6cec8668396f94176f53bd1bc86fa5ebd2ba5cfc, files defra_factors_2025_v2/category_freighting_goods.csv and
# defra_factors_2025_v2/category_wtt_delivery_vehs_&_freight.csv. Two rows agree with a second copy, Climatiq's
# pages of the same 2025 flat file: "Container ship (over 8000 TEU)" 0.01266 (climatiq.io/data/emission-factor/
# 269e2737-716c-4d55-9493-f6df89904af8) and WTT "Rail freight train" 0.00691 (.../d5089ae2-a5cb-4aac-bde3-
# 9543b8951b56); in the JulesProject files: Container ship > 8000+ TEU 0.01266, WTT- rail > Freight train 0.00691.
PUBLISHED = {
    # mode label: (tank-to-wheel, well-to-tank), row as Level 2 > Level 3 > Level 4 / Column Text
    "road HGV UK average": (0.10163, 0.02359),          # HGV (all diesel) > All HGVs > Average laden
    "road articulated UK average": (0.078, 0.01823),    # HGV (all diesel) > All artics > Average laden
    "road rigid UK average": (0.19748, 0.04332),        # HGV (all diesel) > All rigids > Average laden
    "rail freight train UK average": (0.02779, 0.00691),  # Rail > Freight train
    "sea container ship average": (0.01612, 0.00365),   # Cargo ship > Container ship > Average
    "sea bulk carrier average": (0.00353, 0.0008),      # Cargo ship > Bulk carrier > Average
    "air freight short-haul": (0.75539, 0.20515),       # Freight flights > Short-haul, to/from UK > Without RF
    "air freight long-haul": (0.5313, 0.13516),         # Freight flights > Long-haul, to/from UK > Without RF
}
#: Modes listed without a factor: no default lanesolve could verify (the 2025 edition has no inland-waterway row).
WITHOUT_DEFAULT = {"barge"}


@pytest.fixture(scope="module")
def modes(tmp_path_factory):
    path = tmp_path_factory.mktemp("template") / "blank.xlsx"
    write_template(path)
    sheet = openpyxl.load_workbook(path)["Modes"]
    rows = list(sheet.iter_rows(values_only=True))
    assert rows[0] == ("mode", "emission_factor", "source")
    return {mode: (factor, source) for mode, factor, source in rows[1:]}


def test_shipped_factors_are_the_published_well_to_wheel_sums(modes):
    # Well-to-wheel = tank-to-wheel + well-to-tank (ISO 14083:2023 and the GLEC Framework report the sum).
    for mode, (ttw, wtt) in PUBLISHED.items():
        factor, source = modes[mode]
        assert factor == pytest.approx(ttw + wtt, abs=5e-6)
        assert "2025" in source and "Freighting goods" in source and "WTT- delivery vehs & freight" in source
        assert "well-to-wheel" in source
        # The source text quotes both published figures, five decimals as published.
        assert f"{ttw:.5f}" in source and f"{wtt:.5f}" in source


def test_published_rows_named_in_each_source(modes):
    # Each row's source names the publication's own row labels (Level 2 > Level 3 > Level 4 / Column Text).
    assert "All HGVs > Average laden" in modes["road HGV UK average"][1]
    assert "All artics > Average laden" in modes["road articulated UK average"][1]
    assert "All rigids > Average laden" in modes["road rigid UK average"][1]
    assert "Rail > Freight train" in modes["rail freight train UK average"][1]
    assert "Container ship > Average" in modes["sea container ship average"][1]
    assert "Bulk carrier > Average" in modes["sea bulk carrier average"][1]
    assert "Short-haul, to/from UK > Without RF" in modes["air freight short-haul"][1]
    assert "Long-haul, to/from UK > Without RF" in modes["air freight long-haul"][1]


def test_every_shipped_row_names_its_source_and_unverified_modes_have_no_factor(modes):
    assert set(modes) == set(PUBLISHED) | WITHOUT_DEFAULT
    for mode, (factor, source) in modes.items():
        assert source and source.strip()
        if mode in WITHOUT_DEFAULT:
            assert factor is None or (isinstance(factor, float) and math.isnan(factor))


def test_no_default_label_is_a_bare_mode_name(modes):
    # A default applies only to lanes whose mode is its full label, so a workbook whose lanes say "rail" or "road"
    # asks for no emissions until the planner renames a row (README "Modes").
    assert not {"road", "rail", "sea", "air"} & {m.casefold() for m in modes}


def test_shipped_defaults_rank_the_modes_as_the_published_tables_do(modes):
    # Per tonne-km a bulk carrier emits less than a container ship, then a freight train, the HGV averages and air
    # freight: the order of the published 2025 well-to-wheel sums above (common practice ranks the modes alike).
    order = ["sea bulk carrier average", "sea container ship average", "rail freight train UK average",
             "road articulated UK average", "road HGV UK average", "road rigid UK average",
             "air freight long-haul", "air freight short-haul"]
    shipped = [modes[m][0] for m in order]
    assert shipped == sorted(shipped) and len(set(shipped)) == len(shipped)

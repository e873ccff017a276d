"""The default emission factors the template's Modes sheet ships, read back from a written template and compared
with the published values, each quoted with its source beside it."""

import math

import openpyxl
import pytest

from lanesolve.write.template import write_template

# UK Government, 2012 Guidelines to Defra / DECC's GHG Conversion Factors for Company Reporting, Annex 7 (Freight
# Transport Conversion Tables, last updated Apr-12), Table 7e "Diesel HGV Road Freight Conversion Factors (UK
# Average Vehicle Loads): Tonne.km Basis", column "Grand Total GHG" (kg CO2e per tonne.km, direct + indirect):
PUBLISHED = {
    "road HGV UK average": 0.14993,          # row "ALL HGVs UK average" (direct 0.12366 + indirect 0.02627)
    "road articulated UK average": 0.10700,  # row "All artics UK average" (direct 0.08825 + indirect 0.01875)
    "road rigid UK average": 0.30139,        # row "All rigids UK average" (direct 0.24858 + indirect 0.05281)
}
#: Modes listed without a factor: no default lanesolve could verify, so none is shipped.
WITHOUT_DEFAULT = {"rail", "barge", "sea", "air"}


@pytest.fixture(scope="module")
def modes(tmp_path_factory):
    path = tmp_path_factory.mktemp("template") / "blank.xlsx"
    write_template(path)
    sheet = openpyxl.load_workbook(path)["Modes"]
    rows = list(sheet.iter_rows(values_only=True))
    assert rows[0] == ("mode", "emission_factor", "source")
    return {mode: (factor, source) for mode, factor, source in rows[1:]}


def test_shipped_factors_are_the_published_values(modes):
    for mode, value in PUBLISHED.items():
        factor, source = modes[mode]
        assert factor == pytest.approx(value, abs=5e-6)
        # The published table is the sum of its direct and indirect columns: well-to-wheel, as the Modes sheet asks.
        assert "Table 7e" in source and "2012" in source and "well-to-wheel" in source


def test_every_shipped_row_names_its_source_and_unverified_modes_have_no_factor(modes):
    assert set(modes) == set(PUBLISHED) | WITHOUT_DEFAULT
    for mode, (factor, source) in modes.items():
        assert source and source.strip()
        if mode in WITHOUT_DEFAULT:
            assert factor is None or (isinstance(factor, float) and math.isnan(factor))


def test_published_rows_add_up_direct_and_indirect():
    # The table's own arithmetic (Table 7e): grand total = total direct + total indirect.
    assert 0.12366 + 0.02627 == pytest.approx(PUBLISHED["road HGV UK average"], abs=1e-5)
    assert 0.08825 + 0.01875 == pytest.approx(PUBLISHED["road articulated UK average"], abs=1e-5)
    assert 0.24858 + 0.05281 == pytest.approx(PUBLISHED["road rigid UK average"], abs=1e-5)

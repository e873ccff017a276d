"""The HTML summary in a real browser: headless Chromium (Debian packages chromium and chromium-driver).

The bundled example is solved through the pipeline, which writes ``<stem>-summary.html``; Chromium loads that file
and the tests check what a reader would get: a page that is not blank, no sideways scrolling at a desktop mail
pane's width (800 px) or a phone's (375 px), no request for anything but the file itself, charts that decode, and
key figures equal to the plan's. Chromium is the independent party here: it parses, lays out and paints the page.

Skipped when selenium, ``chromium`` or ``chromedriver`` is missing (``.ci/run`` installs the two packages when it
runs as root).
"""

from __future__ import annotations

import base64
import io
import json
import math
import re
import shutil
from pathlib import Path

import pytest

webdriver = pytest.importorskip("selenium.webdriver")
PIL_Image = pytest.importorskip("PIL.Image")

CHROMIUM = shutil.which("chromium") or ("/usr/bin/chromium" if Path("/usr/bin/chromium").exists() else None)
CHROMEDRIVER = shutil.which("chromedriver") or (
    "/usr/bin/chromedriver" if Path("/usr/bin/chromedriver").exists() else None)
# A real browser is slow to start: CI runs these (pytest -m slow), the quick start does not.
pytestmark = [pytest.mark.slow,
              pytest.mark.skipif(not (CHROMIUM and CHROMEDRIVER), reason="chromium and chromedriver not installed")]

EXAMPLE = Path(__file__).resolve().parent.parent / "example_workbooks" / "orvale_larder_supply.xlsx"

# The flags keep the browser quiet and self-contained: no GPU, no QUIC, no first-run pages, no background
# fetches (component updates, sync), so any network request seen in the log comes from the page itself.
FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync"]

#: Widths checked: a desktop mail pane and a phone (375 CSS px is the common small-phone width; common practice).
WIDTHS = (800, 375)


@pytest.fixture(scope="module")
def solved(tmp_path_factory):
    from lanesolve.pipeline import run

    folder = tmp_path_factory.mktemp("browser")
    outcome = run(EXAMPLE, output=folder / "solved.xlsx")
    return outcome, Path(outcome.info.summary_path)


@pytest.fixture(scope="module")
def browser(tmp_path_factory):
    from selenium.webdriver.chrome.service import Service

    options = webdriver.ChromeOptions()
    options.binary_location = CHROMIUM
    for flag in FLAGS:
        options.add_argument(flag)
    options.add_argument(f"--user-data-dir={tmp_path_factory.mktemp('chromium-profile')}")
    # Chromium's DevTools events (Network.*) are handed to selenium's "performance" log.
    options.set_capability("goog:loggingPrefs", {"performance": "ALL"})
    driver = webdriver.Chrome(service=Service(CHROMEDRIVER), options=options)
    try:
        yield driver
    finally:
        driver.quit()


def _set_width(driver, width: int, height: int = 900) -> None:
    # Device metrics through the DevTools protocol: the viewport is exactly `width` CSS px, as on a phone when
    # mobile is set (the page's viewport meta tag then applies).
    driver.execute_cdp_cmd("Emulation.setDeviceMetricsOverride",
                           {"width": width, "height": height, "deviceScaleFactor": 1, "mobile": width < 600})


def _load(driver, path: Path, width: int) -> None:
    _set_width(driver, width)
    driver.get_log("performance")  # drop events from earlier pages
    driver.get(path.resolve().as_uri())


def _full_page_png(driver) -> bytes:
    shot = driver.execute_cdp_cmd("Page.captureScreenshot", {"format": "png", "captureBeyondViewport": True})
    return base64.b64decode(shot["data"])


def _number(text: str) -> float:
    """The first number in a figure as shown ("89,761.85 EUR" -> 89761.85)."""
    match = re.search(r"-?[0-9][0-9,]*(\.[0-9]+)?", text)
    assert match, f"no number in {text!r}"
    return float(match.group(0).replace(",", ""))


@pytest.mark.parametrize("width", WIDTHS)
def test_page_is_painted_and_not_blank(browser, solved, width, tmp_path):
    _load(browser, solved[1], width)
    png = _full_page_png(browser)
    (tmp_path / f"summary-{width}.png").write_bytes(png)  # kept in pytest's temp folder for a look by eye
    image = PIL_Image.open(io.BytesIO(png)).convert("RGB")
    assert width - 20 <= image.width <= width  # less a vertical scroll bar, if the browser draws one
    colours = image.getcolors(maxcolors=1 << 24)
    # A blank or unstyled page has a handful of colours; text anti-aliasing and the charts give hundreds.
    assert len(colours) > 200, len(colours)
    non_white = sum(count for count, rgb in colours if min(rgb) < 240)
    assert non_white / (image.width * image.height) > 0.05


@pytest.mark.parametrize("width", WIDTHS)
def test_no_horizontal_overflow(browser, solved, width):
    _load(browser, solved[1], width)
    inner, scroll = browser.execute_script(
        "return [window.innerWidth, document.documentElement.scrollWidth];")
    assert inner == width
    assert scroll <= inner, f"page is {scroll} px wide in a {inner} px window"


def test_no_network_requests(browser, solved):
    page_url = solved[1].resolve().as_uri()
    _load(browser, solved[1], 800)
    events = [json.loads(entry["message"])["message"] for entry in browser.get_log("performance")]
    urls = [e["params"]["request"]["url"] for e in events if e.get("method") == "Network.requestWillBeSent"]
    # The page's own load is logged, so the log works and an outside request would show up here too.
    assert page_url in urls
    outside = [u for u in urls if u != page_url and not u.startswith("data:")]
    assert outside == []
    sockets = [e for e in events if e.get("method", "").startswith("Network.webSocket")]
    assert sockets == []


def test_charts_decode_in_the_browser(browser, solved):
    _load(browser, solved[1], 800)
    images = browser.execute_script(
        "return Array.from(document.images).map(i => [i.complete, i.naturalWidth, i.src.slice(0, 26)]);")
    # The example has coordinates, so: cost breakdown, network map, utilisation.
    assert len(images) == 3
    for complete, natural_width, src in images:
        assert complete and natural_width > 0, src
        assert src.startswith("data:image/svg+xml")


def test_figures_shown_equal_the_plan(browser, solved):
    from selenium.webdriver.common.by import By

    outcome, summary = solved
    result, network = outcome.result, outcome.network
    _load(browser, summary, 800)

    def shown(key: str) -> str:
        return browser.find_element(By.ID, f"kpi-{key}").text

    assert shown("status") == "Optimal plan"
    # Money is shown with 2 decimals, so it may differ from the solver's float by half a cent.
    assert math.isclose(_number(shown("total-cost")), result.total_cost, abs_tol=0.005 + 1e-9)
    unmet = float(result.unmet["quantity"].sum())
    assert math.isclose(_number(shown("unmet")), unmet, abs_tol=0.005 + 1e-9)
    # Delivered = demand from the workbook minus what the plan leaves short.
    delivered = float(network.customers["demand"].sum()) - unmet
    assert math.isclose(_number(shown("delivered")), delivered, abs_tol=0.005 + 1e-9)
    assert int(_number(shown("lanes-used"))) == len(result.flows)
    # The sum of the flows into customers equals what the page says was delivered (an independent recount).
    customers = set(network.customers["id"])
    inbound = float(result.flows[result.flows["destination"].isin(customers)]["flow"].sum())
    assert math.isclose(inbound, _number(shown("delivered")), abs_tol=0.005 + 1e-6)


def test_cost_chart_numbers_equal_the_cost_table(browser, solved):
    # The planners' finding: the chart said transport 91 % / handling 9 % beside a table with a third component.
    # The browser reads the table as laid out; the chart's figures come from the SVG the page's <img> shows.
    from selenium.webdriver.common.by import By

    from test_cost_agreement import chart_rows

    _load(browser, solved[1], 800)
    table = [tuple(cell.text for cell in row.find_elements(By.TAG_NAME, "td")[:3])
             for row in browser.find_elements(By.CSS_SELECTOR, "#cost-table tr[data-key]")]
    src = browser.execute_script(
        "return Array.from(document.images).find(i => i.alt.startsWith('Cost breakdown')).src;")
    chart = chart_rows(base64.b64decode(src.split(",", 1)[1]).decode("utf-8"))
    assert table and chart == table
    assert sum(_number(share) for _label, _amount, share in table) == pytest.approx(100.0, abs=0.05 * len(table))
    assert math.isclose(sum(_number(amount) for _label, amount, _share in table), solved[0].result.total_cost,
                        abs_tol=0.005 * len(table) + 1e-9)

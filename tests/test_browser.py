"""The map and the report in a real browser: Debian's Chromium, headless, offline.

Selenium drives the system Chromium through the system ChromeDriver
(``/usr/bin/chromium``, ``/usr/bin/chromedriver``, Debian packages
``chromium`` and ``chromium-driver``). Every request other than ``file:``
(and the page's own ``data:`` and ``about:`` URLs) is blocked twice over:
the DevTools protocol's ``Network.setBlockedURLs`` blocks ``http(s)`` and
``ws(s)`` addresses, and a host-resolver rule makes every host name
unresolvable. So the pages are shown exactly as on a laptop with no network:
only base map tiles are missing.

The tests click with real mouse events (DevTools ``Input.dispatchMouseEvent``
at a point where the element is the topmost one) and read what the page
shows. Screenshots of the pages are saved in tests/artifacts/ (git-ignored).
Skipped, with the reason, when Chromium or ChromeDriver is not installed;
with ``HUBNET_REQUIRE_BROWSER=1`` (as in CI) a missing browser is an error.
"""

from __future__ import annotations

import base64
import json
import os
import re
import shutil
import tempfile
import time
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Any

import pandas as pd
import pytest
from freightdata import freight_run
from reportdata import SCENARIO_NAME, SITES, XSS_NAME, tiny_run

from hubnet.api import run_scenario
from hubnet.report.html import write_report
from hubnet.report.maps import MAX_ZOOM, TERMINAL_LABELS_IN_VIEW, write_map

REPO_ROOT = Path(__file__).resolve().parent.parent
ARTIFACTS = REPO_ROOT / "tests" / "artifacts"
DEMO_CONFIG = REPO_ROOT / "configs" / "demo.toml"

CHROMIUM = next(
    (p for p in map(shutil.which, ("chromium", "chromium-browser", "google-chrome")) if p), None
)
CHROMEDRIVER = shutil.which("chromedriver")
NO_BROWSER = (
    "no Chromium found: browser tests need the Debian packages chromium and "
    "chromium-driver (apt-get install -y chromium chromium-driver)"
)
if CHROMIUM is None or CHROMEDRIVER is None:
    # CI sets HUBNET_REQUIRE_BROWSER=1, so a missing browser fails there
    # instead of silently skipping the tests.
    if os.environ.get("HUBNET_REQUIRE_BROWSER") == "1":
        raise RuntimeError(NO_BROWSER + ", and HUBNET_REQUIRE_BROWSER=1 asks for them")
    pytest.skip(NO_BROWSER, allow_module_level=True)
webdriver = pytest.importorskip(
    "selenium.webdriver", reason="selenium is not installed: pip install -e '.[test]'"
)

#: Hosts of the base map tiles: the only requests a map page may try to make.
TILE_HOSTS = ("server.arcgisonline.com", "tile.openstreetmap.org")

#: Run in every frame before its scripts: record dialogs and script errors, and
#: let dialogs open as usual (so Selenium sees them too).
HOOK = """
window.__hubnet = {dialogs: [], errors: []};
for (const name of ["alert", "confirm", "prompt"]) {
  const original = window[name];
  window[name] = function (message) {
    window.__hubnet.dialogs.push(name + ": " + String(message));
    return original.apply(this, arguments);
  };
}
window.addEventListener("error", (e) => window.__hubnet.errors.push(String(e.message)));
window.addEventListener("unhandledrejection", (e) => window.__hubnet.errors.push(String(e.reason)));
const consoleError = console.error;
console.error = function () {
  window.__hubnet.errors.push(Array.from(arguments).map(String).join(" "));
  return consoleError.apply(this, arguments);
};
"""

#: A function giving a point on an SVG element where it is the topmost element
#: (viewport pixels), or null: along a line, or the middle of a circle.
POINT_FN = """
function hubnetPointOn(el) {
  const tries = [0.5, 0.42, 0.58, 0.34, 0.66, 0.26, 0.74, 0.18, 0.82, 0.1, 0.9];
  if (!el.classList.contains("hubnet-site") && el.getTotalLength() > 0) {
    const length = el.getTotalLength();
    const m = el.getScreenCTM();
    for (const f of tries) {
      const p = el.getPointAtLength(length * f);
      const x = m.a * p.x + m.c * p.y + m.e, y = m.b * p.x + m.d * p.y + m.f;
      if (document.elementFromPoint(x, y) === el) { return [x, y]; }
    }
    return null;
  }
  const r = el.getBoundingClientRect();
  const x = r.left + r.width / 2, y = r.top + r.height / 2;
  return document.elementFromPoint(x, y) === el ? [x, y] : null;
}
"""
POINT_ON = POINT_FN + "return hubnetPointOn(arguments[0]);"
CLICKABLE_LEGS = (
    POINT_FN + "return [...document.querySelectorAll('path.hubnet-leg')]"
    ".filter(p => hubnetPointOn(p) !== null).length;"
)


#: The page's Leaflet map object (folium names it ``map_<id>``).
THE_MAP = "window[Object.keys(window).find(k => /^map_[0-9a-f]+$/.test(k))]"


@pytest.fixture(scope="module")
def browser() -> Iterator[Any]:
    """Headless Chromium with the network cut off; closed after the module."""
    from selenium.webdriver.chrome.service import Service

    profile = tempfile.mkdtemp(prefix="hubnet-chromium-")
    options = webdriver.ChromeOptions()
    options.binary_location = CHROMIUM
    for flag in (
        "--headless=new",
        "--no-sandbox",
        "--disable-gpu",
        "--disable-quic",
        "--no-first-run",
        "--disable-background-networking",
        "--disable-component-update",
        "--disable-sync",
        "--disable-extensions",
        f"--user-data-dir={profile}",
        "--window-size=1400,900",
        "--host-resolver-rules=MAP * ~NOTFOUND",
        # Keep the report's sandboxed map frames in the page's own process, so
        # their console messages reach the log and the recording hook runs in
        # them (their scripts behave the same either way).
        "--disable-features=IsolateSandboxedIframes",
    ):
        options.add_argument(flag)
    options.set_capability("goog:loggingPrefs", {"browser": "ALL", "performance": "ALL"})
    driver = webdriver.Chrome(service=Service(CHROMEDRIVER), options=options)
    try:
        driver.execute_cdp_cmd("Network.enable", {})
        driver.execute_cdp_cmd(
            "Network.setBlockedURLs", {"urls": ["http://*", "https://*", "ws://*", "wss://*"]}
        )
        driver.execute_cdp_cmd("Page.addScriptToEvaluateOnNewDocument", {"source": HOOK})
        yield driver
    finally:
        driver.quit()
        shutil.rmtree(profile, ignore_errors=True)


@pytest.fixture(scope="module")
def tiny(tmp_path_factory: pytest.TempPathFactory) -> Path:
    return tiny_run(tmp_path_factory.mktemp("browser"))


def wait_for(check: Callable[[], Any], timeout: float = 8.0) -> Any:
    """Poll ``check`` until it returns something truthy; fail after ``timeout`` s."""
    end = time.monotonic() + timeout
    while True:
        value = check()
        if value:
            return value
        if time.monotonic() > end:
            raise AssertionError(f"timed out waiting for {check}")
        time.sleep(0.05)


def open_page(driver: Any, path: Path) -> None:
    """Load a file, drain earlier logs, and wait until Leaflet drew (when it is a map)."""
    driver.get_log("browser")
    driver.get_log("performance")
    driver.get(path.resolve().as_uri())
    wait_for(lambda: driver.execute_script("return document.readyState") == "complete")


def requests_made(driver: Any) -> list[str]:
    """URLs the page asked for since the last call (from the performance log)."""
    urls = []
    for entry in driver.get_log("performance"):
        message = json.loads(entry["message"])["message"]
        if message.get("method") == "Network.requestWillBeSent":
            urls.append(message["params"]["request"]["url"])
    return urls


def outside_requests(urls: list[str]) -> list[str]:
    """The requests that are not the page's own (file:, data:, about:)."""
    return [u for u in urls if not u.startswith(("file:", "data:", "about:"))]


def console_errors(driver: Any, allowed_hosts: tuple[str, ...] = ()) -> list[str]:
    """Severe console entries, except failed requests to ``allowed_hosts``."""
    errors = []
    for entry in driver.get_log("browser"):
        if entry["level"] != "SEVERE":
            continue
        if allowed_hosts and any(h in entry["message"] for h in allowed_hosts):
            continue
        errors.append(entry["message"])
    return errors


def frame_record(driver: Any) -> dict[str, list[str]]:
    """Dialogs and script errors the hook recorded in the current frame."""
    record = driver.execute_script("return window.__hubnet || null")
    assert record is not None, "the recording hook did not run in this frame"
    return record


def click_at(driver: Any, x: float, y: float) -> None:
    """A real left click at viewport coordinates (mouse moved, pressed, released)."""
    for kind in ("mouseMoved", "mousePressed", "mouseReleased"):
        driver.execute_cdp_cmd(
            "Input.dispatchMouseEvent",
            {"type": kind, "x": x, "y": y, "button": "left", "clickCount": 1},
        )


def click_element(driver: Any, element: Any) -> None:
    """Click an SVG element where it is on top (a line at a point of its own).

    An element that an earlier popup's auto-pan moved out of the window is
    panned back to the middle first.
    """
    point = driver.execute_script(POINT_ON, element)
    if point is None:
        driver.execute_script(
            "const r = arguments[0].getBoundingClientRect();"
            f"{THE_MAP}.panBy([r.left + r.width / 2 - window.innerWidth / 2,"
            " r.top + r.height / 2 - window.innerHeight / 2], {animate: false});",
            element,
        )
        point = driver.execute_script(POINT_ON, element)
    assert point is not None, "the element is hidden under others everywhere"
    click_at(driver, *point)


def popup_rows(driver: Any) -> tuple[str, dict[str, str]]:
    """The open popup's heading text and its table rows (label -> text)."""
    content = wait_for(
        lambda: driver.execute_script(
            "const c = document.querySelector('.leaflet-popup-content');"
            "if (!c) { return null; }"
            "const rows = {};"
            "for (const tr of c.querySelectorAll('tr')) {"
            "  rows[tr.querySelector('th').textContent] = tr.querySelector('td').textContent; }"
            "return [c.querySelector('h4').textContent, rows];"
        )
    )
    return content[0], content[1]


def close_popup(driver: Any) -> None:
    driver.execute_script(
        "for (const k of Object.keys(window)) {"
        "  if (k.startsWith('map_') && window[k].closePopup) { window[k].closePopup(); } }"
    )
    wait_for(lambda: not driver.execute_script("return document.querySelector('.leaflet-popup')"))


def count(driver: Any, selector: str) -> int:
    return int(driver.execute_script(f"return document.querySelectorAll('{selector}').length"))


def screenshot(driver: Any, name: str, full_page: bool = False) -> Path:
    """Save a PNG of the page (the whole page with ``full_page``) in tests/artifacts/."""
    ARTIFACTS.mkdir(parents=True, exist_ok=True)
    path = ARTIFACTS / name
    if not full_page:
        driver.save_screenshot(str(path))
        return path
    # Make the viewport as tall as the page, so frames below the fold are painted too.
    size = driver.execute_cdp_cmd("Page.getLayoutMetrics", {})["cssContentSize"]
    width = driver.execute_script("return window.innerWidth")
    driver.execute_cdp_cmd(
        "Emulation.setDeviceMetricsOverride",
        {"width": width, "height": int(size["height"]), "deviceScaleFactor": 1, "mobile": False},
    )
    try:
        time.sleep(0.5)  # let the frames lay out and draw at the new size
        shot = driver.execute_cdp_cmd("Page.captureScreenshot", {"format": "png"})
    finally:
        driver.execute_cdp_cmd("Emulation.clearDeviceMetricsOverride", {})
    path.write_bytes(base64.b64decode(shot["data"]))
    return path


def no_dialog_open(driver: Any) -> bool:
    from selenium.common.exceptions import NoAlertPresentException

    try:
        driver.switch_to.alert  # noqa: B018 - raises when no dialog is open
    except NoAlertPresentException:
        return True
    return False


# --------------------------------------------------------------------------
# The map
# --------------------------------------------------------------------------


def test_map_renders_offline_with_one_mark_per_row(browser: Any, tiny: Path) -> None:
    open_page(browser, tiny / "map.html")
    legs = pd.read_csv(tiny / "legs.csv")
    hubs = pd.read_csv(tiny / "hubs.csv")
    assert browser.execute_script("return typeof L") == "object"  # Leaflet ran, inlined
    assert count(browser, "path.hubnet-leg") == len(legs) > 0
    assert count(browser, "path.hubnet-hub") == len(hubs) > 0
    assert count(browser, "path.hubnet-terminal") == len(SITES) - len(hubs)
    for tier, n in legs["tier"].value_counts().items():
        assert count(browser, f"path.hubnet-tier-{tier}") == n
    # the view is fitted: every site is inside the visible map
    inside = browser.execute_script(
        "const w = innerWidth, h = innerHeight;"
        "return [...document.querySelectorAll('path.hubnet-site')].every(p => {"
        "  const r = p.getBoundingClientRect();"
        "  return r.left >= 0 && r.top >= 0 && r.right <= w && r.bottom <= h; });"
    )
    assert inside
    # nothing but the base map tiles was asked for outside the file, and no script failed
    outside = outside_requests(requests_made(browser))
    assert all(any(h in u for h in TILE_HOSTS) for u in outside), outside
    assert console_errors(browser, allowed_hosts=TILE_HOSTS) == []
    assert frame_record(browser)["errors"] == []
    screenshot(browser, "map-tiny.png")


def test_map_without_tiles_makes_no_request_at_all(browser: Any, tiny: Path) -> None:
    page = write_map(tiny, tiny.parent / "map-none.html", tiles="none")
    open_page(browser, page)
    assert count(browser, "path.hubnet-leg") == len(pd.read_csv(tiny / "legs.csv"))
    assert outside_requests(requests_made(browser)) == []
    assert console_errors(browser) == []


def test_clicking_a_leg_opens_its_popup_with_its_volume(browser: Any, tiny: Path) -> None:
    open_page(browser, tiny / "map.html")
    legs = pd.read_csv(tiny / "legs.csv", dtype={"from_site": str, "to_site": str})
    checked = 0
    for row in (int(legs["volume_per_day"].idxmax()), int(legs["volume_per_day"].idxmin())):
        leg = legs.iloc[row]
        line = browser.find_element("css selector", f"path.hubnet-row-{row}")
        click_element(browser, line)
        heading, rows = popup_rows(browser)
        assert heading.startswith(f"{leg['from_site']} ") and f"→ {leg['to_site']} " in heading
        volume = float(re.sub(r"[^\d.]", "", rows["Volume"].split(" ")[0]))
        assert volume == pytest.approx(leg["volume_per_day"], abs=0.01)
        assert rows["Volume"].endswith("pallets per day")
        assert rows["Tier"] == leg["tier"]
        close_popup(browser)
        checked += 1
    assert checked == 2


def test_switching_a_tier_layer_off_removes_its_lines(browser: Any, tiny: Path) -> None:
    open_page(browser, tiny / "map.html")
    legs = pd.read_csv(tiny / "legs.csv")
    trunks, feeders = (int((legs["tier"] == t).sum()) for t in ("trunk", "feeder"))
    assert trunks > 0 and feeders > 0
    labels = browser.find_elements("css selector", ".leaflet-control-layers-overlays label")
    trunk = next(lb for lb in labels if lb.text.startswith("Trunk legs"))
    assert f"({trunks})" in trunk.text
    box = trunk.find_element("css selector", "input")
    box.click()
    wait_for(lambda: count(browser, "path.hubnet-tier-trunk") == 0)
    assert count(browser, "path.hubnet-tier-feeder") == feeders
    assert not box.is_selected()
    box.click()
    wait_for(lambda: count(browser, "path.hubnet-tier-trunk") == trunks)


def test_hostile_names_show_as_text_and_no_dialog_opens(browser: Any, tiny: Path) -> None:
    open_page(browser, tiny / "map.html")
    hubs = set(pd.read_csv(tiny / "hubs.csv", dtype={"hub_id": str})["hub_id"])
    names = {sid: name for sid, name, *_ in SITES}
    headline = browser.find_element("css selector", "#hn-headline summary").text
    assert headline == SCENARIO_NAME
    assert browser.title.startswith(SCENARIO_NAME)
    # click every site; its popup shows the name exactly as written in sites.csv
    sites = browser.find_elements("css selector", "path.hubnet-site")
    assert len(sites) == len(SITES)
    seen = set()
    for circle in sites:
        click_element(browser, circle)
        heading, rows = popup_rows(browser)
        site_id = heading.split(" ")[0]
        assert heading == f"{site_id} · {names[site_id]}"
        assert ("Throughput" in rows) == (site_id in hubs)
        # the name is text in the page, not markup: the open popup holds no element
        # made from it (no img, no b, no script)
        assert count(browser, ".leaflet-popup-content :is(img, b, i, script)") == 0
        seen.add(site_id)
        close_popup(browser)
    assert seen == set(names)
    assert XSS_NAME in names.values()
    assert count(browser, "img:not(.leaflet-tile)") == 0  # base map tiles aside
    assert count(browser, "b") <= 1  # the legend's own heading only; never the site's <b>
    assert no_dialog_open(browser)
    record = frame_record(browser)
    assert record["dialogs"] == [] and record["errors"] == []
    assert console_errors(browser, allowed_hosts=TILE_HOSTS) == []


# --------------------------------------------------------------------------
# The report
# --------------------------------------------------------------------------


def test_report_renders_with_no_console_errors(browser: Any, tiny: Path, tmp_path: Path) -> None:
    second = tiny_run(tmp_path / "second", allocation="multiple", transfer=0.4)
    legs = [len(pd.read_csv(r / "legs.csv")) for r in (tiny, second)]
    for tiles in ("none", "light"):
        out = write_report([tiny, second], tmp_path / f"report-{tiles}.html", tiles=tiles)
        open_page(browser, out)
        assert browser.find_element("tag name", "h1").text == "Network plan report"
        assert count(browser, "svg.chart") == 2
        assert count(browser, "table.hierarchy") == 2
        assert SCENARIO_NAME in browser.find_element("id", "headline").text
        frames = browser.find_elements("css selector", "iframe.map")
        assert len(frames) == 2
        for frame, n in zip(frames, legs, strict=True):
            browser.switch_to.frame(frame)
            wait_for(lambda n=n: count(browser, "path.hubnet-leg") == n)
            zoom_ok = browser.execute_script(
                "const k = Object.keys(window).find(k => k.startsWith('map_'));"
                "return window[k].getSize().x > 0 && window[k].getZoom() < 12;"
            )
            assert zoom_ok, "the map in the report was not fitted to its network"
            record = frame_record(browser)
            assert record["dialogs"] == [] and record["errors"] == []
            browser.switch_to.default_content()
        assert no_dialog_open(browser)
        assert frame_record(browser) == {"dialogs": [], "errors": []}
        outside = outside_requests(requests_made(browser))
        if tiles == "none":
            assert outside == []
            assert console_errors(browser) == []
        else:
            assert all(any(h in u for h in TILE_HOSTS) for u in outside), outside
            assert console_errors(browser, allowed_hosts=TILE_HOSTS) == []
    screenshot(browser, "report-tiny.png", full_page=True)


def test_a_lone_site_is_shown_at_street_level_not_beyond(
    browser: Any, tiny: Path, tmp_path: Path
) -> None:
    # A review found that with no tile layer (the outline base map) nothing
    # capped the zoom, so a map with one site located (here through --sites)
    # was fitted at an endless zoom. The map now stops at MAX_ZOOM.
    sites = pd.read_csv(tiny / "sites.csv")
    one = tmp_path / "one_site.csv"
    sites.iloc[:1].to_csv(one, index=False)
    page = write_map(tiny, tmp_path / "one.html", sites=one)
    open_page(browser, page)
    zoom = browser.execute_script(f"return {THE_MAP}.getZoom();")
    assert zoom == MAX_ZOOM
    assert count(browser, "path.hubnet-site") == 1


# --------------------------------------------------------------------------
# The demo, as a new user sees it
# --------------------------------------------------------------------------


@pytest.fixture(scope="module")
def demo(tmp_path_factory: pytest.TempPathFactory) -> Path:
    _, path = run_scenario(DEMO_CONFIG, tmp_path_factory.mktemp("demo") / "run")
    return path


def test_demo_map_and_report(browser: Any, demo: Path, tmp_path: Path) -> None:
    open_page(browser, demo / "map.html")
    legs = pd.read_csv(demo / "legs.csv")
    assert count(browser, "path.hubnet-leg") == len(legs)
    assert count(browser, "path.hubnet-hub") == len(pd.read_csv(demo / "hubs.csv"))
    # the default base map: country outlines drawn in the page (Spain and
    # Portugal among them), under the legs, taking no clicks, and no tile asked
    outlines = browser.execute_script(
        "const p = [...document.querySelectorAll('.leaflet-overlay-pane path')];"
        "return [p.length, p.filter(e => e.classList.contains('leaflet-interactive')).length];"
    )
    assert outlines[0] >= 2 and outlines[1] == 0
    assert count(browser, ".leaflet-tile") == 0
    assert (
        "Natural Earth" in browser.find_element("css selector", ".leaflet-control-attribution").text
    )
    # on a real network most lines can be clicked somewhere: the two directions
    # of a lane are drawn apart; the largest leg's popup shows its volume
    row = int(legs["volume_per_day"].idxmax())
    click_element(browser, browser.find_element("css selector", f"path.hubnet-row-{row}"))
    _, rows = popup_rows(browser)
    assert rows["Volume"] == f"{legs['volume_per_day'][row]:,.0f} pallets per day"
    close_popup(browser)
    clickable = browser.execute_script(CLICKABLE_LEGS)
    assert clickable == len(legs)
    assert console_errors(browser, allowed_hosts=TILE_HOSTS) == []
    screenshot(browser, "map-demo.png")
    report = write_report([demo], tmp_path / "report.html")
    open_page(browser, report)
    browser.switch_to.frame(browser.find_element("css selector", "iframe.map"))
    wait_for(lambda: count(browser, "path.hubnet-leg") == len(legs))
    browser.switch_to.default_content()
    assert console_errors(browser, allowed_hosts=TILE_HOSTS) == []
    screenshot(browser, "report-demo.png", full_page=True)


def test_demo_map_boxes_do_not_cover_each_other_on_a_small_screen(browser: Any, demo: Path) -> None:
    # A laptop window (1024 x 640, common practice, no source): the headline box
    # (with its caution), the legend, the layer switch and the scale bar each
    # keep to their own corner (a new user saw the scale bar run into the legend).
    browser.set_window_size(1024, 640)
    try:
        open_page(browser, demo / "map.html")
        opened = browser.execute_script(BOXES)
        # a lower window with the headline box folded: the legend moves up, and
        # must still keep clear of the zoom buttons (a review found it under them)
        browser.find_element("css selector", "#hn-headline summary").click()
        browser.set_window_size(1024, 440)
        folded = browser.execute_script(BOXES)
    finally:
        browser.set_window_size(1400, 900)
    assert_apart(opened)
    assert_apart(folded)


#: The map's boxes: headline, legend and Leaflet's controls.
BOX_SELECTORS = json.dumps(
    [
        "#hn-headline",
        "#hn-legend",
        ".leaflet-control-scale",
        ".leaflet-control-layers",
        ".leaflet-control-zoom",
    ]
)
BOXES = (
    f"return {BOX_SELECTORS}.map(q => {{"
    "  const r = document.querySelector(q).getBoundingClientRect();"
    "  return [q, r.left, r.top, r.right, r.bottom]; });"
)


def assert_apart(boxes: list[list[Any]]) -> None:
    """No two of the (selector, left, top, right, bottom) boxes overlap."""
    for a in range(len(boxes)):
        for b in range(a + 1, len(boxes)):
            qa, la, ta, ra, ba = boxes[a]
            qb, lb, tb, rb, bb = boxes[b]
            apart = ra <= lb or rb <= la or ba <= tb or bb <= ta
            assert apart, (qa, boxes[a][1:], qb, boxes[b][1:])


def boxes_fit(driver: Any) -> list[tuple[str, int, int]]:
    """The headline box and legend that have to scroll: (id, scroll height, height)."""
    got = driver.execute_script(
        "return ['hn-headline', 'hn-legend'].map(id => {"
        "  const e = document.getElementById(id);"
        "  return [id, e.scrollHeight, e.clientHeight]; });"
    )
    return [(i, sh, ch) for i, sh, ch in got if sh > ch + 1]


def test_demo_map_shows_both_boxes_whole_on_a_desktop_screen(browser: Any, demo: Path) -> None:
    # 1400 x 900 (the browser fixture's window; common practice, no source): a
    # new user's trial found the legend scrolling there. Both boxes now share the
    # left column and take the height they need.
    open_page(browser, demo / "map.html")
    assert boxes_fit(browser) == []


@pytest.fixture(scope="module")
def many(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """The national demo's 140 sites under the classic model: 3 hubs, multiple allocation.

    Solved in a second or two (every hub set priced); a map with more
    terminals than are ever named at once.
    """
    folder = tmp_path_factory.mktemp("many")
    region = REPO_ROOT / "demo_regions" / "france"
    config = folder / "many.toml"
    config.write_text(
        '[scenario]\nname = "many-terminals"\n'
        f"[inputs]\nsites = {json.dumps(str(region / 'sites.csv'))}\n"
        f'demand = {json.dumps(str(region / "demand.csv"))}\nvolume_unit = "pallets"\n'
        '[model]\nallocation = "multiple"\nhubs = 3\ntransfer_factor = 0.6\n',
        encoding="utf-8",
    )
    _, path = run_scenario(config, folder / "run")
    return path


def test_terminals_are_named_once_few_are_in_view(browser: Any, many: Path) -> None:
    open_page(browser, many / "map.html")
    sites = pd.read_csv(many / "sites.csv")
    hubs = set(pd.read_csv(many / "hubs.csv")["hub_id"])
    terminals = sites[~sites["id"].isin(hubs)]
    assert count(browser, "path.hubnet-terminal") == len(terminals) > TERMINAL_LABELS_IN_VIEW
    # the whole country in view: no terminal named (hubs are)
    wait_for(lambda: count(browser, ".hn-label") == len(hubs))
    assert count(browser, ".hn-tlabel") == 0
    # zoomed in on one terminal: the few in view are named, this one among them
    row = terminals.iloc[0]
    browser.execute_script(
        f"{THE_MAP}.setView([arguments[0], arguments[1]], 10, {{animate: false}});",
        row["lat"],
        row["lon"],
    )
    in_view = browser.execute_script(
        f"const m = {THE_MAP}; const v = m.getBounds();"
        "return arguments[0].filter(p => v.contains(L.latLng(p[0], p[1]))).length;",
        terminals[["lat", "lon"]].values.tolist(),
    )
    assert 0 < in_view <= TERMINAL_LABELS_IN_VIEW
    # only those in view carry a label (off-screen ones keep their hover tooltip)
    wait_for(lambda: count(browser, ".hn-tlabel") == in_view)
    names = browser.execute_script(
        "return [...document.querySelectorAll('.hn-tlabel')].map(e => e.textContent);"
    )
    assert row["name"] in names
    # hub names are drawn above terminal names (a new user found Lille's, Lyon's
    # and Nantes's hidden under them)
    z = browser.execute_script(
        "const z = q => Number(getComputedStyle(document.querySelector(q)).zIndex);"
        "return [z('.hn-label:not(.hn-tlabel)'), z('.hn-tlabel')];"
    )
    assert z[0] > z[1]
    # back out: the labels go, the hover tooltips come back
    browser.execute_script(f"{THE_MAP}.setZoom(5, {{animate: false}});")
    wait_for(lambda: count(browser, ".hn-tlabel") == 0)
    assert console_errors(browser, allowed_hosts=TILE_HOSTS) == []


def test_no_terminal_is_hidden_under_a_hub(browser: Any, many: Path) -> None:
    # Terminals are drawn above the hubs: a terminal next to a large hub (Paris
    # here) used to lie under the hub's circle, out of sight and out of reach.
    open_page(browser, many / "map.html")
    covered = browser.execute_script(
        "return [...document.querySelectorAll('path.hubnet-terminal')].filter(t => {"
        "  const r = t.getBoundingClientRect();"
        "  const top = document.elementFromPoint(r.left + r.width / 2, r.top + r.height / 2);"
        "  return top !== null && top.classList.contains('hubnet-hub'); }).length;"
    )
    assert covered == 0


#: Sites (hubs and terminals) whose centre lies under one of the map's boxes.
SITES_UNDER_BOXES = (
    f"const boxes = {BOX_SELECTORS}"
    + """
  .map(q => document.querySelector(q).getBoundingClientRect());
return [...document.querySelectorAll('path.hubnet-site')].filter(s => {
  const r = s.getBoundingClientRect();
  const x = r.left + r.width / 2, y = r.top + r.height / 2;
  return boxes.some(b => x >= b.left && x <= b.right && y >= b.top && y <= b.bottom);
}).map(s => s.getAttribute('class'));
"""
)


@pytest.mark.parametrize("size", [(1024, 640), (1400, 900)])
def test_no_site_starts_under_a_box(browser: Any, many: Path, size: tuple[int, int]) -> None:
    # A new user's trial at 1024 x 640 (a laptop window; common practice, no
    # source) found the layer switch over Lille, a hub near the top right of the
    # country: the first view now keeps every site clear of every box.
    browser.set_window_size(*size)
    try:
        open_page(browser, many / "map.html")
        under = browser.execute_script(SITES_UNDER_BOXES)
    finally:
        browser.set_window_size(1400, 900)
    assert count(browser, "path.hubnet-site") > 100
    assert under == []


@pytest.mark.parametrize("size", [(1024, 640), (1400, 900)])
def test_no_site_starts_under_a_folded_box_in_the_report(
    browser: Any, demo: Path, many: Path, tmp_path: Path, size: tuple[int, int]
) -> None:
    # In the report the maps' headline box and legend start folded, and the
    # view used the whole frame: a new user found A Coruna (the demo's site
    # nearest the top left) under the folded headline box.
    report = write_report([demo, many], tmp_path / "report.html")
    browser.set_window_size(*size)
    under: list[list[str]] = []
    try:
        open_page(browser, report)
        for frame in browser.find_elements("css selector", "iframe.map"):
            browser.execute_script("arguments[0].scrollIntoView();", frame)
            browser.switch_to.frame(frame)
            wait_for(lambda: count(browser, "path.hubnet-site") > 20)
            assert not browser.execute_script("return document.getElementById('hn-headline').open")
            under.append(browser.execute_script(SITES_UNDER_BOXES))
            browser.switch_to.default_content()
    finally:
        browser.switch_to.default_content()
        browser.set_window_size(1400, 900)
    assert under == [[], []]


# --------------------------------------------------------------------------
# A freight run: vehicle classes on the legs
# --------------------------------------------------------------------------


@pytest.fixture(scope="module")
def freight(tmp_path_factory: pytest.TempPathFactory) -> Path:
    return freight_run(tmp_path_factory.mktemp("freight")).folder


def test_freight_map_one_line_per_row_and_class_popups(browser: Any, freight: Path) -> None:
    open_page(browser, freight / "map.html")
    legs = pd.read_csv(freight / "legs.csv", dtype={"from_site": str, "to_site": str})
    assert count(browser, "path.hubnet-leg") == len(legs)
    empty = int((legs["volume_per_day"] == 0).sum())
    assert empty > 0 and count(browser, "path.hubnet-empty") == empty
    # a leg run by both classes: its popup names them and counts each
    row = int(legs.index[legs["vehicle_class"] == "artic+van"][0])
    leg = legs.iloc[row]
    dispatches = pd.read_csv(freight / "dispatches.csv")
    own = dispatches[
        (dispatches["origin"] == leg["from_site"])
        & (dispatches["destination"] == leg["to_site"])
        & (dispatches["tier"] == leg["tier"])
    ]
    click_element(browser, browser.find_element("css selector", f"path.hubnet-row-{row}"))
    heading, rows = popup_rows(browser)
    assert heading.startswith(f"{leg['from_site']} ")
    assert rows["Vehicle class"] == "artic+van"
    by_class = rows["Dispatches by class"]
    for cls, n in zip(own["vehicle_class"], own["dispatches"], strict=True):
        assert f"{n:,.0f} × {cls}" in by_class
    assert rows["Fill"] == f"{100 * leg['fill']:.1f} %"
    close_popup(browser)
    assert console_errors(browser, allowed_hosts=TILE_HOSTS) == []
    screenshot(browser, "map-freight.png")

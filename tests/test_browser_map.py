"""The HTML map in a real browser: headless Chromium (Debian package) driven by Playwright.

The page is opened from ``file://`` with every other request blocked, as for
a planner in the field with no network.  Checked: no console errors, no
failed requests, no alert dialog, the layer control and legend are there,
a hub named ``<script>alert(1)</script>`` shows as text in its tooltip and
popup, long text is shortened in tooltips, the legend follows the layer
switches, the before/after switch works, and a screenshot is not blank and
shows the palette's colours.

Needs ``/usr/bin/chromium`` (``make test`` installs it when run as root); the
test fails, not skips, without it.
"""

from __future__ import annotations

import io
import re
import sys
from pathlib import Path

import numpy as np
import pytest

sys.path.insert(0, str(Path(__file__).parent))
from helpers.export_layers import EVIL, sample_comparison, sample_layers  # noqa: E402

from geo_reach import CAUTION  # noqa: E402
from geo_reach.export import palette as P  # noqa: E402
from geo_reach.export.html_map import TOOLTIP_CHARS, Comparison, write_map  # noqa: E402

pytestmark = pytest.mark.browser

CHROMIUM = "/usr/bin/chromium"
ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
        "--disable-background-networking", "--disable-component-update", "--disable-sync"]


@pytest.fixture(scope="module")
def browser():
    if not Path(CHROMIUM).exists():
        pytest.fail(f"headless Chromium not found at {CHROMIUM}: run `make test` as root (it installs the Debian "
                    "package) or `apt-get install chromium`", pytrace=False)
    try:
        from playwright.sync_api import sync_playwright
    except ImportError:  # pragma: no cover - the test extra installs it
        pytest.fail("the Python package playwright is missing: run `make test` (installs the test extras)",
                    pytrace=False)
    with sync_playwright() as pw:
        br = pw.chromium.launch(executable_path=CHROMIUM, args=ARGS)
        yield br
        br.close()


class Page:
    """A page opened offline, recording console errors, failed or blocked requests and dialogs."""

    def __init__(self, browser, path: Path):
        self.errors, self.failed, self.blocked, self.dialogs = [], [], [], []
        self.page = browser.new_page(viewport={"width": 1280, "height": 800})
        self.page.set_default_timeout(10_000)
        self.page.on("console", lambda m: self.errors.append(m.text) if m.type == "error" else None)
        self.page.on("pageerror", lambda e: self.errors.append(str(e)))
        self.page.on("requestfailed", lambda r: self.failed.append(r.url))
        self.page.on("dialog", self._dialog)

        def route(r):
            url = r.request.url
            if url.startswith(("file:", "data:")):
                r.continue_()
            else:
                self.blocked.append(url)
                r.abort()

        self.page.route("**/*", route)
        self.page.goto(path.as_uri())
        self.page.wait_for_selector(".leaflet-overlay-pane path")
        self.page.wait_for_timeout(300)
        self.map_id = self.page.eval_on_selector(".folium-map", "e => e.id")

    def _dialog(self, d):
        self.dialogs.append(d.message)
        d.dismiss()

    def point_of(self, needle: str, key: str = "t0"):
        """Screen point of the first point feature whose first tooltip field holds ``needle`` (escaped form)."""
        return self.page.evaluate(
            """([mapId, needle, key]) => { const map = window[mapId]; let out = null;
                 map.eachLayer(l => { if (!out && l.feature && l.getLatLng
                                      && String(l.feature.properties[key]).includes(needle)) {
                   const p = map.latLngToContainerPoint(l.getLatLng()); out = [p.x, p.y]; } });
                 return out; }""", [self.map_id, needle, key])

    def close(self):
        self.page.close()


@pytest.fixture(scope="module")
def map_files(tmp_path_factory):
    d = tmp_path_factory.mktemp("map")
    lay = sample_layers()
    main = write_map(d / "results.html", edges=lay["edges"], hubs=lay["hubs"], bands=lay["reach_bands"],
                     weak=lay["weak_regions"], diameter=lay["diameter"], issues=lay["issues"])
    before, after, change = sample_comparison(lay["edges"])
    comp = write_map(d / "compare.html", hubs=lay["hubs"], weak=lay["weak_regions"],
                     comparison=Comparison(before, after, change, "Before", "After"))
    return main, comp


@pytest.fixture(scope="module")
def main_page(browser, map_files):
    p = Page(browser, map_files[0])
    p.shots = map_files[0].parent  # screenshots kept beside the map in pytest's temporary folder
    yield p
    p.close()


def test_loads_offline_without_errors(main_page):
    assert main_page.errors == []
    assert main_page.failed == []
    assert main_page.blocked == []  # nothing even tried to reach the network
    assert main_page.dialogs == []


def test_layer_control_legend_and_caution_visible(main_page):
    pg = main_page.page
    assert pg.locator(".leaflet-control-layers").is_visible()
    names = [t.strip() for t in pg.locator(".leaflet-control-layers-overlays label").all_inner_texts()]
    assert names == ["Reach bands", "Weak regions (ranked)", "Network: minutes to nearest hub",
                     "Diameter path (longest shortest trip)", "Network issues", "Hubs"]
    legend = pg.locator(".gr-legend")
    assert legend.is_visible()
    text = legend.inner_text()
    assert "Network: minutes to nearest hub" in text and "min" in text and "Hubs by kind" in text
    caution = pg.locator(".gr-caution")
    assert caution.is_visible() and CAUTION in caution.inner_text()
    # drawn features: network lines, region polygons, hub circles
    assert pg.locator(".leaflet-overlay-pane path").count() >= 31 + 2 + 3


def test_script_in_a_hub_name_shows_as_text(main_page):
    pg = main_page.page
    xy = main_page.point_of("&lt;script&gt;")
    assert xy is not None
    pg.mouse.move(*xy)
    tip = pg.locator(".leaflet-tooltip")
    tip.wait_for()
    assert EVIL in tip.inner_text() and "clinic" in tip.inner_text()  # the hub named EVIL, a clinic
    assert pg.locator(".leaflet-tooltip script").count() == 0
    pg.mouse.click(*xy)
    pop = pg.locator(".leaflet-popup-content")
    pop.wait_for()
    assert EVIL in pop.inner_text()
    pg.wait_for_timeout(400)  # popup fade-in
    pg.screenshot(path=str(main_page.shots / "popup.png"))
    assert pg.locator(".leaflet-popup-content script").count() == 0
    assert pg.locator("script", has_text="alert(1)").count() == 0
    pg.wait_for_timeout(200)
    assert main_page.dialogs == [] and main_page.errors == []
    pg.keyboard.press("Escape")
    pg.mouse.click(5, 400)  # close the popup


def test_long_text_is_shortened_in_tooltip(main_page):
    pg = main_page.page
    xy = main_page.point_of("dangling end")
    pg.mouse.move(*xy)
    tip = pg.locator(".leaflet-tooltip", has_text="dangling end")
    tip.wait_for()
    cells = tip.locator("td").all_inner_texts()
    assert any(c.endswith("\u2026") and len(c) <= TOOLTIP_CHARS for c in cells), cells
    pg.mouse.move(5, 400)


def test_legend_follows_layer_switches(main_page):
    pg = main_page.page
    section = pg.locator(".gr-leg", has_text="Hubs by kind")
    hubs = pg.locator(".leaflet-control-layers-overlays label", has_text=re.compile(r"^\s*Hubs\s*$"))
    assert section.is_visible()
    n = pg.locator(".leaflet-overlay-pane path").count()
    hubs.click()
    assert not section.is_visible()
    assert pg.locator(".leaflet-overlay-pane path").count() == n - 3
    hubs.click()
    assert section.is_visible()
    bands_section = pg.locator(".gr-leg", has_text="Reach bands")
    assert not bands_section.is_visible()  # bands start hidden under the network
    pg.locator(".leaflet-control-layers-overlays label", has_text="Reach bands").click()
    assert bands_section.is_visible()
    pg.locator(".leaflet-control-layers-overlays label", has_text="Reach bands").click()
    assert main_page.errors == []


def _colours(png: bytes) -> np.ndarray:
    from PIL import Image

    return np.asarray(Image.open(io.BytesIO(png)).convert("RGB")).reshape(-1, 3).astype(int)


def _near(pixels: np.ndarray, hexcol: str, tol: int = 40) -> int:
    rgb = np.array([int(hexcol[i:i + 2], 16) for i in (1, 3, 5)])
    return int((np.abs(pixels - rgb).sum(axis=1) <= tol).sum())


def test_screenshot_is_not_blank_and_shows_the_palette(main_page, map_files):
    png = main_page.page.screenshot()
    (map_files[0].parent / "results.png").write_bytes(png)
    px = _colours(png)
    uniq = np.unique(px, axis=0)
    assert len(uniq) > 100
    bg = np.array([int(P.BACKGROUND[i:i + 2], 16) for i in (1, 3, 5)])
    share_bg = (np.abs(px - bg).sum(axis=1) <= 6).mean()
    assert 0.2 < share_bg < 0.97  # plain background around drawn features
    hub_minutes = sample_layers()["edges"]["hub_minutes"].to_numpy(float)
    shown = [c.colour for c in P.cost_classes(hub_minutes) if _near(px, c.colour) > 30]
    assert len(shown) >= 3, shown
    assert _near(px, P.PATH_COLOUR) > 30  # the diameter path


def test_before_after_switch(browser, map_files):
    p = Page(browser, map_files[1])
    try:
        pg = p.page
        base = pg.locator(".leaflet-control-layers-base label")
        assert [t.strip() for t in base.all_inner_texts()] == ["Before: network, minutes to nearest hub",
                                                              "After: network, minutes to nearest hub"]
        radios = pg.locator(".leaflet-control-layers-base input")
        assert radios.nth(1).is_checked() and not radios.nth(0).is_checked()
        assert pg.locator(".gr-leg", has_text="Change in minutes").is_visible()
        png_after = pg.screenshot()
        # hide the change layer, then switch views: the drawing changes
        pg.locator(".leaflet-control-layers-overlays label", has_text="Change").click()
        assert not pg.locator(".gr-leg", has_text="Change in minutes").is_visible()
        png_a = pg.screenshot()
        base.nth(0).click()
        assert radios.nth(0).is_checked()
        pg.wait_for_timeout(200)
        png_b = pg.screenshot()
        (map_files[1].parent / "compare_change.png").write_bytes(png_after)
        (map_files[1].parent / "compare_before.png").write_bytes(png_b)
        assert png_a != png_b
        # hubs stay drawn on top of the network after the switch (SVG paint order = document order)
        last = pg.evaluate("() => Array.from(document.querySelectorAll('.leaflet-overlay-pane path'))"
                           ".slice(-3).map(e => e.getAttribute('fill'))")
        assert set(last) <= set(P.category_colours(["clinic", "depot"]).values()), last
        faster, slower = P.diverging(3)
        assert _near(_colours(png_after), faster[-1]) > 30  # the change layer's strongest "faster" class
        assert p.errors == [] and p.failed == [] and p.blocked == [] and p.dialogs == []
    finally:
        p.close()

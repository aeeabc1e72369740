"""The HTML map in a real browser: headless Chromium (Debian package) driven by Playwright.

Each page is opened from ``file://`` with every other request blocked, as for
a planner in the field with no network.  Checked: no console errors, failed
requests or dialogs; hostile names (template syntax, script tags, quotes,
backslashes, right-to-left text, emoji) show literally as the text of their
element and nothing evaluates them (``49`` = 7*7 appears nowhere); the page
opens on today's view with the study area filling the window; each legend
swatch has the colour the map renders inside its ring (sampled from a
screenshot); legend entries shown together differ by CIEDE2000 (Sharma, Wu
and Dalal 2005, as implemented by scikit-image); change layers and the
proposed line are drawn only in their scenario's view; popups use plain
labels with units; network issues are off at first and grouped when shown.

Needs ``/usr/bin/chromium`` (``make test`` installs it when run as root); the
test fails, not skips, without it.
"""

from __future__ import annotations

import io
import sys
from pathlib import Path

import numpy as np
import pytest
import shapely
from pyproj import Transformer
from shapely.ops import polylabel

sys.path.insert(0, str(Path(__file__).parent))
from helpers import map_input as MI  # noqa: E402

from geo_reach import CAUTION  # noqa: E402
from geo_reach.export import palette as P  # noqa: E402
from geo_reach.export.webmap import MapInput, NetworkLayer, write_map  # noqa: E402

pytestmark = pytest.mark.browser

CHROMIUM = "/usr/bin/chromium"
ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
        "--disable-background-networking", "--disable-component-update", "--disable-sync",
        "--force-color-profile=srgb"]
TO_LONLAT = Transformer.from_crs(MI.CRS, 4326, always_xy=True)


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

    def __init__(self, browser, path: Path, size=(1280, 800)):
        self.errors, self.failed, self.blocked, self.dialogs = [], [], [], []
        self.page = browser.new_page(viewport={"width": size[0], "height": size[1]})
        self.page.set_default_timeout(15_000)
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
        self.page.wait_for_selector("html[data-gr-ready]")
        self.page.wait_for_timeout(200)

    def _dialog(self, d):
        self.dialogs.append(d.message)
        d.dismiss()

    def js(self, code, arg=None):
        return self.page.evaluate(code, arg)

    def screen(self, lon, lat):
        return self.js("([lon, lat]) => { const p = geoReachMap.map.latLngToContainerPoint([lat, lon]);"
                       " const r = document.getElementById('gr-map').getBoundingClientRect();"
                       " return [p.x + r.left, p.y + r.top]; }", [lon, lat])

    def set_view(self, index):
        self.page.locator("input[name=gr-view]").nth(index).check()
        self.page.wait_for_timeout(250)

    def toggle(self, group, on):
        box = self.page.locator(f".gr-grp[data-group='{group}'] > label input")
        if box.is_checked() != on:
            box.click()
        self.page.wait_for_timeout(150)

    def clean(self):
        assert self.errors == [] and self.failed == [] and self.blocked == [] and self.dialogs == []

    def close(self):
        self.page.close()


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    d = tmp_path_factory.mktemp("map")
    m, places = MI.hostile()
    return {"full": write_map(d / "full.html", MI.full()), "hostile": write_map(d / "hostile.html", m),
            "places": places, "dir": d}


@pytest.fixture(scope="module")
def full_page(browser, files):
    p = Page(browser, files["full"])
    yield p
    p.close()


def _png(page) -> np.ndarray:
    from PIL import Image

    return np.asarray(Image.open(io.BytesIO(page.screenshot())).convert("RGB")).astype(int)


def _rgb(hexcol: str) -> np.ndarray:
    return np.array([int(hexcol[i:i + 2], 16) for i in (1, 3, 5)])


def test_opens_offline_on_today_filling_the_window(full_page):
    pg = full_page.page
    full_page.clean()
    assert pg.locator("input[name=gr-view]").nth(0).is_checked()
    assert pg.locator(".gr-view-name").nth(0).text_content() == "Today"
    assert full_page.js("() => geoReachMap.state.view") == "today"
    assert pg.locator("#gr-caution-text").text_content() == CAUTION and pg.locator("#gr-caution").is_visible()
    # the study area (network, hubs, settlements, districts) fills the map in one direction
    (s, w), (n, e) = full_page.js("() => geoReachMap.data.bounds")
    x0, y0 = full_page.screen(w, n)
    x1, y1 = full_page.screen(e, s)
    box = pg.locator("#gr-map").bounding_box()
    fill = max((x1 - x0) / box["width"], (y1 - y0) / box["height"])
    assert 0.9 <= fill <= 1.0, fill
    assert x0 >= box["x"] - 1 and x1 <= box["x"] + box["width"] + 1


def test_a_small_study_is_zoomed_to_fill(browser, files):
    hubs = MI.hubs().iloc[:1]
    tiny = MI.network().edges.iloc[:1].copy()
    tiny = tiny.set_geometry([shapely.LineString([MI.xy(0, 0), MI.xy(0.3, 0.1)])], crs=MI.CRS)
    path = write_map(files["dir"] / "tiny.html", MapInput(title="tiny", network=NetworkLayer(tiny, MI.node_cost()),
                                                         hubs=hubs))
    p = Page(browser, path)
    try:
        assert p.js("() => geoReachMap.map.getZoom()") > 15
        (s, w), (n, e) = p.js("() => geoReachMap.data.bounds")
        x0, _ = p.screen(w, n)
        x1, _ = p.screen(e, s)
        assert (x1 - x0) / p.page.locator("#gr-map").bounding_box()["width"] >= 0.9
        p.clean()
    finally:
        p.close()


def test_hostile_names_show_literally_and_never_run(browser, files):
    places = files["places"]
    p = Page(browser, files["hostile"])
    try:
        pg = p.page
        title = " ".join(places["title"][0].split())
        assert pg.locator("#gr-title").text_content() == title
        assert pg.evaluate("() => document.title") == title
        name, text = places["scenario"]
        assert pg.locator(".gr-view-name").nth(1).text_content() == "With " + name
        kinds = pg.locator(".gr-grp[data-group='hubs'] .gr-leg-text").all_text_contents()
        assert set(places["hub kinds"]) <= set(kinds)
        # hub names in their tooltips, settlement and district names in their popups and labels
        tips = p.js("() => { const out = []; geoReachMap.map.eachLayer(x => {"
                    " if (x.options && x.options.pane === 'gr-hubs' && x.getTooltip()) { x.openTooltip();"
                    "   out.push(x.getTooltip().getElement().querySelector('.gr-tip').textContent); x.closeTooltip(); } });"
                    " return out; }")
        assert sorted(tips) == sorted(places["hubs"])
        pops = p.js("() => { const out = []; geoReachMap.map.eachLayer(x => {"
                    " if (x.options && x.options.pane === 'gr-pts' && x.getPopup()) { x.openPopup();"
                    "   out.push(x.getPopup().getElement().querySelector('.gr-pop-title').textContent);"
                    "   x.closePopup(); } }); return out; }")
        assert sorted(pops) == sorted(" ".join(t.split()) for t in places["settlements"])
        labels = pg.locator(".gr-label:not(.gr-label-hub) span").all_text_contents()
        assert labels and set(labels) <= {" ".join(t.split()) for t in places["settlements"]}
        hub_labels = pg.locator(".gr-label-hub span").all_text_contents()
        assert hub_labels and set(hub_labels) <= set(places["hubs"])
        dlabels = pg.locator(".gr-dlabel span").all_text_contents()
        assert sorted(dlabels) == sorted(places["districts"])
        pg.locator(".gr-grp[data-group='districts'] input").check()
        for poly, want in zip(MI.districts().geometry, places["districts"]):
            c = poly.representative_point()
            lon, lat = TO_LONLAT.transform(c.x, c.y)
            # a spot inside the district clear of other features: the district popup opens there
            p.js("() => geoReachMap.map.closePopup()")
            pg.wait_for_timeout(350)  # a closed popup fades out before it leaves the page
            p.js("([lon, lat]) => geoReachMap.map.fire('click', {latlng: L.latLng(lat, lon)})", [lon, lat])
            got = pg.locator(".leaflet-popup-content .gr-pop-title").text_content()
            assert got == want
        p.set_view(1)
        assert pg.locator(".gr-view-text").text_content() == " ".join(text.split())
        # nothing ran: no dialog, no error, no 49, no element made from the names
        body = pg.evaluate("() => document.documentElement.innerText + ' ' + document.title")
        assert "49" not in body
        assert pg.locator("img").count() == 0 and pg.locator("script").count() == 3
        assert pg.locator("#gr-panel b, #gr-title *, .leaflet-popup-content b").count() == 0
        pg.wait_for_timeout(300)
        p.clean()
    finally:
        p.close()


def test_legend_swatches_have_the_colours_drawn_inside_each_ring(browser, files):
    p = Page(browser, files["full"])
    try:
        for g in ("settlements", "hubs", "network", "water", "district_lines", "weak_top"):
            p.toggle(g, False)
        p.page.mouse.move(5, 5)
        px = _png(p.page)
        swatches = p.page.locator(".gr-grp[data-group='rings'] .gr-sw-fill")
        assert swatches.count() == 4
        rings = MI.rings()
        sampled = 0
        for k, geom in enumerate(rings.geometry):
            part = max(getattr(geom, "geoms", [geom]), key=lambda g: g.area)
            c = polylabel(part, tolerance=1.0)   # the point farthest from the ring's edges
            x, y = p.screen(*TO_LONLAT.transform(c.x, c.y))
            box = p.page.locator("#gr-map").bounding_box()
            if not (box["x"] < x < box["x"] + box["width"] and box["y"] < y < box["y"] + box["height"]):
                continue   # the open outer ring's centre can lie off screen
            drawn = px[int(round(y)), int(round(x))]
            sb = swatches.nth(k).bounding_box()
            legend = px[int(sb["y"] + sb["height"] / 2), int(sb["x"] + sb["width"] / 2)]
            want = _rgb(P.travel_classes(MI.THRESHOLDS)[k].colour)
            assert np.abs(drawn - legend).max() <= 2, (k, drawn, legend)
            assert np.abs(drawn - want).max() <= 2, (k, drawn, want)
            assert swatches.nth(k).get_attribute("data-colour") == P.travel_classes(MI.THRESHOLDS)[k].colour
            sampled += 1
        assert sampled >= 3
        p.clean()
    finally:
        p.close()


def _legend_entries(p: Page):
    return p.js("() => Array.from(document.querySelectorAll('.gr-grp[data-group]')).filter(g => g.offsetParent !== null"
                " && g.querySelector('.gr-leg').style.display !== 'none').flatMap(g =>"
                " Array.from(g.querySelectorAll('.gr-sw[data-colour]')).map(s => [g.dataset.group, s.dataset.colour,"
                " s.dataset.fam || '', s.className])).filter(e => !/gr-sw-(badge|size)/.test(e[3]))")


def test_legend_entries_shown_together_differ_by_ciede2000(browser, files):
    from skimage.color import deltaE_ciede2000, rgb2lab

    def lab(c):
        return rgb2lab((_rgb(c) / 255.0)[None, None, :])[0, 0]

    p = Page(browser, files["full"])
    try:
        checked = 0
        for view in (0, 1):
            p.set_view(view)
            for shade in ("rings", "districts"):
                if p.page.locator(f".gr-grp[data-group='{shade}']").is_visible():
                    p.page.locator(f".gr-grp[data-group='{shade}'] input").check()
                for box in p.page.locator(".gr-grp:not([data-group='rings']):not([data-group='districts']) > label "
                                          "input").all():
                    if box.is_visible() and not box.is_checked():
                        box.click()
                entries = _legend_entries(p)
                assert len(entries) > 15
                for i, (ga, ca, fa, _) in enumerate(entries):
                    for gb, cb, fb, _ in entries[i + 1:]:
                        if fa and fa == fb:
                            continue  # one family (travel time on rings and dots, "no value" grey): by design
                        if ga == gb:
                            continue  # one ramp: checked for neighbouring classes in test_export_styles
                        d = float(deltaE_ciede2000(lab(ca), lab(cb)))
                        assert d >= P.MIN_DELTA_E_BETWEEN_FAMILIES, (view, shade, ga, ca, gb, cb, round(d, 1))
                        checked += 1
        assert checked > 500
        p.clean()
    finally:
        p.close()


def test_change_and_proposed_only_in_their_view(browser, files):
    p = Page(browser, files["full"])
    try:
        pg = p.page
        def drawn(group):
            return p.js("(g) => geoReachMap.state && Array.from(document.querySelectorAll('.gr-grp'))"
                        ".some(r => r.dataset.group === g && r.offsetParent !== null)", group)
        halo = _rgb(P.PROPOSED_COLOUR)
        today = _png(pg)
        assert not drawn("change") and not drawn("proposed") and drawn("weak_top")
        assert (np.abs(today - halo).sum(axis=2) <= 6).sum() == 0
        p.set_view(1)
        assert drawn("change") and drawn("proposed") and not drawn("weak_top") and not drawn("districts")
        scen = _png(pg)
        assert (np.abs(scen - halo).sum(axis=2) <= 6).sum() > 100     # the proposed line, highlighted
        faster = _rgb(P.change_classes([-100, 100])[0].colour)
        assert (np.abs(scen - faster).sum(axis=2) <= 6).sum() > 50
        p.set_view(0)
        back = _png(pg)
        assert (np.abs(back - halo).sum(axis=2) <= 6).sum() == 0
        assert (np.abs(back - today).sum(axis=2) > 30).mean() < 0.001   # today's view comes back as it was
        p.clean()
    finally:
        p.close()


def test_popups_have_plain_labels_and_units(full_page):
    pg = full_page.page
    s = MI.settlements()
    pt = s.geometry.iloc[1]
    full_page.js("([lon, lat]) => { geoReachMap.map.eachLayer(x => { if (x.options && x.options.pane === 'gr-pts'"
                 " && x.getLatLng && Math.abs(x.getLatLng().lng - lon) < 1e-4 && Math.abs(x.getLatLng().lat - lat) < 1e-4)"
                 " { x.openPopup(); } }); }", list(TO_LONLAT.transform(pt.x, pt.y)))
    pop = pg.locator(".leaflet-popup-content")
    pop.wait_for()
    rows = dict(zip(pop.locator("th").all_text_contents(), pop.locator("td").all_text_contents()))
    assert pop.locator(".gr-pop-title").text_content() == "Brannock"
    assert rows == {"People": "830", "Minutes to the nearest hub": "15.0 min", "Nearest hub": "Tessaly Clinic",
                    "Along the network": "2.1 km"}
    full_page.js("() => geoReachMap.map.closePopup()")
    # a network link, picked by a click on the map
    x, y = full_page.screen(*TO_LONLAT.transform(*MI.xy(1.5, 2.0)))
    pg.mouse.click(x, y)
    pop.wait_for()
    assert pop.locator(".gr-pop-head").text_content() == "Road link"
    rows = dict(zip(pop.locator("th").all_text_contents(), pop.locator("td").all_text_contents()))
    assert rows["Minutes to the nearest hub"].endswith(" min") and rows["Length"] == "1.00 km"
    assert "src_fid" not in pop.text_content() and "edge_id" not in pop.text_content()
    full_page.js("() => geoReachMap.map.closePopup()")
    full_page.clean()


def test_issues_off_at_first_then_grouped(full_page):
    pg = full_page.page
    assert pg.locator(".gr-cluster").count() == 0
    full_page.toggle("issues", True)
    texts = pg.locator(".gr-cluster").all_text_contents()
    assert "30" in texts                      # the 30 bunched issues show as one numbered group
    singles = full_page.js("() => { let n = 0; geoReachMap.map.eachLayer(x => { if (x.options && x.options.pane"
                           " === 'gr-pts' && x.options.fillColor === '" + P.ISSUE_COLOUR + "') { n++; } }); return n; }")
    assert singles == 2
    # zooming in splits the group
    full_page.js("() => geoReachMap.map.setZoom(geoReachMap.map.getZoom() + 6, {animate: false})")
    pg.wait_for_timeout(300)
    assert "30" not in pg.locator(".gr-cluster").all_text_contents()
    full_page.js("() => geoReachMap.map.fitBounds(geoReachMap.data.bounds, {padding: [14, 14], animate: false})")
    full_page.toggle("issues", False)
    assert pg.locator(".gr-cluster").count() == 0
    full_page.clean()


def test_legend_follows_layer_switches(full_page):
    pg = full_page.page
    leg = pg.locator(".gr-grp[data-group='hubs'] .gr-leg")
    assert leg.is_visible() and pg.locator(".gr-hub").count() == 3
    full_page.toggle("hubs", False)
    assert not leg.is_visible() and pg.locator(".gr-hub").count() == 0
    full_page.toggle("hubs", True)
    assert leg.is_visible() and pg.locator(".gr-hub").count() == 3
    # one shading at a time: districts replace the rings and their legend
    pg.locator(".gr-grp[data-group='districts'] input").check()
    assert pg.locator(".gr-grp[data-group='districts'] .gr-leg").is_visible()
    assert not pg.locator(".gr-grp[data-group='rings'] .gr-leg").is_visible()
    pg.locator(".gr-grp[data-group='rings'] input").check()
    full_page.clean()


def test_settlement_and_hub_names_show_as_labels(full_page):
    pg = full_page.page
    names = set(MI.settlements()["name"])
    labels = pg.locator(".gr-label:not(.gr-label-hub) span").all_text_contents()
    assert len(labels) >= 3 and set(labels) <= names and "Brannock" in labels
    assert set(pg.locator(".gr-label-hub span").all_text_contents()) == set(MI.hubs()["name"])
    # a name left out for want of room shows when zoomed in on it
    assert "Ossel" not in labels
    pt = MI.settlements().geometry.iloc[0]
    lon, lat = TO_LONLAT.transform(pt.x, pt.y)
    full_page.js("([lon, lat]) => geoReachMap.map.setView([lat, lon], geoReachMap.map.getZoom() + 3, {animate: false})",
                 [lon, lat])
    pg.wait_for_timeout(300)
    assert "Ossel" in pg.locator(".gr-label:not(.gr-label-hub) span").all_text_contents()
    full_page.js("() => geoReachMap.map.fitBounds(geoReachMap.data.bounds, {padding: [14, 14], animate: false})")
    full_page.clean()

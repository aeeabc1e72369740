"""report.html: one offline page with the caution, key figures, charts, tables and an overview map.

Parsed back with the standard library's HTML parser (``html.parser``, which
follows the HTML Living Standard's tokenizer for these cases, from memory):
the text a browser would show must be the user's text exactly, however much
markup it holds; there is no script, and no URL other than ``data:`` images.
The images are decoded as PNG (PNG signature and IHDR chunk, ISO/IEC 15948:2004)
and read back by matplotlib.  Figures are checked against summary.json and the
CSV tables of the same run (one trip, one number).
"""

from __future__ import annotations

import base64
import io
import re
import sys
from html.parser import HTMLParser
from pathlib import Path

import matplotlib.image as mpimg
import pytest

sys.path.insert(0, str(Path(__file__).parent))
from helpers.kit_run import DESCRIPTION, TITLE, run_named  # noqa: E402

from geo_reach import CAUTION  # noqa: E402
from geo_reach.export.report import CSP, el  # noqa: E402
from geo_reach.export.tables import read_csv  # noqa: E402


class Page(HTMLParser):
    """Tags, attributes, text by element, and every URL-like attribute."""

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.tags, self.urls, self.texts, self.stack, self.meta = [], [], [], [], []
        self.by_tag: dict[str, list[str]] = {}

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        a = dict(attrs)
        if tag not in ("meta", "img", "br"):
            self.stack.append(tag)
        for k in ("src", "href", "action", "data", "poster"):
            if k in a:
                self.urls.append(a[k])
        if tag == "meta":
            self.meta.append(a)

    def handle_endtag(self, tag):
        if self.stack and self.stack[-1] == tag:
            self.stack.pop()

    def handle_data(self, data):
        self.texts.append(data)
        if self.stack:
            self.by_tag.setdefault(self.stack[-1], []).append(data)


@pytest.fixture(scope="module")
def kit(tmp_path_factory):
    return run_named(tmp_path_factory.mktemp("report"))


@pytest.fixture(scope="module")
def page(kit):
    _, out, _ = kit
    p = Page()
    p.feed((out / "report.html").read_text(encoding="utf-8"))
    return p


def test_escaping_builder():
    assert el("td", '<a href="x">&') == '<td>&lt;a href=&quot;x&quot;&gt;&amp;</td>'
    assert el("img", src='data:x" onerror="y', alt="a") == '<img src="data:x&quot; onerror=&quot;y" alt="a">'


def test_offline_no_script_and_user_text_shown_as_text(page):
    assert "script" not in page.tags and "iframe" not in page.tags and "link" not in page.tags
    assert page.urls and all(u.startswith("data:image/png;base64,") for u in page.urls)
    assert {"http-equiv": "Content-Security-Policy", "content": CSP} in page.meta
    assert page.by_tag["h1"] == [TITLE] and page.by_tag["title"] == [f"{TITLE}: report"]
    assert DESCRIPTION in page.by_tag["td"]
    text = "".join(page.texts)
    assert text.count(CAUTION) >= 2                     # at the top and in the footer
    for heading in ("Key figures", "People by minutes to the nearest hub", "Overview map", "Reach profile",
                    "Districts", "Weakest regions", "Scenario ranking"):
        assert any(h.startswith(heading) for h in page.by_tag["h2"]), heading


def test_images_are_png(page):
    assert len(page.urls) == 3                           # band chart, overview map, reach profile
    for u in page.urls:
        raw = base64.b64decode(u.split(",", 1)[1])
        assert raw[:8] == b"\x89PNG\r\n\x1a\n" and raw[12:16] == b"IHDR"
        img = mpimg.imread(io.BytesIO(raw), format="png")
        assert img.shape[0] > 100 and img.shape[1] > 300
        assert img[..., :3].std() > 0.05                 # not blank


def _cells(html_text: str, heading: str) -> list[list[str]]:
    part = html_text.split(f"<h2>{heading}", 1)[1].split("</table>", 1)[0]
    rows = re.findall(r"<tr>(.*?)</tr>", part, flags=re.S)
    return [[re.sub(r"<[^>]+>", "", c) for c in re.findall(r"<t[dh][^>]*>(.*?)</t[dh]>", r, flags=re.S)]
            for r in rows]


def test_figures_are_those_of_the_run(kit):
    _, out, summary = kit
    text = (out / "report.html").read_text(encoding="utf-8")
    rows = _cells(text, "Key figures")
    by = {r[0]: r[1:] for r in rows[1:]}
    s = summary["baseline"]
    assert by["People in the study areapeople"][0] == f"{s['population_total']:,.0f}"
    assert by["Within 30 min of a hubpeople"][0] == f"{s['population_by_band']['30']:,.0f}"
    newly = summary["scenarios"]["far_link"]["people_newly_within"]["60"]
    after = by["Within 60 min of a hubpeople"][1]       # "3,600 (+0)" style: after, then the change
    assert after.split(" (")[0] == f"{s['population_by_band']['60'] + newly:,.0f}"
    zones = read_csv(out / "zones.csv")
    drows = _cells(text, "Districts")[1:]
    assert [r[0] for r in drows] == zones["zone_id"].astype(str).tolist()
    assert [r[2] for r in drows] == [f"{v:.1f}" for v in zones["share_within_15_pct"]]
    ranking = _cells(text, "Scenario ranking")[1:]
    assert [r[1] for r in ranking] == [r["scenario"] for r in summary["scenario_ranking"]]


def test_same_run_same_report(kit, tmp_path):
    from geo_reach.pipeline import run_study
    from geo_reach.study import load_study

    p, out, _ = kit
    run_study(load_study(p), tmp_path / "again")
    assert (tmp_path / "again" / "report.html").read_bytes() == (out / "report.html").read_bytes()

"""report.html in headless Chromium (Debian package, driven by Playwright), offline, printed to PDF.

Opened from ``file://`` with every other request blocked: no console error,
no request made at all, every image decoded, markup in the user's text shown
literally (no dialog opens), and Chromium's print to PDF (A4, ``page.pdf``)
gives at most three pages for the demo.  The PDF's pages are counted with
pypdf, a PDF reader independent of Chromium (ISO 32000-1 page tree).

Needs ``/usr/bin/chromium`` (``make test`` installs it when run as root); the
test fails, not skips, without it.
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

sys.path.insert(0, str(Path(__file__).parent))
from helpers.kit_run import TITLE, run_named  # noqa: E402

from geo_reach import CAUTION  # noqa: E402

pytestmark = pytest.mark.browser

CHROMIUM = "/usr/bin/chromium"
ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
        "--disable-background-networking", "--disable-component-update", "--disable-sync"]
A4_PT = (595.0, 842.0)     # ISO 216 A4, 210 x 297 mm, in PDF points (1/72 in)


@pytest.fixture(scope="module")
def browser():
    if not Path(CHROMIUM).exists():
        pytest.fail(f"headless Chromium not found at {CHROMIUM}: run `make test` as root (it installs the Debian "
                    "package) or `apt-get install chromium`", pytrace=False)
    from playwright.sync_api import sync_playwright

    with sync_playwright() as pw:
        br = pw.chromium.launch(executable_path=CHROMIUM, args=ARGS)
        yield br
        br.close()


def open_offline(browser, path: Path):
    """The page, and lists of console errors, requests made (other than the file) and dialogs."""
    errors, requests, dialogs = [], [], []
    page = browser.new_page(viewport={"width": 1000, "height": 1300})
    page.on("console", lambda m: errors.append(m.text) if m.type == "error" else None)
    page.on("pageerror", lambda e: errors.append(str(e)))
    page.on("dialog", lambda d: (dialogs.append(d.message), d.dismiss()))

    def route(r):
        url = r.request.url
        if url == path.as_uri() or url.startswith("data:"):
            r.continue_()
        else:
            requests.append(url)
            r.abort()

    page.route("**/*", route)
    page.goto(path.as_uri())
    page.wait_for_load_state("load")
    return page, errors, requests, dialogs


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    out = tmp_path_factory.mktemp("demo_report") / "demo"
    p = subprocess.run([sys.executable, "-m", "geo_reach", "demo", "-o", str(out), "--quiet"],
                       capture_output=True, text=True)
    assert p.returncode == 0, p.stderr
    return out


def test_demo_report_offline_and_at_most_three_a4_pages(browser, demo, tmp_path):
    from pypdf import PdfReader

    page, errors, requests, dialogs = open_offline(browser, demo / "report.html")
    assert errors == [] and requests == [] and dialogs == []
    widths = page.eval_on_selector_all("img", "els => els.map(e => e.complete ? e.naturalWidth : 0)")
    assert len(widths) == 3 and min(widths) > 300
    assert CAUTION in page.inner_text(".caution")
    shot = tmp_path / "report.png"
    page.screenshot(path=str(shot), full_page=True)
    import matplotlib.image as mpimg

    img = mpimg.imread(shot)
    assert img.shape[0] > 1300 and img[..., :3].std() > 0.05
    pdf = tmp_path / "report.pdf"
    page.pdf(path=str(pdf), format="A4", print_background=True, prefer_css_page_size=True)
    reader = PdfReader(pdf)
    assert 1 <= len(reader.pages) <= 3, len(reader.pages)
    for p in reader.pages:
        assert np.allclose([float(p.mediabox.width), float(p.mediabox.height)], A4_PT, atol=1.5)
    words = " ".join(p.extract_text() for p in reader.pages)
    assert "Model estimates only" in words and "Scenario ranking" in words
    page.close()


def test_markup_in_names_is_shown_literally(browser, tmp_path):
    _, out, _ = run_named(tmp_path)
    page, errors, requests, dialogs = open_offline(browser, out / "report.html")
    assert errors == [] and requests == [] and dialogs == []
    assert page.inner_text("h1") == TITLE
    assert page.title() == f"{TITLE}: report"
    assert page.eval_on_selector_all("script", "els => els.length") == 0
    assert "<img src=x onerror=alert(2)>" in page.inner_text("body")
    page.close()

"""The web report in a real browser: Debian's headless Chromium, driven by playwright.

Renders a report of every kind of results folder, takes a full-page screenshot, and checks that
the headline, every figure and every table are in the DOM and visible with a non-zero size, that
the planted <script> text stays text, that the print stylesheet applies, and that the page made no
network request (every request is the file itself or a data: URI).
"""

from pathlib import Path

import pytest

from cosmogrow.report.html import build_report

from report_fixtures import EVIL_SAMPLE, results_folders

pytestmark = pytest.mark.browser

CHROMIUM = Path("/usr/bin/chromium")
CHROMIUM_ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
                 "--disable-component-update", "--no-first-run", "--disable-sync"]


@pytest.fixture(scope="module")
def rendered(tmp_path_factory):
    """Everything the browser saw: requests, dialogs, element geometry, screenshot and PDF."""
    if not CHROMIUM.exists():
        pytest.skip(f"{CHROMIUM} is absent (install Debian's chromium: `make browser`)")
    from playwright.sync_api import sync_playwright

    folders = results_folders(tmp_path_factory)
    out_dir = tmp_path_factory.mktemp("browser")
    report = build_report(list(folders.values()), out_dir / "report.html", title="Browser check").path
    seen = {"requests": [], "dialogs": [], "failed": [], "folders": folders}
    with sync_playwright() as playwright:
        browser = playwright.chromium.launch(executable_path=str(CHROMIUM), args=CHROMIUM_ARGS)
        try:
            page = browser.new_page(viewport={"width": 1280, "height": 900})
            page.on("request", lambda request: seen["requests"].append(request.url))
            page.on("requestfailed", lambda request: seen["failed"].append(request.url))
            page.on("dialog", lambda dialog: (seen["dialogs"].append(dialog.message), dialog.dismiss()))
            page.goto(report.resolve().as_uri(), wait_until="load")
            seen["screenshot"] = out_dir / "report.png"
            page.screenshot(path=str(seen["screenshot"]), full_page=True)
            seen["headline"] = _box(page.locator("#headline"))
            seen["headline_text"] = page.locator("#headline").inner_text()
            seen["warnings"] = _box(page.locator("#warnings"))
            seen["images"] = [dict(_box(img), file=img.get_attribute("data-file"),
                                   loaded=img.evaluate("e => e.complete && e.naturalWidth > 0"))
                              for img in page.locator("img").all()]
            seen["tables"] = [dict(_box(t), rows=t.locator("tbody tr").count())
                              for t in page.locator("table").all()]
            seen["scripts"] = page.locator("script").count()
            seen["sample_as_text"] = page.get_by_text(EVIL_SAMPLE, exact=True).count()
            page.emulate_media(media="print")
            seen["toc_in_print"] = page.locator("nav.toc").is_visible()
            seen["pdf"] = page.pdf(format="A4")
        finally:
            browser.close()
    return seen


def _box(locator):
    box = locator.bounding_box()
    return {"visible": locator.is_visible(), "width": box["width"] if box else 0,
            "height": box["height"] if box else 0}


def test_screenshot_is_taken(rendered):
    shot = rendered["screenshot"]
    assert shot.is_file() and shot.stat().st_size > 50_000
    assert shot.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_headline_is_visible_with_k(rendered):
    assert rendered["headline"]["visible"] and rendered["headline"]["height"] > 100
    assert "k = " in rendered["headline_text"] and "68 % interval" in rendered["headline_text"]
    assert rendered["warnings"]["visible"]


def test_every_figure_is_in_the_dom_loaded_and_visible(rendered):
    expected = sorted(p.name for folder in rendered["folders"].values() for p in folder.glob("*.png"))
    images = rendered["images"]
    assert sorted(image["file"] for image in images) == expected
    for image in images:
        assert image["visible"] and image["loaded"], image
        assert image["width"] > 200 and image["height"] > 100, image


def test_every_table_is_visible(rendered):
    tables = rendered["tables"]
    assert len(tables) >= 12
    for table in tables:
        assert table["visible"] and table["width"] > 100 and table["height"] > 20, table
        assert table["rows"] >= 1


def test_no_network_requests_and_no_script(rendered):
    assert rendered["requests"], "the request listener saw nothing"
    for url in rendered["requests"]:
        assert url.startswith(("file:", "data:")), url
    assert rendered["failed"] == []
    assert rendered["scripts"] == 0 and rendered["dialogs"] == []
    assert rendered["sample_as_text"] >= 1  # the <script> sample name is shown as text


def test_print_stylesheet_applies(rendered):
    assert rendered["toc_in_print"] is False
    assert rendered["pdf"][:4] == b"%PDF" and rendered["pdf"].count(b"/Type /Page") >= 4

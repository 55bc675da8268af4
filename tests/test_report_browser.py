"""The HTML report in a real headless browser (Debian's Chromium, driven by playwright).

Checks: nothing is requested but the file itself, no broken image, no element wider than the
page at A4 width, the caution is present. Skipped only when Chromium is not installed
(.ci/run installs it).
"""

from __future__ import annotations

import shutil

import pytest

from relayset.report import build

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
pytestmark = pytest.mark.skipif(CHROMIUM is None, reason="chromium is not installed")
sync_api = pytest.importorskip("playwright.sync_api")

#: A4 width 210 mm at the CSS reference 96 px per inch.
A4_WIDTH_PX = round(210 / 25.4 * 96)


@pytest.fixture(scope="module")
def report_files(tmp_path_factory):
    from relayset.resources import demo_lines_dir

    out = tmp_path_factory.mktemp("browser")
    paths = [demo_lines_dir() / "elsford_fallowby_230kv_double.toml",
             demo_lines_dir() / "greyholt_ivel_400kv_twin.toml"]
    reports = build.render_reports(paths, jobs=1)
    build.write_reports(reports, out)
    return [out / f"{r.stem}.html" for r in reports]


def test_report_in_headless_chromium(report_files):
    with sync_api.sync_playwright() as p:
        browser = p.chromium.launch(executable_path=CHROMIUM,
                                    args=["--no-sandbox", "--disable-gpu",
                                          "--disable-background-networking"])
        try:
            for html in report_files:
                page = browser.new_page(viewport={"width": A4_WIDTH_PX, "height": 1123})
                requests: list[str] = []
                page.on("request", lambda req, log=requests: log.append(req.url))
                page.goto(html.as_uri(), wait_until="load")
                assert requests == [html.as_uri()], requests
                broken = page.evaluate(
                    "Array.from(document.images).filter(i => !i.complete || "
                    "i.naturalWidth === 0).length")
                assert broken == 0
                assert page.evaluate("document.querySelectorAll('svg').length") >= 3
                too_wide = page.evaluate(
                    """() => { const w = document.documentElement.clientWidth; return Array
                    .from(document.querySelectorAll('body *'))
                    .filter(e => !e.closest('.watermark'))
                    // an <svg> clips its own content: check the <svg> box, not its parts
                    .filter(e => e.tagName.toLowerCase() === 'svg' || !e.closest('svg'))
                    .filter(e => e.getBoundingClientRect().right > w + 1)
                    .map(e => e.tagName + '.' + e.className).slice(0, 5); }""")
                assert too_wide == []
                assert page.evaluate(
                    "document.documentElement.scrollWidth <= "
                    "document.documentElement.clientWidth")
                caution = page.inner_text("#caution")
                assert "licensed professional engineer" in caution
                page.close()
        finally:
            browser.close()

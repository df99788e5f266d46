"""The HTML report, in a real browser (headless Chromium from the distribution's packages) and by a parser.

References: html5lib (a conforming HTML5 parser, strict mode raises on every parse error) for the page's
structure; matplotlib's own ``transData`` for where clipped points cross the top of the axes; Chromium for
loading, requests, console errors, the filters and the screenshot.
"""

from __future__ import annotations

import html as htmlmod
import json
import os
import re
import shutil
import subprocess
import sys
import textwrap
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import numpy as np
import pytest

from figproof import cli

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser") or shutil.which("google-chrome")
DRIVER = shutil.which("chromedriver")


def _no_browser_reason() -> str | None:
    if CHROMIUM is None or DRIVER is None:
        return "no Chromium and chromedriver on this machine (Debian packages chromium, chromium-driver)"
    try:
        import selenium  # noqa: F401
    except ImportError:
        return "selenium is not installed (pip install -e '.[test]')"
    return None


@pytest.fixture(scope="module")
def demo_report(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """The demo's reports folder, written once for this module."""
    base = tmp_path_factory.mktemp("demo")
    os.environ.setdefault("FIGPROOF_REPO_VIEW", "copy")
    assert cli.main(["demo", "--keep", str(base)]) == 0
    return base / "figproof-report"


@pytest.fixture(scope="module")
def browser() -> Iterator[Any]:
    reason = _no_browser_reason()
    if reason:
        pytest.skip(reason)
    from selenium import webdriver
    from selenium.webdriver.chrome.service import Service

    options = webdriver.ChromeOptions()
    options.binary_location = str(CHROMIUM)
    for flag in ("--headless=new", "--no-sandbox", "--disable-gpu", "--disable-dev-shm-usage",
                 "--window-size=1280,1000", "--hide-scrollbars"):
        options.add_argument(flag)
    options.set_capability("goog:loggingPrefs", {"browser": "ALL", "performance": "ALL"})
    driver = webdriver.Chrome(service=Service(executable_path=str(DRIVER)), options=options)
    try:
        yield driver
    finally:
        driver.quit()


def _requests(driver: Any) -> list[str]:
    urls = []
    for entry in driver.get_log("performance"):
        message = json.loads(entry["message"])["message"]
        if message.get("method") == "Network.requestWillBeSent":
            urls.append(message["params"]["request"]["url"])
    return urls


def _open(driver: Any, page: Path) -> None:
    driver.get_log("performance")  # drop what earlier pages logged
    driver.get_log("browser")
    driver.get(page.as_uri())


# --------------------------------------------------------------------------
# without a browser
# --------------------------------------------------------------------------


@pytest.mark.slow
def test_page_is_valid_html5_and_self_contained(demo_report: Path) -> None:
    import html5lib

    page = demo_report / "html" / "index.html"
    text = page.read_text(encoding="utf-8")
    html5lib.HTMLParser(strict=True).parse(text)  # raises on any parse error
    # the header names the isolation layers that were in force, as the markdown summary does
    summary = (demo_report / "summary.md").read_text(encoding="utf-8")
    layers = summary.split("Isolation: ", 1)[1].split(".\n", 1)[0]
    assert f"isolation: {layers}" in text
    links = re.findall(r'(?:src|href)="([^"]+)"', text)
    assert links
    for link in links:
        assert not re.match(r"^[a-z]+:|^//", link), f"{link} leaves the report folder"
        if not link.startswith("#"):
            assert (page.parent / htmlmod.unescape(link)).is_file(), link
    anchors = set(re.findall(r'id="([^"]+)"', text))
    assert {h[1:] for h in links if h.startswith("#")} <= anchors
    # every open finding of the JSON report is on the page, once, with its allow comment
    report = json.loads((demo_report / "figproof.json").read_text(encoding="utf-8"))
    open_findings = [f for f in report["findings"] if "accepted" not in f]
    assert text.count("<li class=\"finding ") == len(open_findings)
    for f in open_findings:
        assert f"# figproof: allow {f['rule']} -- " in text
    # the markdown summary links the page
    assert "](html/index.html)" in (demo_report / "summary.md").read_text(encoding="utf-8")


@pytest.mark.slow
def test_every_generated_redraw_runs_and_draws_the_pictured_points(demo_report: Path, tmp_path: Path) -> None:
    page = demo_report / "html" / "index.html"
    text = page.read_text(encoding="utf-8")
    codes = [htmlmod.unescape(c) for c in re.findall(r'<pre class="code"><code>(.*?)</code></pre>', text, re.S)]
    pictures = re.findall(r'<img src="(img/[^"]+-redraw\.png)"', text)
    assert len(codes) == len(pictures) >= 2  # the demo's bar chart of means and its boxes of n = 4
    repo = demo_report.parent / "demo-lab"
    for k, (code, picture) in enumerate(zip(codes, pictures, strict=True)):
        assert "..." not in code and "TODO" not in code and "<" not in code.replace("<=", "")
        script = tmp_path / f"redraw{k}.py"
        script.write_text(code, encoding="utf-8")
        out = tmp_path / f"redraw{k}.png"
        probe = textwrap.dedent(f"""
            import json, runpy, sys
            import matplotlib
            matplotlib.use("Agg")
            import matplotlib.pyplot as plt
            runpy.run_path({str(script)!r}, run_name="__main__")
            fig = plt.gcf()
            fig.savefig({str(out)!r}, format="png", metadata={{"Software": None}})
            ax = fig.axes[0]
            from matplotlib.collections import PathCollection
            points = [c.get_offsets().tolist() for c in ax.collections if isinstance(c, PathCollection)]
            print(json.dumps(points))
        """)
        done = subprocess.run([sys.executable, "-c", probe], cwd=repo, capture_output=True, text=True, timeout=120,
                              env={**os.environ, "MPLBACKEND": "Agg"})
        assert done.returncode == 0, done.stderr
        points = json.loads(done.stdout.strip().splitlines()[-1])
        assert sum(len(p) for p in points) in (56, 16)  # 4 groups of 14 roots; 4 dishes x 4 germination trays
        # the code draws exactly the picture the report shows
        from PIL import Image

        with Image.open(out) as a, Image.open(page.parent / picture) as b:
            assert a.size == b.size
            assert np.array_equal(np.asarray(a.convert("RGB")), np.asarray(b.convert("RGB")))


# --------------------------------------------------------------------------
# in the browser
# --------------------------------------------------------------------------


@pytest.mark.slow
def test_page_loads_offline_with_every_image_and_no_errors(demo_report: Path, browser: Any) -> None:
    page = demo_report / "html" / "index.html"
    _open(browser, page)
    images = browser.execute_script(
        "return Array.from(document.images).map(function(i){return [i.getAttribute('src'), i.complete, "
        "i.naturalWidth];});")
    assert len(images) >= 10
    for src, complete, width in images:
        assert complete and width > 0, f"{src} did not load"
    urls = _requests(browser)
    assert urls and all(u.startswith("file://") for u in urls), [u for u in urls if not u.startswith("file://")]
    errors = [e for e in browser.get_log("browser") if e["level"] in ("SEVERE", "WARNING")]
    assert errors == []


@pytest.mark.slow
def test_filters_hide_and_show_the_right_findings(demo_report: Path, browser: Any) -> None:
    from selenium.webdriver.support.ui import Select

    report = json.loads((demo_report / "figproof.json").read_text(encoding="utf-8"))
    open_findings = [f for f in report["findings"] if "accepted" not in f]
    _open(browser, demo_report / "html" / "index.html")

    def shown() -> list[dict[str, str]]:
        return browser.execute_script(
            "return Array.from(document.querySelectorAll('li[data-finding]')).filter(function(li){"
            "return li.offsetParent !== null;}).map(function(li){return {rule: li.dataset.rule, "
            "severity: li.dataset.severity, script: li.dataset.script};});")

    assert len(shown()) == len(open_findings)
    form = browser.find_element("id", "filters")
    Select(form.find_element("name", "severity")).select_by_value("warning")
    got = shown()
    assert got and {g["severity"] for g in got} == {"warning"}
    assert len(got) == sum(f["severity"] == "warning" for f in open_findings)
    cards = browser.execute_script("return Array.from(document.querySelectorAll('[data-card]')).filter("
                                   "function(c){return c.offsetParent !== null;}).length;")
    assert 0 < cards < len(report["scripts"])
    Select(form.find_element("name", "severity")).select_by_value("")
    Select(form.find_element("name", "rule")).select_by_value("bars-for-continuous")
    got = shown()
    assert [g["rule"] for g in got] == ["bars-for-continuous"] * sum(f["rule"] == "bars-for-continuous"
                                                                      for f in open_findings)
    marks = browser.execute_script("return Array.from(document.querySelectorAll('[data-mark]')).filter("
                                   "function(m){return getComputedStyle(m).display !== 'none';}).map("
                                   "function(m){return m.dataset.rules;});")
    assert marks and all("bars-for-continuous" in m.split() for m in marks)
    Select(form.find_element("name", "rule")).select_by_value("")
    Select(form.find_element("name", "script")).select_by_value("figures/fig4_growth_curves.py")
    got = shown()
    assert {g["script"] for g in got} == {"figures/fig4_growth_curves.py"}
    assert len(got) == sum(f["path"] == "figures/fig4_growth_curves.py" for f in open_findings)
    Select(form.find_element("name", "script")).select_by_value("")
    assert len(shown()) == len(open_findings)


@pytest.mark.slow
def test_change_view_switches_in_place(demo_report: Path, browser: Any) -> None:
    _open(browser, demo_report / "html" / "index.html")
    box = browser.find_element("css selector", "[data-switch]")
    assert "the title and the bars changed; 33 % of pixels" in box.text

    def visible() -> list[str]:
        return [i.get_attribute("data-view") for i in box.find_elements("css selector", "img[data-view]")
                if i.is_displayed()]

    assert visible() == ["changes"]
    for view in ("committed", "regenerated", "changes"):
        radio = box.find_element("css selector", f"input[value='{view}']")
        browser.execute_script("arguments[0].scrollIntoView(); arguments[0].click();", radio)
        assert visible() == [view]


@pytest.mark.slow
def test_screenshot_shows_the_figure_grid(demo_report: Path, browser: Any, tmp_path: Path) -> None:
    from PIL import Image

    _open(browser, demo_report / "html" / "index.html")
    grid = browser.find_element("css selector", "#overview .grid")
    shot = tmp_path / "grid.png"
    grid.screenshot(str(shot))
    with Image.open(shot) as img:
        pixels = np.asarray(img.convert("RGB"))
    assert pixels.shape[0] > 200 and pixels.shape[1] > 600
    # not blank: a good share of the grid is ink, and it has the many colours of the demo's figures
    assert np.mean(pixels.min(axis=-1) < 200) > 0.05
    assert len(np.unique(pixels.reshape(-1, 3), axis=0)) > 500
    cards = grid.find_elements("css selector", "[data-card]")
    report = json.loads((demo_report / "figproof.json").read_text(encoding="utf-8"))
    assert len(cards) == sum(len(s["figures"]) for s in report["scripts"])


_CLIPPED = """
import matplotlib.pyplot as plt

fig, ax = plt.subplots(figsize=(4, 3), dpi={dpi})
ax.scatter([1, 2, 3, 4, 5, 6], [10, 20, 30, 55, 58, 25])
ax.set_xlim(0, 7)
ax.set_ylim(0, 40)
fig.savefig("doses.png")
"""


@pytest.mark.slow
@pytest.mark.parametrize("dpi", [72, 200])
def test_marks_land_on_the_clipped_points(tmp_path: Path, browser: Any, dpi: int,
                                          capsys: pytest.CaptureFixture[str]) -> None:
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    repo = tmp_path / "repo"
    repo.mkdir()
    (repo / "doses.py").write_text(_CLIPPED.format(dpi=dpi), encoding="utf-8")
    out = tmp_path / "visual"
    cli.main(["check", str(repo), "--html", str(out), "--quiet", "--no-cache"])
    capsys.readouterr()
    # where matplotlib puts the two points above the y-limit, pulled onto the top edge (display pixels,
    # origin bottom left), and the figure's height in pixels
    fig = Figure(figsize=(4, 3), dpi=dpi)
    FigureCanvasAgg(fig)
    ax = fig.add_subplot()
    ax.set_xlim(0, 7)
    ax.set_ylim(0, 40)
    top = ax.transData.transform([(4, 40), (5, 40)])
    height = fig.bbox.height
    _open(browser, out / "index.html")
    found = browser.execute_script("""
        var mark = document.querySelector('[data-mark][data-rules~="axis-clips-data"] rect.line');
        var img = mark.ownerSVGElement.previousElementSibling;
        var m = mark.getBoundingClientRect(), i = img.getBoundingClientRect();
        var s = img.naturalWidth / i.width;
        return [(m.left - i.left) * s, (m.top - i.top) * s, (m.right - i.left) * s, (m.bottom - i.top) * s,
                img.naturalWidth, img.naturalHeight];""")
    x0, y0, x1, y1, width, natural_h = found
    assert (width, natural_h) == (round(fig.bbox.width), round(height))
    for x, y in top:
        y_img = height - y  # image rows count from the top
        assert x0 <= x <= x1 and y0 <= y_img <= y1, (x, y_img, found)
    # the box hugs the two cut points: no wider than their spread plus a little
    assert (x1 - x0) < (top[1][0] - top[0][0]) + 40

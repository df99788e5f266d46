"""A deposit checked end to end: environment first, references matched, the replication report, a batch.

The deposit is an invented lab's (a growth-curve study): one script that reproduces its figure, one written for
Python 2, one that needs a package this machine lacks, one that passes an argument pandas 2.0 removed
(``error_bad_lines``; pandas 2.0.0 release notes).  The references are that figure as a journal returns it
(resized, cropped by 3 pixels, JPEG-compressed) and one figure that no script draws.
"""

from __future__ import annotations

import io
import json
import zipfile
from pathlib import Path

import pytest
from PIL import Image

from figproof.cli import main

GROWTH = b"t,od\n0,0.05\n1,0.09\n2,0.18\n3,0.35\n4,0.61\n5,0.88\n6,1.02\n7,1.08\n"
PLOT = '''import matplotlib
matplotlib.use("Agg")
import matplotlib.pyplot as plt
import csv
with open("data/growth.csv") as fh:
    rows = list(csv.reader(fh))[1:]
fig, ax = plt.subplots(figsize=(4, 3), dpi={dpi})
ax.plot([float(r[0]) for r in rows], [float(r[1]) for r in rows], "o-")
ax.set_xlabel("time (h)")
ax.set_ylabel("OD600")
fig.savefig({out!r})
'''
DEPOSIT = {
    "growth/fig1_growth.py": PLOT.format(dpi=100, out="fig1.png").encode(),
    "growth/fig2_legacy.py": b"import matplotlib\nmatplotlib.use('Agg')\nimport matplotlib.pyplot as plt\n"
                             b"print 'plotting'\nplt.plot([1, 2])\nplt.savefig('fig2.png')\n",
    "growth/fig3_counts.py": b"import matplotlib\nmatplotlib.use('Agg')\nimport matplotlib.pyplot as plt\n"
                             b"import cellcount_tools_lab\nplt.plot(cellcount_tools_lab.load())\n",
    "growth/fig4_table.py": b"import matplotlib\nmatplotlib.use('Agg')\nimport matplotlib.pyplot as plt\n"
                            b"import pandas as pd\nd = pd.read_csv('data/growth.csv', error_bad_lines=False)\n"
                            b"d.plot(x='t', y='od')\nplt.savefig('fig4.png')\n",
    "growth/data/growth.csv": GROWTH,
    "growth/requirements.txt": b"pandas==1.3.5\nmatplotlib>=3\n",
}


def _zip(path: Path, members: dict[str, bytes]) -> Path:
    with zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED) as zf:
        for name, data in members.items():
            zf.writestr(name, data)
    return path


def _figure_as_submitted(folder: Path, data: bytes = GROWTH) -> Image.Image:
    """fig1 drawn by its own code at print resolution (from ``data``), as the authors submitted it."""
    import os
    import runpy

    (folder / "data").mkdir(parents=True)
    (folder / "data/growth.csv").write_bytes(data)
    (folder / "draw.py").write_text(PLOT.format(dpi=300, out="submitted.png"))
    here = os.getcwd()
    try:
        os.chdir(folder)
        runpy.run_path("draw.py")
    finally:
        os.chdir(here)
        import matplotlib.pyplot as plt

        plt.close("all")
    img = Image.open(folder / "submitted.png")
    img.load()
    return img.convert("RGB")


def _references(tmp_path: Path) -> Path:
    refs = tmp_path / "references"
    refs.mkdir()
    fig = _figure_as_submitted(tmp_path / "authors")
    fig.resize((700, 525), Image.Resampling.BICUBIC).save(refs / "Figure 1.tif")
    buf = io.BytesIO()
    fig.crop((3, 3, fig.width - 3, fig.height - 3)).save(buf, "JPEG", quality=40)
    (refs / "Figure 1 (cropped).jpg").write_bytes(buf.getvalue())
    other = Image.new("RGB", (600, 400), "white")
    other.paste((30, 30, 160), (100, 100, 500, 300))  # a figure no script draws
    other.save(refs / "Figure 5.png")
    return refs


@pytest.mark.slow
def test_a_deposit_is_explained_matched_and_reported(tmp_path, monkeypatch, capsys) -> None:
    temp = tmp_path / "tmp"
    temp.mkdir()
    monkeypatch.setenv("TMPDIR", str(temp))
    archive = _zip(tmp_path / "growth-study.zip", DEPOSIT)
    refs = _references(tmp_path)
    md, js = tmp_path / "report/replication.md", tmp_path / "report/replication.json"
    code = main(["check", str(archive), "--reference", str(refs), "--markdown", str(md), "--json", str(js),
                 "--quiet"])
    assert code == 1  # scripts failed and a reference was not reproduced
    report = json.loads(js.read_text())
    causes = {c["kind"]: c for c in report["environment"]["causes"]}
    assert causes["python2-only"]["scripts"] == ["fig2_legacy.py"]
    assert causes["package-missing"]["key"] == "cellcount_tools_lab"
    assert causes["package-missing"]["verdict"] == "install cellcount_tools_lab to run 1 script"
    assert causes["api-removed"]["scripts"] == ["fig4_table.py"]
    assert causes["api-removed"]["key"].startswith("pandas 2.0 removed a reader/writer argument")
    asks = {a["requirement"]: a["met"] for a in report["environment"]["requirements"]}
    assert asks["pandas==1.3.5"] is False and asks["matplotlib>=3"] is True
    verdicts = {r["reference"]: (r["verdict"], r["regenerated"]) for r in report["references"]}
    assert verdicts["Figure 1.tif"] == ("reproduced", "fig1_growth.py#1")
    assert verdicts["Figure 1 (cropped).jpg"] == ("reproduced", "fig1_growth.py#1")
    assert verdicts["Figure 5.png"][0] == "not-found"
    (regenerated,) = report["regenerated"]
    assert regenerated["id"] == "fig1_growth.py#1" and regenerated["reference"] is not None
    assert {i["path"] for i in report["inputs"]} == {"data/growth.csv"}
    text = md.read_text()
    # the environment comes before the figures, and the letter closes the report
    assert text.index("## Environment") < text.index("## Figures as submitted") < text.index("## Run log") \
        < text.index("## Provenance") < text.index("## For the letter to the authors")
    assert "**install cellcount_tools_lab to run 1 script**: `fig3_counts.py`" in text
    assert "We could not reproduce Figure 5.png." in report["letter"]
    assert not list(temp.iterdir())


def _local_page(page: Path) -> str:
    """The page's text, after checking it is strict HTML5 and links nothing outside its folder that is missing."""
    import html as htmlmod
    import re

    import html5lib

    text = page.read_text(encoding="utf-8")
    html5lib.HTMLParser(strict=True).parse(text)  # html5lib, a conforming HTML5 parser: raises on any parse error
    for link in re.findall(r'(?:src|href)="([^"]+)"', text):
        assert not re.match(r"^[a-z]+:|^//", link), f"{link} leaves the report folder"
        if not link.startswith("#"):
            assert (page.parent / htmlmod.unescape(link)).is_file(), link
    return text


@pytest.mark.slow
def test_a_figure_that_differs_gets_the_change_view_in_markdown_json_and_html(tmp_path, monkeypatch) -> None:
    temp = tmp_path / "tmp"
    temp.mkdir()
    monkeypatch.setenv("TMPDIR", str(temp))
    archive = _zip(tmp_path / "growth-study.zip", {k: v for k, v in DEPOSIT.items()
                                                   if k in ("growth/fig1_growth.py", "growth/data/growth.csv")})
    refs = tmp_path / "references"
    refs.mkdir()
    moved = GROWTH.replace(b"5,0.88", b"5,0.50")  # the submitted figure was drawn from other data at hour 5
    _figure_as_submitted(tmp_path / "authors", moved).save(refs / "Figure 1.png")
    md, js, site = tmp_path / "report/replication.md", tmp_path / "report/replication.json", tmp_path / "site"
    code = main(["check", str(archive), "--reference", str(refs), "--markdown", str(md), "--json", str(js),
                 "--html", str(site), "--quiet"])
    assert code == 1
    (ref,) = json.loads(js.read_text())["references"]
    assert (ref["verdict"], ref["regenerated"]) == ("differs", "fig1_growth.py#1")
    assert (md.parent / ref["change_view"]).is_file() and ref["change_view"].startswith("changes/")
    assert ref["change_caption"].endswith("% of pixels") and ref["change_caption"] != "nothing changed"
    assert f"[what changed]({ref['change_view']}): {ref['change_caption']}" in md.read_text()
    text = _local_page(site / "index.html")
    assert text.index('id="environment"') < text.index('id="references"') < text.index('id="regenerated"') \
        < text.index('id="run-log"') < text.index('id="provenance"') < text.index('id="letter"')
    assert "NOT REPRODUCED" in text and "<code>data/growth.csv</code>" in text
    # the issue-15 change view and its switch: what changed, the figure as submitted, the regenerated figure
    assert text.count("<div class=\"drift\" data-switch>") == 1 and text.count('data-view="') == 3
    assert "We could not reproduce Figure 1.png." in text
    # the layers in force for the deposit's scripts, as the markdown summary names them
    assert "isolation: " in text and "Python write guard (audit hooks)" in text and "time limit" in text
    assert not list(temp.iterdir())


@pytest.mark.slow
def test_a_batch_reports_each_deposit_and_a_refused_one_does_not_stop_the_others(tmp_path, monkeypatch,
                                                                                  capsys) -> None:
    temp = tmp_path / "tmp"
    temp.mkdir()
    monkeypatch.setenv("TMPDIR", str(temp))
    good = _zip(tmp_path / "study-a.zip", {k: v for k, v in DEPOSIT.items()
                                           if k in ("growth/fig1_growth.py", "growth/data/growth.csv")})
    evil = _zip(tmp_path / "study-b.zip", {"x/fig.py": b"import matplotlib\n", "../../escape.py": b"x\n"})
    folder = tmp_path / "study-c"
    (folder / "data").mkdir(parents=True)
    (folder / "data/growth.csv").write_bytes(GROWTH)
    (folder / "plot.py").write_bytes(DEPOSIT["growth/fig1_growth.py"])
    out = tmp_path / "reports"
    code = main(["check", str(good), str(evil), str(folder), "--report-dir", str(out), "--quiet"])
    assert code == 5  # one deposit could not be unpacked
    index = json.loads((out / "index.json").read_text())
    rows = {d["deposit"]: d for d in index["deposits"]}
    assert rows["study-a"]["reproduced"] is True and rows["study-c"]["reproduced"] is True
    assert "climbs out of the deposit" in rows["study-b"]["problem"] and rows["study-b"]["folder"] is None
    assert (out / "study-a/replication.md").is_file() and (out / "study-c/replication.json").is_file()
    assert "| `study-b` | **not checked**" in (out / "index.md").read_text()
    # the index links each deposit's HTML report, which opens offline
    assert rows["study-a"]["html"] == "study-a/replication.html" and rows["study-b"]["html"] is None
    assert "[the visual report](study-c/replication.html)" in (out / "index.md").read_text()
    index_page = _local_page(out / "index.html")
    assert 'href="study-a/replication.html"' in index_page and 'href="study-c/replication.html"' in index_page
    assert "REPRODUCED" in _local_page(out / "study-a/replication.html")
    assert not (tmp_path / "escape.py").exists() and not list(temp.iterdir())


def test_several_deposits_without_a_report_folder_is_one_line(tmp_path, capsys) -> None:
    a, b = _zip(tmp_path / "a.zip", {"x.py": b""}), _zip(tmp_path / "b.zip", {"y.py": b""})
    assert main(["check", str(a), str(b)]) == 2
    assert capsys.readouterr().err.strip() == ("figproof: several deposits need --report-dir DIR (one report "
                                               "folder each, and an index)")
    assert main(["check", str(a), "--reference", str(tmp_path / "nowhere")]) == 2
    assert "--reference must be a folder of figure files" in capsys.readouterr().err


@pytest.mark.slow
def test_the_replication_page_opens_offline_and_its_change_view_switches(tmp_path, monkeypatch) -> None:
    # Chromium from the distribution, driven by selenium, as the visual report's own browser tests do
    from tests.test_html_report import _no_browser_reason, _open, _requests

    reason = _no_browser_reason()
    if reason:
        pytest.skip(reason)
    from selenium import webdriver
    from selenium.webdriver.chrome.service import Service

    from tests.test_html_report import CHROMIUM, DRIVER

    monkeypatch.setenv("TMPDIR", str(tmp_path))
    archive = _zip(tmp_path / "growth-study.zip", {k: v for k, v in DEPOSIT.items()
                                                   if k in ("growth/fig1_growth.py", "growth/data/growth.csv")})
    refs = tmp_path / "references"
    refs.mkdir()
    _figure_as_submitted(tmp_path / "authors", GROWTH.replace(b"5,0.88", b"5,0.50")).save(refs / "Figure 1.png")
    site = tmp_path / "site"
    assert main(["check", str(archive), "--reference", str(refs), "--html", str(site), "--quiet"]) == 1
    # the browser gets the usual temp folder: Chromium's sockets live there, and a long path (a test worker's
    # temp folder) passes the 108-byte limit of a Unix socket's name, so Chromium would exit at once
    monkeypatch.undo()
    options = webdriver.ChromeOptions()
    options.binary_location = str(CHROMIUM)
    for flag in ("--headless=new", "--no-sandbox", "--disable-gpu", "--disable-dev-shm-usage",
                 "--window-size=1280,1000"):
        options.add_argument(flag)
    options.set_capability("goog:loggingPrefs", {"browser": "ALL", "performance": "ALL"})
    browser = webdriver.Chrome(service=Service(executable_path=str(DRIVER)), options=options)
    try:
        _open(browser, site / "index.html")
        images = browser.execute_script("return Array.from(document.images).map(function(i){return "
                                        "[i.getAttribute('src'), i.complete, i.naturalWidth];});")
        assert len(images) >= 5 and all(complete and width > 0 for _, complete, width in images), images
        urls = _requests(browser)
        assert urls and all(u.startswith("file://") for u in urls), urls
        assert [e for e in browser.get_log("browser") if e["level"] in ("SEVERE", "WARNING")] == []
        box = browser.find_element("css selector", "[data-switch]")

        def visible() -> list[str]:
            return [i.get_attribute("data-view") for i in box.find_elements("css selector", "img[data-view]")
                    if i.is_displayed()]

        assert visible() == ["changes"]
        for view in ("submitted", "regenerated", "changes"):
            radio = box.find_element("css selector", f"input[value='{view}']")
            browser.execute_script("arguments[0].scrollIntoView(); arguments[0].click();", radio)
            assert visible() == [view]
    finally:
        browser.quit()

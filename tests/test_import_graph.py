"""Discovery follows the repo's own imports: scripts that draw through a helper module, and the helpers themselves.

The fixture repos are an invented lab (a plate-reader group) of our own.  Which file a name imports is checked
against Python's import system itself: a child interpreter imports the script's modules and lists the repo files
it loaded (the language reference, "The import system", 5.3 Searching and 5.5 The path based finder).
"""

from __future__ import annotations

import ast
import json
import subprocess
import sys
from pathlib import Path

import nbformat
import pytest

from figproof.cli import ExitCode, main
from figproof.config import Config
from figproof.discover.imports import local_imports, search_folders
from figproof.discover.inventory import discover, draws_at_top_level

HELPER = """\
import matplotlib.pyplot as plt


def bar(values, out):
    fig, ax = plt.subplots()
    ax.bar(range(len(values)), values)
    ax.set_ylim(0, 2)
    fig.savefig(out)


def broken():
    raise ValueError("plate 3 has no readings")
"""


def put(root: Path, rel: str, text: str = "") -> Path:
    path = root / rel
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(text, encoding="utf-8")
    return path


def notebook(root: Path, rel: str, *cells: str) -> Path:
    # written with nbformat, the reference implementation of the Jupyter notebook format (v4)
    nb = nbformat.v4.new_notebook()
    nb.cells.extend(nbformat.v4.new_code_cell(c) for c in cells)
    path = root / rel
    path.parent.mkdir(parents=True, exist_ok=True)
    nbformat.write(nb, str(path))
    return path


def python_loads(root: Path, script: str, cwd: Path) -> set[str]:
    """The repo files Python itself imports for ``script``'s import statements (run from ``cwd``, the script's
    folder first on sys.path as ``python script.py`` puts it), without running the rest of the script."""
    tree = ast.parse((root / script).read_text())
    keep = [n for n in tree.body if isinstance(n, (ast.Import, ast.ImportFrom))
            or (isinstance(n, ast.Expr) and "sys.path" in ast.unparse(n))]
    code = "import os, sys\n" + "\n".join(ast.unparse(n) for n in keep)
    probe = (
        "import runpy, sys, json\n"
        f"sys.path[0] = {str((root / script).parent)!r}\n"
        f"g = {{'__file__': {str(root / script)!r}, '__name__': 'probe'}}\n"
        f"exec(compile({code!r}, {str(root / script)!r}, 'exec'), g)\n"
        f"root = {str(root.resolve())!r}\n"
        "import os\n"
        "files = {os.path.realpath(m.__file__) for m in list(sys.modules.values()) if getattr(m, '__file__', None)}\n"
        "print(json.dumps(sorted(f for f in files if f.startswith(root + '/'))))\n"
    )
    out = subprocess.run([sys.executable, "-c", probe], cwd=cwd, capture_output=True, text=True, check=True)
    return {Path(p).relative_to(root.resolve()).as_posix() for p in json.loads(out.stdout)} - {script}


def test_a_script_drawing_through_a_package_module_is_found_and_the_module_is_a_helper(tmp_path: Path) -> None:
    put(tmp_path, "lab/__init__.py")
    put(tmp_path, "lab/plots.py", HELPER)
    put(tmp_path, "fig_growth.py", "from lab.plots import bar\n\nbar([1, 5, 3], 'figures/growth.png')\n")
    put(tmp_path, "fig_yield.py", "from lab import plots\n\nplots.bar([2, 1], 'figures/yield.png')\n")
    put(tmp_path, "analysis/means.py", "import statistics\nprint(statistics.mean([1, 2]))\n")
    inv = discover(Config(root=tmp_path))
    assert inv.scripts == ("fig_growth.py", "fig_yield.py")
    assert inv.helpers == (("lab/plots.py", ("fig_growth.py", "fig_yield.py")),)
    # Python's own import system loads the same repo files
    assert python_loads(tmp_path, "fig_growth.py", tmp_path) == {"lab/__init__.py", "lab/plots.py"}
    assert local_imports(tmp_path, "fig_growth.py", search_folders(tmp_path, "fig_growth.py", "root")).files == (
        "lab/__init__.py", "lab/plots.py")


def test_relative_imports_and_modules_that_draw_through_other_modules(tmp_path: Path) -> None:
    put(tmp_path, "lab/__init__.py")
    put(tmp_path, "lab/style.py", "import matplotlib as mpl\n\ndef apply():\n    mpl.rcParams['font.size'] = 9\n")
    # panels.py imports no plotting library itself, only the repo module that does
    put(tmp_path, "lab/panels.py", "from .style import apply\nfrom . import style\n\ndef panel(ax):\n    apply()\n")
    put(tmp_path, "figs/fig3.py", "import sys\nsys.path.insert(0, '..')\nfrom lab.panels import panel\n")
    inv = discover(Config(root=tmp_path))
    assert inv.scripts == ("figs/fig3.py",)
    assert dict(inv.helpers) == {"lab/panels.py": ("figs/fig3.py",), "lab/style.py": ("figs/fig3.py",)}
    # run from its own folder, as `cd figs && python fig3.py`: Python resolves the same files
    assert python_loads(tmp_path, "figs/fig3.py", tmp_path / "figs") == {
        "lab/__init__.py", "lab/panels.py", "lab/style.py"}


def test_src_layout_and_sys_path_built_from_file(tmp_path: Path) -> None:
    put(tmp_path, "src/plate/__init__.py", "from plate.draw import heat\n")
    put(tmp_path, "src/plate/draw.py", "import seaborn as sns\n\ndef heat(m):\n    return sns.heatmap(m)\n")
    put(tmp_path, "scripts/fig4.py", "from plate import heat\nheat([[1, 2], [3, 4]])\n")
    put(tmp_path, "common/curves.py", "import matplotlib.pyplot as plt\n\ndef curve(y):\n    plt.plot(y)\n")
    put(tmp_path, "analysis/fig5.py", "import os\nimport sys\n"
        "sys.path.append(os.path.join(os.path.dirname(os.path.abspath(__file__)), '..', 'common'))\n"
        "from curves import curve\ncurve([1, 2])\n")
    put(tmp_path, "analysis/fig6.py", "import sys\nfrom pathlib import Path\n"
        "sys.path.insert(0, str(Path(__file__).resolve().parent.parent / 'common'))\nimport curves\n")
    inv = discover(Config(root=tmp_path))
    assert inv.scripts == ("analysis/fig5.py", "analysis/fig6.py", "scripts/fig4.py")
    assert dict(inv.helpers) == {"common/curves.py": ("analysis/fig5.py", "analysis/fig6.py"),
                                 "src/plate/__init__.py": ("scripts/fig4.py",),
                                 "src/plate/draw.py": ("scripts/fig4.py",)}
    assert python_loads(tmp_path, "analysis/fig5.py", tmp_path) == {"common/curves.py"}
    assert python_loads(tmp_path, "analysis/fig6.py", tmp_path) == {"common/curves.py"}


def test_an_import_cycle_ends(tmp_path: Path) -> None:
    put(tmp_path, "ring_a.py", "import ring_b\n\ndef a():\n    ring_b.b()\n")
    put(tmp_path, "ring_b.py", "import matplotlib.pyplot as plt\nimport ring_a\n\ndef b():\n    plt.plot([1])\n")
    put(tmp_path, "fig7.py", "import ring_a\nring_a.a()\n")
    inv = discover(Config(root=tmp_path))
    assert inv.scripts == ("fig7.py",)
    assert dict(inv.helpers) == {"ring_a.py": ("fig7.py",), "ring_b.py": ("fig7.py",)}


def test_a_notebook_that_draws_through_a_repo_module_is_found(tmp_path: Path) -> None:
    put(tmp_path, "lab/__init__.py")
    put(tmp_path, "lab/plots.py", HELPER)
    notebook(tmp_path, "notebooks/summary.ipynb", "from lab.plots import bar", "bar([1, 2], 'summary.png')")
    notebook(tmp_path, "notebooks/numbers.ipynb", "import json\nprint(json.dumps([1]))")
    put(tmp_path, "notebooks/lab", "")  # a file, not a package: the name is still found under the root
    inv = discover(Config(root=tmp_path, working_dir="root"))
    assert inv.scripts == ("notebooks/summary.ipynb",)
    assert inv.helpers == (("lab/plots.py", ("notebooks/summary.ipynb",)),)


def test_an_imported_module_that_draws_when_run_stays_a_script(tmp_path: Path) -> None:
    put(tmp_path, "overview.py", "import matplotlib.pyplot as plt\nfig, ax = plt.subplots()\nfig.savefig('o.png')\n")
    put(tmp_path, "tools.py", "import matplotlib.pyplot as plt\n\ndef main():\n    plt.plot([1])\n\n"
        "if __name__ == '__main__':\n    main()\n")
    put(tmp_path, "uses_both.py", "import overview\nimport tools\ntools.main()\n")
    inv = discover(Config(root=tmp_path))
    assert inv.scripts == ("overview.py", "tools.py", "uses_both.py")
    assert inv.helpers == ()


@pytest.mark.parametrize(("code", "runs"), [
    ("import matplotlib.pyplot as plt\n\ndef f():\n    plt.plot([1])\n", False),
    ("import matplotlib as mpl\nmpl.rcParams['font.size'] = 8\nmpl.use('Agg')\n", False),
    ("import matplotlib.pyplot as plt\nplt.figure()\n", True),
    ("import matplotlib.pyplot as plt\n\ndef f():\n    plt.plot([1])\n\ndef g():\n    f()\n\nfor _ in range(2):\n"
     "    g()\n", True),  # a loop calling the module's own drawing function
    ("import matplotlib.pyplot as plt\n\nif __name__ == '__main__':\n    pass\n", True),
    ("import seaborn as sns\nPALETTE = sns.color_palette('colorblind')\n", False),
])
def test_what_draws_when_a_module_is_run(code: str, runs: bool) -> None:
    assert draws_at_top_level(ast.parse(code)) is runs


@pytest.mark.slow
def test_findings_in_a_helper_belong_to_the_script_that_ran(tmp_path: Path) -> None:
    repo = tmp_path / "plates"
    put(repo, "lab/__init__.py")
    put(repo, "lab/plots.py", HELPER)
    put(repo, "fig_growth.py", "from lab.plots import bar\n\nbar([1, 5, 3], 'figures/growth.png')\n")
    put(repo, "fig_yield.py", "from lab import plots\n\nplots.broken()\n")
    notebook(repo, "notebooks/summary.ipynb", "from lab import plots", "plots.broken()")
    put(repo, "figproof.toml", 'working-dir = "root"\n')
    (repo / "figures").mkdir()
    out, sarif, md = tmp_path / "r.json", tmp_path / "r.sarif", tmp_path / "r.md"
    assert main(["check", str(repo), "--quiet", "--no-cache", "--json", str(out), "--sarif", str(sarif),
                 "--markdown", str(md)]) == ExitCode.FAILED
    report = json.loads(out.read_text())
    assert [s["path"] for s in report["scripts"]] == ["fig_growth.py", "fig_yield.py", "notebooks/summary.ipynb"]
    assert report["helpers"] == [{"path": "lab/plots.py",
                                  "used_by": ["fig_growth.py", "fig_yield.py", "notebooks/summary.ipynb"]}]
    by_rule: dict[str, list[dict]] = {}
    for f in report["findings"]:
        by_rule.setdefault(f["rule"], []).append(f)
    clip, = by_rule["axis-clips-data"]
    assert (clip["path"], clip["line"], clip["script"], clip["figure"]) == (
        "lab/plots.py", 6, "fig_growth.py", "fig_growth.py#1")
    fails = sorted((f["path"], f["line"], f.get("cell")) for f in by_rule["script-fails"])
    assert fails == [("fig_yield.py", 3, None), ("notebooks/summary.ipynb", 1, 2)]
    assert all("lab/plots.py:12" in f["message"] for f in by_rule["script-fails"])
    # SARIF 2.1.0 result property bag (§3.8) and the markdown row name the script whose run it comes from
    [result] = [r for r in json.loads(sarif.read_text())["runs"][0]["results"] if r["ruleId"] == "axis-clips-data"]
    assert result["properties"]["script"] == "fig_growth.py"
    assert result["locations"][0]["physicalLocation"]["artifactLocation"]["uri"] == "lab/plots.py"
    text = md.read_text()
    assert "| `lab/plots.py:6` (run of `fig_growth.py`) | axis-clips-data |" in text
    assert "- `lab/plots.py`, used by `fig_growth.py`, `fig_yield.py`, `notebooks/summary.ipynb`" in text


@pytest.mark.slow
def test_checking_a_helper_checks_the_scripts_that_import_it(tmp_path: Path) -> None:
    repo = tmp_path / "plates"
    put(repo, "lab/__init__.py")
    put(repo, "lab/plots.py", HELPER)
    put(repo, "lab/other.py", "import matplotlib.pyplot as plt\n\ndef dot():\n    plt.plot([1], 'o')\n")
    put(repo, "fig_growth.py", "from lab.plots import bar\n\nbar([1, 1.5], 'figures/growth.png')\n")
    put(repo, "fig_dots.py", "from lab.other import dot\ndot()\n")
    put(repo, "figproof.toml", "")  # marks the repo root above the helper's folder
    (repo / "figures").mkdir()
    out = tmp_path / "r.json"
    assert main(["check", str(repo / "lab" / "plots.py"), "--quiet", "--no-cache", "--json", str(out)]) \
        == ExitCode.PASSED
    report = json.loads(out.read_text())
    assert [s["path"] for s in report["scripts"]] == ["fig_growth.py"]
    assert report["not_run"] == ["fig_dots.py"]


def test_a_changed_helper_selects_the_scripts_that_import_it_through_other_modules(tmp_path: Path) -> None:
    from figproof.pipeline import scripts_touched_by

    put(tmp_path, "lab/__init__.py")
    put(tmp_path, "lab/plots.py", HELPER)
    put(tmp_path, "lab/figures.py", "from lab.plots import bar\n\ndef growth():\n    bar([1], 'g.png')\n")
    put(tmp_path, "fig_growth.py", "from lab.figures import growth\ngrowth()\n")
    put(tmp_path, "fig_other.py", "import matplotlib.pyplot as plt\nplt.plot([1])\n")
    scripts = discover(Config(root=tmp_path)).scripts
    assert scripts == ("fig_growth.py", "fig_other.py")
    # never run before, so nothing is recorded: the import graph decides (the code never names plots.py)
    assert scripts_touched_by(tmp_path, scripts, ("lab/plots.py",)) == ["fig_growth.py"]


def test_a_drawing_module_only_tests_import_is_a_helper_not_a_script(tmp_path: Path) -> None:
    put(tmp_path, "plate_plots.py", HELPER)
    put(tmp_path, "tests/test_plate_plots.py", "from plate_plots import bar\n\ndef test_bar(tmp_path):\n"
        "    bar([1], tmp_path / 'b.png')\n")
    inv = discover(Config(root=tmp_path))
    assert inv.scripts == ()  # run on its own it would draw nothing: "ok, 0 figures" said nothing true
    assert inv.helpers == (("plate_plots.py", ()),)


def test_a_check_that_finds_only_helpers_says_so(tmp_path: Path) -> None:
    put(tmp_path, "plate_plots.py", HELPER)
    put(tmp_path, "tests/test_plate_plots.py", "import plate_plots\n")
    out = tmp_path.parent / f"{tmp_path.name}-report.json"
    assert main(["check", str(tmp_path), "--quiet", "--no-cache", "--json", str(out)]) == ExitCode.PASSED
    report = json.loads(out.read_text())
    assert report["helpers"] == [{"path": "plate_plots.py", "used_by": []}]
    assert "no figure scripts found: the 1 module that draws is a helper that only tests or other helpers import" \
        in report["notes"]


def test_the_visual_report_files_a_helper_finding_under_the_script_that_ran() -> None:
    from figproof.model.findings import CheckResult, Finding, Summary
    from figproof.report import html

    f = Finding(rule="axis-clips-data", severity="error", confidence="certain", path="lab/plots.py", line=6,
                figure="fig_growth.py#1", message="2 of 3 bar tops lie above the y-limit", script="fig_growth.py")
    result = CheckResult(root=".", version="0", runs=(), findings=(f,), helpers=(("lab/plots.py", ("fig_growth.py",)),),
                         summary=Summary(scripts=1, figures=1, errors=1, warnings=0, notes=0, accepted=0, passed=False))
    assert 'data-script="fig_growth.py"' in html._attrs(f)
    options = html._filters(result)
    assert '<option value="fig_growth.py">' in options and "lab/plots.py" not in options


def test_a_notebook_run_from_its_folder_still_depends_on_the_repo_package_it_imports(tmp_path: Path) -> None:
    # run from notebooks/, `lab` is found through an editable install rather than sys.path; its edits must
    # still re-run the notebook, so the result cache counts it among the notebook's inputs
    from figproof.run.cache import script_imports
    from figproof.run.execute import Task

    put(tmp_path, "lab/__init__.py")
    put(tmp_path, "lab/plots.py", HELPER)
    notebook(tmp_path, "notebooks/summary.ipynb", "from lab.plots import bar", "bar([1, 2], 'summary.png')")
    found = script_imports(tmp_path, Task(script="notebooks/summary.ipynb", working_dir="script"))
    assert {"lab/__init__.py", "lab/plots.py"} <= set(found.files)

"""What the child does where a user's session would: a blocking show, savefig without an extension, notebook
cells under the inline display, failures inside a helper module, and messages free of temporary paths.

References:
- matplotlib's ``FigureCanvasBase.print_figure`` (matplotlib/backend_bases.py): a file name without an
  extension and no ``format`` gets ``"." + rcParams["savefig.format"]`` appended (default "png").
- matplotlib's ``pyplot.show``: ``block`` defaults to True outside interactive mode; a blocking show returns
  when the windows are closed, and the next pyplot call then makes a new figure.
- matplotlib-inline's ``backend_inline.flush_figures`` (ipython/matplotlib-inline), registered as IPython's
  ``post_execute`` hook: when a cell created a figure in interactive mode and ``InlineBackend.close_figures``
  is True (the default), it calls ``show(True)``, which displays every figure and runs ``plt.close('all')``;
  ``set_matplotlib_close(False)`` / ``%config InlineBackend.close_figures = False`` keep them open.
"""

from __future__ import annotations

import json
from pathlib import Path

import nbformat
import pytest

from figproof.notebook import InlineDisplay
from figproof.pipeline import check

pytestmark = pytest.mark.slow


def _repo(tmp_path: Path, files: dict[str, str]) -> Path:
    repo = tmp_path / "lab"
    for name, text in files.items():
        (repo / name).parent.mkdir(parents=True, exist_ok=True)
        (repo / name).write_text(text, encoding="utf-8")
    return repo


def _notebook(cells: list[str]) -> str:
    nb = nbformat.v4.new_notebook()
    nb.cells = [nbformat.v4.new_code_cell(c) for c in cells]
    return nbformat.writes(nb)


def _run(repo: Path, script: str, warm_runner):
    checked = check(repo, runner=warm_runner)
    (run,) = [r for r in checked.result.runs if r.path == script]
    return checked, run


def test_a_blocking_show_closes_the_figures_so_the_next_plot_is_a_new_figure(tmp_path: Path, warm_runner) -> None:
    repo = _repo(tmp_path, {"gallery.py": (
        "import matplotlib.pyplot as plt\n"
        "for k in range(3):\n"
        "    plt.plot([0, 1, 2], [k, k + 1, k])\n"
        "    plt.title(f'panel {k}')\n"
        "    plt.show()\n")})
    _, run = _run(repo, "gallery.py", warm_runner)
    assert [len(f.axes) for f in run.figures] == [1, 1, 1]
    assert [len(f.axes[0].lines) for f in run.figures] == [1, 1, 1]


def test_a_figure_saved_after_show_is_still_matched_to_its_file(tmp_path: Path, warm_runner) -> None:
    repo = _repo(tmp_path, {"fig.py": (
        "import matplotlib.pyplot as plt\n"
        "fig, ax = plt.subplots()\n"
        "ax.plot([0, 1], [1, 2])\n"
        "plt.show()\n"
        "fig.savefig('out.png')\n")})
    _, run = _run(repo, "fig.py", warm_runner)
    assert [f.outputs for f in run.figures] == [("out.png",)]


def test_show_in_interactive_mode_or_without_blocking_leaves_the_figure_open(tmp_path: Path, warm_runner) -> None:
    repo = _repo(tmp_path, {"ion.py": (
        "import matplotlib.pyplot as plt\n"
        "plt.ion()\n"
        "plt.plot([0, 1], [0, 1])\n"
        "plt.show()\n"
        "plt.plot([0, 1], [1, 0])\n"
        "plt.ioff()\n"
        "plt.show(block=False)\n"
        "plt.plot([0, 1], [2, 2])\n")})
    _, run = _run(repo, "ion.py", warm_runner)
    assert [len(f.axes[0].lines) for f in run.figures] == [3]


def test_savefig_without_extension_records_the_file_matplotlib_writes(tmp_path: Path, warm_runner) -> None:
    repo = _repo(tmp_path, {"fig.py": (
        "import matplotlib\n"
        "import matplotlib.pyplot as plt\n"
        "fig, ax = plt.subplots()\n"
        "ax.plot([0, 1], [1, 2])\n"
        "fig.savefig('figures/growth')\n"
        "matplotlib.rcParams['savefig.format'] = 'svg'\n"
        "fig.savefig('figures/growth_vector')\n"
        "fig.savefig('figures/raw', format='pdf')\n"), "figures/.keep": ""})
    _, run = _run(repo, "fig.py", warm_runner)
    assert [e.path for e in run.events if e.action == "save"] == [
        "figures/growth.png", "figures/growth_vector.svg", "figures/raw"]  # an explicit format adds nothing
    assert run.figures[0].outputs == ("figures/growth.png", "figures/growth_vector.svg", "figures/raw")


def test_notebook_cells_close_their_figures_like_the_inline_display(tmp_path: Path, warm_runner) -> None:
    repo = _repo(tmp_path, {"nb.ipynb": _notebook([
        "import matplotlib.pyplot as plt\nplt.plot([0, 1], [0, 1])",
        "plt.plot([0, 1], [1, 0])",  # a new figure: the first cell's was shown and closed
        "%config InlineBackend.close_figures = False\nplt.plot([0, 1], [2, 2])",
        "plt.plot([0, 1], [3, 3])",  # close_figures is off now: drawn onto the third cell's figure
    ])})
    _, run = _run(repo, "nb.ipynb", warm_runner)
    assert [len(f.axes[0].lines) for f in run.figures] == [1, 1, 2]


def test_inline_display_settings_follow_the_cells() -> None:
    start = InlineDisplay()
    assert start.closes
    assert not start.after("%config InlineBackend.close_figures = False").closes
    assert not start.after("from matplotlib_inline.backend_inline import set_matplotlib_close\n"
                           "set_matplotlib_close(False)").closes
    assert not start.after("%matplotlib widget").closes
    assert start.after("%matplotlib widget").after("%matplotlib inline").closes


def test_a_failure_inside_a_helper_is_the_scripts_finding_naming_the_helper_line(tmp_path: Path,
                                                                                  warm_runner) -> None:
    repo = _repo(tmp_path, {
        "lab_plots.py": "def draw(ax, values):\n    ax.plot(values, values[5])\n",
        "fig.py": "import matplotlib.pyplot as plt\nimport lab_plots\nfig, ax = plt.subplots()\n"
                  "lab_plots.draw(ax, [1, 2, 3])\n",
        "nb.ipynb": _notebook(["import matplotlib.pyplot as plt\nimport lab_plots",
                               "fig, ax = plt.subplots()\nlab_plots.draw(ax, [1])"]),
    })
    checked = check(repo, runner=warm_runner)
    fails = {f.path: f for f in checked.result.findings if f.rule == "script-fails"}
    assert set(fails) == {"fig.py", "nb.ipynb"}
    assert (fails["fig.py"].line, fails["fig.py"].cell) == (4, None)
    assert fails["fig.py"].message == ("fig.py raised IndexError: list index out of range in lab_plots.py:2, "
                                       "called at fig.py:4")
    assert (fails["nb.ipynb"].line, fails["nb.ipynb"].cell) == (2, 2)
    assert fails["nb.ipynb"].message.endswith("in lab_plots.py:2, called at nb.ipynb cell 2:2")


def test_messages_name_repo_paths_not_the_temporary_view(tmp_path: Path, warm_runner) -> None:
    repo = _repo(tmp_path, {"fig.py": "import os\nimport matplotlib.pyplot as plt\n"
                                      "raise ValueError(f'cannot parse {os.path.abspath(\"data/cells.csv\")}')\n"})
    checked = check(repo, runner=warm_runner)
    (fail,) = [f for f in checked.result.findings if f.rule == "script-fails"]
    assert fail.message == "fig.py raised ValueError: cannot parse data/cells.csv at fig.py:3"
    assert str(tmp_path) not in json.dumps(fail.to_json())

"""Discovery of figure scripts, data and committed figures; choice of a script's working folder."""

from __future__ import annotations

import os
import shutil
import subprocess
from pathlib import Path

import nbformat
import pytest

from figproof.config import Config
from figproof.discover.inventory import (
    DiscoveryError,
    choose_working_dir,
    code_draws,
    discover,
    glob_match,
    notebook_cells,
)

needs_git = pytest.mark.skipif(shutil.which("git") is None, reason="git is not installed")

PLOT = "import matplotlib.pyplot as plt\nplt.plot([1, 2])\n"


def put(root: Path, rel: str, text: str | bytes = "") -> Path:
    path = root / rel
    path.parent.mkdir(parents=True, exist_ok=True)
    if isinstance(text, bytes):
        path.write_bytes(text)
    else:
        path.write_text(text, encoding="utf-8")
    return path


def notebook(root: Path, rel: str, *cells: str, markdown: str = "") -> Path:
    # Written with nbformat, the reference implementation of the Jupyter notebook format (v4).
    nb = nbformat.v4.new_notebook()
    if markdown:
        nb.cells.append(nbformat.v4.new_markdown_cell(markdown))
    nb.cells.extend(nbformat.v4.new_code_cell(c) for c in cells)
    path = root / rel
    path.parent.mkdir(parents=True, exist_ok=True)
    nbformat.write(nb, str(path))
    return path


def lab_repo(root: Path) -> Path:
    """An invented lab: root growth curves, a seaborn notebook and the usual clutter around them."""
    put(root, "figures/growth.py", PLOT)
    put(root, "figures/roots.py", "from matplotlib import pyplot as plt\n")
    put(root, "figures/panel.py", "import pandas as pd\ndf = pd.read_csv('data/growth.csv')\ndf.plot.bar()\n")
    put(root, "figures/hist.py", "import pandas\npandas.read_csv('x.csv').hist()\n")
    put(root, "figures/matrix.py", "from pandas.plotting import scatter_matrix\n")
    put(root, "figures/broken.py", "import seaborn as sns\nsns.barplot(x=[1, 2], y=[3, 4]\n")  # syntax error
    put(root, "analysis/stats.py", "import numpy as np\nimport pandas as pd\npd.read_csv('a.csv').mean()\n")
    put(root, "analysis/plotting_words.py", "text = 'import matplotlib'\n# import seaborn\n")
    notebook(root, "notebooks/fig2.ipynb", "import seaborn as sns", "sns.histplot([1, 2, 3])", markdown="# Figure 2")
    notebook(root, "notebooks/magic.ipynb", "%matplotlib inline\nplt.plot([1])")
    notebook(root, "notebooks/clean.ipynb", "import numpy as np\nx = np.ones(3)", markdown="import matplotlib")
    put(root, "notebooks/corrupt.ipynb", '{"cells": [')
    for rel in (
        "tests/test_figs.py", "test/plot.py", "figures/test_growth.py", "figures/growth_test.py",
        "conftest.py", ".venv/lib/plot.py", "venv/plot.py", "env/plot.py", "labenv/plot.py",
        "build/plot.py", "dist/plot.py", "node_modules/x/plot.py", "lab.egg-info/plot.py",
        "figures/__pycache__/plot.py", ".hidden/plot.py", "figures/.scratch.py", "condaenv/plot.py",
    ):
        put(root, rel, PLOT)
    put(root, "labenv/pyvenv.cfg", "home = /usr/bin\n")
    (root / "condaenv" / "conda-meta").mkdir(parents=True)
    for rel in (
        "data/growth.csv", "data/raw/plate1.tsv", "data/weights.npy", "data/archive.csv.gz",
        "data/table.parquet", "data/sheet.xlsx", "data/notes.txt", "requirements.txt", "README.txt",
        "venv/data.csv", ".figproof-accepted.json",
    ):
        put(root, rel, "1,2\n")
    for rel in ("figures/growth.png", "figures/vector/roots.svg", "paper/fig3.pdf", "docs/logo.png",
                "tests/baseline/growth.png", "figures/photo.JPG"):
        put(root, rel, b"\x89PNG")
    return root


def test_default_discovery_in_a_plain_folder(tmp_path: Path) -> None:
    inv = discover(Config(root=lab_repo(tmp_path)))
    assert inv.scripts == (
        "figures/broken.py",
        "figures/growth.py",
        "figures/hist.py",
        "figures/matrix.py",
        "figures/panel.py",
        "figures/roots.py",
        "notebooks/corrupt.ipynb",
        "notebooks/fig2.ipynb",
        "notebooks/magic.ipynb",
    )
    assert inv.data_files == (
        "data/archive.csv.gz",
        "data/growth.csv",
        "data/notes.txt",
        "data/raw/plate1.tsv",
        "data/sheet.xlsx",
        "data/table.parquet",
        "data/weights.npy",
    )
    # Default figure folders: everything outside docs/ and tests/.
    assert inv.figure_files == ("figures/growth.png", "figures/photo.JPG", "figures/vector/roots.svg", "paper/fig3.pdf")
    assert inv.is_git is False and inv.tracked == ()


def test_figure_dirs_narrow_committed_figures(tmp_path: Path) -> None:
    inv = discover(Config(root=lab_repo(tmp_path), figure_dirs=("figures/vector", "paper/*.pdf", "docs")))
    assert inv.figure_files == ("docs/logo.png", "figures/vector/roots.svg", "paper/fig3.pdf")


def test_include_replaces_the_default_and_exclude_removes(tmp_path: Path) -> None:
    root = lab_repo(tmp_path)
    inv = discover(Config(root=root, include=("analysis/*.py", "figures/test_*.py")))
    # No import test and no test skipping for explicit includes.
    assert inv.scripts == ("analysis/plotting_words.py", "analysis/stats.py", "figures/test_growth.py")
    inv = discover(Config(root=root, include=("**/*.ipynb",), exclude=("corrupt.ipynb",)))
    assert inv.scripts == ("notebooks/clean.ipynb", "notebooks/fig2.ipynb", "notebooks/magic.ipynb")
    inv = discover(Config(root=root, exclude=("figures",)))
    assert inv.scripts == ("notebooks/corrupt.ipynb", "notebooks/fig2.ipynb", "notebooks/magic.ipynb")


def test_include_that_matches_nothing_names_the_pattern(tmp_path: Path) -> None:
    root = lab_repo(tmp_path)
    with pytest.raises(DiscoveryError, match=r"include pattern 'figs/\*\.py' matches no \.py or \.ipynb file"):
        discover(Config(root=root, include=("figures/*.py", "figs/*.py")))
    # Hidden and environment folders stay out even for an explicit pattern.
    with pytest.raises(DiscoveryError, match=r"'\.venv/"):
        discover(Config(root=root, include=(".venv/**/*.py",)))


def test_order_runs_first_even_when_it_draws_nothing(tmp_path: Path) -> None:
    root = lab_repo(tmp_path)
    put(root, "prep/make_data.py", "open('data/growth.csv', 'w').write('1')\n")
    inv = discover(Config(root=root, order=("prep/make_data.py", "notebooks/fig2.ipynb", "figures/growth.py")))
    assert inv.scripts[:3] == ("prep/make_data.py", "notebooks/fig2.ipynb", "figures/growth.py")
    assert len(inv.scripts) == len(set(inv.scripts)) == 10
    assert list(inv.scripts[3:]) == sorted(inv.scripts[3:])
    with pytest.raises(DiscoveryError, match=r"order entry 'prep/missing\.py' is not a file"):
        discover(Config(root=root, order=("prep/missing.py",)))


def test_no_scripts_is_not_an_error(tmp_path: Path) -> None:
    put(tmp_path, "data/x.csv", "1\n")
    inv = discover(Config(root=tmp_path))
    assert inv.scripts == () and inv.data_files == ("data/x.csv",)


def test_accepted_file_and_cache_are_never_data(tmp_path: Path) -> None:
    put(tmp_path, "ci/accepted.json", "{}")
    put(tmp_path, "ci/cache/run.json", "{}")
    put(tmp_path, "ci/results.json", "{}")
    inv = discover(Config(root=tmp_path, accepted_file="ci/accepted.json", cache_dir="ci/cache"))
    assert inv.data_files == ("ci/results.json",)


# --------------------------------------------------------------------------- git


def git(repo: Path, *args: str) -> None:
    subprocess.run(["git", "-C", str(repo), *args], check=True, capture_output=True)


@needs_git
def test_git_repo_lists_tracked_files_only(tmp_path: Path) -> None:
    repo = tmp_path / "lab"
    repo.mkdir()
    git(repo, "init", "-q")
    put(repo, "figures/growth.py", PLOT)
    put(repo, "figures/gone.py", PLOT)
    put(repo, "figures/growth.png", b"\x89PNG")
    put(repo, "data/growth.csv", "1\n")
    put(repo, "data/weird name ü.csv", "1\n")
    put(repo, ".gitignore", "scratch/\n")
    git(repo, "add", "figures", "data", ".gitignore")
    (repo / "figures" / "gone.py").unlink()  # tracked but deleted from the working tree: nothing to run
    put(repo, "figures/untracked.py", PLOT)
    put(repo, "figures/untracked.png", b"\x89PNG")
    put(repo, "scratch/draft.py", PLOT)
    put(repo, "data/new.csv", "1\n")
    inv = discover(Config(root=repo))
    assert inv.is_git is True
    assert inv.scripts == ("figures/growth.py",)
    assert inv.data_files == ("data/growth.csv", "data/weird name ü.csv")
    assert inv.figure_files == ("figures/growth.png",)
    # Reference: git's own index listing (`git ls-files`), minus the deleted file.
    assert inv.tracked == (".gitignore", "data/growth.csv", "data/weird name ü.csv", "figures/growth.png", "figures/growth.py")


@needs_git
def test_root_below_the_git_top_level_lists_relative_to_root(tmp_path: Path) -> None:
    git(tmp_path, "init", "-q")
    put(tmp_path, "paper/figures/a.py", PLOT)
    put(tmp_path, "other/b.py", PLOT)
    put(tmp_path, "paper/venv/pyvenv.cfg", "x\n")
    put(tmp_path, "paper/venv/c.py", PLOT)
    git(tmp_path, "add", ".")
    inv = discover(Config(root=tmp_path / "paper"))
    assert inv.scripts == ("figures/a.py",)
    assert inv.tracked == ("figures/a.py", "venv/c.py", "venv/pyvenv.cfg")


# --------------------------------------------------------------------------- globs against git's wildmatch

GLOB_FILES = [
    "a.py", "figures/a.py", "figures/sub/b.py", "figures/sub/deep/c.ipynb", "notes/figures/d.py",
    "fig1.py", "fig2.py", "figA.py", "data/x.csv", "scratch_one.py", "lab/scratch_two.py",
]
GLOB_PATTERNS = [
    "*.py", "figures/*.py", "figures/**/*.py", "**/*.ipynb", "figures", "figures/**", "fig[12].py",
    "fig?.py", "fig[!1].py", "scratch_*", "**/figures/*.py", "figures/sub", "*/scratch_*.py", "data/*",
]


@needs_git
@pytest.mark.parametrize("pattern", GLOB_PATTERNS)
def test_glob_match_agrees_with_gitignore_patterns(tmp_path: Path, pattern: str) -> None:
    # Reference: gitignore pattern semantics (git-scm.com/docs/gitignore), as git itself applies them to
    # untracked files through `git ls-files --others --ignored --exclude=PATTERN`.
    git(tmp_path, "init", "-q")
    for rel in GLOB_FILES:
        put(tmp_path, rel, "x\n")
    done = subprocess.run(
        ["git", "-C", str(tmp_path), "ls-files", "-z", "--others", "--ignored", f"--exclude={pattern}"],
        check=True, capture_output=True,
    )
    expected = sorted(os.fsdecode(p) for p in done.stdout.split(b"\0") if p)
    assert sorted(f for f in GLOB_FILES if glob_match(f, pattern)) == expected


# --------------------------------------------------------------------------- reading code


@pytest.mark.parametrize(
    ("code", "draws"),
    [
        ("import matplotlib\n", True),
        ("import matplotlib.pyplot as plt\n", True),
        ("from matplotlib.figure import Figure\n", True),
        ("from pylab import *\n", True),
        ("from mpl_toolkits.mplot3d import Axes3D\n", True),
        ("import seaborn.objects as so\n", True),
        ("from plotnine import ggplot\n", True),
        ("def f():\n    import matplotlib.pyplot as plt\n", True),
        ("import pandas as pd\ndf = pd.DataFrame()\ndf.plot(x='a')\n", True),
        ("import pandas as pd\npd.Series([1]).plot.hist()\n", True),
        ("from pandas import plotting\n", True),
        ("import pandas.plotting\n", True),
        ("import pandas as pd\npd.read_csv('a.csv').describe()\n", False),
        ("import numpy as np\nnp.histogram([1])\n", False),
        ("x.plot()\n", False),  # a .plot call without pandas or a plotting library
        ("from .matplotlib import helper\n", False),  # a local module that happens to share the name
        ("s = 'import matplotlib'\n", False),
        ("import matplotlibx\n", False),
        ("import seaborn as sns\nsns.barplot(\n", True),  # syntax error: found by the line scan
        ("x = (\nfrom pandas import plotting\n", True),
        ("x = (\n# import matplotlib\n", False),
        ("", False),
    ],
)
def test_code_draws(code: str, draws: bool) -> None:
    assert code_draws(code) is draws
    assert code_draws(code.encode()) is draws


def test_code_with_an_encoding_cookie(tmp_path: Path) -> None:
    raw = "# -*- coding: latin-1 -*-\nimport matplotlib\nlabel = 'caf\u00e9'\n".encode("latin-1")
    assert code_draws(raw) is True


def test_notebook_cells_blank_magics_and_keep_line_numbers(tmp_path: Path) -> None:
    path = notebook(tmp_path, "n.ipynb", "%matplotlib inline\nimport numpy as np\n!ls\nx = 1", "%%bash\necho hi\nls")
    cells = notebook_cells(path.read_bytes())
    assert cells == ["\nimport numpy as np\n\nx = 1", "\n\n"]
    assert notebook_cells(b"not json") is None
    assert notebook_cells(b"[1, 2]") is None
    assert notebook_cells(b'{"cells": "nope"}') is None


def test_notebook_format_3_is_read(tmp_path: Path) -> None:
    # nbformat 3 keeps code under worksheets[0].cells[*].input (nbformat's documented v3 layout).
    raw = b'{"nbformat": 3, "worksheets": [{"cells": [{"cell_type": "code", "input": ["import seaborn"]}]}]}'
    assert notebook_cells(raw) == ["import seaborn"]
    put(tmp_path, "old.ipynb", raw)
    assert discover(Config(root=tmp_path)).scripts == ("old.ipynb",)


# --------------------------------------------------------------------------- working folder


def folder_repo(root: Path) -> Path:
    put(root, "data/growth.csv", "1\n")
    put(root, "data/roots.csv", "1\n")
    put(root, "figures/local.csv", "1\n")
    put(root, "figures/shared.csv", "1\n")
    put(root, "shared.csv", "1\n")
    put(root, "root_style.py", "")
    return root


def test_auto_prefers_the_folder_where_literals_resolve(tmp_path: Path) -> None:
    root = folder_repo(tmp_path)
    put(root, "figures/from_root.py", "import pandas as pd\npd.read_csv('data/growth.csv')\npd.read_csv(\"data/roots.csv\")\n")
    put(root, "figures/from_here.py", "import numpy as np\nnp.loadtxt('local.csv')\nopen('./local.csv')\n")
    put(root, "figures/mixed.py", "a = 'data/growth.csv'\nb = 'local.csv'\nc = 'shared.csv'\nd = 'data/roots.csv'\n")
    assert choose_working_dir(root, "figures/from_root.py", "auto") == "root"
    assert choose_working_dir(root, "figures/from_here.py", "auto") == "script"
    # 'shared.csv' resolves from both and counts for neither; 2 root paths beat 1 local one.
    assert choose_working_dir(root, "figures/mixed.py", "auto") == "root"


def test_ties_go_to_root_for_scripts_and_to_the_folder_for_notebooks(tmp_path: Path) -> None:
    root = folder_repo(tmp_path)
    put(root, "figures/tie.py", "a = 'data/growth.csv'\nb = 'local.csv'\n")
    put(root, "figures/none.py", "print('hello world')\n")
    assert choose_working_dir(root, "figures/tie.py", "auto") == "root"
    assert choose_working_dir(root, "figures/none.py", "auto") == "root"
    notebook(root, "figures/tie.ipynb", "a = 'data/growth.csv'", "b = 'local.csv'")
    notebook(root, "figures/none.ipynb", "x = 1")
    notebook(root, "figures/rooted.ipynb", "%matplotlib inline\na = 'data/growth.csv'", "b = 'data/roots.csv'")
    assert choose_working_dir(root, "figures/tie.ipynb", "auto") == "script"
    assert choose_working_dir(root, "figures/none.ipynb", "auto") == "script"
    assert choose_working_dir(root, "figures/rooted.ipynb", "auto") == "root"


def test_forced_modes_bad_code_and_paths_outside_the_repo(tmp_path: Path) -> None:
    root = folder_repo(tmp_path / "repo")
    put(tmp_path, "outside.csv", "1\n")
    put(root, "figures/broken.py", "a = 'data/growth.csv'\nb = 'local.csv'\nc = 'figures/shared.csv'\nd = (\n")
    put(root, "figures/escape.py", "a = '../../outside.csv'\nb = '../outside.csv'\nc = 'local.csv'\n")
    put(root, "figures/absolute.py", f"a = {str(root / 'data/growth.csv')!r}\nb = 'local.csv'\n")
    put(root, "figures/corrupt.ipynb", "{")
    assert choose_working_dir(root, "figures/broken.py", "auto") == "root"  # does not parse
    assert choose_working_dir(root, "figures/escape.py", "auto") == "script"  # '..' beyond the repo counts for no side
    assert choose_working_dir(root, "figures/absolute.py", "auto") == "script"
    assert choose_working_dir(root, "figures/corrupt.ipynb", "auto") == "script"
    assert choose_working_dir(root, "figures/missing.py", "auto") == "root"
    assert choose_working_dir(root, "root_style.py", "auto") == "root"
    assert choose_working_dir(root, "figures/escape.py", "root") == "root"
    assert choose_working_dir(root, "figures/broken.py", "script") == "script"
    with pytest.raises(ValueError, match="'cwd'"):
        choose_working_dir(root, "figures/broken.py", "cwd")

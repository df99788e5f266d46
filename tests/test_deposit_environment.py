"""The deposit's environment read before running, and failures grouped by cause.

The error messages the causes are recognised in are produced here by the installed pandas, NumPy and
matplotlib themselves (not typed in), so the table follows the libraries' real wording; the version
comparisons follow PEP 440's worked examples of the compatible-release and wildcard clauses.
"""

from __future__ import annotations

import io
import zipfile
from pathlib import Path

import pytest

from figproof.deposit.environment import (
    causes,
    distribution_of,
    failure_cause,
    python2_syntax,
    requirement_asks,
    survey,
)
from figproof.model.records import ScriptError, ScriptRun


def _failed(path: str, exc: BaseException) -> ScriptRun:
    return ScriptRun(path=path, status="failed",
                     error=ScriptError(kind="exception", type=type(exc).__name__, message=str(exc)))


def _raised(call) -> BaseException:
    try:
        call()
    except Exception as exc:  # noqa: BLE001 - the test wants whatever the library raises
        return exc
    pytest.fail("the call did not raise: the installed library still has this API")


@pytest.mark.parametrize(("source", "line", "what"), [
    ("import sys\nprint 'hello'\n", 2, "print statement"),
    ("try:\n    pass\nexcept ValueError, e:\n    pass\n", 3, "except E, e"),
    ("x = `1`\n", 1, "backtick repr"),
    ("if 1 <> 2:\n    pass\n", 1, "<> operator"),
    ("exec 'x = 1'\n", 1, "exec statement"),
    ("import os\nos.chmod('a', 0755)\n", 2, "octal literal 0NNN"),
])
def test_python2_syntax_is_named_at_the_line_python3_refuses(source, line, what) -> None:
    # each snippet is valid Python 2.7 and a SyntaxError under Python 3 ("What's New In Python 3.0")
    assert python2_syntax(source) == (line, what)


@pytest.mark.parametrize("source", ["print('fine')\n", "def f(:\n    pass\n", "x = (1,\n"])
def test_python3_code_and_plain_syntax_errors_are_not_python2(source) -> None:
    assert python2_syntax(source) is None


def test_import_names_map_to_distributions() -> None:
    # PIL is provided by Pillow, installed here with figproof (importlib.metadata.packages_distributions)
    assert distribution_of("PIL").lower() == "pillow"
    assert distribution_of("sklearn", {}) == "scikit-learn"  # not installed: the table's name
    assert distribution_of("somethingunheardof", {}) == "somethingunheardof"


def test_survey_lists_imports_missing_packages_readers_and_python2(tmp_path) -> None:
    (tmp_path / "helpers.py").write_text("def style():\n    pass\n")
    (tmp_path / "fig1.py").write_text("import numpy as np\nimport helpers\nimport notinstalledpkg_x\n"
                                      "import pandas as pd\npd.read_excel('data/cohort.xlsx')\n")
    (tmp_path / "fig2.py").write_text("import matplotlib\nimport os\nprint 'old'\n")
    found = survey(tmp_path, ["fig1.py", "fig2.py"], ["data/cohort.xlsx"])
    modules = {i.module: i for i in found.imports}
    assert set(modules) == {"numpy", "pandas", "notinstalledpkg_x", "matplotlib"}  # helpers is the deposit's own
    assert modules["numpy"].installed and modules["notinstalledpkg_x"].installed is None
    assert modules["matplotlib"].scripts == ("fig2.py",)  # read from a script that does not parse under 3
    assert [(p.path, p.line, p.syntax) for p in found.python2] == [("fig2.py", 3, "print statement")]
    (reader,) = found.readers
    assert (reader.distribution, reader.suffixes, reader.scripts) == ("openpyxl", (".xlsx",), ("fig1.py",))


def test_requirement_files_are_compared_with_what_is_installed(tmp_path) -> None:
    import numpy

    major, minor = (int(x) for x in numpy.__version__.split(".")[:2])
    (tmp_path / "requirements.txt").write_text(
        f"numpy~={major}.{minor}.0  # PEP 440: ~=X.Y.0 admits X.Y.*\n"
        f"pandas==1.3.5\nnot a requirement !!\n-r other.txt\nsomethingabsent>=1\n")
    (tmp_path / "environment.yml").write_text(f"name: x\ndependencies:\n  - python=2.7\n  - numpy={major}.{minor}\n"
                                              "  - pip:\n    - scipy>=0.1\n")
    (tmp_path / "pyproject.toml").write_text('[project]\nname = "x"\ndependencies = ["matplotlib<1"]\n')
    asks, notes = requirement_asks(tmp_path)
    table = {(a.file, a.requirement): a.met for a in asks}
    assert table[("requirements.txt", f"numpy~={major}.{minor}.0")] is True
    assert table[("requirements.txt", "pandas==1.3.5")] is False
    assert table[("requirements.txt", "somethingabsent>=1")] is False
    assert table[("environment.yml", "python==2.7.*")] is False  # conda's "=2.7" is PEP 440's "==2.7.*"
    assert table[("environment.yml", f"numpy=={major}.{minor}.*")] is True
    assert table[("environment.yml", "scipy>=0.1")] is True
    assert table[("pyproject.toml", "matplotlib<1")] is False
    assert notes == ("requirements.txt: cannot read the requirement 'not a requirement !!'",)


def test_failures_are_named_from_the_libraries_own_messages(tmp_path) -> None:
    import matplotlib
    import numpy as np
    import pandas as pd

    xlsx = tmp_path / "cohort.xlsx"
    buf = io.BytesIO()
    with zipfile.ZipFile(buf, "w") as zf:
        zf.writestr("xl/workbook.xml", "<workbook/>")  # enough for pandas to take it for an .xlsx workbook
    xlsx.write_bytes(buf.getvalue())
    found = survey(tmp_path, [])
    cases = {
        "a.py": (_raised(lambda: pd.DataFrame().append({})), ("api-removed", "pandas 2.0 removed DataFrame.append")),
        "b.py": (_raised(lambda: np.float), ("api-removed", "NumPy 1.24 removed the aliases")),
        "c.py": (_raised(lambda: np.NaN), ("api-removed", "NumPy 2.0 removed")),
        "d.py": (_raised(lambda: pd.read_csv(io.StringIO("a\n1\n"), error_bad_lines=False)),
                 ("api-removed", "pandas 2.0 removed a reader/writer argument")),
        "e.py": (_raised(lambda: matplotlib.cm.get_cmap("viridis")),
                 ("api-removed", "matplotlib 3.9 removed matplotlib.cm.get_cmap")),
        # matplotlib 3.9.0 API changes: register_cmap and unregister_cmap removed with get_cmap
        "e2.py": (_raised(lambda: matplotlib.cm.register_cmap(name="lab", cmap=matplotlib.colormaps["viridis"])),
                  ("api-removed", "matplotlib 3.9 removed matplotlib.cm.get_cmap, register_cmap")),
        "f.py": (_raised(lambda: pd.read_excel(xlsx)) if not _has("openpyxl") else ImportError("Missing optional "
                 "dependency 'openpyxl'.  Use pip or conda to install openpyxl."), ("package-missing", "openpyxl")),
        "g.py": (ModuleNotFoundError("No module named 'pandas.core.indexes.numeric'"), ("pickle-version", "pandas")),
        "h.py": (FileNotFoundError(2, "No such file or directory", "/Users/ana/Desktop/cohort.csv"),
                 ("author-path", "absolute")),
        "i.py": (ValueError("x and y must have same first dimension"), None),
    }
    for path, (exc, expected) in cases.items():
        got = failure_cause(_failed(path, exc), found)
        if expected is None:
            assert got is None, path
        else:
            assert got is not None and got[0] == expected[0] and got[1].startswith(expected[1]), (path, exc, got)


def _has(module: str) -> bool:
    import importlib.util

    return importlib.util.find_spec(module) is not None


def test_one_cause_per_missing_package_names_every_script_it_explains(tmp_path) -> None:
    for n in range(8):
        (tmp_path / f"fig{n}.py").write_text(f"import pandas as pd\nd = pd.read_excel('sheet{n}.xlsx')\n")
    (tmp_path / "old.py").write_text("import matplotlib\nprint 'x'\n")
    (tmp_path / "ok.py").write_text("import matplotlib\n")
    scripts = [*(f"fig{n}.py" for n in range(8)), "old.py", "ok.py"]
    found = survey(tmp_path, scripts)
    runs = [_failed(f"fig{n}.py", ImportError("Missing optional dependency 'openpyxl'.  Use pip or conda to install "
                                              "openpyxl.")) for n in range(8)]
    runs += [_failed("old.py", SyntaxError("Missing parentheses in call to 'print'")),
             ScriptRun(path="ok.py", status="ok")]
    grouped = causes(runs, found)
    assert [(c.kind, c.key, c.verdict) for c in grouped] == [
        ("package-missing", "openpyxl", "install openpyxl to read the .xlsx inputs of 8 scripts"),
        ("python2-only", "python2", "1 script is Python 2 code, which Python 3 cannot run; run it with Python "
                                    "2.7 or port it to Python 3"),
    ]
    assert grouped[0].scripts == tuple(sorted(f"fig{n}.py" for n in range(8)))


def test_a_deposit_folder_without_requirement_files_asks_nothing(tmp_path: Path) -> None:
    assert requirement_asks(tmp_path) == ((), ())


def test_a_notebook_with_a_python2_cell_is_python2_only(tmp_path) -> None:
    import json

    def cell(source: str) -> dict:
        return {"cell_type": "code", "metadata": {}, "execution_count": None, "outputs": [], "source": source}

    # valid Python 2.7 that Python 3 refuses ("What's New In Python 3.0": the print statement); IPython's own
    # lines (%matplotlib) are not Python of either version and are blanked as when the notebook runs
    nb = {"nbformat": 4, "nbformat_minor": 5, "metadata": {}, "cells": [
        {"cell_type": "markdown", "metadata": {}, "source": "# Doses"},
        cell("%matplotlib inline\nimport matplotlib.pyplot as plt\nimport seaborn_absent_x"),
        cell("doses = [1, 2, 3]\nprint 'plotting', len(doses)\nplt.plot(doses)")]}
    (tmp_path / "doses.ipynb").write_text(json.dumps(nb))
    (tmp_path / "fine.ipynb").write_text(json.dumps({**nb, "cells": [cell("%matplotlib inline\nprint('ok')")]}))
    found = survey(tmp_path, ["doses.ipynb", "fine.ipynb"])
    assert [(p.path, p.cell, p.line, p.syntax) for p in found.python2] == [("doses.ipynb", 3, 2, "print statement")]
    assert "seaborn_absent_x" in {i.module for i in found.imports}
    run = ScriptRun(path="doses.ipynb", status="failed",
                    error=ScriptError(kind="exception", type="SyntaxError", message="invalid syntax (line 2)"))
    assert failure_cause(run, found) == ("python2-only", "python2")

"""Provenance manifest and environment fingerprint.

Outside references: the versions are checked against what each library reports
about itself (``sys.version_info``, ``matplotlib.__version__``,
``matplotlib.ft2font.__freetype_version__``, ``numpy.__version__``,
``PIL.__version__``, ``pandas.__version__``); the SHA-256 known-answer value for
"abc" is the example in FIPS 180-2, Appendix B.1.
"""

from __future__ import annotations

import hashlib
import json
import sys

from figproof.model.comparison import OutputComparison
from figproof.model.context import RunContext
from figproof.model.records import FileEvent
from figproof.report.provenance import build_manifest, environment_fingerprint, provenance_rows
from tests.builders import axes, figure, run, src

ABC_SHA256 = "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"  # FIPS 180-2, B.1


def test_fingerprint_matches_libraries() -> None:
    import matplotlib
    import numpy
    import pandas
    import PIL
    from matplotlib import ft2font

    env = environment_fingerprint()
    assert env["python"] == ".".join(map(str, sys.version_info[:3]))
    assert env["matplotlib"] == matplotlib.__version__
    assert env["freetype"] == ft2font.__freetype_version__
    assert env["numpy"] == numpy.__version__
    assert env["pandas"] == pandas.__version__
    assert env["pillow"] == PIL.__version__
    assert env["platform"]
    json.dumps(env, allow_nan=False)


def _runs() -> tuple:
    digest = hashlib.sha256(b"abc").hexdigest()
    assert digest == ABC_SHA256
    prep = run(path="prep/clean.py", events=(
        FileEvent(action="read", path="data/raw.csv", sha256=digest, source=src(3, "prep/clean.py")),
        FileEvent(action="write", path="data/clean.csv", source=src(9, "prep/clean.py")),
    ))
    fig = figure(axes(), script="figures/growth.py", outputs=("figures/growth.png",))
    plot = run(fig, path="figures/growth.py", events=(
        FileEvent(action="read", path="data/clean.csv", sha256="11" * 32, source=src(4, "figures/growth.py")),
        FileEvent(action="read", path="data/clean.csv", sha256="11" * 32, source=src(4, "figures/growth.py")),
        FileEvent(action="missing", path="data/extra.csv", exists=False, source=src(5, "figures/growth.py")),
        FileEvent(action="save", path="figures/growth.png", format="png", source=src(20, "figures/growth.py")),
        FileEvent(action="save", path="/tmp/preview.png", inside_repo=False, format="png",
                  source=src(21, "figures/growth.py")),
    ))
    nb = run(path="analysis/fig2.ipynb", events=(
        FileEvent(action="read", path="data/a.csv", sha256="22" * 32, source=src(2, "analysis/fig2.ipynb", cell=1)),
        FileEvent(action="save", path="figures/fig2.svg", format="svg", source=src(5, "analysis/fig2.ipynb", cell=2)),
        FileEvent(action="read", path="data/b.csv", sha256="33" * 32, source=src(1, "analysis/fig2.ipynb", cell=3)),
    ))
    return prep, plot, nb


def test_manifest_content() -> None:
    runs = _runs()
    comparison = OutputComparison(path="figures/growth.png", kind="raster", status="drift", rms=2.5,
                                  committed_version="3.7.1")
    context = RunContext(runs=runs, comparisons={"figures/growth.png": comparison})
    env = {"python": "3.11.7", "matplotlib": "3.11.2"}
    m = build_manifest(runs, context, git_commit="0" * 40, environment=env, date="2023-11-14T22:13:20Z")
    assert m["git_commit"] == "0" * 40 and m["date"] == "2023-11-14T22:13:20Z"
    assert [f["path"] for f in m["figures"]] == ["figures/fig2.svg", "figures/growth.png"]
    growth = m["figures"][1]
    assert growth["script"] == "figures/growth.py" and growth["line"] == 20
    assert growth["figure"] == "figures/growth.py#1"
    assert growth["comparison"] == {"status": "drift", "rms": 2.5, "committed_version": "3.7.1"}
    assert growth["inputs"] == [
        {"path": "data/clean.csv", "sha256": "11" * 32, "inside_repo": True, "exists": True,
         "written_by": ["prep/clean.py"]},
        {"path": "data/extra.csv", "sha256": None, "inside_repo": True, "exists": False},
    ]
    # a notebook figure lists the inputs read up to the cell that saved it
    fig2 = m["figures"][0]
    assert fig2["cell"] == 2 and [i["path"] for i in fig2["inputs"]] == ["data/a.csv"]
    scripts = {s["path"]: s for s in m["scripts"]}
    assert scripts["prep/clean.py"]["inputs"][0]["sha256"] == ABC_SHA256
    assert scripts["figures/growth.py"]["outputs"] == ["figures/growth.png"]  # /tmp preview not listed
    assert provenance_rows(m)[1] == ("figures/growth.png", "figures/growth.py:20",
                                     "data/clean.csv, data/extra.csv (missing)")


def test_manifest_is_deterministic() -> None:
    runs = _runs()
    env = environment_fingerprint()
    a = build_manifest(runs, RunContext(runs=runs), git_commit=None, environment=env)
    b = build_manifest(tuple(reversed(runs)), RunContext(runs=runs), git_commit=None,
                       environment=dict(reversed(list(env.items()))))
    assert json.dumps(a, sort_keys=True, allow_nan=False) == json.dumps(b, sort_keys=True, allow_nan=False)
    assert list(a["environment"]) == sorted(a["environment"])


def test_same_path_written_by_two_scripts() -> None:
    one = run(path="a.py", events=(FileEvent(action="save", path="figures/x.png", source=src(3, "a.py")),))
    two = run(path="b.py", events=(FileEvent(action="save", path="figures/x.png", source=src(4, "b.py")),))
    m = build_manifest((one, two), RunContext(runs=(one, two)), git_commit=None, environment={})
    assert m["figures"][0]["script"] == "b.py" and m["figures"][0]["also_written_by"] == ["a.py"]


def test_empty_manifest() -> None:
    m = build_manifest((), RunContext(), git_commit=None, environment={})
    assert m["figures"] == [] and m["scripts"] == [] and provenance_rows(m) == []

"""The same repo checked twice, from two different temporary folders, gives byte-identical reports.

The runs see the repo through temporary views whose paths differ every time; nothing of them may reach a
report (a traceback's file names, an exception message quoting an absolute path).
"""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest

from figproof.cli import main

REPOS = Path(__file__).parent / "data" / "repos"


@pytest.mark.slow
def test_two_checks_in_different_folders_write_the_same_bytes(tmp_path: Path,
                                                               monkeypatch: pytest.MonkeyPatch) -> None:
    outputs = []
    for name in ("first", "second"):
        repo = tmp_path / name / "lab"
        shutil.copytree(REPOS / "broken", repo, ignore=shutil.ignore_patterns("expected.json"))
        (repo / "abspath.py").write_text("import os\nimport matplotlib.pyplot as plt\n"
                                         "raise ValueError(f'cannot parse {os.path.abspath(\"data.csv\")}')\n")
        out = tmp_path / name / "out"
        monkeypatch.chdir(tmp_path / name)
        main(["check", "lab", "--quiet", "--no-cache", "--json", str(out / "r.json"), "--markdown",
              str(out / "r.md"), "--sarif", str(out / "r.sarif")])
        outputs.append({f: (out / f).read_bytes() for f in ("r.json", "r.md", "r.sarif")})
    assert outputs[0] == outputs[1]
    assert b"figproof-run-" not in outputs[0]["r.json"] and b"cannot parse data.csv" in outputs[0]["r.json"]

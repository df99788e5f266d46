"""The demo's reports, byte for byte: a change to what figproof reports on the demo lab shows up here.

The expected files in tests/data/demo-report/ were written by figproof itself; when a change to the
reports is intended, rewrite them with ``FIGPROOF_WRITE_EXPECTED=1 python -m pytest tests/test_demo_report.py``
and read the diff before committing it. Only the environment line (interpreter and library versions) is
masked, since it names this machine's versions.
"""

from __future__ import annotations

import os
import re
from pathlib import Path

import pytest

from figproof import cli

EXPECTED = Path(__file__).parent / "data" / "demo-report"
FILES = ("summary.md", "figproof.json", "figproof.sarif")
_ENVIRONMENT = re.compile(r"Python \d+\.\d+\.\d+, matplotlib [^\n]*")
# the kernel layers exist where the kernel has Landlock: the reports name them, the expected files do not
_KERNEL = re.compile(r'kernel (write confinement|network block) \(Landlock\), |\n *"kernel-[a-z-]+",')


def _masked(text: str) -> str:
    return _KERNEL.sub("", _ENVIRONMENT.sub("<environment>", text))


@pytest.mark.slow
def test_demo_reports_are_the_expected_bytes(tmp_path: Path, capsys: pytest.CaptureFixture[str],
                                             monkeypatch: pytest.MonkeyPatch) -> None:
    # how scripts see the repo depends on the machine (an overlay where the kernel allows it) and the reports
    # name it; the expected files were written with the copy every platform has
    monkeypatch.setenv("FIGPROOF_REPO_VIEW", "copy")
    assert cli.main(["demo", "--keep", str(tmp_path / "demo")]) == 0
    capsys.readouterr()
    reports = tmp_path / "demo" / "figproof-report"
    if os.environ.get("FIGPROOF_WRITE_EXPECTED") == "1":
        EXPECTED.mkdir(parents=True, exist_ok=True)
        for name in FILES:
            (EXPECTED / name).write_text(_masked((reports / name).read_text(encoding="utf-8")), encoding="utf-8")
    for name in FILES:
        got = _masked((reports / name).read_text(encoding="utf-8"))
        assert got == (EXPECTED / name).read_text(encoding="utf-8"), f"{name} differs from tests/data/demo-report"

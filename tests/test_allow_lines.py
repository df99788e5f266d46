"""Allow comments on the line that caused a finding, and allow comments that match nothing (stale)."""

from __future__ import annotations

from pathlib import Path

import pytest

from figproof.model.findings import Finding
from figproof.pipeline import check
from figproof.policy.accept import apply_acceptance, parse_allow_comments, unused_allows

CLIPPED = """\
import matplotlib.pyplot as plt
fig, ax = plt.subplots()
ax.scatter([1, 2, 3, 4], [10, 20, 30, 90])
ax.set_ylim(0, 40){comment}
ax.set_xlabel("day")  # figproof: allow points-hidden -- nothing is hidden here
fig.savefig("out.png")
"""


def _finding(line: int, cause_line: int | None) -> Finding:
    return Finding(rule="axis-clips-data", severity="error", confidence="certain", path="a.py", line=line,
                   message="1 of 4 points (25%) lies above the y-limit 40 and is not drawn", fingerprint="f" * 16,
                   cause_line=cause_line)


def test_an_allow_comment_on_the_causing_line_accepts_the_finding() -> None:
    text = "x\nax.set_ylim(0, 40)  # figproof: allow axis-clips-data -- the outlier is in panel b\n"
    allows, _ = parse_allow_comments(text, {"axis-clips-data"})
    (accepted,), _ = apply_acceptance([_finding(line=9, cause_line=2)], {"a.py": allows}, [])
    assert accepted.accepted == "the outlier is in panel b"
    (open_,), _ = apply_acceptance([_finding(line=9, cause_line=None)], {"a.py": allows}, [])
    assert open_.accepted is None
    assert [(k, a.line) for k, a in unused_allows([open_], {"a.py": allows})] == [("a.py", 2)]


@pytest.mark.slow
def test_set_ylim_line_allow_and_a_stale_allow_in_a_real_check(tmp_path: Path, warm_runner) -> None:
    repo = tmp_path / "lab"
    repo.mkdir()
    (repo / "fig.py").write_text(CLIPPED.format(comment="  # figproof: allow axis-clips-data -- shown in panel b"))
    result = check(repo, runner=warm_runner).result
    (clip,) = [f for f in result.findings if f.rule == "axis-clips-data"]
    assert clip.line == 3 and clip.accepted == "shown in panel b"  # found at the scatter, caused at set_ylim
    assert "fig.py, line 5: allow comment for points-hidden matches no finding (stale); remove it" in result.notes

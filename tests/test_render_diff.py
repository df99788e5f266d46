"""Drift that is only rendering: figures drawn under two rendering settings differ only by small shifts,
while changed content (a title, a bar, a point, an axis range) still drifts, in both directions.

The two renderings come from matplotlib itself (text anti-aliasing on and off, FreeType hinting "auto" and
"none"), so the differences are the ones a matplotlib or FreeType upgrade produces.
"""

from __future__ import annotations

from pathlib import Path

import matplotlib
import pytest

matplotlib.use("Agg")
import matplotlib.pyplot as plt

from figproof.compare.files import compare_output
from figproof.rules.reproduce import figure_drift


def _draw(path: Path, *, title: str = "Root length by treatment", heights=(3.0, 5.0, 4.0), point=(1.0, 4.5),
          ylim=None, **rc: object) -> Path:
    with plt.rc_context(rc):
        fig, ax = plt.subplots(figsize=(6.4, 4.8), dpi=100)
        ax.bar(["control", "low", "high"], heights, color="tab:blue")
        ax.plot([0, 1, 2], [2, 3, 3.5], marker="o", color="tab:orange")
        ax.scatter([point[0]], [point[1]], color="black")
        ax.set_title(title)
        ax.set_xlabel("treatment")
        ax.set_ylabel("root length (mm)")
        if ylim is not None:
            ax.set_ylim(*ylim)
        fig.savefig(path, format="png")
        plt.close(fig)
    return path


RENDERING = {"text antialiasing off": {"text.antialiased": False}, "hinting none": {"text.hinting": "none"},
             "lines and patches not antialiased": {"lines.antialiased": False, "patch.antialiased": False}}
CONTENT = {"changed title": {"title": "Root length by treatment (n = 14)"},
           "one letter of the title": {"title": "Root length by treatmemt"},
           "taller bar": {"heights": (3.0, 5.2, 4.0)}, "moved point": {"point": (1.0, 4.3)},
           "other y range": {"ylim": (0, 6)}}


@pytest.mark.parametrize("name", RENDERING)
@pytest.mark.parametrize("direction", ["old-vs-new", "new-vs-old"])
def test_rendering_changes_are_rendering(name: str, direction: str, tmp_path: Path) -> None:
    base = _draw(tmp_path / "base.png")
    other = _draw(tmp_path / "other.png", **RENDERING[name])
    a, b = (base, other) if direction == "old-vs-new" else (other, base)
    c = compare_output(a, b, tolerance=0.0, shifts=True)
    assert c.status == "rendering", c.message
    # without the shift tolerance (as for two runs of one script) the same files drift
    assert compare_output(a, b, tolerance=0.0).status == "drift"


@pytest.mark.parametrize("name", CONTENT)
@pytest.mark.parametrize("rc", ["same settings", "text antialiasing off"])
def test_content_changes_still_drift(name: str, rc: str, tmp_path: Path) -> None:
    settings = {} if rc == "same settings" else RENDERING[rc]
    base = _draw(tmp_path / "base.png")
    changed = _draw(tmp_path / "changed.png", **CONTENT[name], **settings)
    for a, b in ((base, changed), (changed, base)):
        assert compare_output(a, b, tolerance=0.0, shifts=True).status == "drift"


def test_rendering_only_difference_is_a_note(tmp_path: Path) -> None:
    from figproof.model.context import RunContext
    from figproof.model.records import FileEvent, ScriptRun, Source

    base = _draw(tmp_path / "base.png")
    other = _draw(tmp_path / "other.png", **{"text.hinting": "none"})
    c = compare_output(base, other, tolerance=0.0, shifts=True, path="figures/roots.png")
    saved = FileEvent(action="save", path="figures/roots.png", source=Source(path="figures/roots.py", line=9))
    run = ScriptRun(path="figures/roots.py", status="ok", events=(saved,))
    context = RunContext(runs=(run,), comparisons={"figures/roots.png": c})
    found = [h for h in figure_drift.check(run, context, figure_drift.defaults()) if "roots.png" in h.message]
    assert len(found) == 1 and found[0].severity == "note" and "not stale" in found[0].message

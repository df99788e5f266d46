"""Extraction without painting: the model is the same whether or not figure renderings are kept.

A check without ``--images`` or ``--twice`` keeps no renderings, so the child lays a figure out without
painting it, or skips drawing when the script's own savefig already drew it and nothing changed since.
The reference is the full Agg draw (matplotlib's ``FigureCanvasAgg.draw``) the model was always built from.
"""

from __future__ import annotations

import json
import os
import sys
import textwrap
from pathlib import Path

import pytest

from figproof.model.records import ScriptRun
from figproof.run.execute import Options, Task, execute_all
from figproof.run.pool import WarmPool

SCRIPTS = {
    # saved at another dpi than the figure's, nothing changed afterwards: the savefig draw is reused
    "saved.py": """
        import matplotlib.pyplot as plt
        import numpy as np
        fig, ax = plt.subplots(figsize=(3, 2))
        ax.scatter([1, 2, 3], [2.5, 3.1, 4.0], c="tab:green", label="plants")
        ax.plot(np.arange(4), np.arange(4) ** 2)
        ax.set_title("Height by dose")
        ax.legend(loc="best")
        fig.savefig("saved.png", dpi=50)
    """,
    # saved as displayed (PNG at the figure's dpi): extracted from the script's own draw, without drawing
    "as_shown.py": """
        import matplotlib.pyplot as plt
        fig, ax = plt.subplots(figsize=(4, 3))
        ax.plot([1, 2, 3], [3, 1, 2], "o-", label="dry")
        ax.plot([1, 2, 3], [2, 2, 3], "s--", label="wet")
        ax.legend(loc="best", title="soil")
        ax.annotate("peak", xy=(1, 3), xytext=(10, -10), textcoords="offset points")
        fig.savefig("as_shown.png")
    """,
    # changed after saving: the limits (so the tick labels) and the title must be the new ones
    "changed.py": """
        import matplotlib.pyplot as plt
        fig, ax = plt.subplots(figsize=(3, 2))
        ax.bar(["a", "b", "c"], [3.0, 1.0, 2.0])
        fig.savefig("changed.png")
        ax.set_ylim(0, 100)
        ax.set_title("after saving")
    """,
    # a layout engine, last saved as PDF (72 dpi): laid out again at the figure's dpi
    "constrained.py": """
        import matplotlib.pyplot as plt
        import numpy as np
        rng = np.random.default_rng(3)
        fig, axs = plt.subplots(1, 2, figsize=(6, 3), layout="constrained")
        for ax in axs:
            ax.scatter(rng.normal(size=50), rng.normal(size=50), label="plants", s=30)
            ax.set_xlabel("a long x label with words")
        fig.suptitle("two panels")
        fig.savefig("constrained.png", dpi=300)
        fig.savefig("constrained.pdf")
    """,
    # never saved, tight bounding box on another figure
    "unsaved.py": """
        import matplotlib.pyplot as plt
        plt.figure()
        plt.plot([1, 2, 3], [2, 1, 3], "o-")
        plt.xlabel("day")
        fig = plt.figure()
        plt.hist([1, 2, 2, 3, 3, 3])
        fig.savefig("hist.png", bbox_inches="tight")
    """,
}


def _runs(tmp_path: Path, renders: bool, runner: object) -> list[ScriptRun]:
    root = tmp_path / "repo"
    if not root.exists():
        root.mkdir()
        for name, text in SCRIPTS.items():
            (root / name).write_text(textwrap.dedent(text), encoding="utf-8")
    options = Options(root=root, artifacts=tmp_path / f"art-{renders}", renders=renders)
    return execute_all([Task(script=s) for s in SCRIPTS], options, runner=runner)  # type: ignore[arg-type]


def _comparable(run: ScriptRun) -> list[str]:
    out = []
    for fig in run.figures:
        data = fig.to_json()
        data.pop("render")
        out.append(json.dumps(data, sort_keys=True, default=str))
    return out


@pytest.mark.slow
@pytest.mark.skipif(os.name != "posix" or sys.platform == "darwin", reason="uses the warm pool (fork)")
def test_model_is_the_same_with_and_without_renderings(tmp_path: Path) -> None:
    with WarmPool() as pool:
        painted = _runs(tmp_path, True, pool)
        unpainted = _runs(tmp_path, False, pool)
    for a, b in zip(painted, unpainted, strict=True):
        assert a.status == b.status == "ok", (a.path, a.error, b.error)
        assert len(a.figures) == len(b.figures) > 0
        assert _comparable(a) == _comparable(b), a.path
        assert all(f.render == f"figure-{f.number}.png" for f in a.figures)
        assert all(f.render is None for f in b.figures)
    art = tmp_path / "art-False"
    assert not [p for slug in os.listdir(art) for p in (art / slug / "renders").glob("*.png")]
    changed = next(r for r in unpainted if r.path == "changed.py").figures[0].axes[0]
    # matplotlib's default locator on 0–100 (AutoLocator: ticks at multiples of 20)
    assert [label for _, label in changed.y.ticks] == ["0", "20", "40", "60", "80", "100"]
    assert any(t.text == "after saving" for t in changed.texts)


def _counting(fig: object) -> list[int]:
    from matplotlib.figure import Figure

    calls: list[int] = []
    real = Figure.draw

    def draw(renderer: object) -> None:
        calls.append(1)
        real(fig, renderer)  # type: ignore[arg-type]

    fig.draw = draw  # type: ignore[attr-defined]
    return calls


def test_a_figure_saved_as_displayed_is_not_drawn_again_until_it_changes(tmp_path: Path) -> None:
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    from figproof.child.extract import draw_for_extraction

    fig = Figure(figsize=(3, 2))
    canvas = FigureCanvasAgg(fig)
    ax = fig.subplots()
    ax.plot([0, 1], [0, 1])
    fig.savefig(tmp_path / "a.png")
    fig.stale = False  # what the capture hook does after a savefig it can reuse
    calls = _counting(fig)
    draw_for_extraction(fig, canvas, already_drawn=True, renders=False)
    assert calls == []
    ax.set_title("later")  # an artist's change marks the figure stale (matplotlib's stale propagation)
    assert fig.stale
    draw_for_extraction(fig, canvas, already_drawn=True, renders=False)
    assert calls == [1]
    draw_for_extraction(fig, canvas, already_drawn=False, renders=True)
    assert calls == [1, 1]


@pytest.mark.parametrize(("fname", "kwargs", "expected"), [
    ("a.png", {}, True),  # rcParams savefig.dpi defaults to "figure" (matplotlib's matplotlibrc)
    ("a.png", {"dpi": 100}, True),
    ("a.png", {"dpi": 300}, False),
    ("a.jpg", {"dpi": "figure"}, True),
    ("a.pdf", {}, False),
    ("a.svg", {}, False),
    ("a.png", {"bbox_inches": "tight"}, False),
    ("a", {"format": "png"}, True),
    ("a.png", {"format": "pdf"}, False),
    ("a.png", {"dpi": "high"}, False),
])
def test_which_savefig_calls_leave_the_figure_drawn_as_displayed(fname: str, kwargs: dict[str, object],
                                                                 expected: bool) -> None:
    from matplotlib.figure import Figure

    from figproof.child.capture import drew_as_displayed

    assert drew_as_displayed(Figure(dpi=100), fname, kwargs) is expected

"""Run rules of the reproducibility family, on hand-built runs and comparisons.

The comparison verdicts fed to figure-drift come from figproof.compare.files, whose
pixel and RMS definitions are checked against Pillow and matplotlib in
tests/test_compare.py; one test here feeds real compare_output results through
the rule so the two agree end to end.
"""

from __future__ import annotations

from pathlib import Path
from types import MappingProxyType

import numpy as np
from PIL import Image, PngImagePlugin

from figproof.compare.files import OutputComparison, compare_output
from figproof.model.context import Inventory, RunContext
from figproof.model.findings import Hit
from figproof.model.records import FileEvent, ScriptRun, Source
from figproof.rules import knob_value, reproduce
from figproof.rules.base import Rule
from tests.builders import axes, errorbars, figure, points, run, src


def hits(r: Rule, run_: ScriptRun, context: RunContext, **knobs: float) -> list[Hit]:
    return list(r.check(run_, context, {**r.defaults(), **knobs}))


def save(path: str, line: int = 9, script: str = "fig.py") -> FileEvent:
    return FileEvent(action="save", path=path, format=path.rsplit(".", 1)[-1], source=src(line, script))


def drift(path: str = "figures/growth.png", **kw: object) -> OutputComparison:
    base = dict(path=path, kind="raster", status="drift", rms=12.5, differing_pixels=4800, total_pixels=307200,
                committed_size=(640, 480), regenerated_size=(640, 480), committed_version="3.11.2",
                regenerated_version="3.11.2")
    base.update(kw)
    return OutputComparison(**base)  # type: ignore[arg-type]


def ctx(*runs: ScriptRun, **kw: object) -> RunContext:
    return RunContext(runs=runs, running_version="3.11.2", **kw)  # type: ignore[arg-type]


# ---------------------------------------------------------------------------- figure-drift


def test_drift_stale_with_rms_and_pixel_count() -> None:
    r = run(path="fig.py", events=(save("figures/growth.png"),))
    found = hits(reproduce.figure_drift, r, ctx(r, comparisons={"figures/growth.png": drift()}))
    assert len(found) == 1
    assert found[0].message == ("figures/growth.png is stale: fig.py now draws it differently "
                                "(4800 of 307200 (2%) pixels differ, RMS 12.50 of 255)")
    assert found[0].source == src(9)
    assert found[0].severity is None  # the rule's default: error


def test_drift_environment_differs_is_reported_apart() -> None:
    r = run(path="fig.py", events=(save("figures/growth.png"),))
    c = drift(committed_version="3.7.1", rms=1.8)
    found = hits(reproduce.figure_drift, r, ctx(r, comparisons={"figures/growth.png": c}))
    assert len(found) == 1
    assert "matplotlib 3.7.1" in found[0].message and "3.11.2" in found[0].message
    assert "RMS 1.80 of 255" in found[0].message
    assert found[0].severity == "warning" and found[0].confidence == "possible"
    assert found[0].key.endswith(":environment")


def test_drift_tolerance_knob_reaches_the_comparison(tmp_path: Path) -> None:
    # the knob is applied once, where the images are compared: read from the config, else the rule's default
    a = np.zeros((20, 20, 3), np.uint8)
    b = a.copy()
    b[0, 0] = 40  # RMS over all channels: sqrt(3 * 40**2 / 1200) = 2.0
    committed, regenerated = tmp_path / "c.png", tmp_path / "r.png"
    Image.fromarray(a).save(committed)
    Image.fromarray(b).save(regenerated)
    for configured, status in (({}, "drift"), ({"figure-drift": (None, {"tolerance": 2.5})}, "same"),
                               ({"figure-drift": (None, {"tolerance": 1.5})}, "drift")):
        tolerance = knob_value(configured, "figure-drift", "tolerance")
        assert compare_output(committed, regenerated, tolerance=tolerance).status == status


def test_drift_size_mismatch_and_unreadable() -> None:
    r = run(path="fig.py", events=(save("a.png"), save("b.png", 10), save("c.pdf", 11), save("d.png", 12)))
    context = ctx(r, comparisons={
        "a.png": drift("a.png", status="size-mismatch", rms=None, regenerated_size=(800, 600)),
        "b.png": drift("b.png", status="unreadable-committed", rms=None, message="cannot identify image file"),
        "c.pdf": drift("c.pdf", kind="vector", status="same", rms=None),
        "d.png": drift("d.png", status="missing-committed", rms=None),
    })
    found = {h.key: h for h in hits(reproduce.figure_drift, r, context)}
    assert set(found) == {"a.png:size", "b.png:unreadable"}
    assert found["a.png:size"].message == "a.png is 640×480 px but fig.py now draws it at 800×600 px"
    assert "cannot identify image file" in found["b.png:unreadable"].message


def test_drift_saved_twice_note_and_outside_paths_ignored() -> None:
    events = (save("figures/a.png", 5), save("figures/a.png", 8),
              FileEvent(action="save", path="/tmp/scratch.png", inside_repo=False, source=src(9)))
    r = run(path="fig.py", events=events)
    found = hits(reproduce.figure_drift, r, ctx(r, comparisons={"/tmp/scratch.png": drift("/tmp/scratch.png")}))
    assert [h.key for h in found] == ["figures/a.png:saved-twice"]
    assert "(lines 5, 8)" in found[0].message and found[0].severity == "note"


def test_drift_pillow_write_counts_as_output() -> None:
    # Pillow's Image.save opens the file for writing: the child records a "write" of an image path
    events = (FileEvent(action="write", path="figures/photo_panel.png", source=src(6)),
              FileEvent(action="write", path="data/summary.csv", source=src(7)))
    r = run(path="fig.py", events=events)
    context = ctx(r, comparisons={"figures/photo_panel.png": drift("figures/photo_panel.png"),
                                  "data/summary.csv": drift("data/summary.csv", kind="other")})
    assert [h.key for h in hits(reproduce.figure_drift, r, context)] == ["figures/photo_panel.png:stale"]


def test_drift_notebook_cell() -> None:
    r = run(path="analysis/fig2.ipynb")
    c = drift("analysis/fig2.ipynb", cell=4, output=0)
    found = hits(reproduce.figure_drift, r, ctx(r, notebook_comparisons={"analysis/fig2.ipynb": (c,)}))
    assert len(found) == 1 and found[0].source == Source(path="analysis/fig2.ipynb", cell=4)
    assert "cell 4" in found[0].message


def test_drift_from_real_comparison(tmp_path: Path) -> None:
    # End to end with figproof.compare.files: a PNG with one changed block, recorded as made by matplotlib 3.7.1.
    rng = np.random.default_rng(7)
    a = rng.integers(0, 256, (20, 30, 3), dtype=np.uint8)
    b = a.copy()
    b[:5, :5] = 0
    info = PngImagePlugin.PngInfo()
    info.add_text("Software", "Matplotlib version3.7.1, https://matplotlib.org/")
    Image.fromarray(a).save(tmp_path / "committed.png", pnginfo=info)
    Image.fromarray(b).save(tmp_path / "regenerated.png")
    c = compare_output(tmp_path / "committed.png", tmp_path / "regenerated.png", tolerance=0, path="growth.png")
    r = run(path="fig.py", events=(save("growth.png"),))
    found = hits(reproduce.figure_drift, r, ctx(r, comparisons=MappingProxyType({"growth.png": c})))
    assert len(found) == 1 and "environment differs" in found[0].message
    assert "25 of 600 (4%) pixels differ" in found[0].message


# ---------------------------------------------------------------------------- input-missing


def test_input_missing_names_file_and_line() -> None:
    ev = FileEvent(action="missing", path="data/growth_2023.csv", exists=False, source=src(3))
    r = run(path="fig.py", events=(ev, ev))
    found = hits(reproduce.input_missing, r, ctx(r))
    assert [h.message for h in found] == ["data/growth_2023.csv is read at fig.py:3 but is not in the repo"]
    assert found[0].source == src(3)


def test_input_missing_outside_repo_left_to_other_rule() -> None:
    ev = FileEvent(action="missing", path="/srv/lab-share/growth.csv", inside_repo=False, exists=False,
                   source=src(3))
    r = run(path="fig.py", events=(ev,))
    assert hits(reproduce.input_missing, r, ctx(r)) == []
    found = hits(reproduce.input_outside_repo, r, ctx(r))
    assert len(found) == 1 and "absolute path /srv/lab-share/growth.csv" in found[0].message
    assert "does not exist here" in found[0].message


def test_read_of_file_a_later_script_writes() -> None:
    reader = run(path="figures/plot.py", events=(
        FileEvent(action="read", path="data/clean.csv", sha256="ab", source=src(4, "figures/plot.py")),
        FileEvent(action="missing", path="data/summary.csv", exists=False, source=src(5, "figures/plot.py")),
    ))
    writer = run(path="prep/clean.py", events=(
        FileEvent(action="write", path="data/clean.csv", source=src(8, "prep/clean.py")),
        FileEvent(action="write", path="data/summary.csv", source=src(9, "prep/clean.py")),
    ))
    found = {h.key: h for h in hits(reproduce.input_missing, reader, ctx(reader, writer))}
    assert set(found) == {"data/clean.csv:order", "data/summary.csv:order"}
    assert found["data/clean.csv:order"].severity == "warning"
    assert "prep/clean.py, which runs later, rewrites it" in found["data/clean.csv:order"].message
    assert found["data/summary.csv:order"].severity is None
    # in the stated order (writer first) the existing file is fine; a still-missing one names the writer
    ordered = hits(reproduce.input_missing, reader, ctx(writer, reader))
    assert [h.key for h in ordered] == ["data/summary.csv"]
    assert ordered[0].message.endswith("(prep/clean.py writes it earlier in this run)")


# ---------------------------------------------------------------------------- input-outside-repo


def test_outside_repo_network_blocked_write_untracked() -> None:
    events = (
        FileEvent(action="network", path="data.lab.example:443", inside_repo=False, exists=False,
                  source=src(2)),
        FileEvent(action="read", path="data/notes.csv", sha256="cd", source=src(3)),
        FileEvent(action="read", path="data/growth.csv", sha256="ef", source=src(4)),
        FileEvent(action="read", path="https://data.lab.example/growth.csv", inside_repo=False, source=src(5)),
    )
    r = run(path="fig.py", events=events)
    inventory = Inventory(tracked=("fig.py", "data/growth.csv"), is_git=True)
    found = {h.key: h for h in hits(reproduce.input_outside_repo, r, ctx(r, inventory=inventory))}
    assert set(found) == {"network:data.lab.example:443", "untracked:data/notes.csv",
                          "read:https://data.lab.example/growth.csv"}
    assert found["untracked:data/notes.csv"].severity == "warning"
    assert "over the network" in found["read:https://data.lab.example/growth.csv"].message
    # not a git repo: untracked files are not a finding
    plain = hits(reproduce.input_outside_repo, r, ctx(r, inventory=Inventory(is_git=False)))
    assert "untracked:data/notes.csv" not in {h.key for h in plain}


def test_untracked_file_written_earlier_is_fine() -> None:
    writer = run(path="prep.py", events=(FileEvent(action="write", path="data/clean.csv", source=src(2, "prep.py")),))
    reader = run(path="fig.py", events=(FileEvent(action="read", path="data/clean.csv", sha256="aa", source=src(3)),))
    inventory = Inventory(tracked=("fig.py", "prep.py"), is_git=True)
    assert hits(reproduce.input_outside_repo, reader, ctx(writer, reader, inventory=inventory)) == []


# ---------------------------------------------------------------------------- figure-orphan


def test_orphan_fires_once_at_the_file() -> None:
    first = run(path="a.py", events=(save("figures/a.png", script="a.py"),))
    second = run(path="b.py", events=(FileEvent(action="read", path="figures/photo.png", sha256="1",
                                                source=src(2, "b.py")),))
    inventory = Inventory(figure_files=("figures/old.png", "figures/a.png", "figures/photo.png"), is_git=True)
    context = ctx(first, second, inventory=inventory)
    assert hits(reproduce.figure_orphan, second, context) == []
    found = hits(reproduce.figure_orphan, first, context)
    assert [h.message for h in found] == ["figures/old.png is committed but no script wrote it in this run"]
    assert found[0].source == Source(path="figures/old.png")
    # outside git nothing is committed: the message says the file is in the repo
    plain = hits(reproduce.figure_orphan, first, ctx(first, second, inventory=Inventory(figure_files=("figures/old.png",))))
    assert [h.message for h in plain] == ["figures/old.png is in the repo but no script wrote it in this run"]


def test_no_orphan_while_a_script_did_not_finish() -> None:
    # root cause once: the failed script may write the file, and its failure is already the finding
    ok = run(path="a.py", events=(save("figures/a.png", script="a.py"),))
    failed = run(path="b.py", status="failed")
    context = ctx(ok, failed, inventory=Inventory(figure_files=("figures/old.png", "figures/a.png")))
    assert hits(reproduce.figure_orphan, ok, context) == []


def test_images_outside_the_output_folders_are_not_orphans() -> None:
    # a photo in data/ is an input nobody draws; figures/old.png sits where the scripts save figures
    first = run(path="a.py", events=(save("figures/a.png", script="a.py"),))
    inventory = Inventory(figure_files=("figures/old.png", "figures/a.png", "data/gel_photo.png"))
    found = hits(reproduce.figure_orphan, first, ctx(first, inventory=inventory))
    assert [h.message for h in found] == ["figures/old.png is in the repo but no script wrote it in this run"]


def test_orphan_via_figure_outputs_and_empty_context() -> None:
    fig = figure(axes(), script="a.py", outputs=("figures/a.svg",))
    r = run(fig, path="a.py")
    assert hits(reproduce.figure_orphan, r, ctx(r, inventory=Inventory(figure_files=("figures/a.svg",)))) == []
    assert hits(reproduce.figure_orphan, r, RunContext()) == []


# ---------------------------------------------------------------------------- output-nondeterministic


def _strip(x: list[float], y: list[float], out: str = "figures/strip.png") -> ScriptRun:
    fig = figure(axes(points=[points(x, y, xlim=(-1, 1), ylim=(0, 5))]), script="strip.py", outputs=(out,))
    return run(fig, path="strip.py", events=(save(out, script="strip.py"),))


def test_unseeded_jitter_is_named() -> None:
    y = [2.1, 2.4, 1.9, 2.8]
    first = _strip([0.05, -0.02, 0.08, -0.07], y)
    second = _strip([-0.03, 0.06, 0.08, 0.01], y)
    c = drift("figures/strip.png", rms=3.2, differing_pixels=410, committed_version=None)
    context = ctx(first, second_runs={"strip.py": second}, rerun_comparisons={"strip.py": (c,)})
    found = hits(reproduce.output_nondeterministic, first, context)
    assert len(found) == 1
    assert found[0].message == (
        "figures/strip.png differs between two runs of strip.py (410 of 307200 (0%) pixels differ, RMS 3.20 of 255); "
        "the x positions of 3 of 4 (75%) points in axes 1 differ while their y values agree, "
        "as an unseeded random jitter does")


def test_rendering_comparison_keyed_by_figure_id() -> None:
    y = [2.1, 2.4, 1.9]
    first, second = _strip([0.05, -0.02, 0.08], y), _strip([0.01, -0.02, 0.03], y)
    c = drift("strip.py#1", rms=2.0, differing_pixels=300, committed_version=None)
    found = hits(reproduce.output_nondeterministic, first,
                 ctx(first, second_runs={"strip.py": second}, rerun_comparisons={"strip.py": (c,)}))
    assert len(found) == 1  # one finding: the rendering and the marks are the same figure
    assert found[0].message.startswith("figure strip.py#1 differs between two runs of strip.py")
    assert "unseeded random jitter" in found[0].message


def test_nondeterministic_unsaved_figure_and_bootstrap() -> None:
    def one(upper: float) -> ScriptRun:
        ax = axes(errorbars=[errorbars([0, 1], [2.0, 3.0], [0.5, upper])])
        return run(figure(ax, script="ci.py"), path="ci.py")

    first, second = one(0.4), one(0.6)
    found = hits(reproduce.output_nondeterministic, first, ctx(first, second_runs={"ci.py": second}))
    assert len(found) == 1 and "bootstrap" in found[0].message and found[0].key == "marks:ci.py#1"


def test_nondeterministic_generic_cause_status_and_inputs() -> None:
    first = run(path="fig.py", events=(FileEvent(action="read", path="data/a.csv", sha256="1", source=src(2)),))
    second = run(path="fig.py", events=(FileEvent(action="read", path="data/a.csv", sha256="2", source=src(2)),))
    c = drift("figures/a.pdf", kind="vector", rms=None, differing_pixels=None)
    found = {h.key: h for h in hits(reproduce.output_nondeterministic, first,
                                    ctx(first, second_runs={"fig.py": second},
                                        rerun_comparisons={"fig.py": (c,)}))}
    assert set(found) == {"figures/a.pdf", "input:data/a.csv"}
    assert "unseeded random numbers" in found["figures/a.pdf"].message
    crashed = run(path="fig.py", status="failed")
    status = hits(reproduce.output_nondeterministic, first, ctx(first, second_runs={"fig.py": crashed}))
    assert [h.key for h in status] == ["status"]


def test_a_different_number_of_figures_is_counted_in_words() -> None:
    # "1 figure", not "1 figures" (common practice: counts agree with their nouns)
    first = run(figure(script="fig.py"), path="fig.py")
    second = run(figure(script="fig.py"), figure(script="fig.py", number=2), path="fig.py")
    found = [h for h in hits(reproduce.output_nondeterministic, first, ctx(first, second_runs={"fig.py": second}))
             if h.key == "figures"]
    assert [h.message for h in found] == ["fig.py creates 1 figure in one run and 2 in the other"]


def test_deterministic_and_single_run_yield_nothing() -> None:
    y = [2.1, 2.4]
    first, second = _strip([0.1, 0.2], y), _strip([0.1, 0.2], y)
    same = drift("figures/strip.png", status="same", rms=0.0)
    context = ctx(first, second_runs={"strip.py": second}, rerun_comparisons={"strip.py": (same,)})
    assert hits(reproduce.output_nondeterministic, first, context) == []
    assert hits(reproduce.output_nondeterministic, first, ctx(first)) == []


def test_mark_differences_odd_input() -> None:
    nan = float("nan")
    a = figure(axes(points=[points([nan, 1.0], [nan, 2.0])]))
    b = figure(axes(points=[points([nan, 1.0], [nan, 2.0])]))
    assert reproduce.mark_differences(a, b) == []  # NaN in the same place is the same
    c = figure(axes(points=[points([1.0], [2.0])]))
    assert reproduce.mark_differences(a, c) == ["a different number of points in axes 1"]
    assert reproduce.mark_differences(figure(), figure(axes())) == ["0 axes in one run and 1 in the other"]


def test_rules_record() -> None:
    ids = [r.id for r in reproduce.RULES]
    assert ids == ["figure-drift", "input-missing", "input-outside-repo", "figure-orphan",
                   "output-nondeterministic"]
    assert all(r.scope == "run" and r.bad != r.good for r in reproduce.RULES)


# ---------------------------------------------------------------------------- write-outside-copy


def test_write_outside_copy_one_finding_per_cause() -> None:
    from figproof.model.records import ScriptError
    from figproof.rules import run as run_rules

    events = (
        FileEvent(action="blocked-write", path="/home/ana/paper/data.csv", inside_repo=False, source=src(4),
                  operation="remove"),
        FileEvent(action="blocked-write", path="/home/ana/paper/data.csv", inside_repo=False, source=src(4),
                  operation="remove"),  # the same line in a loop: one cause
        FileEvent(action="blocked-write", path="/home/ana/paper/data.csv", inside_repo=False, source=src(9),
                  operation="remove (kernel)"),
        FileEvent(action="subprocess", path="/home/ana/paper", inside_repo=False, source=src(11),
                  operation="rm -rf /home/ana/paper"),
    )
    error = ScriptError(kind="exception", type="PermissionError", source=src(4),
                        message="figproof: remove /home/ana/paper/data.csv is refused: it is outside the copy")
    r = run(path="fig.py", status="failed", error=error, events=events,
            isolation=("repo-copy", "kernel-write-confinement"))
    found = hits(run_rules.write_outside_copy, r, ctx(r))
    assert [h.source.line for h in found if h.source] == [4, 9, 11]
    assert "figproof refused it" in found[0].message and "the kernel refused it" in found[1].message
    assert "`rm -rf /home/ana/paper`" in found[2].message and "the kernel layer refused its writes" in found[2].message
    # the PermissionError the refusal raised is the same cause: script-fails stays quiet
    assert hits(run_rules.script_fails, r, ctx(r)) == []
    other = run(path="fig.py", status="failed", error=ScriptError(kind="exception", type="PermissionError",
                                                                  message="[Errno 13] denied", source=src(2)))
    assert len(hits(run_rules.script_fails, other, ctx(other))) == 1

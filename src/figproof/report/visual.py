"""Write the HTML report's folder: ``index.html`` and its images in ``img/`` beside it.

Gathers, for each drawn figure, its rendering, the boxes of its findings
(:mod:`figproof.report.marks`), its simulated colour-vision views, the change
views of its drifted files, the honest redraws of its summaries
(:mod:`figproof.report.redraw`) and its inputs, then renders the page with
:mod:`figproof.report.html`.  Image names are derived from figure ids and
file paths, so the same check writes the same folder.
"""

from __future__ import annotations

import shutil
from collections.abc import Mapping
from pathlib import Path
from typing import Any

from PIL import Image

from figproof.model.findings import Finding
from figproof.model.records import FigureModel, ScriptRun
from figproof.pipeline import Checked
from figproof.report import html
from figproof.report.change_view import Change
from figproof.report.images import COLOUR_RULES, CVD_KINDS, simulated_views


def _safe(name: str) -> str:
    return "".join(c if c.isalnum() or c in "._-" else "_" for c in name)


def _size(path: Path) -> tuple[int, int] | None:
    try:
        with Image.open(path) as img:
            return img.size
    except (OSError, ValueError, SyntaxError):
        return None


def _inputs(run: ScriptRun) -> tuple[tuple[str, str], ...]:
    seen: dict[str, str] = {}
    for ev in run.events:
        if ev.action == "read" and ev.inside_repo:
            seen.setdefault(ev.path, ev.sha256 or "")
    return tuple(sorted(seen.items()))


def _drift_owner(finding: Finding, figures: list[FigureModel]) -> FigureModel | None:
    """The figure whose saved file a run-scope finding (drift, a repeated save) is about."""
    for fig in figures:
        if any(out in finding.message for out in fig.outputs):
            return fig
    return None


def _vision_kinds(findings: list[Finding]) -> tuple[tuple[str, ...], bool]:
    """Which simulated views the colour findings ask for: the deficiencies a finding names, and grayscale.

    A colour-vision finding names the vision it fails under (all three when it names none); a grayscale
    finding, a colour map's uneven lightness and a low contrast are seen in grayscale.
    """
    kinds: set[str] = set()
    gray = False
    for f in findings:
        if f.accepted is not None or f.rule not in COLOUR_RULES:
            continue
        if f.rule == "colours-confusable-cvd":
            named = {k for k in CVD_KINDS if k in f.message}
            kinds |= named or set(CVD_KINDS)
        else:
            gray = True
    return tuple(k for k in CVD_KINDS if k in kinds), gray


def _vision(figure: FigureModel, rendering: Path, img: Path, findings: list[Finding],
            severity: float) -> tuple[html.View, ...]:
    kinds, gray = _vision_kinds(findings)
    if not kinds and not gray:
        return ()
    with Image.open(rendering) as opened:
        opened.load()
        rgba = opened.convert("RGBA")
    flat = Image.new("RGBA", rgba.size, (255, 255, 255, 255))
    flat.alpha_composite(rgba)
    views = simulated_views(flat.convert("RGB"), gray=gray, severity=severity, kinds=kinds)
    out = []
    for (label, view), name in zip(views[1:], [*kinds, "gray"], strict=False):
        target = img / f"{_safe(figure.id)}-{name}.png"
        view.save(target, format="PNG", compress_level=1)  # fast; the report is an artifact, not an archive
        out.append(html.View(label=label, src=f"img/{target.name}"))
    return tuple(out)


def write_html(checked: Checked, folder: Path, manifest: Mapping[str, Any]) -> str:
    """Write the HTML report's images into ``folder``/img; return the page (the caller writes index.html)."""
    from figproof.report.marks import finding_boxes
    from figproof.report.redraw import redraws_for
    from figproof.rules import knob_value
    from figproof.run.execute import artifact_folder

    folder = Path(folder)
    img = folder / "img"
    img.mkdir(parents=True, exist_ok=True)  # files are overwritten by name; nothing else in the folder is touched
    result = checked.result
    severity = knob_value(checked.config.rules, "colours-confusable-cvd", "cvd_severity")
    drifted = {path: (committed, regenerated) for path, committed, regenerated, _ in drifted_files(checked)}
    views = change_views(checked, img, caption=False)
    entries: list[html.FigureEntry] = []
    all_figures = [fig for run in result.runs for fig in run.figures]
    for run in result.runs:
        for fig in run.figures:
            mine = [f for f in result.findings if f.figure == fig.id]
            mine += [f for f in result.findings if f.figure is None and f.path == run.path
                     and f.rule in ("figure-drift", "output-nondeterministic")
                     and _drift_owner(f, all_figures) is fig]
            mine.sort(key=Finding.sort_key)
            rendering = artifact_folder(checked.artifacts, run.path) / "renders" / fig.render if fig.render else None
            size = _size(rendering) if rendering is not None else None
            image = None
            vision: tuple[html.View, ...] = ()
            if rendering is not None and size is not None:
                target = img / f"{_safe(fig.id)}.png"
                shutil.copyfile(rendering, target)
                image = f"img/{target.name}"
                vision = _vision(fig, rendering, img, mine, severity)
            drifts = []
            for out in fig.outputs:
                if out in views:
                    committed, regenerated = drifted[out]
                    suffix = Path(out).suffix
                    c_target, r_target = img / f"{_safe(out)}-committed{suffix}", img / f"{_safe(out)}-now{suffix}"
                    shutil.copyfile(committed, c_target)
                    shutil.copyfile(regenerated, r_target)
                    change_png, change = views[out]
                    drifts.append(html.Drift(path=out, changes=f"img/{change_png.name}",
                                             committed=f"img/{c_target.name}", regenerated=f"img/{r_target.name}",
                                             caption=change.caption()))
            boxes = tuple(tuple(finding_boxes(fig, f)) if f.figure == fig.id else () for f in mine)
            redraws = tuple(redraws_for(fig, mine, img, checked.config.root))
            entries.append(html.FigureEntry(
                id=fig.id, script=run.path, where=str(fig.source or run.path), image=image,
                image_size=size or (0, 0), model_size=(float(fig.size_px[0]), float(fig.size_px[1])),
                findings=tuple(mine), boxes=boxes, vision=vision, drifts=tuple(drifts), redraws=redraws,
                inputs=_inputs(run), outputs=fig.outputs))
    return html.render(html.Page(result=result, figures=tuple(entries), provenance=manifest))


def drifted_files(checked: Checked) -> list[tuple[str, Path, Path, FigureModel | None]]:
    """Committed raster figures that drifted: (repo path, committed file, regenerated file, the figure's model)."""
    from figproof.run.execute import artifact_folder

    found = []
    for path, comparison in sorted(checked.context.comparisons.items()):
        if comparison.status != "drift" or comparison.kind != "raster":
            continue
        for run in checked.result.runs:
            figure = next((f for f in run.figures if path in f.outputs), None)
            regenerated = artifact_folder(checked.artifacts, run.path) / "regenerated" / path
            if figure is not None or regenerated.is_file():
                found.append((path, checked.config.root / path, regenerated, figure))
                break
    return found


def change_views(checked: Checked, folder: Path, *, caption: bool = True) -> dict[str, tuple[Path, Change]]:
    """Write a change view for every drifted committed raster figure; returns repo path → (PNG, what changed)."""
    from figproof.report.change_view import ChangeViewError, write_change_view

    written: dict[str, tuple[Path, Change]] = {}
    for path, committed, regenerated, figure in drifted_files(checked):
        out = folder / (path.replace("/", "__") + "-changes.png")
        try:
            change = write_change_view(committed, regenerated, out, figure, caption=caption)
        except (ChangeViewError, OSError):
            continue  # the finding still says what drifted; an unreadable file gets no picture
        written[path] = (out, change)
    return written


__all__ = ["change_views", "drifted_files", "write_html"]

"""``figproof check DEPOSIT...``: check deposited archives or plain folders as a data editor would.

Each deposit is unpacked safely (:mod:`figproof.deposit.unpack`) into its own temporary folder.  Before anything
runs, its environment is surveyed (:mod:`figproof.deposit.environment`); then its scripts are checked with every
file counting as committed, the failures are grouped by environmental cause, the manuscript's figures (``--reference``)
are matched to the regenerated ones (:mod:`figproof.deposit.references`), and the replication report is written
(:mod:`figproof.deposit.replication`).  With several deposits each gets a report folder under ``--report-dir`` and
an index lists them; a deposit that cannot be unpacked is listed in the index and does not stop the others.
"""

from __future__ import annotations

import hashlib
import shutil
import sys
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, replace
from pathlib import Path

from figproof import __version__
from figproof.deposit import environment, references, replication
from figproof.deposit.unpack import DepositError, deposit_name, is_archive, opened
from figproof.model.records import FigureModel, ScriptRun
from figproof.pipeline import Checked, CheckOptions, check
from figproof.report.write import ReportRequest, write_text

# exit codes, as figproof.cli.ExitCode names them (this module may not import the command line)
REPRODUCED, NOT_REPRODUCED, REFUSED = 0, 1, 5
REPLICATION_HTML = "replication.html"  # a batch's page per deposit, beside replication.md

Progress = Callable[[ScriptRun, int, int], None]


@dataclass(frozen=True, slots=True, kw_only=True)
class DepositRun:
    """What the command line asks of a deposit check (built by :mod:`figproof.cli`)."""

    paths: tuple[Path, ...]
    reports: ReportRequest  # --markdown and --json take the replication report of a single deposit
    reference: Path | None = None
    report_dir: Path | None = None
    jobs: int | None = None
    twice: bool = False
    quiet: bool = False


def wanted(paths: Sequence[Path], deposit_flag: bool, reference: str | None, report_dir: str | None) -> bool:
    """Whether ``figproof check`` was asked to check deposits rather than one repo."""
    return deposit_flag or bool(reference) or bool(report_dir) or len(paths) > 1 or any(is_archive(p) for p in paths)


def _sha256(path: Path) -> str | None:
    if not path.is_file():
        return None
    digest = hashlib.sha256()
    with open(path, "rb") as fh:
        while chunk := fh.read(1 << 20):
            digest.update(chunk)
    return digest.hexdigest()


def _survey(root: Path) -> environment.Survey:
    """The environment the deposit needs, from the scripts discovery finds (nothing runs)."""
    from figproof import rules
    from figproof.config import Config, load_config
    from figproof.discover.inventory import discover

    config = load_config(root, rules=rules.by_id())
    if config.root != root.resolve():
        config = Config(root=root.resolve())
    inventory = discover(config, use_git=False)
    return environment.survey(config.root, inventory.scripts, inventory.data_files)


def _say(run: DepositRun, text: str) -> None:
    if not run.quiet:
        print(text, file=sys.stderr)


def _environment_note(name: str, found: environment.Survey) -> str:
    missing = sorted({i.distribution for i in found.missing})
    parts = [f"{len(found.imports)} third-party imports"]
    if missing:
        parts.append(f"missing here: {', '.join(missing)}")
    if found.python2:
        parts.append(f"{len(found.python2)} Python 2 script(s)")
    unmet = [a for a in found.asks if not a.met]
    if unmet:
        parts.append(f"{len(unmet)} of {len(found.asks)} requirement versions not met")
    return f"figproof: {name}: " + "; ".join(parts)


@dataclass(frozen=True, slots=True, kw_only=True)
class Outputs:
    """Where one deposit's report files go besides the markdown and JSON (None: not written)."""

    changes: Path | None = None  # the folder of change views the markdown and JSON link
    html: Path | None = None  # the HTML page; its images go into img/ beside it


def replicate(path: Path, run: DepositRun, out: Outputs, progress: Progress | None = None
              ) -> replication.Replication:
    """Unpack (or open) one deposit, survey it, check it, compare it with the references and write the change
    views and the HTML page that ``out`` asks for (the caller writes the markdown and JSON)."""
    name = deposit_name(path.resolve())
    with opened(path) as root:
        found = _survey(root)
        _say(run, _environment_note(name, found))
        options = CheckOptions(jobs=run.jobs, twice=run.twice, cache=False, renders=True, deposit=True,
                               skip_copy=_skip(root, run, out))
        checked = check(root, options, progress=progress)
    try:
        pictures = checked.artifacts / "report-pictures"
        rep = _replication(name, path, checked, found, run, pictures)
        _publish(rep, pictures, out)
        return rep
    finally:
        shutil.rmtree(checked.artifacts, ignore_errors=True)


def _skip(root: Path, run: DepositRun, out: Outputs) -> tuple[str, ...]:
    wanted_paths = (run.reports.images, run.reports.json, run.reports.markdown, run.reports.html, out.changes,
                    out.html)
    return tuple(s for s in (_inside(root, p) for p in wanted_paths if p is not None) if s)


def _inside(root: Path, p: Path) -> str | None:
    try:
        return p.resolve().relative_to(root.resolve()).parts[0]
    except (ValueError, IndexError):
        return None


def _replication(name: str, path: Path, checked: Checked, found: environment.Survey, run: DepositRun,
                 pictures: Path) -> replication.Replication:
    """The deposit's replication record; the pictures its reports show are written into ``pictures``."""
    from figproof.report.provenance import environment_fingerprint
    from figproof.run.execute import artifact_folder

    runs = checked.result.runs
    regenerated: list[references.Picture] = []
    figures: list[replication.Regenerated] = []
    renders: dict[str, tuple[Path, FigureModel]] = {}
    for r in runs:
        for fig in r.figures:
            figures.append(replication.Regenerated(id=fig.id, script=r.path, outputs=fig.outputs))
            if fig.render is not None:
                render = artifact_folder(checked.artifacts, r.path) / "renders" / fig.render
                pic = references.regenerated_picture(fig.id, render)
                if pic is not None:
                    regenerated.append(pic)
                    renders[fig.id] = (render, fig)
    matches: list[references.Match] = []
    problems: list[str] = []
    views: dict[str, replication.ChangeView] = {}
    shown: dict[str, str] = {}
    if run.reference is not None:
        refs, problems = references.load_references(run.reference)
        matches = references.match(refs, regenerated)
        matched = references.matched_regenerated(matches)
        figures = [replace(f, reference=matched.get(f.id)) for f in figures]
        views = _change_views(matches, refs, renders, pictures)
        shown = _thumbnails(refs, pictures)
    shown.update(_rendered(renders, pictures))
    freetype = next((r.freetype for r in runs if r.freetype), None)
    return replication.Replication(
        deposit=name, sha256=_sha256(path), version=__version__, survey=found,
        causes=environment.causes(runs, found), runs=runs, matches=tuple(matches),
        references_asked=run.reference is not None, reference_problems=tuple(problems), regenerated=tuple(figures),
        change_views=views, findings=checked.result.findings, environment=environment_fingerprint(freetype),
        pictures=shown)


def _safe(label: str) -> str:
    return "".join(c if c.isalnum() or c in "._-" else "_" for c in label)


def _change_views(matches: Sequence[references.Match], refs: Sequence[references.Picture],
                  renders: Mapping[str, tuple[Path, FigureModel]], folder: Path) -> dict[str, replication.ChangeView]:
    """The change view of every reference that differs from its closest regenerated figure (the product's one
    change view: :func:`figproof.deposit.references.change_view`)."""
    from PIL import Image

    from figproof.report.change_view import ChangeViewError

    by_label = {p.label: p for p in refs}
    views: dict[str, replication.ChangeView] = {}
    for m in matches:
        if m.verdict != "differs" or m.regenerated is None or m.regenerated not in renders:
            continue
        render, figure = renders[m.regenerated]
        stem = _safe(m.reference)
        try:
            with Image.open(render) as page:
                page.load()
                ref = by_label[m.reference]
                placed, change = references.change_view(ref, page, folder / f"{stem}-changes.png", figure)
                references.change_view(ref, page, folder / f"{stem}-view.png", figure, caption=False)  # the page
        except (ChangeViewError, OSError, ValueError):
            continue  # the verdict still stands; an unreadable render gets no picture
        placed.save(folder / f"{stem}-submitted.png", format="PNG")
        views[m.reference] = replication.ChangeView(image=f"{stem}-changes.png", view=f"{stem}-view.png",
                                                    submitted=f"{stem}-submitted.png",
                                                    regenerated=f"figure-{_safe(m.regenerated)}.png",
                                                    caption=change.caption())
    return views


def _thumbnails(refs: Sequence[references.Picture], folder: Path) -> dict[str, str]:
    """Each reference as submitted (trimmed), as a PNG a browser shows whatever its format (TIFF, PDF)."""
    folder.mkdir(parents=True, exist_ok=True)
    out: dict[str, str] = {}
    for p in refs:
        name = f"reference-{_safe(p.label)}.png"
        img = p.shown.convert("RGB")
        img.thumbnail((900, 900))
        img.save(folder / name, format="PNG", compress_level=1)
        out[p.label] = name
    return out


def _rendered(renders: Mapping[str, tuple[Path, FigureModel]], folder: Path) -> dict[str, str]:
    folder.mkdir(parents=True, exist_ok=True)
    out: dict[str, str] = {}
    for fig_id, (render, _) in sorted(renders.items()):
        name = f"figure-{_safe(fig_id)}.png"
        shutil.copyfile(render, folder / name)
        out[fig_id] = name
    return out


def _publish(rep: replication.Replication, pictures: Path, out: Outputs) -> None:
    """Copy the change views beside the markdown and JSON, and write the HTML page with its images."""
    if out.changes is not None:
        for cv in rep.change_views.values():
            out.changes.mkdir(parents=True, exist_ok=True)
            shutil.copyfile(pictures / cv.image, out.changes / cv.image)
    if out.html is not None:
        from figproof.deposit import page

        img = out.html.parent / page.IMAGES
        img.mkdir(parents=True, exist_ok=True)  # files are overwritten by name; nothing else is touched
        captioned = {cv.image for cv in rep.change_views.values()}  # the page writes its own captions
        for file in sorted(pictures.iterdir()) if pictures.is_dir() else ():
            if file.name not in captioned:
                shutil.copyfile(file, img / file.name)
        write_text(out.html, page.render(rep))


def run(request: DepositRun, progress: Progress | None = None) -> int:
    """Check every deposit named on the command line; return the exit code."""
    paths = list(request.paths) or [Path(".")]
    if request.report_dir is None:
        return _single(paths[0], request, progress)
    return _batch(paths, request, request.report_dir, progress)


def usage_problem(request: DepositRun) -> str | None:
    """A one-line mistake in how the deposit check was asked for (the command line exits 2), or None."""
    if request.reference is not None and not request.reference.is_dir():
        return f"{request.reference}: --reference must be a folder of figure files"
    if len(request.paths) > 1 and request.report_dir is None:
        return "several deposits need --report-dir DIR (one report folder each, and an index)"
    return None


def _single(path: Path, request: DepositRun, progress: Progress | None) -> int:
    if not path.exists():
        raise DepositError(f"{path}: no such file or folder")
    markdown, js, html = request.reports.markdown, request.reports.json, request.reports.html
    beside = markdown.parent if markdown is not None else (js.parent if js is not None else None)
    out = Outputs(changes=beside / replication.CHANGES if beside is not None else None,
                  html=html / "index.html" if html is not None else None)
    rep = replicate(path, request, out, progress)
    text = replication.render_markdown(rep)
    if markdown is not None:
        write_text(markdown, text)
    if js is not None:
        write_text(js, replication.render_json(rep))
    if not request.quiet:
        print(text)
        print(f"figproof: {'reproduced' if rep.reproduced else 'NOT reproduced'}: {replication.headline(rep)}",
              file=sys.stderr)
    return REPRODUCED if rep.reproduced else NOT_REPRODUCED


def _batch(paths: Sequence[Path], request: DepositRun, report_dir: Path, progress: Progress | None) -> int:
    entries: list[replication.IndexEntry] = []
    used: set[str] = set()
    for path in paths:
        name = deposit_name(path.resolve()) if path.exists() else path.name
        folder = _unique(name, used)
        try:
            if not path.exists():
                raise DepositError(f"{path}: no such file or folder")
            rep = replicate(path, request, Outputs(changes=report_dir / folder / replication.CHANGES,
                                                   html=report_dir / folder / REPLICATION_HTML), progress)
        except DepositError as exc:
            _say(request, f"figproof: {exc}")
            entries.append(replication.IndexEntry(deposit=name, problem=str(exc)))
            continue
        write_text(report_dir / folder / "replication.md", replication.render_markdown(rep))
        write_text(report_dir / folder / "replication.json", replication.render_json(rep))
        entries.append(replication.IndexEntry(deposit=name, folder=folder, headline=replication.headline(rep),
                                              reproduced=rep.reproduced, html=f"{folder}/{REPLICATION_HTML}"))
        _say(request, f"figproof: {name}: {'reproduced' if rep.reproduced else 'NOT reproduced'}: "
                      f"{replication.headline(rep)}")
    index = replication.render_index(entries)
    write_text(report_dir / "index.md", index)
    write_text(report_dir / "index.json", replication.index_json(entries))
    from figproof.deposit import page

    write_text(report_dir / "index.html", page.render_index(entries))
    if not request.quiet:
        print(index)
    if any(e.problem is not None for e in entries):
        return REFUSED
    return REPRODUCED if all(e.reproduced for e in entries) else NOT_REPRODUCED


def _unique(name: str, used: set[str]) -> str:
    folder, n = name, 2
    while folder in used:
        folder, n = f"{name}-{n}", n + 1
    used.add(folder)
    return folder


__all__ = ["DepositRun", "Outputs", "replicate", "run", "usage_problem", "wanted"]

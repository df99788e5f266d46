"""Check each work copy of the real-world benchmark and keep what a person needs to label it.

For each member (one at a time, one script at a time: the machine is shared) this writes, under ``--out``:

- ``MEMBER.json``: figproof's JSON report, what ``score.py`` reads;
- ``MEMBER.md``: the markdown summary;
- ``MEMBER/figures/``: every drawn figure as a PNG, named ``<script>__figure-<N>.png`` after the report's
  figure id ``<script>#<N>`` (slashes in the script path become ``__``), so each can be looked at;
- ``MEMBER/images/``: what ``figproof check --images`` writes (colour-vision panels, drift diffs).

    python tests/bench/realworld/render.py [--work DIR] [--out DIR] [--only NAME ...]

It runs the figproof installed in this interpreter, through the same pipeline as ``figproof check --jobs 1
--no-cache --images``.
"""

from __future__ import annotations

import argparse
import json
import shutil
import sys
import tempfile
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

from rebuild import DEFAULT_DEST, load_sources  # noqa: E402


def figure_png_name(figure_id: str) -> str:
    """The PNG name of the figure ``<script>#<N>``."""
    script, _, number = figure_id.rpartition("#")
    return f"{script.replace('/', '__')}__figure-{number}.png"


def _request(images: Path, markdown: Path, report: Path) -> object:
    """What to write, in the form this figproof's ``write_reports`` takes."""
    try:
        from figproof.report.write import ReportRequest
    except ImportError:  # before the report request: the command line's namespace
        return argparse.Namespace(images=str(images), markdown=str(markdown), json=str(report), timings=False,
                                  sarif=None, gitlab=None, provenance=None, quiet=True)
    return ReportRequest(images=images, markdown=markdown, json=report, annotations=False)


def render_member(work: Path, out: Path) -> dict:
    """Check one work copy; write its reports and figure PNGs under ``out``; returns the JSON report."""
    from figproof.pipeline import CheckOptions, check
    from figproof.report.write import write_reports
    from figproof.run.execute import artifact_folder

    name = work.name
    folder = out / name
    if folder.exists():
        shutil.rmtree(folder)
    (folder / "figures").mkdir(parents=True)
    artifacts = Path(tempfile.mkdtemp(prefix="figproof-realworld-"))
    try:
        checked = check(work, CheckOptions(jobs=1, cache=False, renders=True, artifacts=artifacts))
        write_reports(checked, _request(folder / "images", out / f"{name}.md", out / f"{name}.json"),
                      shown_root=name)
        for run in checked.result.runs:
            for fig in run.figures:
                if fig.render is None:
                    continue
                src = artifact_folder(checked.artifacts, run.path) / "renders" / fig.render
                if src.is_file():
                    shutil.copyfile(src, folder / "figures" / figure_png_name(fig.id))
    finally:
        shutil.rmtree(artifacts, ignore_errors=True)
    return json.loads((out / f"{name}.json").read_text(encoding="utf-8"))


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--work", type=Path, default=DEFAULT_DEST, help="where rebuild.py put the work copies")
    parser.add_argument("--out", type=Path, default=DEFAULT_DEST / "_runs" / "current",
                        help="where the reports and figure PNGs go")
    parser.add_argument("--only", nargs="*", help="check only these members")
    args = parser.parse_args(argv)
    args.out.mkdir(parents=True, exist_ok=True)
    for member in load_sources():
        if args.only and member["name"] not in args.only:
            continue
        work = args.work / member["name"]
        if not work.is_dir():
            print(f"{member['name']}: no work copy in {args.work} (run rebuild.py first)", file=sys.stderr)
            continue
        report = render_member(work, args.out)
        figures = sum(len(s.get("figures", [])) for s in report["scripts"])
        print(f"{member['name']}: {len(report['scripts'])} scripts, {figures} figures, "
              f"{len(report['findings'])} findings", flush=True)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())

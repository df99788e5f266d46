"""What the visual report adds to a check (run: python tests/bench/bench_html.py).

Builds the 40-script repo of bench_check.py and prints the wall time of ``figproof check --no-cache`` without
and with ``--html DIR`` (best of R runs each, interleaved so a busy machine hurts both alike), the share the
report adds (target: at most 20 %), and the size of the report folder.  ``--html`` also makes the children keep
each figure's rendering, so the share includes that extra drawing.

Options: ``--scripts N`` (default 40), ``--repeat R`` (default 3).
"""

from __future__ import annotations

import argparse
import shutil
import sys
import tempfile
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

from bench_check import cli_check, make_repo


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--scripts", type=int, default=40)
    parser.add_argument("--repeat", type=int, default=3)
    args = parser.parse_args()
    work = Path(tempfile.mkdtemp(prefix="figproof-bench-html-"))
    try:
        repo = work / "repo"
        make_repo(repo, args.scripts)
        plain, visual = [], []
        for k in range(args.repeat):
            plain.append(cli_check(repo, work / "plain.json", "warm", "--no-cache")[0])
            out = work / f"html{k}"
            visual.append(cli_check(repo, work / "html.json", "warm", "--no-cache", "--html", str(out))[0])
        size = sum(p.stat().st_size for p in (work / "html0").rglob("*") if p.is_file())
        files = sum(1 for p in (work / "html0").rglob("*") if p.is_file())
        a, b = min(plain), min(visual)
        print(f"{args.scripts} scripts: check {a:.2f} s, check --html {b:.2f} s, the report adds "
              f"{100 * (b - a) / a:+.0f}% (target: at most +20%); report folder {files} files, {size / 1e6:.1f} MB")
        print("all runs (s): without " + ", ".join(f"{t:.2f}" for t in plain) + "; with "
              + ", ".join(f"{t:.2f}" for t in visual))
    finally:
        shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    main()

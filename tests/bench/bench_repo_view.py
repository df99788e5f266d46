"""Temp space and time before the first script, for a repo with a large data file (run:
python tests/bench/bench_repo_view.py).

Builds a repo holding one data file of ``--size`` MiB (default 1024) and two figure scripts that read its first
bytes, then, for each repo view (``copy``, the old behaviour, and ``auto``, the overlay or clones where the
platform allows), prints:

(a) making the sandboxes for 2 jobs with :class:`figproof.sandbox.SandboxPool`: wall time and the temp space
    they take (allocated blocks, each inode counted once);
(b) a whole check with 2 jobs and no cache (:func:`figproof.pipeline.check`, as ``figproof check --jobs 2
    --no-cache`` runs it): the time from the start of the check until the first script's first line runs, and
    the temp space in use then (the drop in free space of the temp file system as the scripts see it; other
    users of that disk add noise).

Options: ``--size MiB``, ``--keep`` (leave the generated repo in place).
"""

from __future__ import annotations

import argparse
import json
import os
import shutil
import tempfile
import time
from pathlib import Path

from figproof.run.resources import human_size
from figproof.run.sandbox import SandboxPool

SCRIPT = """\
import json, os, shutil, time
print("FIRST", json.dumps({{"t": time.time(), "free": shutil.disk_usage(os.environ["TMPDIR"]).free}}), flush=True)
import matplotlib.pyplot as plt
with open("data/plates.bin", "rb") as fh:
    head = fh.read(4096)
plt.plot(range(16), list(head[:16]))
plt.savefig("figures/plates_{n}.png", dpi=50)
"""


def make_repo(root: Path, mib: int) -> None:
    (root / "data").mkdir(parents=True)
    (root / "figures").mkdir()
    block = bytes(range(256)) * 4096  # 1 MiB of real (not sparse) data
    with open(root / "data" / "plates.bin", "wb") as fh:
        for _ in range(mib):
            fh.write(block)
    for n in (1, 2):
        (root / "figures" / f"plates_{n}.py").write_text(SCRIPT.format(n=n), encoding="utf-8")


def allocated(folder: Path) -> int:
    """Bytes of disk the files under ``folder`` take (st_blocks), each inode once."""
    seen: set[tuple[int, int]] = set()
    total = 0
    for dirpath, dirnames, filenames in os.walk(folder):
        for name in dirnames + filenames:
            try:
                st = os.lstat(os.path.join(dirpath, name))
            except OSError:
                continue
            if (st.st_dev, st.st_ino) not in seen:
                seen.add((st.st_dev, st.st_ino))
                total += st.st_blocks * 512
    return total


def bench_pool(repo: Path, method: str) -> tuple[float, int, str]:
    started = time.perf_counter()
    with SandboxPool(repo, jobs=2, method=method) as pool:
        boxes = [pool.acquire(), pool.acquire()]
        seconds = time.perf_counter() - started
        used = sum(allocated(b.base) for b in boxes)
        shown = pool.method
        for box in boxes:
            pool.release(box)
    return seconds, used, shown


def bench_check(repo: Path, tmp: Path, method: str) -> tuple[float, int, float]:
    """A whole check (library call, as the command line makes it) with 2 jobs; the scripts' first lines say
    when they started and how much room the temp file system had left."""
    from figproof.pipeline import CheckOptions, check

    old = dict(os.environ)
    os.environ["TMPDIR"] = str(tmp)
    os.environ["FIGPROOF_REPO_VIEW"] = method if method != "auto" else ""
    store = tmp / f"runs-{method}"  # inside the temp folder, where the child may write its run records
    store.mkdir()
    try:
        free_before = shutil.disk_usage(tmp).free
        started = time.time()
        checked = check(repo, CheckOptions(artifacts=store, jobs=2, cache=False, renders=False))
        total = time.time() - started
    finally:
        os.environ.clear()
        os.environ.update(old)
    firsts = []
    for run in checked.result.runs:
        assert run.status == "ok", run.stderr_tail
        firsts += [json.loads(line[6:]) for line in run.stdout_tail.splitlines() if line.startswith("FIRST ")]
    first = min(f["t"] for f in firsts) - started
    used = free_before - min(f["free"] for f in firsts)
    return first, used, total


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--size", type=int, default=1024, help="MiB of the data file (default 1024)")
    parser.add_argument("--keep", action="store_true", help="keep the generated repo")
    args = parser.parse_args()
    base = Path(tempfile.mkdtemp(prefix="bench-repo-view-"))
    try:
        repo = base / "lab"
        make_repo(repo, args.size)
        print(f"repo: one {human_size(args.size << 20)} data file, 2 scripts; temp folder on "
              f"{shutil.disk_usage(base).total >> 30} GiB disk")
        for method in ("copy", "auto"):
            seconds, used, shown = bench_pool(repo, method)
            print(f"(a) {method:>4} -> {shown:<8} sandboxes for 2 jobs: {seconds * 1000:8.0f} ms, "
                  f"{human_size(used):>10} of temp space")
        for method in ("copy", "auto"):
            tmp = base / f"tmp-{method}"
            tmp.mkdir()
            first, used, total = bench_check(repo, tmp, method)
            print(f"(b) {method:>4} figproof check --jobs 2: first script ran {first * 1000:6.0f} ms after the "
                  f"start ({total:.1f} s in all); temp space in use then {human_size(max(used, 0)):>10}")
    finally:
        if not args.keep:
            shutil.rmtree(base, ignore_errors=True)


if __name__ == "__main__":
    main()

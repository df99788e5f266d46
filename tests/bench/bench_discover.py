"""Time discovery on a generated repo, as a plain folder and as a git work tree.

Run from the repo root:  .venv/bin/python tests/bench/bench_discover.py [--scripts 2000] [--data 10000]
Prints the file counts and the best of three wall times for each mode.
"""

from __future__ import annotations

import argparse
import shutil
import subprocess
import tempfile
import time
from pathlib import Path

from figproof.config import Config
from figproof.discover.inventory import choose_working_dir, discover


def build(root: Path, scripts: int, data: int) -> None:
    """A repo of ``scripts`` scripts (half of them plot) and ``data`` data files in 50 folders."""
    for i in range(scripts):
        folder = root / f"analysis{i % 50:02d}"
        folder.mkdir(parents=True, exist_ok=True)
        head = "import matplotlib.pyplot as plt\n" if i % 2 == 0 else "import numpy as np\n"
        body = "".join(f"x{j} = {j} * 2\n" for j in range(40))
        (folder / f"step{i:05d}.py").write_text(head + body + f"plt_path = 'data/d{i:05d}.csv'\n")
    for i in range(data):
        folder = root / "data" / f"batch{i % 50:02d}"
        folder.mkdir(parents=True, exist_ok=True)
        (folder / f"d{i:05d}.csv").write_text("1,2\n")


def best_of(fn, repeat: int = 3) -> float:  # type: ignore[no-untyped-def]
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        fn()
        times.append(time.perf_counter() - start)
    return min(times)


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--scripts", type=int, default=2000)
    parser.add_argument("--data", type=int, default=10000)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        root = Path(tmp) / "repo"
        build(root, args.scripts, args.data)
        config = Config(root=root)
        inv = discover(config)
        print(f"files: {args.scripts} scripts ({len(inv.scripts)} plot), {len(inv.data_files)} data files")
        print(f"plain folder: {best_of(lambda: discover(config)):.3f} s")
        script = inv.scripts[0]
        print(f"choose_working_dir (one script): {1000 * best_of(lambda: choose_working_dir(root, script, 'auto')):.2f} ms")
        if shutil.which("git"):
            subprocess.run(["git", "-C", str(root), "init", "-q"], check=True)
            subprocess.run(["git", "-C", str(root), "add", "."], check=True)
            print(f"git work tree: {best_of(lambda: discover(config)):.3f} s")


if __name__ == "__main__":
    main()

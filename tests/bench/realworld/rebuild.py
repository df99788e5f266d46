"""Recreate the real-world benchmark's work copies from pinned sources (see README.md here).

Each member of ``sources.toml`` is either a public research repository, taken from a local git mirror at the
pinned commit, or the examples folder of a package's source distribution from PyPI, checked against its
pinned SHA-256. Every work copy is laid out as a small git repository (one commit, fixed author and date) with a
``figproof.toml`` holding the member's settings, so figproof sees it as a lab would: tracked files, no network.

    python tests/bench/realworld/rebuild.py --mirrors DIR [--sdists DIR] [--dest DIR] [--only NAME ...]

``--mirrors`` is a folder of bare or non-bare git mirrors named ``owner+name`` (with the git directory in it or
in its ``repo`` subfolder); ``--sdists`` a folder holding the source distributions (missing ones are fetched
with ``pip download --no-binary :all: --no-deps``). Nothing here is run by CI; nothing it copies is committed.
"""

from __future__ import annotations

import argparse
import hashlib
import os
import re
import shutil
import subprocess
import sys
import tarfile
import tempfile
import tomllib
from pathlib import Path

HERE = Path(__file__).resolve().parent
SOURCES = HERE / "sources.toml"
DEFAULT_DEST = Path(tempfile.gettempdir()) / "figproof-realworld"

# seaborn's examples load their data from the network; the work copy reads the same files from a folder in it
_SEABORN_LOAD = re.compile(r"""load_dataset\((["'][^"']+["'])""")


def load_sources(path: Path = SOURCES) -> list[dict]:
    """The members listed in ``sources.toml``, in file order."""
    with open(path, "rb") as fh:
        return list(tomllib.load(fh)["member"])


def _git(git_dir: Path, *args: str, stdout: int | None = subprocess.PIPE) -> bytes:
    done = subprocess.run(["git", "--git-dir", str(git_dir), *args], stdout=stdout, stderr=subprocess.PIPE,
                          check=False)
    if done.returncode != 0:
        raise SystemExit(f"{git_dir}: git {' '.join(args[:2])} failed: {done.stderr.decode().strip()}")
    return done.stdout


def mirror_git_dir(mirrors: Path, repo: str) -> Path:
    """The git directory of the mirror of ``owner/name`` under ``mirrors``."""
    base = mirrors / repo.replace("/", "+")
    for candidate in (base / "repo", base / "repo" / ".git", base / ".git", base):
        if (candidate / "HEAD").is_file() and (candidate / "objects").is_dir():
            return candidate
    raise SystemExit(f"{base}: no git mirror of {repo} here (bring it with the search tool's fetch, "
                     "or clone it there)")


def _extract_git(mirrors: Path, repo: str, commit: str, paths: list[str], target: Path) -> list[str]:
    """Write the files under ``paths`` at ``commit``; returns those the mirror lacks (large files are not kept)."""
    git_dir = mirror_git_dir(mirrors, repo)
    listing = _git(git_dir, "ls-tree", "-r", "-z", commit, "--", *paths).decode().split("\0")
    missing = []
    for entry in filter(None, listing):
        meta, name = entry.split("\t", 1)
        mode, kind, blob = meta.split()
        if kind != "blob" or mode == "120000":
            continue
        done = subprocess.run(["git", "--git-dir", str(git_dir), "cat-file", "blob", blob],
                              capture_output=True, check=False)
        if done.returncode != 0:
            missing.append(name)
            continue
        out = target / name
        out.parent.mkdir(parents=True, exist_ok=True)
        out.write_bytes(done.stdout)
    return missing


def _sdist(sdists: Path, spec: str, sha256: str) -> Path:
    name, version = spec.split("==")
    path = sdists / f"{name}-{version}.tar.gz"
    if not path.is_file():
        sdists.mkdir(parents=True, exist_ok=True)
        subprocess.run([sys.executable, "-m", "pip", "download", "--no-binary", ":all:", "--no-deps",
                        "-d", str(sdists), spec], check=True)
    digest = hashlib.sha256(path.read_bytes()).hexdigest()
    if digest != sha256:
        raise SystemExit(f"{path}: SHA-256 {digest} is not the pinned {sha256}; download {spec} again")
    return path


def _extract_sdist(path: Path, root: str, paths: list[str], target: Path) -> None:
    with tarfile.open(path) as tar:
        top = tar.getnames()[0].split("/")[0]
        prefix = f"{top}/{root}/"
        wanted = [prefix + p.rstrip("/") for p in paths]
        members = []
        for m in tar.getmembers():
            if not m.name.startswith(prefix):
                continue
            if any(m.name == w or m.name.startswith(w + "/") or w == prefix + "." for w in wanted):
                m.name = m.name[len(prefix):]
                members.append(m)
        tar.extractall(target, members=members, filter="data")


def _seaborn_data_home(target: Path, folder: str) -> None:
    for script in sorted(target.rglob("*.py")):
        text = script.read_text(encoding="utf-8")
        new = _SEABORN_LOAD.sub(rf'load_dataset(\1, data_home="{folder}"', text)
        if new != text:
            script.write_text(new, encoding="utf-8")


def _config_text(member: dict) -> str:
    lines = ["# written by tests/bench/realworld/rebuild.py", "jobs = 1"]
    for key, value in sorted(member.get("config", {}).items()):
        if isinstance(value, str):
            lines.append(f'{key} = "{value}"')
        elif isinstance(value, list):
            lines.append(f"{key} = [{', '.join(repr(v).replace(chr(39), chr(34)) for v in value)}]")
        else:
            lines.append(f"{key} = {value}")
    return "\n".join(lines) + "\n"


def _commit(target: Path) -> None:
    env = {**os.environ, "GIT_AUTHOR_NAME": "bench", "GIT_AUTHOR_EMAIL": "bench@example.org",
           "GIT_COMMITTER_NAME": "bench", "GIT_COMMITTER_EMAIL": "bench@example.org",
           "GIT_AUTHOR_DATE": "2026-01-01T00:00:00Z", "GIT_COMMITTER_DATE": "2026-01-01T00:00:00Z"}
    for args in (["init", "-q", "-b", "main"], ["add", "-A"], ["commit", "-q", "-m", "work copy"]):
        subprocess.run(["git", *args], cwd=target, env=env, check=True, stdout=subprocess.DEVNULL)


def rebuild_member(member: dict, dest: Path, mirrors: Path | None, sdists: Path) -> Path:
    """Lay out one member's work copy under ``dest``; returns its folder."""
    target = dest / member["name"]
    if target.exists():
        shutil.rmtree(target)
    target.mkdir(parents=True)
    if "repo" in member:
        if mirrors is None:
            raise SystemExit(f"{member['name']}: needs --mirrors (a folder of git mirrors)")
        for name in _extract_git(mirrors, member["repo"], member["commit"], member.get("paths", ["."]), target):
            print(f"{member['name']}: {name} is not in the mirror (large files are not kept); left out")
    else:
        tarball = _sdist(sdists, member["sdist"], member["sha256"])
        _extract_sdist(tarball, member["root"], member.get("paths", ["."]), target)
    data = member.get("data")
    if data:
        if mirrors is None:
            raise SystemExit(f"{member['name']}: needs --mirrors for its data ({data['repo']})")
        into = target / data["into"]
        into.mkdir(parents=True, exist_ok=True)
        _extract_git(mirrors, data["repo"], data["commit"], data.get("paths", ["."]), into)
        _seaborn_data_home(target, data["into"])
    (target / "figproof.toml").write_text(_config_text(member), encoding="utf-8")
    _commit(target)
    return target


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--mirrors", type=Path, help="folder of git mirrors named owner+name")
    parser.add_argument("--sdists", type=Path, default=DEFAULT_DEST / "_sdists",
                        help="folder of source distributions (fetched with pip when missing)")
    parser.add_argument("--dest", type=Path, default=DEFAULT_DEST, help=f"where work copies go ({DEFAULT_DEST})")
    parser.add_argument("--only", nargs="*", help="rebuild only these members")
    args = parser.parse_args(argv)
    for member in load_sources():
        if args.only and member["name"] not in args.only:
            continue
        target = rebuild_member(member, args.dest, args.mirrors, args.sdists)
        scripts = sum(1 for p in target.rglob("*") if p.suffix in (".py", ".ipynb"))
        print(f"{member['name']}: {target} ({scripts} .py/.ipynb files)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())

"""Unpack a deposited archive (zip, tar.gz, tgz, tar, tar.bz2, tar.xz) into a folder, refusing what could escape it.

A deposit comes from someone else, so every member is checked before anything is written:

- a name that is absolute (``/etc/x``, ``C:\\x``, ``\\\\server\\x``) or holds a ``..`` segment is refused;
- a symbolic link whose target is absolute or leads out of the deposit is refused; one that stays inside is
  made as a link (a zip's link members too); a hard link is written as a copy of the member it names;
- device files, FIFOs and sockets are refused;
- more than ``max_members`` members, or more than ``max_bytes`` unpacked bytes in all, stop the unpacking
  (a decompression bomb): the size is counted on the bytes really written, not on what the archive declares.

Each file is written with ``O_EXCL | O_NOFOLLOW`` into a folder whose real path is checked to lie inside the
target, so a link made by an earlier member cannot redirect a later one.  The first refusal raises
:class:`DepositError`, one line naming the archive and the member; the caller removes the half-made folder.
"""

from __future__ import annotations

import lzma
import os
import posixpath
import re
import stat
import tarfile
import zipfile
import zlib
from collections.abc import Callable, Iterable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from functools import partial
from pathlib import Path
from typing import IO, Literal

ARCHIVE_SUFFIXES = (".zip", ".tar.gz", ".tgz", ".tar", ".tar.bz2", ".tbz2", ".tar.xz", ".txz")
MAX_BYTES = 8 * 1024**3  # 8 GiB: larger than any figure deposit we know of, far below a bomb's size
MAX_MEMBERS = 200_000
_CHUNK = 1024 * 1024
_DRIVE = re.compile(r"^[A-Za-z]:")


class DepositError(Exception):
    """A deposit that cannot be unpacked safely, or at all; the message is one line naming the member."""


@dataclass(frozen=True, slots=True, kw_only=True)
class Member:
    """One archive member, in the terms both archive formats share."""

    name: str
    kind: Literal["file", "dir", "symlink", "hardlink", "special"]
    size: int = 0
    target: str = ""  # a link's target


@dataclass(frozen=True, slots=True, kw_only=True)
class Limits:
    """Caps against decompression bombs."""

    max_bytes: int = MAX_BYTES
    max_members: int = MAX_MEMBERS


def is_archive(path: Path) -> bool:
    """Whether ``path`` is a file whose name ends like an archive figproof unpacks."""
    return path.is_file() and path.name.lower().endswith(ARCHIVE_SUFFIXES)


def deposit_name(path: Path) -> str:
    """The archive's name without its archive suffix (``study.tar.gz`` → ``study``)."""
    lower = path.name.lower()
    for suffix in sorted(ARCHIVE_SUFFIXES, key=len, reverse=True):
        if lower.endswith(suffix):
            return path.name[: -len(suffix)] or path.name
    return path.name


def safe_name(archive: str, raw: str) -> str:
    """The member's relative POSIX path, or DepositError when it is absolute or climbs out with ``..``."""
    name = raw.replace("\\", "/")
    if name.startswith("/") or _DRIVE.match(name):
        raise DepositError(f"{archive}: member {raw!r} has an absolute path; refused (nothing was written "
                           f"outside the temporary folder)")
    parts = [p for p in name.split("/") if p not in ("", ".")]
    if ".." in parts:
        raise DepositError(f"{archive}: member {raw!r} climbs out of the deposit with '..'; refused (nothing "
                           f"was written outside the temporary folder)")
    return "/".join(parts)


def link_target(archive: str, name: str, target: str) -> str:
    """A symbolic link's target as a path inside the deposit, or DepositError when it leads out."""
    norm = target.replace("\\", "/")
    resolved = posixpath.normpath(posixpath.join(posixpath.dirname(name), norm))
    if norm.startswith("/") or _DRIVE.match(norm) or resolved == ".." or resolved.startswith("../"):
        raise DepositError(f"{archive}: member {name!r} is a link to {target!r}, outside the deposit; refused")
    return resolved


def _zip_members(zf: zipfile.ZipFile) -> Iterator[tuple[Member, zipfile.ZipInfo]]:
    for info in zf.infolist():
        mode = info.external_attr >> 16  # the Unix mode, when a Unix zip tool wrote the member
        if info.is_dir():
            kind: Literal["file", "dir", "symlink", "hardlink", "special"] = "dir"
        elif stat.S_ISLNK(mode):
            kind = "symlink"
        elif mode and not stat.S_ISREG(mode) and stat.S_IFMT(mode):
            kind = "special"
        else:
            kind = "file"
        target = ""
        if kind == "symlink":
            # a zip stores a link's target as the member's content; it is short, read it capped
            with zf.open(info) as fh:
                target = fh.read(4096).decode("utf-8", "replace")
        yield Member(name=info.filename, kind=kind, size=info.file_size, target=target), info


def _tar_kind(info: tarfile.TarInfo) -> Literal["file", "dir", "symlink", "hardlink", "special"]:
    if info.isreg():
        return "file"
    if info.isdir():
        return "dir"
    if info.issym():
        return "symlink"
    if info.islnk():
        return "hardlink"
    return "special"


class _Writer:
    """Writes members under ``root``, counting bytes and members against the limits."""

    def __init__(self, archive: str, root: Path, limits: Limits) -> None:
        self.archive, self.root, self.limits = archive, root, limits
        self.real_root = os.path.realpath(root)
        self.written = 0
        self.members = 0

    def count(self, member: Member) -> None:
        self.members += 1
        if self.members > self.limits.max_members:
            raise DepositError(f"{self.archive}: more than {self.limits.max_members} members (at {member.name!r}); "
                               f"refused as a possible decompression bomb")

    def folder(self, rel: str) -> Path:
        """Make the folder ``rel`` (and its parents) and check that its real path is inside the root."""
        path = self.root / rel if rel else self.root
        path.mkdir(parents=True, exist_ok=True)
        real = os.path.realpath(path)
        if real != self.real_root and not real.startswith(self.real_root + os.sep):
            raise DepositError(f"{self.archive}: member {rel!r} would be written through a link outside the "
                               f"deposit; refused")
        return path

    def file(self, rel: str, source: IO[bytes]) -> None:
        parent = self.folder(posixpath.dirname(rel))
        target = parent / posixpath.basename(rel)
        if target.is_symlink() or target.is_dir():
            raise DepositError(f"{self.archive}: member {rel!r} would replace a link or folder of the same "
                               f"name; refused")
        if target.exists():
            target.unlink()  # a later member of the same name wins, as unpacking tools do
        fd = os.open(target, os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_NOFOLLOW", 0), 0o644)
        with os.fdopen(fd, "wb") as out:
            while chunk := source.read(_CHUNK):
                self.written += len(chunk)
                if self.written > self.limits.max_bytes:
                    raise DepositError(f"{self.archive}: unpacks to more than {_size(self.limits.max_bytes)} "
                                       f"(at {rel!r}); refused as a possible decompression bomb")
                out.write(chunk)

    def symlink(self, rel: str, inside: str) -> None:
        parent = self.folder(posixpath.dirname(rel))
        link = parent / posixpath.basename(rel)
        if os.path.lexists(link):
            raise DepositError(f"{self.archive}: link member {rel!r} would replace a file of the same name; refused")
        os.symlink(posixpath.relpath(inside, posixpath.dirname(rel) or "."), link)


def _size(n: int) -> str:
    return f"{n / 1024**3:g} GiB" if n >= 1024**3 else f"{n / 1024**2:g} MiB"


def _check(archive: str, member: Member) -> tuple[str, str]:
    """(safe name, link target inside the deposit) or DepositError."""
    name = safe_name(archive, member.name)
    if member.kind == "special":
        raise DepositError(f"{archive}: member {member.name!r} is a device file, FIFO or socket; refused")
    target = ""
    if member.kind == "symlink":
        target = link_target(archive, name, member.target)
    elif member.kind == "hardlink":
        target = safe_name(archive, member.target)
    return name, target


Opener = Callable[[], IO[bytes] | None]  # a member's content, opened when it is written (None: nothing to write)


def _unpack_members(archive: str, root: Path, limits: Limits, members: Iterable[tuple[Member, Opener]]) -> None:
    """Check and write each member of either format; links last, so no file member is written through one."""
    writer = _Writer(archive, root, limits)
    links: list[tuple[str, str]] = []
    for member, open_member in members:
        writer.count(member)
        name, target = _check(archive, member)
        if not name:
            continue
        if member.kind == "dir":
            writer.folder(name)
        elif member.kind == "symlink":
            links.append((name, target))
        elif (source := open_member()) is not None:
            with source:
                writer.file(name, source)
    for name, target in links:
        writer.symlink(name, target)


def _unpack_zip(path: Path, root: Path, limits: Limits) -> None:
    with zipfile.ZipFile(path) as zf:
        _unpack_members(path.name, root, limits,
                        ((member, partial(zf.open, info)) for member, info in _zip_members(zf)))


def _unpack_tar(path: Path, root: Path, limits: Limits) -> None:
    with tarfile.open(path, mode="r:*") as tf:
        # iterate rather than getmembers(): a bomb of members is stopped at the cap, not read whole into memory
        _unpack_members(path.name, root, limits,
                        ((Member(name=info.name, kind=_tar_kind(info), size=info.size, target=info.linkname),
                          partial(_tar_content, path.name, tf, info)) for info in tf))


def _tar_content(archive: str, tf: tarfile.TarFile, info: tarfile.TarInfo) -> IO[bytes] | None:
    """A tar member's bytes; a hard link's are those of the file it names (DepositError when it names none)."""
    if not info.islnk():
        return tf.extractfile(info)
    try:
        source = tf.extractfile(tf.getmember(info.linkname))
    except KeyError:
        source = None
    if source is None:
        raise DepositError(f"{archive}: member {info.name!r} links to {info.linkname!r}, which is "
                           f"not a file of the archive; refused")
    return source


def unpack(archive: Path, into: Path, limits: Limits | None = None) -> Path:
    """Unpack ``archive`` into the empty folder ``into``; return the deposit's root.

    The root is the one top-level folder when the archive holds nothing else (``study/...``), else ``into``.

    Raises
    ------
    DepositError
        For a refused member, a bomb, or an archive that cannot be read (one line naming it).
    """
    from figproof.run.resources import EnvironmentProblem, describe_os_error, is_environment_error

    limits = limits or Limits()
    try:
        if archive.name.lower().endswith(".zip"):
            _unpack_zip(archive, into, limits)
        else:
            _unpack_tar(archive, into, limits)
    except (zipfile.BadZipFile, tarfile.TarError, EOFError, zlib.error, lzma.LZMAError) as exc:
        raise DepositError(f"{archive.name}: not a readable archive ({exc}); check the file is complete") from None
    except NotImplementedError as exc:  # a zip compression method Python lacks
        raise DepositError(f"{archive.name}: {exc}; unpack it by hand and check the folder") from None
    except OSError as exc:
        if is_environment_error(exc):
            raise EnvironmentProblem(describe_os_error(exc, into, f"unpack {archive.name}")) from None
        raise DepositError(f"{archive.name}: cannot unpack ({exc.strerror or exc}: "
                           f"{Path(exc.filename).name if exc.filename else 'a member'})") from None
    entries = [p for p in into.iterdir() if p.name not in ("__MACOSX", ".DS_Store")]
    if len(entries) == 1 and entries[0].is_dir() and not entries[0].is_symlink():
        return entries[0]
    return into


@contextmanager
def opened(path: Path, limits: Limits | None = None) -> Iterator[Path]:
    """The deposit's root folder: ``path`` itself for a folder, else the archive unpacked into a temp folder.

    The temp folder (with its owner marker, see :mod:`figproof.run.scratch`) is removed on exit, whatever happens.
    """
    from figproof.run.scratch import make_scratch, remove_tree

    if path.is_dir():
        yield path
        return
    if not is_archive(path):
        raise DepositError(f"{path.name}: not a folder or an archive figproof unpacks "
                           f"({', '.join(ARCHIVE_SUFFIXES)})")
    scratch = make_scratch("figproof-deposit-")
    try:
        into = scratch / "deposit"
        into.mkdir()
        yield unpack(path, into, limits)
    finally:
        remove_tree(scratch)


__all__ = ["ARCHIVE_SUFFIXES", "DepositError", "Limits", "deposit_name", "is_archive", "link_target", "opened",
           "safe_name", "unpack"]

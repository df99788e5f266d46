"""Safe unpacking of deposited archives: hostile members are refused with one line, nothing lands outside.

The archives are built here with the standard library's zipfile and tarfile; the attacks are the classic ones
(zip slip, absolute names, links leading out, device members, decompression bombs by size and by count) as the
Python documentation's warnings on ``tarfile.extractall`` and ``zipfile.extractall`` describe them.
"""

from __future__ import annotations

import io
import os
import stat
import tarfile
import zipfile
from pathlib import Path

import pytest

from figproof.cli import main
from figproof.deposit.unpack import DepositError, Limits, deposit_name, opened, unpack


def _zip(path: Path, members: dict[str, bytes], *, compression: int = zipfile.ZIP_DEFLATED) -> Path:
    with zipfile.ZipFile(path, "w", compression) as zf:
        for name, data in members.items():
            zf.writestr(name, data)
    return path


def _zip_symlink(path: Path, name: str, target: str) -> Path:
    with zipfile.ZipFile(path, "w") as zf:
        zf.writestr("study/plot.py", b"print('hi')\n")
        info = zipfile.ZipInfo(name)
        info.external_attr = (stat.S_IFLNK | 0o777) << 16  # how Info-ZIP stores a link
        zf.writestr(info, target)
    return path


def _tar(path: Path, members: list[tarfile.TarInfo | tuple[str, bytes]]) -> Path:
    with tarfile.open(path, "w:gz") as tf:
        for m in members:
            if isinstance(m, tuple):
                info = tarfile.TarInfo(m[0])
                info.size = len(m[1])
                tf.addfile(info, io.BytesIO(m[1]))
            else:
                tf.addfile(m)
    return path


def _link(name: str, target: str, kind: bytes = tarfile.SYMTYPE) -> tarfile.TarInfo:
    info = tarfile.TarInfo(name)
    info.type = kind
    info.linkname = target
    return info


def _everything_under(folder: Path) -> set[str]:
    return {p.relative_to(folder).as_posix() for p in folder.rglob("*")}


def test_a_plain_zip_unpacks_into_its_one_top_folder(tmp_path) -> None:
    archive = _zip(tmp_path / "study-2024.zip", {"study/fig1.py": b"x = 1\n", "study/data/a.csv": b"a\n1\n"})
    into = tmp_path / "out"
    into.mkdir()
    root = unpack(archive, into)
    assert root == into / "study"
    assert (root / "data/a.csv").read_bytes() == b"a\n1\n"
    assert deposit_name(archive) == "study-2024"
    assert deposit_name(Path("x.tar.gz")) == "x" and deposit_name(Path("y.TGZ")) == "y"


def test_a_tar_gz_with_an_inside_link_and_a_hard_link_unpacks(tmp_path) -> None:
    archive = _tar(tmp_path / "d.tar.gz", [("a/data.csv", b"1,2\n"), _link("a/latest.csv", "data.csv"),
                                           _link("a/copy.csv", "a/data.csv", tarfile.LNKTYPE), ("b.py", b"pass\n")])
    into = tmp_path / "out"
    into.mkdir()
    root = unpack(archive, into)
    assert root == into  # two top-level entries: the folder itself is the root
    assert os.readlink(into / "a/latest.csv") == "data.csv"
    assert (into / "a/copy.csv").read_bytes() == b"1,2\n" and not (into / "a/copy.csv").is_symlink()


@pytest.mark.parametrize("target", ["a/missing.csv", "a"])
def test_a_hard_link_to_no_file_of_the_archive_is_refused(tmp_path, target) -> None:
    # a tar hard link (LNKTYPE) names another member whose bytes it shares (tarfile docs: TarInfo.islnk);
    # naming a member that is not there, or a folder, leaves nothing to copy
    archive = _tar(tmp_path / "d.tar.gz", [("a/data.csv", b"1,2\n"), _link("a/copy.csv", target, tarfile.LNKTYPE)])
    into = tmp_path / "out"
    into.mkdir()
    with pytest.raises(DepositError) as info:
        unpack(archive, into)
    message = str(info.value)
    assert "\n" not in message and "d.tar.gz" in message and "'a/copy.csv'" in message
    assert "not a file of the archive" in message and not (into / "a/copy.csv").exists()


@pytest.mark.parametrize(("name", "words"), [
    ("../escape.txt", "climbs out"),
    ("study/../../escape.txt", "climbs out"),
    ("/tmp/escape.txt", "absolute path"),
    ("C:\\escape.txt", "absolute path"),
    ("..\\escape.txt", "climbs out"),
])
def test_zip_members_that_point_outside_are_refused(tmp_path, name, words) -> None:
    archive = _zip(tmp_path / "evil.zip", {"study/ok.py": b"pass\n", name: b"owned\n"})
    into = tmp_path / "box" / "out"
    into.mkdir(parents=True)
    with pytest.raises(DepositError) as info:
        unpack(archive, into)
    message = str(info.value)
    assert "\n" not in message and "evil.zip" in message and repr(name) in message and words in message
    assert not (tmp_path / "escape.txt").exists() and not (tmp_path / "box" / "escape.txt").exists()
    assert not Path("/tmp/escape.txt").exists() or Path("/tmp/escape.txt").read_bytes() != b"owned\n"


@pytest.mark.parametrize("target", ["../../outside", "/etc", "sub/../../.."])
def test_a_zip_symlink_leading_out_is_refused(tmp_path, target) -> None:
    archive = _zip_symlink(tmp_path / "links.zip", "study/data", target)
    into = tmp_path / "out"
    into.mkdir()
    with pytest.raises(DepositError, match=r"links\.zip: member 'study/data' is a link to .* outside the deposit"):
        unpack(archive, into)
    assert not any(p.is_symlink() for p in into.rglob("*"))


def test_a_zip_symlink_inside_the_deposit_is_made(tmp_path) -> None:
    archive = _zip_symlink(tmp_path / "links.zip", "study/again.py", "plot.py")
    into = tmp_path / "out"
    into.mkdir()
    root = unpack(archive, into)
    assert (root / "again.py").read_bytes() == b"print('hi')\n"


def test_tar_links_out_and_device_members_are_refused(tmp_path) -> None:
    into = tmp_path / "out"
    for n, (member, words) in enumerate([
        (_link("study/etc", "/etc"), "outside the deposit"),
        (_link("study/up", "../../.."), "outside the deposit"),
        (_link("study/pw", "/etc/passwd", tarfile.LNKTYPE), "absolute path"),
        (_link("study/pw", "../x", tarfile.LNKTYPE), "climbs out"),
        (tarfile.TarInfo("study/tty"), "device file"),
    ]):
        if words == "device file":
            member.type = tarfile.CHRTYPE
            member.devmajor, member.devminor = 5, 0
        archive = _tar(tmp_path / f"evil{n}.tgz", [("study/ok.py", b"pass\n"), member])
        box = into / str(n)
        box.mkdir(parents=True)
        with pytest.raises(DepositError, match=words) as info:
            unpack(archive, box)
        assert f"evil{n}.tgz" in str(info.value) and "\n" not in str(info.value)
        assert not any(p.is_symlink() or p.is_char_device() for p in box.rglob("*"))


def test_a_link_then_a_file_through_it_cannot_write_outside(tmp_path) -> None:
    # a link member that stays inside, then a file member whose path goes through it: the file must stay inside
    outside = tmp_path / "outside"
    outside.mkdir()
    archive = _tar(tmp_path / "chain.tar.gz", [_link("a", "b"), ("b/c/x.txt", b"1"), ("a/y.txt", b"2")])
    into = tmp_path / "out"
    into.mkdir()
    with pytest.raises(DepositError):
        unpack(archive, into)  # 'a' is a folder by the time the link would be made: refused, not followed
    assert not list(outside.iterdir())


def test_a_zip_bomb_is_stopped_at_the_size_cap(tmp_path) -> None:
    # 64 MiB of zeros deflates to about 64 KiB: a ratio of 1000, as a small bomb has
    archive = _zip(tmp_path / "bomb.zip", {"study/zeros.bin": bytes(64 * 1024 * 1024)})
    assert archive.stat().st_size < 1024 * 1024
    into = tmp_path / "out"
    into.mkdir()
    with pytest.raises(DepositError, match=r"bomb\.zip: unpacks to more than 8 MiB \(at 'study/zeros\.bin'\); "
                                           r"refused as a possible decompression bomb"):
        unpack(archive, into, Limits(max_bytes=8 * 1024 * 1024))
    written = sum(p.stat().st_size for p in into.rglob("*") if p.is_file())
    assert written <= 8 * 1024 * 1024


def test_a_bomb_of_members_is_stopped_at_the_member_cap(tmp_path) -> None:
    archive = _tar(tmp_path / "many.tar.gz", [(f"d/{i}.txt", b"") for i in range(300)])
    into = tmp_path / "out"
    into.mkdir()
    with pytest.raises(DepositError, match=r"many\.tar\.gz: more than 100 members \(at 'd/100\.txt'\)"):
        unpack(archive, into, Limits(max_members=100))


def test_a_truncated_archive_is_one_line(tmp_path) -> None:
    whole = _zip(tmp_path / "whole.zip", {"a.py": b"x" * 5000}).read_bytes()
    cut = tmp_path / "cut.zip"
    cut.write_bytes(whole[: len(whole) // 2])
    into = tmp_path / "out"
    into.mkdir()
    with pytest.raises(DepositError, match=r"cut\.zip: not a readable archive"):
        unpack(cut, into)


def test_opened_removes_its_temp_folder_even_when_refused(tmp_path, monkeypatch) -> None:
    temp = tmp_path / "tmp"
    temp.mkdir()
    monkeypatch.setenv("TMPDIR", str(temp))
    good = _zip(tmp_path / "good.zip", {"study/a.py": b"pass\n"})
    with opened(good) as root:
        assert (root / "a.py").is_file() and temp in root.parents
    evil = _zip(tmp_path / "evil.zip", {"../escape.py": b"pass\n"})
    with pytest.raises(DepositError), opened(evil):
        pass
    assert not list(temp.iterdir())
    with opened(tmp_path) as same:  # a folder is used where it is
        assert same == tmp_path


def test_check_refuses_a_hostile_deposit_with_exit_5_and_one_line(tmp_path, monkeypatch, capsys) -> None:
    temp = tmp_path / "tmp"
    temp.mkdir()
    monkeypatch.setenv("TMPDIR", str(temp))
    evil = _zip(tmp_path / "evil.zip", {"study/fig.py": b"import matplotlib\n", "../../escape.py": b"x\n"})
    assert main(["check", str(evil)]) == 5
    err = capsys.readouterr().err.strip()
    assert err == ("figproof: evil.zip: member '../../escape.py' climbs out of the deposit with '..'; refused "
                   "(nothing was written outside the temporary folder)")
    assert not list(temp.iterdir())
    assert main(["check", str(tmp_path / "absent.zip")]) == 2  # a missing path is a usage error, as for a repo
    assert "absent.zip: no such file or folder" in capsys.readouterr().err


FIGURE = b"""import matplotlib
matplotlib.use("Agg")
import matplotlib.pyplot as plt
import csv
rows = list(csv.reader(open("data/growth.csv")))[1:]
fig, ax = plt.subplots(figsize=(3, 2), dpi=50)
ax.plot([float(r[0]) for r in rows], [float(r[1]) for r in rows], "o")
fig.savefig("fig1.png")
"""


@pytest.mark.slow
def test_a_zipped_deposit_is_checked_and_every_file_counts_as_committed(tmp_path, monkeypatch, capsys) -> None:
    # the deposit sits inside a git work tree where none of its files are tracked: they still count
    import subprocess

    subprocess.run(["git", "init", "-q", str(tmp_path)], check=True)
    temp = tmp_path / "tmp"
    temp.mkdir()
    monkeypatch.setenv("TMPDIR", str(temp))
    archive = _zip(tmp_path / "growth-study.zip", {"growth/fig1.py": FIGURE,
                                                    "growth/data/growth.csv": b"t,y\n0,1\n1,2\n2,4\n"})
    out = tmp_path / "report.json"
    assert main(["check", str(archive), "--json", str(out), "--quiet"]) == 0
    import json

    report = json.loads(out.read_text())
    assert report["deposit"] == "growth-study" and report["reproduced"] is True
    assert [r["path"] for r in report["scripts"]] == ["fig1.py"] and report["scripts"][0]["status"] == "ok"
    assert not [f for f in report["findings"] if f["rule"] in ("input-outside-repo", "input-missing")]
    assert not list(temp.iterdir())  # the unpacked deposit is gone
    folder = tmp_path / "unpacked"
    with zipfile.ZipFile(archive) as zf:
        zf.extractall(folder)
    assert main(["check", str(folder / "growth"), "--deposit", "--json", str(out), "--quiet"]) == 0
    assert not [f for f in json.loads(out.read_text())["findings"] if f["rule"] == "input-outside-repo"]

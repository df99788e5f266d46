"""The kernel layer on its own: Landlock confines a process's writes to the folders it was given.

Each case runs in a fresh interpreter (a Landlock restriction can never be lifted, so it must not touch the
test process).  Skipped, with the reason, only where the kernel has no Landlock; this project's CI machine
has ABI 7, so there they run.
"""

from __future__ import annotations

import subprocess
import sys
import textwrap
from pathlib import Path

import pytest

from figproof.child import landlock

pytestmark = pytest.mark.skipif(landlock.abi_version() == 0, reason="Landlock is absent or disabled here")


def confined(tmp_path: Path, body: str, *, block_tcp: bool = True) -> list[str]:
    """Run ``body`` after confining writes to tmp_path/ok; return its printed lines."""
    code = textwrap.dedent(f"""
        import os, socket, subprocess
        from figproof.child import landlock
        out = landlock.confine([{str(tmp_path / 'ok')!r}], ["/dev/null"], block_tcp={block_tcp})
        print("abi", out.abi, out.writes, out.network)
        def attempt(label, fn):
            try:
                fn()
                print(label, "allowed")
            except OSError as exc:
                print(label, "refused", exc.errno)
    """) + textwrap.dedent(body)
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=60, check=True)
    return done.stdout.splitlines()


def test_write_rights_grow_with_the_abi() -> None:
    # bit values and the ABI that introduced each right: <linux/landlock.h>, the kernel's Landlock
    # userspace API documentation ("Filesystem flags", "Previous limitations")
    assert landlock.write_rights(1) == 0b1_1111_1111_0010  # WRITE_FILE, REMOVE_DIR .. MAKE_SYM (bits 1, 4-12)
    assert landlock.write_rights(2) == landlock.write_rights(1) | 1 << 13  # REFER
    assert landlock.write_rights(3) == landlock.write_rights(2) | 1 << 14  # TRUNCATE
    assert landlock.write_rights(7) == landlock.write_rights(3)  # IOCTL_DEV (bit 15) is left unhandled


def test_writes_outside_the_allowed_folders_are_refused(tmp_path: Path) -> None:
    (tmp_path / "ok").mkdir()
    (tmp_path / "theirs").mkdir()
    (tmp_path / "theirs" / "data.csv").write_text("a,b\n")
    lines = confined(tmp_path, f"""
        ok, theirs = {str(tmp_path / 'ok')!r}, {str(tmp_path / 'theirs')!r}
        attempt("write-ok", lambda: open(ok + "/new.txt", "w").close())
        attempt("rename-ok", lambda: os.rename(ok + "/new.txt", ok + "/moved.txt"))
        attempt("devnull", lambda: open("/dev/null", "w").write("x"))
        attempt("write", lambda: open(theirs + "/data.csv", "w"))
        attempt("create", lambda: open(theirs + "/new.csv", "x"))
        attempt("remove", lambda: os.remove(theirs + "/data.csv"))
        attempt("rename-out", lambda: os.rename(theirs + "/data.csv", ok + "/stolen.csv"))
        attempt("truncate", lambda: os.truncate(theirs + "/data.csv", 0))
        attempt("mkdir", lambda: os.mkdir(theirs + "/sub"))
        attempt("symlink", lambda: os.symlink("/etc/hostname", theirs + "/link"))
        attempt("read", lambda: open(theirs + "/data.csv").read())
        rm = subprocess.run(["rm", "-rf", theirs], capture_output=True)
        print("rm", rm.returncode)
    """)
    assert lines[0].startswith("abi ") and lines[0].endswith("True True")
    results = dict(line.split(" ", 1) for line in lines[1:])
    for label in ("write-ok", "rename-ok", "devnull", "read"):
        assert results[label] == "allowed", label
    for label in ("write", "create", "remove", "rename-out", "truncate", "mkdir", "symlink"):
        assert results[label] == "refused 13", label  # EACCES
    assert results["rm"] != "0"
    assert (tmp_path / "theirs" / "data.csv").read_text() == "a,b\n"
    assert sorted(p.name for p in (tmp_path / "theirs").iterdir()) == ["data.csv"]


def test_tcp_connect_and_bind_are_refused_from_abi_4(tmp_path: Path) -> None:
    (tmp_path / "ok").mkdir()
    lines = confined(tmp_path, """
        attempt("connect", lambda: socket.create_connection(("127.0.0.1", 9), timeout=2))
        attempt("bind", lambda: socket.socket().bind(("127.0.0.1", 0)))
    """)
    results = dict(line.split(" ", 1) for line in lines[1:])
    if landlock.abi_version() >= 4:
        assert results == {"connect": "refused 13", "bind": "refused 13"}
    else:
        assert lines[0].endswith("True False")  # the network right does not exist before ABI 4

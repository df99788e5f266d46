"""Sharding a big repo over CI jobs: pick a stable share of the scripts (``figproof.report.merge`` joins the
shards' JSON reports).

A script's shard depends on its path alone (a hash), not on which other
scripts exist, so adding a script never reshuffles the others: each CI job
keeps checking the same scripts and its result cache stays warm.
"""

from __future__ import annotations

import hashlib
import re
from collections.abc import Sequence

_SPEC = re.compile(r"^\s*(\d+)\s*/\s*(\d+)\s*$")


class ShardError(ValueError):
    """A bad ``--shard`` spec; the message is one line."""


def parse_shard(spec: str) -> tuple[int, int]:
    """Parse ``"K/N"`` (1-based) into ``(K, N)``; raise :class:`ShardError` naming what is wrong."""
    m = _SPEC.match(spec or "")
    if not m:
        raise ShardError(f"--shard {spec!r}: expected K/N with whole numbers, e.g. 2/4")
    k, n = int(m.group(1)), int(m.group(2))
    if n < 1:
        raise ShardError(f"--shard {spec!r}: N must be at least 1 (got {n})")
    if not 1 <= k <= n:
        raise ShardError(f"--shard {spec!r}: K must be between 1 and N={n} (got {k})")
    return k, n


def shard_of(path: str, n: int) -> int:
    """The 1-based shard of ``path`` among ``n`` (SHA-256 of the POSIX path, so stable everywhere)."""
    digest = hashlib.sha256(path.replace("\\", "/").encode("utf-8")).digest()
    return int.from_bytes(digest[:8], "big") % n + 1


def select_shard(scripts: Sequence[str], spec: str) -> list[str]:
    """The scripts of shard ``spec`` (``"K/N"``), in their given order.

    Every script lands in exactly one of the N shards; shares are even on average
    (a hash, not a round robin, so that they do not depend on the other paths).
    """
    k, n = parse_shard(spec)
    return [s for s in scripts if shard_of(s, n) == k]


__all__ = ["ShardError", "parse_shard", "select_shard", "shard_of"]

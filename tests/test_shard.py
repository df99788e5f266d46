"""Shard selection: a stable, even share of the scripts per CI job (merging the shards' reports: test_merge.py)."""

from __future__ import annotations

import pytest
from scipy import stats

from figproof.discover.shard import ShardError, parse_shard, select_shard

SCRIPTS = [f"figures/panel_{i:03d}.py" for i in range(1000)]


@pytest.mark.parametrize(("spec", "expected"), [
    ("3/2", "K must be between 1 and N=2 (got 3)"),
    ("0/2", "K must be between 1 and N=2 (got 0)"),
    ("1/0", "N must be at least 1 (got 0)"),
    ("junk", "expected K/N"),
    ("", "expected K/N"),
    ("-1/2", "expected K/N"),
    ("1.5/3", "expected K/N"),
    ("1/2/3", "expected K/N"),
])
def test_bad_specs_are_one_line_errors(spec: str, expected: str) -> None:
    with pytest.raises(ShardError) as info:
        select_shard(SCRIPTS, spec)
    assert expected in str(info.value) and "\n" not in str(info.value)


def test_spec_tolerates_spaces() -> None:
    assert parse_shard(" 2 / 4 ") == (2, 4)


def test_shards_partition_the_scripts_in_order() -> None:
    shards = [select_shard(SCRIPTS, f"{k}/4") for k in range(1, 5)]
    assert sorted(s for shard in shards for s in shard) == sorted(SCRIPTS)
    for shard in shards:
        assert shard == [s for s in SCRIPTS if s in set(shard)]  # given order kept
    assert select_shard(SCRIPTS, "1/1") == SCRIPTS


def test_shares_are_uniform() -> None:
    counts = [len(select_shard(SCRIPTS, f"{k}/4")) for k in range(1, 5)]
    # Pearson's chi-square goodness of fit against equal shares (scipy.stats.chisquare):
    # a fair hash leaves p far above 0.001.
    assert stats.chisquare(counts).pvalue > 1e-3


def test_adding_scripts_moves_no_existing_script() -> None:
    before = set(select_shard(SCRIPTS[:600], "3/5"))
    after = set(select_shard(SCRIPTS, "3/5"))
    assert before == after & set(SCRIPTS[:600])

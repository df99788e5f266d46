"""Finding what to check: figure scripts and notebooks, data files, committed figures, git facts, shards."""

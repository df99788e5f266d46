"""Committed figure files against the ones the scripts regenerated (pixels, vector files, notebook outputs)."""

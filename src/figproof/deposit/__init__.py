"""Deposits: an archive or a plain folder deposited with a manuscript, checked as a data editor would."""

"""Plain data that crosses the process boundary and feeds the rules: figures, runs, findings, run context."""

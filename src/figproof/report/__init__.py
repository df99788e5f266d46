"""Reporters: pure functions that render a CheckResult; they never decide pass or fail."""

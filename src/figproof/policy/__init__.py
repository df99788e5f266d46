"""The one place that decides: allow comments, accepted findings, severities and pass or fail."""

"""Maintenance rules: records in, due items and readiness verdicts out (via fleet.calc)."""

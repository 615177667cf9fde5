"""Estimators and diagnostics computed from the stacked moment matrices (pure: no web or storage)."""

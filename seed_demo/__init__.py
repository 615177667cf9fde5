"""Invented demo cases: seeded scenarios with documented true effects (never manuscript data)."""

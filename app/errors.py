"""Errors that carry a message meant for the person using the tool.

Every error raised because of the input (a spec, a data file, a design that
cannot be estimated) derives from :class:`SecondStageError`. The CLI and the
web layer print ``str(error)`` and never a traceback.
"""

from __future__ import annotations


class SecondStageError(Exception):
    """An input problem with a message that names what is wrong."""


class SpecError(SecondStageError):
    """The claim specification is malformed or inconsistent."""


class DataFileError(SecondStageError):
    """The data file cannot be read as a table."""


class DesignError(SecondStageError):
    """The data and the claim together do not give an estimable model."""

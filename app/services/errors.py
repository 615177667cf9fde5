"""Errors raised by services; the web layer maps each to an HTTP status and one JSON shape."""

from __future__ import annotations

from dataclasses import dataclass

from pydantic import ValidationError

from app.errors import DataFileError, SecondStageError, SpecError


class NotFound(SecondStageError):
    """The case, dataset, claim, refit or checklist item does not exist (in this case)."""


class NotReady(SecondStageError):
    """The refit has no findings yet (still running) or failed; the message says which."""


class FileRefused(DataFileError):
    """An upload was refused before it was read (empty, no usable name)."""


class FileTooLarge(FileRefused):
    """An upload exceeded the server's size limit; nothing was kept."""


@dataclass(frozen=True)
class Problem:
    """One thing wrong with a submitted claim; ``field`` names the spec field when known."""

    field: str | None
    message: str


class InvalidInput(SecondStageError):
    """Submitted fields failed validation; ``problems`` lists every reason, field by field."""

    def __init__(self, problems: list[Problem]) -> None:
        super().__init__("; ".join(problem.message for problem in problems))
        self.problems = problems


class ClaimRejected(InvalidInput, SpecError):
    """A claim failed validation (its spec, or its columns against the dataset)."""


def problems_from(error: ValidationError) -> list[Problem]:
    """One :class:`Problem` per pydantic error, naming the field and without pydantic's prefixes."""
    problems = []
    for item in error.errors():
        field = ".".join(str(part) for part in item["loc"]) or None
        if item["type"] == "extra_forbidden":
            message = f"unknown field '{field}'"
        elif item["type"] == "missing":
            message = f"'{field}' is required"
        else:
            message = item["msg"].removeprefix("Value error, ")
            message = f"{field}: {message}" if field else message
        problems.append(Problem(field=field, message=message))
    return problems

"""Errors raised by services; the web layer maps each to an HTTP status and one JSON shape."""

from __future__ import annotations

from dataclasses import dataclass

from pydantic import ValidationError

from app.errors import DataFileError, SecondStageError, SpecError


class NotFound(SecondStageError):
    """The case, dataset, claim, refit or checklist item does not exist (in this case)."""


class NotReady(SecondStageError):
    """The refit has no findings yet (still running) or failed; the message says which."""


class Forbidden(SecondStageError):
    """The actor sees the case (or is signed in) but may not do what was asked."""


class CaseClosed(SecondStageError):
    """The case is closed, so nothing in it can change until a coordinator reopens it."""


class ChangedMeanwhile(SecondStageError):
    """Someone else saved the same thing after it was loaded; nothing of the late save is kept."""


class SignInRefused(SecondStageError):
    """The name or password is wrong (the message never says which)."""


class TooManyAttempts(SecondStageError):
    """Too many failed sign-ins for this account or from this address; ``retry_after`` in seconds."""

    def __init__(self, message: str, *, retry_after: int) -> None:
        super().__init__(message)
        self.retry_after = retry_after


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

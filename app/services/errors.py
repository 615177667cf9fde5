"""Errors raised by services; the web layer maps each to an HTTP status and one JSON shape."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

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


WORDS_BY_ERROR_TYPE = {
    "missing": "this is required",
    "int_parsing": "should be a whole number",
    "int_type": "should be a whole number",
    "int_from_float": "should be a whole number",
    "float_parsing": "should be a number",
    "float_type": "should be a number",
    "bool_parsing": "should be yes or no",
}
"""Plain words for pydantic's error types whose own message is written for programmers."""


def pydantic_detail(item: Mapping[str, Any]) -> str:
    """What is wrong with one field, in plain words, without the field's name or pydantic's prefixes."""
    words = WORDS_BY_ERROR_TYPE.get(str(item.get("type")))
    if words is not None:
        return words
    message = str(item.get("msg", "invalid value")).removeprefix("Value error, ")
    return message.replace("Input should", "should", 1)


def problems_from(error: ValidationError) -> list[Problem]:
    """One :class:`Problem` per pydantic error: ``field: what is wrong`` (pages replace the path with a label)."""
    problems = []
    for item in error.errors():
        field = ".".join(str(part) for part in item["loc"]) or None
        if item["type"] == "extra_forbidden":
            message = f"unknown field '{field}'"
        else:
            detail = pydantic_detail(item)
            message = f"{field}: {detail}" if field else detail
        problems.append(Problem(field=field, message=message))
    return problems

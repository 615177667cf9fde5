"""One error shape for the JSON API and an error page for HTML, so bad input never gives a 500.

Every error response of ``/api/v1`` has the body::

    {"error": {"status": 422, "code": "invalid_claim", "message": "...",
               "problems": [{"field": "instruments", "message": "..."}]}}

HTML pages show the same message on the error page (forms re-render themselves
with their problems instead, keeping what the reviewer typed). A request sent
by htmx from a page (a note saved as it is typed) gets the message alone as
plain text, which the page's script shows beside the control. A page asked for
without a sign-in redirects to the sign-in page, with the page to come back to
(an htmx request is told where to go with ``HX-Redirect``); the API answers 401
with ``WWW-Authenticate``.
"""

from __future__ import annotations

import logging
from dataclasses import dataclass, field

from fastapi import FastAPI, Request
from fastapi.exceptions import RequestValidationError
from fastapi.responses import JSONResponse, PlainTextResponse, RedirectResponse, Response
from pydantic import BaseModel
from starlette.exceptions import HTTPException

from app.errors import DataFileError, DesignError, SecondStageError, SpecError
from app.services.errors import (
    CaseClosed,
    ChangedMeanwhile,
    FileTooLarge,
    Forbidden,
    InvalidInput,
    NotFound,
    NotReady,
    Problem,
    SignInRefused,
    TooManyAttempts,
    pydantic_detail,
)
from app.web.identity import FormTokenRefused, SignInRequired, sign_in_location

log = logging.getLogger(__name__)

API_PREFIX = "/api/"


class ProblemBody(BaseModel):
    """One problem with a submitted field."""

    field: str | None
    message: str


class ErrorDetail(BaseModel):
    """What went wrong, for people and for programs."""

    status: int
    code: str
    message: str
    problems: list[ProblemBody]


class ErrorBody(BaseModel):
    """The body of every error response of the JSON API."""

    error: ErrorDetail


@dataclass(frozen=True)
class ErrorInfo:
    """An error ready to render as JSON or HTML."""

    status: int
    code: str
    message: str
    problems: list[Problem] = field(default_factory=list)

    def body(self) -> dict[str, object]:
        detail = ErrorDetail(
            status=self.status,
            code=self.code,
            message=self.message,
            problems=[ProblemBody(field=p.field, message=p.message) for p in self.problems],
        )
        return ErrorBody(error=detail).model_dump()


ERROR_KINDS: tuple[tuple[type[Exception], int, str], ...] = (
    (SignInRequired, 401, "sign_in_required"),
    (SignInRefused, 401, "sign_in_refused"),
    (FormTokenRefused, 403, "form_token_refused"),
    (Forbidden, 403, "forbidden"),
    (NotFound, 404, "not_found"),
    (NotReady, 409, "not_ready"),
    (CaseClosed, 409, "case_closed"),
    (ChangedMeanwhile, 409, "changed_meanwhile"),
    (TooManyAttempts, 429, "too_many_attempts"),
    (FileTooLarge, 413, "file_too_large"),
    (DataFileError, 422, "unreadable_data_file"),
    (InvalidInput, 422, "invalid_input"),
    (SpecError, 422, "invalid_claim"),
    (DesignError, 422, "cannot_estimate"),
    (SecondStageError, 422, "invalid_input"),
)
"""Error class, HTTP status and code; the first matching class wins (subclasses first)."""

HTTP_CODES = {
    400: "bad_request",
    401: "sign_in_required",
    403: "forbidden",
    404: "not_found",
    405: "method_not_allowed",
    406: "not_acceptable",
    413: "file_too_large",
    415: "unsupported_media_type",
}


def describe(error: Exception) -> ErrorInfo:
    """The status, code, message and problems for an exception."""
    if isinstance(error, RequestValidationError):
        problems = [_request_problem(item) for item in error.errors()]
        return ErrorInfo(422, "invalid_request", "; ".join(p.message for p in problems), problems)
    if isinstance(error, HTTPException):
        message = error.detail if isinstance(error.detail, str) else "the request cannot be served"
        return ErrorInfo(error.status_code, HTTP_CODES.get(error.status_code, "http_error"), message)
    for kind, status, code in ERROR_KINDS:
        if isinstance(error, kind):
            problems = list(error.problems) if isinstance(error, InvalidInput) else []
            return ErrorInfo(status, code, str(error), problems)
    return ErrorInfo(
        500,
        "internal_error",
        "the server met an unexpected problem; nothing was changed by this request if it failed "
        "half-way, and the server log has the details",
    )


def _headers_for(error: Exception) -> dict[str, str]:
    if isinstance(error, TooManyAttempts):
        return {"Retry-After": str(error.retry_after)}
    return {}


def _request_problem(item: dict[str, object]) -> Problem:
    if item.get("type") == "json_invalid":
        return Problem(field=None, message="the request body is not valid JSON")
    location = [str(part) for part in item.get("loc", ()) if part not in ("body", "query", "path")]
    name = ".".join(location) or None
    detail = pydantic_detail(item)
    return Problem(field=name, message=f"{name}: {detail}" if name else detail)


def install_error_handlers(app: FastAPI) -> None:
    """Route every error through :func:`describe` to JSON (API) or the error page (HTML)."""

    async def handle(request: Request, error: Exception) -> Response:
        info = describe(error)
        if info.status >= 500:
            log.error("unhandled error on %s %s", request.method, request.url.path, exc_info=error)
        headers = _headers_for(error)
        if request.url.path.startswith(API_PREFIX):
            if isinstance(error, SignInRequired):
                headers["WWW-Authenticate"] = 'Bearer realm="secondstage"'
            return JSONResponse(info.body(), status_code=info.status, headers=headers)
        from_htmx = request.headers.get("HX-Request") == "true"
        if isinstance(error, SignInRequired):
            if from_htmx:
                return Response(status_code=401, headers={"HX-Redirect": sign_in_location(request)})
            return RedirectResponse(sign_in_location(request), status_code=303)
        if from_htmx:
            return PlainTextResponse(info.message, status_code=info.status, headers=headers)
        templates = request.app.state.templates
        return templates.TemplateResponse(
            request, "error.html", {"error": info, "json_twin": None}, status_code=info.status, headers=headers
        )

    for kind in (RequestValidationError, HTTPException, SecondStageError, Exception):
        app.add_exception_handler(kind, handle)

"""Pages about people: signing in and out, the first run, one's own account, the accounts of the server, its audit trail.

The sign-in and first-run forms are shown before anyone is signed in, so their
form token is tied to a short-lived cookie set with the form (double submit).
Every other form here needs a web session and its form token.
"""

from __future__ import annotations

from typing import Annotated, Any

from fastapi import APIRouter, Depends, Form, Request
from fastapi.responses import HTMLResponse, Response

from app.auth.cookies import FORM_COOKIE, SESSION_COOKIE
from app.auth.roles import Role
from app.services import audit, sign_in, tokens, users
from app.services.context import ServiceContext
from app.services.errors import InvalidInput, NotFound, Problem, SignInRefused, TooManyAttempts
from app.web.identity import (
    FORM_COOKIE_SECONDS,
    SIGN_IN_PATH,
    FirstRunKey,
    ServerKeys,
    check_pre_session_token,
    client_address,
    new_form_cookie,
    pre_session_token,
    safe_next,
    services,
)
from app.web.labels import person_field
from app.web.params import RowId
from app.web.rendering import render, see_other

router = APIRouter(include_in_schema=False)
Services = Annotated[ServiceContext, Depends(services)]

PEOPLE_NOTICES = {
    "added": "Account added. Tell them their password in person or by phone, not by e-mail.",
    "role": "Role changed; it applies from their next click.",
    "password": "New password set; their sign-ins have ended.",
    "removed": "Account removed, with its sign-ins, tokens and case access.",
}
"""What the people page says after a change (a fixed text: nothing from the address is shown)."""

NOT_A_FIRST_RUN = (
    "this first-run link is not valid: the server's first steward exists already (sign in instead), "
    "or the link belongs to an earlier start of the server"
)


# -- signing in and out -------------------------------------------------------------


@router.get("/sign-in", name="sign_in_page")
def sign_in_page(request: Request, next: str = "", signed_out: str = "") -> HTMLResponse:
    notice = "You are signed out." if signed_out else None
    return _sign_in_form(request, next_path=safe_next(next), name="", problem=None, notice=notice)


@router.post("/sign-in", name="sign_in_form")
def sign_in_form(
    request: Request,
    name: Annotated[str, Form()] = "",
    password: Annotated[str, Form()] = "",
    next: Annotated[str, Form()] = "",
    csrf_token: Annotated[str, Form()] = "",
) -> Response:
    check_pre_session_token(request, csrf_token)
    ctx: ServiceContext = request.app.state.services
    address = client_address(request)
    try:
        signed_in = sign_in.sign_in(ctx, name=name, password=password, address=address)
    except SignInRefused as error:
        return _sign_in_form(request, next_path=safe_next(next), name=name, problem=str(error), status_code=401)
    except TooManyAttempts as error:
        response = _sign_in_form(request, next_path=safe_next(next), name=name, problem=str(error), status_code=429)
        response.headers["Retry-After"] = str(error.retry_after)
        return response
    keys: ServerKeys = request.app.state.keys
    earlier = keys.sessions.unsign(request.cookies.get(SESSION_COOKIE), max_age_seconds=ctx.settings.session_hours * 3600)
    if earlier is not None:
        sign_in.sign_out(ctx, secret=earlier, address=address)
    return _signed_in(request, see_other(safe_next(next)), signed_in)


@router.post("/sign-out", name="sign_out_form")
def sign_out_form(request: Request, ctx: Services) -> Response:
    sign_in.sign_out(ctx, secret=request.state.session_secret, address=client_address(request))
    response = see_other(f"{SIGN_IN_PATH}?signed_out=1")
    response.delete_cookie(SESSION_COOKIE, path="/")
    return response


def _sign_in_form(
    request: Request,
    *,
    next_path: str,
    name: str,
    problem: str | None,
    notice: str | None = None,
    status_code: int = 200,
) -> HTMLResponse:
    return _pre_session_form(
        request,
        "sign_in.html",
        next_path=next_path,
        name=name,
        problem=problem,
        notice=notice,
        first_run_pending=request.app.state.first_run is not None,
        status_code=status_code,
    )


def _pre_session_form(request: Request, template: str, *, status_code: int, **context: Any) -> HTMLResponse:
    """A form shown before sign-in: its form token is tied to a new short-lived cookie set with it (double submit)."""
    form_cookie = new_form_cookie()
    response = render(
        request,
        template,
        json_twin=None,
        form_token=pre_session_token(request, form_cookie),
        status_code=status_code,
        **context,
    )
    keys: ServerKeys = request.app.state.keys
    response.set_cookie(
        FORM_COOKIE,
        keys.forms.sign(form_cookie),
        **keys.cookies.attributes(max_age=FORM_COOKIE_SECONDS, same_site="strict"),
    )
    return response


def _signed_in(request: Request, response: Response, signed_in: sign_in.SignedIn) -> Response:
    """Set the new session's cookie (a new secret: a cookie planted before sign-in is worthless)."""
    keys: ServerKeys = request.app.state.keys
    lifetime = int(request.app.state.settings.session_hours * 3600)
    response.set_cookie(SESSION_COOKIE, keys.sessions.sign(signed_in.secret), **keys.cookies.attributes(max_age=lifetime))
    response.delete_cookie(FORM_COOKIE, path="/")
    return response


# -- first run --------------------------------------------------------------------------


@router.get("/welcome/{key}", name="first_run_page")
def first_run_page(request: Request, key: str) -> HTMLResponse:
    _check_first_run_key(request, key)
    return _first_run_form(request, key=key, values={}, problems=[])


@router.post("/welcome/{key}", name="first_run_form")
def first_run_form(
    request: Request,
    key: str,
    name: Annotated[str, Form()] = "",
    full_name: Annotated[str, Form()] = "",
    password: Annotated[str, Form()] = "",
    repeat: Annotated[str, Form()] = "",
    csrf_token: Annotated[str, Form()] = "",
) -> Response:
    first_run = _check_first_run_key(request, key)
    check_pre_session_token(request, csrf_token)
    values = {"name": name, "full_name": full_name}
    if password != repeat:
        problems = users.new_account_problems(name=name, full_name=full_name, password=password)
        problems.append(Problem(field="repeat", message="the two passwords differ; type the same password twice"))
        return _first_run_form(request, key=key, values=values, problems=problems, status_code=422)
    with first_run.lock:
        _check_first_run_key(request, key)
        try:
            signed_in = sign_in.complete_first_run(
                request.app.state.services,
                name=name,
                full_name=full_name,
                password=password,
                address=client_address(request),
            )
        except InvalidInput as error:
            return _first_run_form(request, key=key, values=values, problems=error.problems, status_code=422)
        first_run.use_up()
    request.app.state.first_run = None
    return _signed_in(request, see_other("/"), signed_in)


def _check_first_run_key(request: Request, key: str) -> FirstRunKey:
    first_run: FirstRunKey | None = request.app.state.first_run
    if first_run is None or not first_run.matches(key):
        raise NotFound(NOT_A_FIRST_RUN)
    return first_run


def _first_run_form(
    request: Request, *, key: str, values: dict[str, str], problems: list[Problem], status_code: int = 200
) -> HTMLResponse:
    return _pre_session_form(
        request, "first_run.html", key=key, values=values, problems=problems, status_code=status_code
    )


# -- one's own account ---------------------------------------------------------------------


@router.get("/account", name="account_page")
def account_page(request: Request, ctx: Services, changed: str = "") -> HTMLResponse:
    return _account(request, ctx, problems=[], notice="Your password is changed." if changed else None)


@router.post("/account/password", name="password_form")
def password_form(
    request: Request,
    ctx: Services,
    current: Annotated[str, Form()] = "",
    new: Annotated[str, Form()] = "",
    repeat: Annotated[str, Form()] = "",
) -> Response:
    if new != repeat:
        problems = [Problem(field="repeat", message="the two new passwords differ; type the same password twice")]
        return _account(request, ctx, problems=problems, status_code=422)
    try:
        users.change_own_password(ctx, current=current, new=new)
    except InvalidInput as error:
        return _account(request, ctx, problems=error.problems, status_code=422)
    return see_other(str(request.app.url_path_for("account_page")) + "?changed=1")


@router.post("/account/tokens", name="create_token_form")
def create_token_form(
    request: Request,
    ctx: Services,
    label: Annotated[str, Form()] = "",
    days: Annotated[str, Form()] = "",
) -> HTMLResponse:
    try:
        lifetime = int(days) if days.strip() else None
    except ValueError:
        return _account(request, ctx, problems=[Problem(field="days", message="days: a whole number")], status_code=422)
    try:
        created = tokens.create_token(ctx, label=label, days=lifetime)
    except InvalidInput as error:
        return _account(request, ctx, problems=error.problems, status_code=422)
    return render(request, "token_created.html", json_twin=None, created=created)


@router.post("/account/tokens/{token_id}/revoke", name="revoke_token_form")
def revoke_token_form(request: Request, ctx: Services, token_id: RowId) -> Response:
    tokens.revoke_token(ctx, token_id=token_id)
    return see_other(str(request.app.url_path_for("account_page")) + "#tokens")


def _account(
    request: Request, ctx: ServiceContext, *, problems: list[Problem], notice: str | None = None, status_code: int = 200
) -> HTMLResponse:
    view = users.account(ctx)
    twin = str(request.app.url_path_for("api_me"))
    return render(
        request, "account.html", json_twin=twin, page=view, problems=problems, notice=notice, status_code=status_code
    )


# -- the server's accounts -------------------------------------------------------------------


@router.get("/people", name="people_page")
def people_page(request: Request, ctx: Services, done: str = "") -> HTMLResponse:
    return _people(request, ctx, values={}, problems=[], notice=PEOPLE_NOTICES.get(done))


@router.post("/people", name="add_person_form")
def add_person_form(
    request: Request,
    ctx: Services,
    name: Annotated[str, Form()] = "",
    full_name: Annotated[str, Form()] = "",
    role: Annotated[str, Form()] = Role.REFEREE.value,
    password: Annotated[str, Form()] = "",
) -> Response:
    try:
        added = users.add_user(ctx, name=name, role=role, password=password, full_name=full_name)
    except InvalidInput as error:
        values = {"name": name, "full_name": full_name, "role": role}
        return _people(request, ctx, values=values, problems=error.problems, status_code=422)
    return _people_done(request, "added", anchor=f"person-{added.id}")


@router.post("/people/{user_id}/role", name="person_role_form")
def person_role_form(request: Request, ctx: Services, user_id: RowId, role: Annotated[str, Form()] = "") -> Response:
    changed = users.set_role(ctx, user_id=user_id, role=role)
    return _people_done(request, "role", anchor=f"person-{changed.id}")


@router.post("/people/{user_id}/password", name="person_password_form")
def person_password_form(
    request: Request, ctx: Services, user_id: RowId, password: Annotated[str, Form()] = ""
) -> Response:
    try:
        changed = users.reset_password(ctx, user_id=user_id, password=password)
    except InvalidInput as error:
        field = person_field("password", user_id)
        problems = [Problem(field=field, message=problem.message.removeprefix("password: ")) for problem in error.problems]
        return _people(request, ctx, values={}, problems=problems, status_code=422)
    return _people_done(request, "password", anchor=f"person-{changed.id}")


@router.post("/people/{user_id}/remove", name="remove_person_form")
def remove_person_form(
    request: Request, ctx: Services, user_id: RowId, confirm: Annotated[str, Form()] = ""
) -> Response:
    if confirm != "yes":
        problems = [
            Problem(field=person_field("confirm", user_id), message="tick the box to confirm that the account is to be removed")
        ]
        return _people(request, ctx, values={}, problems=problems, status_code=422)
    users.remove_user(ctx, user_id=user_id)
    return _people_done(request, "removed", anchor="people")


def _people(
    request: Request,
    ctx: ServiceContext,
    *,
    values: dict[str, str],
    problems: list[Problem],
    notice: str | None = None,
    status_code: int = 200,
) -> HTMLResponse:
    view = users.list_users(ctx)
    twin = str(request.app.url_path_for("api_list_people"))
    return render(
        request,
        "people.html",
        json_twin=twin,
        page=view,
        values=values,
        problems=problems,
        notice=notice,
        status_code=status_code,
    )


def _people_done(request: Request, notice: str, *, anchor: str) -> Response:
    return see_other(f"{request.app.url_path_for('people_page')}?done={notice}#{anchor}")


# -- the server's audit trail --------------------------------------------------------------------


@router.get("/audit", name="server_audit_page")
def server_audit_page(request: Request, ctx: Services, limit: int = audit.DEFAULT_LIMIT) -> HTMLResponse:
    trail = audit.server_trail(ctx, limit=limit)
    twin = str(request.app.url_path_for("api_server_audit")) + f"?limit={trail.limit}"
    return render(request, "audit.html", json_twin=twin, page=trail)

"""Every route × every principal × own/other case: the status the server must answer.

The routes come from the app's own route table, and every route must have a
rule in :data:`RULES`: a new route without one fails
:func:`test_every_route_has_an_access_rule`, so none can escape the matrix.

Principals: nobody signed in, the four roles (signed in through the sign-in
form, sending their form token), and the referee's API token. The *own* case
is given to the referee and the reader; the *other* case to nobody.

Expected answers:

* nobody signed in: a page redirects to the sign-in page (303), the API says 401;
  an API token counts for nobody on pages (they need the browser's sign-in);
* a case the principal may not see: 404, exactly as a case that does not exist;
* a case it sees but an action its role does not allow: 403;
* otherwise the request is served (neither 401, 403, 404 nor 5xx).

Requests that would destroy what later requests need are aimed at fresh
throwaway objects (see ``tests/security/routes.py``); signing out uses a
second browser of the same person.
"""

from __future__ import annotations

from dataclasses import dataclass

import pytest
from fastapi.testclient import TestClient

from app.auth.roles import CASE_ACTIONS, SERVER_ACTIONS, Action, Role, ServerAction
from tests.security.conftest import Shared
from tests.security.routes import ENDPOINTS, Endpoint, request_for

PRINCIPALS = ("anonymous", "steward", "coordinator", "referee", "reader", "referee token")
CASES = ("own", "other")


@dataclass(frozen=True)
class Rule:
    """Who may use a route.

    ``scope`` is ``public`` (the same answer ``status`` for everyone),
    ``signed_in`` (any signed-in person), ``server`` (a server-wide ``need``) or
    ``case`` (``need`` on the case in the path).
    """

    scope: str
    need: Action | ServerAction | None = None
    status: int | None = None


PUBLIC_200 = Rule("public", status=200)
SIGNED_IN = Rule("signed_in")


def case(action: Action) -> Rule:
    return Rule("case", need=action)


def server(action: ServerAction) -> Rule:
    return Rule("server", need=action)


RULES: dict[str, Rule] = {
    # public: sign-in, first run (no first run is pending: 404), session links, the API description
    "sign_in_page": PUBLIC_200,
    "sign_in_form": Rule("public", status=403),  # no pre-session form token: refused for everyone
    "first_run_page": Rule("public", status=404),
    "first_run_form": Rule("public", status=404),
    "follow_page": PUBLIC_200,
    "follow_checklist_page": PUBLIC_200,
    "follow_present_page": PUBLIC_200,
    "follow_figure": PUBLIC_200,
    "api_follow": PUBLIC_200,
    "openapi": PUBLIC_200,
    # any signed-in person
    "cases_page": SIGNED_IN,
    "api_list_cases": SIGNED_IN,
    "api_page": SIGNED_IN,
    "account_page": SIGNED_IN,
    "api_me": SIGNED_IN,
    "password_form": SIGNED_IN,
    "create_token_form": SIGNED_IN,
    "revoke_token_form": SIGNED_IN,
    "sign_out_form": SIGNED_IN,
    # server-wide
    "new_case_page": server(ServerAction.OPEN_CASES),
    "create_case_form": server(ServerAction.OPEN_CASES),
    "api_create_case": server(ServerAction.OPEN_CASES),
    "people_page": server(ServerAction.MANAGE_ACCOUNTS),
    "api_list_people": server(ServerAction.MANAGE_ACCOUNTS),
    "add_person_form": server(ServerAction.MANAGE_ACCOUNTS),
    "person_role_form": server(ServerAction.MANAGE_ACCOUNTS),
    "person_password_form": server(ServerAction.MANAGE_ACCOUNTS),
    "remove_person_form": server(ServerAction.MANAGE_ACCOUNTS),
    "server_audit_page": server(ServerAction.READ_SERVER_AUDIT),
    "api_server_audit": server(ServerAction.READ_SERVER_AUDIT),
    # one case: reading
    "case_page": case(Action.READ),
    "api_get_case": case(Action.READ),
    "dataset_page": case(Action.READ),
    "api_get_dataset": case(Action.READ),
    "claim_page": case(Action.READ),
    "api_get_claim": case(Action.READ),
    "refit_page": case(Action.READ),
    "api_get_refit": case(Action.READ),
    "refit_progress": case(Action.READ),
    "refit_figure": case(Action.READ),
    "checklist_page": case(Action.READ),
    "api_get_checklist": case(Action.READ),
    "compare_page": case(Action.READ),
    "api_compare_refits": case(Action.READ),
    "api_export_report": case(Action.EXPORT),
    # one case: changing
    "upload_page": case(Action.EDIT),
    "upload_form": case(Action.EDIT),
    "api_upload_dataset": case(Action.EDIT),
    "new_claim_page": case(Action.EDIT),
    "revise_claim_page": case(Action.EDIT),
    "create_claim_form": case(Action.EDIT),
    "revise_claim_form": case(Action.EDIT),
    "check_claim_form": case(Action.EDIT),
    "api_claim_editor": case(Action.EDIT),
    "api_check_claim": case(Action.EDIT),
    "api_create_claim": case(Action.EDIT),
    "api_revise_claim": case(Action.EDIT),
    "start_refit_form": case(Action.EDIT),
    "api_start_refit": case(Action.EDIT),
    "judgement_form": case(Action.EDIT),
    "api_save_judgement": case(Action.EDIT),
    # one case: session links
    "open_link_form": case(Action.SHARE),
    "api_open_session_link": case(Action.SHARE),
    "withdraw_link_form": case(Action.SHARE),
    "api_withdraw_session_link": case(Action.SHARE),
    # one case: managing
    "delete_case_page": case(Action.MANAGE),
    "delete_case_form": case(Action.MANAGE),
    "api_delete_case": case(Action.MANAGE),
    "grant_access_form": case(Action.MANAGE),
    "api_grant_access": case(Action.MANAGE),
    "withdraw_access_form": case(Action.MANAGE),
    "api_withdraw_access": case(Action.MANAGE),
    "close_case_form": case(Action.MANAGE),
    "api_close_case": case(Action.MANAGE),
    "reopen_case_form": case(Action.MANAGE),
    "api_reopen_case": case(Action.MANAGE),
    "case_audit_page": case(Action.AUDIT),
    "api_case_audit": case(Action.AUDIT),
}

def test_every_route_has_an_access_rule() -> None:
    names = {endpoint.name for endpoint in ENDPOINTS}
    assert names - RULES.keys() == set(), "routes without an access rule: add them to RULES"
    assert RULES.keys() - names == set(), "rules for routes that no longer exist"


def expected_status(endpoint: Endpoint, principal: str, which: str) -> int | None:
    """The status the server must answer, or None when the request must be served."""
    rule = RULES[endpoint.name]
    if rule.scope == "public":
        return rule.status
    nobody = principal == "anonymous" or (principal == "referee token" and not endpoint.is_api)
    if nobody:
        return 401 if endpoint.is_api else 303
    role = Role("referee" if principal == "referee token" else principal)
    if rule.scope == "signed_in":
        return None
    if rule.scope == "server":
        return None if rule.need in SERVER_ACTIONS[role] else 403
    sees = role in (Role.STEWARD, Role.COORDINATOR) or which == "own"
    if not sees:
        return 404
    return None if rule.need in CASE_ACTIONS[role] else 403


def client_for(shared: Shared, endpoint: Endpoint, principal: str) -> TestClient:
    """The principal's client; signing out gets a second browser of the same person, so the first stays signed in."""
    if endpoint.name == "sign_out_form" and principal not in ("anonymous", "referee token"):
        return shared.signed_in_client(principal)
    return shared.clients[principal]


@pytest.mark.parametrize("endpoint", ENDPOINTS, ids=lambda endpoint: f"{endpoint.method} {endpoint.path}")
def test_each_principal_gets_the_answer_its_access_allows(shared: Shared, endpoint: Endpoint) -> None:
    wrong = []
    for principal in PRINCIPALS:
        for which in CASES if "{case_id}" in endpoint.path else CASES[:1]:
            request = request_for(shared, endpoint, principal, which)
            response = client_for(shared, endpoint, principal).request(follow_redirects=False, **request)
            expected = expected_status(endpoint, principal, which)
            status = response.status_code
            location = response.headers.get("location", "")
            to_sign_in = status == 303 and (location == "/sign-in" or location.startswith("/sign-in?next="))
            if expected is None:
                served = status not in (401, 403, 404) and status < 500 and not to_sign_in
                if not served:
                    wrong.append(f"{principal} on {which} case: {status}, expected it served")
            elif status != expected or (expected == 303 and not to_sign_in):
                wrong.append(f"{principal} on {which} case: {status}, expected {expected}")
    assert wrong == []


def test_the_matrix_covers_every_route_with_every_principal() -> None:
    """The size of the matrix, as reported: routes × principals × cases (for routes of a case)."""
    cells = sum(len(PRINCIPALS) * (2 if "{case_id}" in endpoint.path else 1) for endpoint in ENDPOINTS)
    assert len(ENDPOINTS) == len(RULES) and cells >= 6 * len(ENDPOINTS)

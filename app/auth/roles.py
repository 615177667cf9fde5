"""The four roles of a shared server and what each may do.

=============  =====================================================================
role           may
=============  =====================================================================
steward        everything a coordinator may, plus manage accounts and read the
               server's audit trail (sign-in failures, account changes, deletions)
coordinator    see and manage every case: open, close, delete, give and withdraw
               access, read a case's audit trail, and everything a referee may
referee        only the cases they are given: upload data, enter and revise claims,
               refit, judge and annotate, export reports, open session links
reader         only the cases shared with them, read-only (pages and reports)
=============  =====================================================================

Seeing a case comes first: a referee or reader without access to a case is
told it does not exist (404); one who sees it but may not do the thing asked is
refused (403).
"""

from __future__ import annotations

from enum import StrEnum


class Role(StrEnum):
    """A person's role on this server."""

    STEWARD = "steward"
    COORDINATOR = "coordinator"
    REFEREE = "referee"
    READER = "reader"


class Action(StrEnum):
    """Something done to a case the actor can see."""

    READ = "read"
    """See the case, its data profiles, claims, refits, checklists and history."""
    EXPORT = "export"
    """Download reports of a checklist."""
    EDIT = "edit"
    """Upload data, enter and revise claims, refit, judge and annotate."""
    SHARE = "share"
    """Open and withdraw journal-club session links."""
    MANAGE = "manage"
    """Give and withdraw access, close, reopen and delete the case."""
    AUDIT = "audit"
    """Read the case's audit trail."""


class ServerAction(StrEnum):
    """Something done on the server rather than to one case."""

    OPEN_CASES = "open cases"
    MANAGE_ACCOUNTS = "manage accounts"
    READ_SERVER_AUDIT = "read the server's audit trail"


ROLE_LABELS: dict[Role, str] = {
    Role.STEWARD: "Steward",
    Role.COORDINATOR: "Coordinator",
    Role.REFEREE: "Referee",
    Role.READER: "Reader",
}

ROLE_DESCRIPTIONS: dict[Role, str] = {
    Role.STEWARD: "manages accounts and sees every case",
    Role.COORDINATOR: "sees and manages every case, gives referees and readers access",
    Role.REFEREE: "works on the cases they are given: data, claims, refits, judgements",
    Role.READER: "reads the cases shared with them, changes nothing",
}

CASE_ACTIONS: dict[Role, frozenset[Action]] = {
    Role.STEWARD: frozenset(Action),
    Role.COORDINATOR: frozenset(Action),
    Role.REFEREE: frozenset({Action.READ, Action.EXPORT, Action.EDIT, Action.SHARE}),
    Role.READER: frozenset({Action.READ, Action.EXPORT}),
}
"""What each role may do to a case it can see."""

SERVER_ACTIONS: dict[Role, frozenset[ServerAction]] = {
    Role.STEWARD: frozenset(ServerAction),
    Role.COORDINATOR: frozenset({ServerAction.OPEN_CASES}),
    Role.REFEREE: frozenset({ServerAction.OPEN_CASES}),
    Role.READER: frozenset(),
}

SEES_EVERY_CASE = frozenset({Role.STEWARD, Role.COORDINATOR})
"""Roles that need no access row to see a case."""

GIVEN_ACCESS = frozenset({Role.REFEREE, Role.READER})
"""Roles that see a case only once they are given access to it."""

ACTION_WORDS: dict[Action, str] = {
    Action.READ: "read this case",
    Action.EXPORT: "export reports of this case",
    Action.EDIT: "change this case (upload, claims, refits, judgements)",
    Action.SHARE: "open session links for this case",
    Action.MANAGE: "manage this case (access, closing, deleting)",
    Action.AUDIT: "read this case's audit trail",
}
"""The refusal message's words for each action."""


def role_label(role: Role | str) -> str:
    """The role's name as pages print it."""
    return ROLE_LABELS.get(Role(role), str(role))

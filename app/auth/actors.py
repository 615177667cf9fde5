"""Who is acting in a service call: a signed-in person (through a web session or an API token) or the server itself.

Every service call runs for one :class:`Actor` (``ServiceContext.actor``). The
web layer builds it from the request; the command line, the refit worker and
the demo loader act as the server (:func:`Actor.system`), which may do
everything. Audit entries record the actor's name, kind and address.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

from app.auth.roles import CASE_ACTIONS, SEES_EVERY_CASE, SERVER_ACTIONS, Action, Role, ServerAction

ActorKind = Literal["user", "system"]


@dataclass(frozen=True)
class Actor:
    """An acting identity.

    Attributes
    ----------
    name
        The user's sign-in name, or what the server is doing ("command line").
    kind
        ``"user"`` for a person, ``"system"`` for the server itself.
    role
        The user's role (None for the server, which may do everything).
    user_id
        The user's id (None for the server).
    via
        How the person reached the server: ``"web session"`` or ``"API token"``.
    address
        The client's network address, when known.
    session_id
        The web session's id (pages are cached per session: they carry its form token).
    """

    name: str
    kind: ActorKind
    role: Role | None = None
    user_id: int | None = None
    via: str = ""
    address: str = ""
    session_id: int | None = None

    @classmethod
    def system(cls, name: str) -> Actor:
        """The server acting on its own (command line, refit worker, demo loader)."""
        return cls(name=name, kind="system")

    @property
    def is_system(self) -> bool:
        return self.kind == "system"

    @property
    def sees_every_case(self) -> bool:
        """Whether the actor sees every case without being given access."""
        return self.is_system or self.role in SEES_EVERY_CASE

    def may(self, action: Action) -> bool:
        """Whether the actor may do ``action`` to a case it can see."""
        return self.is_system or (self.role is not None and action in CASE_ACTIONS[self.role])

    def may_on_server(self, action: ServerAction) -> bool:
        """Whether the actor may do a server-wide ``action``."""
        return self.is_system or (self.role is not None and action in SERVER_ACTIONS[self.role])

    def described(self) -> str:
        """The actor for an audit line: ``anna (API token)``."""
        return f"{self.name} ({self.via})" if self.via else self.name


SERVER = Actor.system("server")
"""The default actor of a service context opened outside a request."""

REFIT_WORKER = Actor.system("refit worker")

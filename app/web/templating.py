"""The Jinja2 environment: autoescaping on, the number filters, and the page globals.

Findings differ by design (a panel refit has keys an IV refit lacks), so a
missing key renders as nothing instead of failing the page
(:class:`jinja2.ChainableUndefined`).

Numbers are printed with :mod:`app.review.formatting`, so a page, a report and
the checklist's evidence write the same value the same way.
"""

from __future__ import annotations

from datetime import UTC, datetime
from pathlib import Path
import functools
from typing import Any

from jinja2 import ChainableUndefined, Environment, FileSystemLoader, pass_context, select_autoescape
from markupsafe import Markup, escape
from starlette.applications import Starlette
from starlette.templating import Jinja2Templates

from app.auth import csrf
from app.auth.actors import Actor
from app.auth.roles import Action, ServerAction, role_label
from app.estimation.inference import CONFIDENCE_LEVEL
from app.review import formatting
from app.services.datasets import format_bytes
from app.web import labels, presenters

TEMPLATES_DIR = Path(__file__).resolve().parents[2] / "templates"


def build_templates() -> Jinja2Templates:
    """Templates from ``templates/`` with this app's filters and globals."""
    environment = Environment(
        loader=FileSystemLoader(TEMPLATES_DIR),
        autoescape=select_autoescape(default=True, default_for_string=True),
        undefined=ChainableUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
        auto_reload=False,
    )
    environment.filters.update(
        number=number,
        count=formatting.count,
        pvalue=pvalue,
        interval=interval,
        confidence_set=formatting.confidence_set,
        df=degrees_of_freedom,
        when=when,
        size=format_bytes,
        words=words,
        dom_id=dom_id,
        breakable=breakable,
    )
    environment.globals.update(
        labels=labels,
        path=path,
        details=presenters.details,
        confidence_percent=round(100 * CONFIDENCE_LEVEL),
        viewer=viewer,
        may=may,
        may_on_server=may_on_server,
        csrf_field=csrf_field,
        csrf_token=csrf_token,
        role_label=role_label,
    )
    return Jinja2Templates(env=environment)


@pass_context
def path(context: Any, name: str, /, **params: Any) -> str:
    """The path of a named route (never a full URL, so pages only ever point at this server)."""
    return context["request"].app.state.paths(name, **params)


@pass_context
def viewer(context: Any) -> Actor | None:
    """The signed-in person the page is for (None on pages shown before sign-in and on session links)."""
    return getattr(context["request"].state, "actor", None)


@pass_context
def may(context: Any, action: str, case: Any = None) -> bool:
    """Whether the page's viewer may do ``action`` (an :class:`~app.auth.roles.Action` value) to the case shown.

    Changes to a closed case (``case.closed_at`` set) are not offered.
    """
    actor = viewer(context)
    if actor is None or not actor.may(Action(action)):
        return False
    return not (Action(action) is Action.EDIT and case is not None and case.closed_at is not None)


@pass_context
def may_on_server(context: Any, action: str) -> bool:
    """Whether the page's viewer may do a server-wide action (a :class:`~app.auth.roles.ServerAction` name)."""
    actor = viewer(context)
    return actor is not None and actor.may_on_server(ServerAction[action])


@pass_context
def csrf_token(context: Any) -> str:
    """The form token of the viewer's web session (empty outside a session)."""
    return getattr(context["request"].state, "csrf_token", None) or ""


@pass_context
def csrf_field(context: Any) -> Markup:
    """The hidden form field that carries the form token; the first field of every form that changes something."""
    return Markup('<input type="hidden" name="{}" value="{}">').format(csrf.FIELD, escape(csrf_token(context)))


class RoutePaths:
    """Paths of the app's named routes, remembered once built.

    ``url_path_for`` walks the whole route table on every call, and a checklist
    page builds a hundred links; the app's routes never change after start-up,
    so each (route, parameters) path is computed once.
    """

    def __init__(self, app: Starlette, *, size: int = 8192) -> None:
        @functools.lru_cache(maxsize=size)
        def build(name: str, params: tuple[tuple[str, str], ...]) -> str:
            return str(app.url_path_for(name, **dict(params)))

        self._build = build

    def __call__(self, name: str, /, **params: Any) -> str:
        return self._build(name, tuple(sorted((key, str(value)) for key, value in params.items())))


def number(value: object, digits: int = formatting.SIGNIFICANT_DIGITS) -> str:
    """A whole number (a count, degrees of freedom) with thousands separators; other numbers to ``digits``."""
    if isinstance(value, int) and not isinstance(value, bool):
        return formatting.count(value)
    return formatting.number(value, digits=digits)


def pvalue(value: object) -> str:
    """A p-value for a table cell: ``0.0146`` or ``< 0.0001``; ``n/a`` when missing."""
    return formatting.p_value(value).removeprefix("p = ").removeprefix("p ")


def interval(low: object, high: object) -> str:
    """A confidence interval ``[low, high]``; ``n/a`` unless both ends are numbers."""
    if formatting.as_number(low) is None or formatting.as_number(high) is None:
        return formatting.MISSING
    return formatting.interval(low, high)


def degrees_of_freedom(value: object) -> str:
    """Degrees of freedom: one number, or ``df1, df2`` for an F test."""
    if isinstance(value, (list, tuple)):
        return ", ".join(number(part) for part in value)
    return "" if value is None else number(value)


def when(value: datetime | None) -> str:
    """A timestamp in UTC to the minute."""
    return "" if value is None else value.astimezone(UTC).strftime("%Y-%m-%d %H:%M UTC")


def words(code: object) -> str:
    """A snake_case key in words (``hansen_j`` becomes ``hansen j``)."""
    return str(code).replace("_", " ")


def dom_id(item_id: object) -> str:
    """An item id usable in HTML ids and CSS selectors (``relevance.effective_f`` becomes ``relevance--effective_f``)."""
    return str(item_id).replace(".", "--")


def breakable(name: object) -> Markup:
    """A column name that may wrap after its underscores (``walkability_<wbr>index``) in a narrow table."""
    return Markup(str(escape(str(name))).replace("_", "_<wbr>"))

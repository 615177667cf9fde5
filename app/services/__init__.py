"""Services: the only code that touches both the store and the computation.

Routes and CLI commands call one service function each. Every function takes the
:class:`~app.services.context.ServiceContext` first and its other arguments by
keyword, and returns a view model from :mod:`app.services.views`; an HTML page
and its JSON twin render the same result. Errors meant for the user are
:mod:`app.services.errors` (``NotFound``, ``NotReady``, ``InvalidInput`` with
field-by-field problems) or the input errors of :mod:`app.errors`.

Modules: ``cases`` (triage overview, case page, revision, verified deletion),
``datasets`` (upload, profile), ``claims`` (claim entry, validation, versions),
``refits`` (queueing, computing and reading refits), ``checklists`` (checklist,
judgements, reports), ``comparison`` (two refits side by side), ``demo`` (the
demo cases), ``maintenance`` (schema upgrades), ``jobs`` (the in-process
worker), ``records`` (loading rows within a case with access checks, views,
history and audit entries). People and safety: ``users`` (accounts, roles,
passwords), ``sign_in`` (sign-in limits, web sessions, the first steward),
``tokens`` (API tokens), ``access`` (giving referees and readers a case),
``session_links`` (journal-club links), ``audit`` (reading the audit trail),
``lifecycle`` (closing, reopening, purging after the retention period),
``backup`` (consistent backup and restore of a data directory).

Every service acts for ``ctx.actor`` (:class:`app.auth.actors.Actor`): the
server itself for the command line and the worker, a signed-in person for a
request. Every row is reached through :mod:`app.services.records` with its case
id, which checks the actor's access there, once; every change to a case goes
through :func:`app.services.records.record_event` (history and audit trail) or
:func:`app.services.records.bump_revision`.
"""

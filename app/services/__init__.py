"""Services: the only code that touches both the store and the computation.

Routes and CLI commands call one service function each. Every function takes the
:class:`~app.services.context.ServiceContext` first and its other arguments by
keyword, and returns a view model from :mod:`app.services.views`; an HTML page
and its JSON twin render the same result. Errors meant for the user are
:mod:`app.services.errors` (``NotFound``, ``NotReady``, ``InvalidInput`` with
field-by-field problems) or the input errors of :mod:`app.errors`.

Modules: ``cases`` (triage overview, case page, revision, deletion),
``datasets`` (upload, profile), ``claims`` (claim entry, validation, versions),
``refits`` (queueing, computing and reading refits), ``checklists`` (checklist,
judgements, reports), ``comparison`` (two refits side by side), ``demo`` (the
demo cases), ``maintenance`` (schema upgrades), ``jobs`` (the in-process
worker), ``records`` (loading rows within a case, views, history).

Every row is reached through :mod:`app.services.records` with its case id, and
every change to a case goes through :func:`app.services.records.record_event`
or :func:`app.services.records.bump_revision`: those are the two places where an
acting user and access checks attach.
"""

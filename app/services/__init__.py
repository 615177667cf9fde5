"""Services: the only code that touches both the store and the computation.

Routes and CLI commands call one service function each. Every function takes the
:class:`~app.services.context.ServiceContext` first and its other arguments by
keyword, and returns a view model from :mod:`app.services.views`; an HTML page
and its JSON twin render the same result.

Modules: ``cases`` (triage overview, case page), ``datasets`` (upload, profile),
``claims`` (claim entry, versions), ``refits`` (running and reading refits),
``checklists`` (checklist, judgements, reports), ``comparison`` (two refits side
by side), ``demo`` (the demo cases), ``jobs`` (the in-process refit worker).
"""

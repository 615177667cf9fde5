"""The web app: server-rendered pages and their JSON twins under /api/v1.

``app.py`` holds the factory ``create_app(settings)``; ``pages.py`` the HTML
routes and ``api.py`` the JSON routes, each validating its input, calling one
service and rendering the result; ``errors.py`` turns every error into the one
JSON shape or the error page. Presentation helpers: ``templating.py`` (Jinja
environment and number filters), ``labels.py`` (words for codes),
``presenters.py`` (tables and diagnostic groups from findings), ``figures.py``
(SVG plots), ``claim_form.py`` (form fields to claim spec), ``uploads.py``
(streaming multipart uploads), ``page_cache.py`` (pages kept per case
revision), ``rendering.py`` (shared route helpers).
"""

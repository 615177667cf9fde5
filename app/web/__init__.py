"""The web app: FastAPI routes, server-rendered pages and their JSON twins under /api/v1."""

"""Persistence: SQLAlchemy models, the database connection and the content-addressed file store."""

"""Alembic revisions, one file per schema change."""

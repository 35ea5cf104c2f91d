"""Alembic migrations of the drivespan store (shipped inside the package as
``monitor.migrations``)."""

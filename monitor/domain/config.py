"""Where the store is when none is named."""

DEFAULT_URL = "sqlite:///drivespan.db"
"""Database URL used when neither ``--db`` nor :data:`ENV_URL` names one."""

ENV_URL = "DRIVESPAN_DB"
"""Environment variable that may hold the database URL."""

"""The ``drivespan`` command line: a thin skin over the use cases (:mod:`monitor.usecases`).

:mod:`~monitor.cli.common` holds the group and the shared options; importing
:mod:`~monitor.cli.commands`, :mod:`~monitor.cli.plan_demo` and
:mod:`~monitor.cli.maintenance` registers the commands.
"""

from monitor.cli import (  # noqa: F401 - registers the commands
    calibrate,
    commands,
    maintenance,
    plan_demo,
    settings,
    trace,
)
from monitor.cli.common import main

__all__ = ["main"]

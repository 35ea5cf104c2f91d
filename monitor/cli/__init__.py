"""The ``drivespan`` command line: a thin skin over the use cases (:mod:`monitor.usecases`).

:mod:`~monitor.cli.common` holds the group and the shared options; importing
:mod:`~monitor.cli.commands` and :mod:`~monitor.cli.plan_demo` registers the commands.
"""

from monitor.cli import calibrate, commands, plan_demo, trace  # noqa: F401 - registers commands
from monitor.cli.common import main

__all__ = ["main"]

"""Rebuild planning (pure: the fleet status table in, a frozen plan out).

Modules: :mod:`~monitor.planning.scheduler` (the weekly scheduler),
:mod:`~monitor.planning.types` (settings, result types, column layouts),
:mod:`~monitor.planning.report` (plain-words reasons and output tables). The public
names of all three are gathered here.
"""

from monitor.planning.scheduler import *  # noqa: F403 - the package's public names
from monitor.planning.scheduler import __all__  # noqa: F401

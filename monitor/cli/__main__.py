"""``python -m monitor.cli``: the ``drivespan`` command."""

from monitor.cli import main

main()

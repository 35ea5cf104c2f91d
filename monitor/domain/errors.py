"""The error a user sees: a request that cannot be carried out, with what to do."""

from __future__ import annotations

from collections.abc import Iterable
from typing import TYPE_CHECKING

if TYPE_CHECKING:  # the command line imports this module; it must not pull in numpy
    from monitor.domain.records import Problem


class DomainError(Exception):
    """A request that cannot be carried out, with a message for the user."""

    def __init__(self, message: str, problems: Iterable[Problem] = ()) -> None:
        super().__init__(message)
        self.problems = tuple(problems)

"""Exceptions raised by robustff.

Every problem a user can cause (a bad case file, a bad argument, bad data) raises a subclass of
:class:`RobustffError` whose message is written for a control engineer. The command line and the
text UI print that message; they never show a traceback for these errors.
"""

from __future__ import annotations

__all__ = ["RobustffError", "CaseError", "DesignError", "DataError", "StudyInterrupted"]


class RobustffError(ValueError):
    """Base class of all user-facing robustff errors."""


class CaseError(RobustffError):
    """One or more problems in a case file or a case edit.

    Parameters
    ----------
    problems : list of str
        One message per problem, each naming the file, the key path and the bad value.
    """

    def __init__(self, problems: list[str] | str) -> None:
        if isinstance(problems, str):
            problems = [problems]
        self.problems: list[str] = list(problems)
        super().__init__("\n".join(self.problems))


class DesignError(RobustffError):
    """A controller or feedforward design that cannot be built from the nominal models."""


class DataError(RobustffError):
    """Plant test data that cannot be used (missing column, no step, too short a record)."""


class StudyInterrupted(RobustffError):
    """A study was stopped by the user before all chunks finished."""

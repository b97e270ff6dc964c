"""The one exception type for problems in a user's input.

Every problem a user can fix (a study key, a CSV column, a unit) is reported as an
:class:`Problem` carrying where it is and what was expected. Loaders collect problems
and raise one :class:`InputError` holding all of them, so a user sees every mistake at
once. The command line catches :class:`InputError` once, prints it without a traceback
and exits with status 2; any other exception is a bug.
"""

from __future__ import annotations

from dataclasses import dataclass, field


@dataclass(frozen=True)
class Problem:
    """One located problem in the input.

    Parameters
    ----------
    where : str
        File and position, e.g. ``study.yaml:12 scenarios[0].locations[1].co`` or
        ``data/fire-a.csv column 'CO_1' row 14``.
    message : str
        What was found and what was expected, with a hint where one is likely.
    warning : bool
        True for a likely mistake that does not stop the run.
    """

    where: str
    message: str
    warning: bool = False

    def __str__(self) -> str:
        tag = "warning" if self.warning else "error"
        return f"{self.where}: {tag}: {self.message}"


@dataclass
class InputError(Exception):
    """Raised once with every problem found in the user's input."""

    problems: list[Problem] = field(default_factory=list)

    def __post_init__(self) -> None:
        super().__init__(str(self))

    def __str__(self) -> str:
        errors = [p for p in self.problems if not p.warning]
        head = f"{len(errors)} problem{'s' if len(errors) != 1 else ''} in the input:"
        return "\n".join([head] + [f"  {p}" for p in self.problems])


def raise_if_any(problems: list[Problem]) -> None:
    """Raise :class:`InputError` when any of ``problems`` is an error (not a warning)."""
    if any(not p.warning for p in problems):
        raise InputError(list(problems))

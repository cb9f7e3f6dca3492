"""One exception family for the whole tool; the CLI turns each into a message and exit code 2."""

from __future__ import annotations

from typing import NamedTuple

__all__ = ["TubuloError", "CaseError", "UnitError", "KnowledgeError", "Problem"]


class Problem(NamedTuple):
    """One thing wrong with an input: where (a dotted path), what was found, what was expected."""

    path: str
    message: str
    level: str = "error"  # error | warning | info

    def __str__(self) -> str:
        return f"{self.path}: {self.message}" if self.path else self.message


class TubuloError(Exception):
    """Base of every error tubulo raises on purpose."""


class CaseError(TubuloError):
    """A case file is unreadable or invalid; carries every problem found, not just the first."""

    def __init__(self, problems: list[Problem] | tuple[Problem, ...], source: str = ""):
        self.problems = tuple(problems)
        self.source = source
        head = f"{source}: " if source else ""
        super().__init__(head + "; ".join(str(p) for p in self.problems))


class UnitError(TubuloError):
    """A quantity's unit is unknown or does not fit the analyte."""


class KnowledgeError(TubuloError):
    """The knowledge files are inconsistent; the message names file, entry and field."""

"""One exception tree for every mistake in an input; each carries its file, place and problem as data.

The CLI prints an error once, one problem a line, and exits with its exit code (2).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import ClassVar


@dataclass(frozen=True)
class Problem:
    """One thing wrong with an input, at a key path, a line or another place in a file."""

    file: str
    where: str
    message: str

    def __str__(self) -> str:
        head = ": ".join(p for p in (self.file, self.where) if p)
        return f"{head}: {self.message}" if head else self.message


class LayoutError(Exception):
    """Base of every error the CLI reports without a traceback; carries one Problem or more."""

    exit_code: ClassVar[int] = 2

    def __init__(self, *problems: Problem) -> None:
        self.problems = list(problems)
        super().__init__("\n".join(str(p) for p in self.problems))

    @classmethod
    def at(cls, file: str, where: str, message: str) -> LayoutError:
        """The error for one problem at a place in a file."""
        return cls(Problem(str(file), where, message))

    def lines(self) -> list[str]:
        """The message, one problem a line."""
        return [str(p) for p in self.problems]


class SpecError(LayoutError, ValueError):
    """A design spec that cannot be used; carries every problem found."""

    def __init__(self, problems: list[Problem]) -> None:
        super().__init__(*problems)


class PlanError(LayoutError, ValueError):
    """A plan file that is missing, unreadable, edited or of another format."""


class UnreadableFile(LayoutError, ValueError):
    """A returned file that cannot be read safely; check reports it as a finding and goes on."""


class OutputExists(LayoutError, FileExistsError):
    """An output would overwrite an existing file and --force was not given."""

    def __init__(self, path: str) -> None:
        self.path = path
        super().__init__(
            Problem(
                str(path),
                "",
                "already exists; nothing was written. Use --force to replace it, or choose another output",
            )
        )


class UsageError(LayoutError, ValueError):
    """Command-line arguments that cannot be used."""

    def __init__(self, message: str | Problem, *more: Problem) -> None:
        first = message if isinstance(message, Problem) else Problem("", "", message)
        super().__init__(first, *more)

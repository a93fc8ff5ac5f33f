"""One exception tree for every mistake a user can make; the CLI prints it once."""

from __future__ import annotations

from dataclasses import dataclass
from typing import ClassVar


class LayoutError(Exception):
    """Base of every error the CLI reports without a traceback."""

    exit_code: ClassVar[int] = 2

    def lines(self) -> list[str]:
        """The message, one problem a line."""
        return [str(self)]


@dataclass(frozen=True)
class Problem:
    """One thing wrong with an input file, at a key path or a line."""

    file: str
    where: str
    message: str

    def __str__(self) -> str:
        return f"{self.file}: {self.where}: {self.message}" if self.where else f"{self.file}: {self.message}"


class SpecError(LayoutError, ValueError):
    """A design spec that cannot be used; carries every problem found."""

    def __init__(self, problems: list[Problem]) -> None:
        self.problems = problems
        super().__init__("\n".join(str(p) for p in problems))

    def lines(self) -> list[str]:
        return [str(p) for p in self.problems]


class PlanError(LayoutError, ValueError):
    """A plan file that is missing, unreadable, edited or of another format."""


class OutputExists(LayoutError, FileExistsError):
    """An output would overwrite an existing file and --force was not given."""

    def __init__(self, path: str) -> None:
        self.path = path
        super().__init__(
            f"{path}: already exists; nothing was written. Use --force to replace it, or choose another output"
        )


class UsageError(LayoutError, ValueError):
    """Command-line arguments that cannot be used."""

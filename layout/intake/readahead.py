"""Returned files read one ahead: a workbook's parse runs in a thread (calamine releases the GIL) while the
plan loads, or while the rows of the file before it are checked.

Each file's safety checks (readers.open_returned) run in the caller's thread before its parse starts, so
nothing is parsed that they would refuse. One parse runs at a time, so at most two files' cells are held.
"""

from __future__ import annotations

import threading
from collections.abc import Callable, Sequence
from pathlib import Path

from layout.intake.readers import ReturnedTable, open_returned
from layout.intake.safety import DEFAULT_LIMITS, Limits

IN_THREAD = (".xlsx", ".xlsm", ".ods")  # a CSV is parsed in Python, which holds the GIL: no gain from a thread


class _Read:
    """One file's read, started now; its table, or what the read raised, given by take()."""

    def __init__(self, path: str, limits: Limits) -> None:
        self._table: ReturnedTable | None = None
        self._error: BaseException | None = None
        self._thread: threading.Thread | None = None
        self._parse: Callable[[], ReturnedTable] | None = None
        try:
            parse = open_returned(path, limits)
        except Exception as exc:  # told when the file is taken, in its place among the files
            self._error = exc
            return
        if Path(path).suffix.lower() in IN_THREAD:
            # a daemon thread: a read left behind (the plan would not load) never holds up the exit
            self._thread = threading.Thread(target=self._run, args=(parse,), daemon=True, name=f"read {path}")
            self._thread.start()
        else:
            self._parse = parse

    def _run(self, parse: Callable[[], ReturnedTable]) -> None:
        try:
            self._table = parse()
        except BaseException as exc:  # raised again in the caller's thread by take()
            self._error = exc

    def take(self) -> ReturnedTable:
        if self._thread is not None:
            self._thread.join()
        elif self._parse is not None:
            self._run(self._parse)
        if self._error is not None:
            raise self._error
        assert self._table is not None
        return self._table


class ReadAhead:
    """The returned files in the order given; taking one starts the read of the next."""

    def __init__(self, paths: Sequence[str | Path], limits: Limits = DEFAULT_LIMITS) -> None:
        self.paths = [str(p) for p in paths]
        self._limits = limits
        self._at = 0  # the place of the read in flight
        self._read: _Read | None = _Read(self.paths[0], limits) if self.paths else None

    def take(self, place: int) -> ReturnedTable:
        """The table of the file at this place in paths (UnreadableFile or OSError as read_returned raises).

        Places are taken in rising order; a file passed over (a copy of one already read) is not kept.
        """
        while self._at < place:
            self._pass_over()
        if self._at != place or self._read is None:
            raise ValueError(f"file {place} of {len(self.paths)} was taken already or is not there")
        read = self._read
        try:
            return read.take()
        finally:
            self._start_next()

    def _pass_over(self) -> None:
        """Wait for the parse of a file that is not wanted (one parse at a time) and keep nothing of it."""
        if self._read is not None:
            try:
                self._read.take()
            except Exception:  # the file is not read, so what went wrong in reading it is nobody's finding
                pass
        self._start_next()

    def _start_next(self) -> None:
        self._at += 1
        self._read = _Read(self.paths[self._at], self._limits) if self._at < len(self.paths) else None

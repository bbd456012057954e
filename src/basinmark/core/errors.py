"""Exceptions of basinmark's own, each carrying where the problem is and a plain sentence."""

from __future__ import annotations

from pathlib import Path


class BasinmarkError(Exception):
    """Base class of every error basinmark raises on purpose."""


class TrajectoryFileError(BasinmarkError):
    """A trajectory file could not be read.

    ``path`` and ``line`` (1-based, or None when the problem is the whole file)
    say where; ``problem`` says what, in a plain sentence.
    """

    def __init__(self, path: str | Path, problem: str, line: int | None = None):
        self.path = Path(path)
        self.line = line
        self.problem = problem
        where = f"{self.path}" if line is None else f"{self.path}, line {line}"
        super().__init__(f"{where}: {problem}")


class PartialReadWarning(UserWarning):
    """A file was read only in part (for example a truncated last frame)."""


class SetError(BasinmarkError):
    """A set (folder of runs) or its manifest is unusable."""

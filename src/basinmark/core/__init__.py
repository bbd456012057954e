"""Headless core of basinmark: pure Python + numpy/pandas/ase.  Never imports Qt."""

from basinmark.core.errors import BasinmarkError, TrajectoryFileError
from basinmark.core.model import SourceFile, Trajectory, TrajectorySet

__all__ = ["BasinmarkError", "TrajectoryFileError", "SourceFile", "Trajectory", "TrajectorySet"]

"""One family of errors and warnings for every public function of tdakit.

Every error names the parameter at fault (``.parameter``), says what was
required and what was received, so callers can both read and catch it.
The classes also subclass the matching built-in exception, so existing
``except ValueError`` / ``except TypeError`` code keeps working.
"""

from __future__ import annotations

__all__ = [
    "TdakitError",
    "InvalidParameterError",
    "BlindBandWarning",
    "InvalidDataError",
    "DataFileNotFoundError",
    "MemoryBudgetError",
    "TdakitWarning",
    "DuplicatePointsWarning",
    "FewWitnessesWarning",
    "OutputWriteError",
    "SuspiciousDataWarning",
]


class TdakitError(Exception):
    """Base class of every error raised by tdakit on purpose.

    Parameters
    ----------
    message : str
        The full, human-readable message.
    parameter : str, optional
        Name of the parameter (or input) that is at fault.
    """

    def __init__(self, message: str, *, parameter: str | None = None) -> None:
        super().__init__(message)
        self.parameter = parameter


class InvalidParameterError(TdakitError, ValueError, TypeError):
    """An option has the wrong type or a value outside its allowed range."""


class InvalidDataError(TdakitError, ValueError):
    """Input data (points, distances, diagrams, files' content) cannot be used as given."""


class DataFileNotFoundError(TdakitError, FileNotFoundError):
    """A file named as input does not exist."""


class MemoryBudgetError(TdakitError, MemoryError):
    """A computation was refused before it started because it would not fit the memory budget."""


class OutputWriteError(TdakitError, OSError):
    """An output file could not be written (full disk, no permission); the message names the file."""


class TdakitWarning(UserWarning):
    """Base class of tdakit's warnings."""


class DuplicatePointsWarning(TdakitWarning):
    """The cloud holds repeated points (accepted; they add nothing to the topology)."""


class FewWitnessesWarning(TdakitWarning):
    """A witness complex has fewer than ten witnesses per landmark."""


class BlindBandWarning(TdakitWarning):
    """A band's noise strip is taller than any bar the diagrams can hold: it cannot see anything there."""


class SuspiciousDataWarning(TdakitWarning):
    """The data look unlike what the options assume (radians read as degrees, an identifier column, mixed scales)."""

"""The project's own exception types. Every error a user can cause is one of these."""

from __future__ import annotations


class AcqplanError(Exception):
    """Base class of every error acqplan raises on purpose."""


class InputError(AcqplanError, ValueError):
    """A file or a value given by the user cannot be used.

    ``file``, ``line`` and ``field`` locate the problem; ``str(err)`` is one line that
    names all of them that are known, ready for stderr or a message box.
    """

    def __init__(self, message: str, *, file: str | None = None, line: int | None = None,
                 field: str | None = None):
        self.message = message
        self.file = file
        self.line = line
        self.field = field
        super().__init__(self.__str__())

    def __str__(self) -> str:
        where = []
        if self.file:
            where.append(str(self.file))
        if self.line is not None:
            where.append(f"line {self.line}")
        if self.field:
            where.append(f"field '{self.field}'")
        prefix = ", ".join(where)
        return f"{prefix}: {self.message}" if prefix else self.message


class OrbitFormatError(InputError):
    """An orbit file (YUMA, SEM, TLE, mapping) is malformed."""


class RecordFormatError(InputError):
    """A receiver record (RINEX observation file, NMEA log) is malformed."""


class ScenarioError(InputError):
    """A scenario file or scenario value is invalid."""


class ComputationError(AcqplanError):
    """A computation could not produce a result (e.g. nothing visible)."""


class Cancelled(AcqplanError):
    """A long computation was stopped by its cancel callback (not an error to report)."""

"""Typed errors and warnings of the icing library.

Every error a user can cause by giving bad input derives from :class:`IcingError`, so the command line
can print it as one clear line. Format errors carry the file, line and column where the problem was found.
"""

from __future__ import annotations

__all__ = [
    "IcingError",
    "IcingWarning",
    "LocatedError",
    "SoundingFormatError",
    "ProfileQualityError",
    "RouteFormatError",
    "UnitError",
    "ConfigError",
]


class IcingError(Exception):
    """Base class of every error raised on purpose by this library."""


class IcingWarning(UserWarning):
    """Warning about data the library used but does not fully trust."""


class LocatedError(IcingError):
    """An error tied to a place in an input file.

    Parameters
    ----------
    reason : str
        What is wrong, in words a user can act on.
    file, line, column : optional
        Where it is: the path, the 1-based line number and the column (a 1-based character position or
        a column name in a table).
    """

    def __init__(self, reason: str, file=None, line: int | None = None, column=None):
        self.reason = reason
        self.file = None if file is None else str(file)
        self.line = line
        self.column = column
        super().__init__(self._message())

    def _message(self) -> str:
        where = []
        if self.file:
            where.append(self.file)
        if self.line is not None:
            where.append(f"line {self.line}")
        if self.column is not None:
            where.append(f"column {self.column}")
        return (", ".join(where) + ": " if where else "") + self.reason

    def __reduce__(self):  # keep the fields through pickling (dask workers)
        return (type(self), (self.reason, self.file, self.line, self.column))


class SoundingFormatError(LocatedError, ValueError):
    """A sounding file cannot be read: wrong layout, bad number, missing column, unknown unit."""


class ProfileQualityError(LocatedError, ValueError):
    """A profile was read but is not usable: too few levels, values out of physical range."""


class RouteFormatError(LocatedError, ValueError):
    """A route file or route argument cannot be understood."""


class UnitError(IcingError, ValueError):
    """A quantity came with a unit of the wrong dimensionality or with none where one is needed."""


class ConfigError(LocatedError, ValueError):
    """An aircraft or configuration file (TOML) is invalid."""

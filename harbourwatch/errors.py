"""One exception hierarchy for every error a user can cause.

``HarbourwatchError`` is the base; the command line catches it, prints one
line and exits with status 2 for :class:`InputError` (bad input) and
:class:`ParameterError` (a library argument out of range, named so the
command line can point at its flag), and 1 for anything else
(:class:`ComputationError`, :class:`OutputError`).
"""

from __future__ import annotations

from os import PathLike

__all__ = ["HarbourwatchError", "InputError", "ParameterError", "ComputationError",
           "OutputError"]


class HarbourwatchError(Exception):
    """Base class of all errors harbourwatch raises on purpose."""


class InputError(HarbourwatchError, ValueError):
    """Bad user input, located as precisely as possible.

    Parameters
    ----------
    message
        What was expected and what was found (and the valid choices, where
        there is a short list of them).
    file
        The input file, as the user named it.
    line
        1-based line number in that file, where one applies.
    field
        Column, key or property name, where one applies.

    Examples
    --------
    >>> str(InputError("expected a number, found 'abc'", file="a.csv", line=3, field="lat"))
    "a.csv, line 3, field 'lat': expected a number, found 'abc'"
    """

    def __init__(
        self,
        message: str,
        *,
        file: str | PathLike[str] | None = None,
        line: int | None = None,
        field: str | None = None,
    ) -> None:
        self.message = message
        self.file = None if file is None else str(file)
        self.line = line
        self.field = field
        super().__init__(self.__str__())

    def __str__(self) -> str:
        where = []
        if self.file is not None:
            where.append(self.file)
        if self.line is not None:
            where.append(f"line {self.line}")
        if self.field is not None:
            where.append(f"field '{self.field}'")
        return (", ".join(where) + ": " if where else "") + self.message


class ParameterError(HarbourwatchError, ValueError):
    """A library function was called with an argument out of its range.

    ``parameter`` names the argument (the command line maps it to its flag).

    Examples
    --------
    >>> str(ParameterError("must be a positive number, got -1", parameter="cutoff_m"))
    "parameter 'cutoff_m': must be a positive number, got -1"
    """

    def __init__(self, message: str, *, parameter: str) -> None:
        self.message = message
        self.parameter = parameter
        super().__init__(f"parameter {parameter!r}: {message}")


class ComputationError(HarbourwatchError, RuntimeError):
    """A numerical step failed on valid input (a solver that did not converge)."""


class OutputError(HarbourwatchError, OSError):
    """An output could not be written (a full disk, a folder gone read-only).

    The message says why and which file: ``"no space left on /data while
    writing /data/out/as_seen.csv"``. It is also an :class:`OSError`.

    Examples
    --------
    >>> str(OutputError("no space left on /data", path="/data/out/as_seen.csv"))
    'no space left on /data while writing /data/out/as_seen.csv'
    """

    def __init__(self, reason: str, *, path: str | PathLike[str]) -> None:
        self.reason = reason
        self.path = str(path)
        super().__init__(f"{reason} while writing {self.path}")

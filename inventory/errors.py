"""The project's error hierarchy, shared by every layer.

Every error a user can cause is an :class:`InputError` (exit code 2) that names
where the problem is: file, line and field when known.  The command line maps
these to one line per problem on stderr and never prints a traceback for them.
"""

from __future__ import annotations

from collections.abc import Iterable, Iterator
from contextlib import contextmanager

__all__ = ["DrawerfitError", "InputError", "InputErrors", "ErrorList", "StoreError",
           "StockShortage"]


class DrawerfitError(Exception):
    """Base of every error the program raises on purpose."""

    exit_code = 1


class InputError(DrawerfitError, ValueError):
    """Bad input: a malformed value, an unknown key, an impossible request.

    Parameters
    ----------
    message : str
        What is wrong, in plain words.
    file, line, field : optional
        Where it is.  ``line`` counts from 1 as an editor shows it.
    """

    exit_code = 2

    def __init__(
        self,
        message: str,
        *,
        file: str | None = None,
        line: int | None = None,
        field: str | None = None,
    ) -> None:
        self.message = message
        self.file = file
        self.line = line
        self.field = field
        super().__init__(str(self))

    def located(self, *, file: str | None = None, line: int | None = None,
                field: str | None = None) -> "InputError":
        """A copy with the missing parts of the location filled in."""
        return InputError(
            self.message,
            file=self.file or file,
            line=self.line if self.line is not None else line,
            field=self.field or field,
        )

    def __str__(self) -> str:
        where = ""
        if self.file:
            where = self.file
            if self.line is not None:
                where += f":{self.line}"
            where += ": "
        elif self.line is not None:
            where = f"line {self.line}: "
        if self.field:
            where += f"{self.field}: "
        return where + self.message


class InputErrors(InputError):
    """Several input problems found together (e.g. every bad row of a CSV file)."""

    def __init__(self, errors: Iterable[InputError]) -> None:
        self.errors = list(errors)
        DrawerfitError.__init__(self, "\n".join(str(e) for e in self.errors))
        self.message = str(self)
        self.file = self.line = self.field = None

    def __str__(self) -> str:
        return "\n".join(str(e) for e in self.errors)


class ErrorList:
    """Several input problems gathered before one is raised, so that every bad key of a
    file is reported at once::

        problems = ErrorList()
        with problems.collect():
            check_one_key()          # an InputError is noted and the next check runs
        problems.raise_any()         # one error, or InputErrors sorted by line
    """

    def __init__(self) -> None:
        self.errors: list[InputError] = []

    @contextmanager
    def collect(self) -> Iterator[None]:
        try:
            yield
        except InputErrors as e:
            self.errors.extend(e.errors)
        except InputError as e:
            self.errors.append(e)

    def combined(self) -> InputError:
        """The one error, or every one of several (sorted by line)."""
        errors = sorted(self.errors, key=lambda e: (e.line is None, e.line or 0))
        return errors[0] if len(errors) == 1 else InputErrors(errors)

    def raise_any(self) -> None:
        if self.errors:
            raise self.combined()


class StoreError(DrawerfitError):
    """The store cannot be used as asked (damaged, too new, unreachable).

    A damaged or foreign database is the user's input too, so it exits with 2.
    """

    exit_code = 2


class StockShortage(InputError):
    """A stock movement would take a quantity below zero; nothing was changed."""

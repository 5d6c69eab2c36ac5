"""The exception family of stockbias.

Every error the user can cause is a :class:`StockbiasError`.  It carries the
place (file, line, column) and the offending text, so the command line can
print exactly one line that names all four.  Only the CLI turns an exception
into an exit code:

* :class:`InputError` and subclasses: bad input, exit code 2;
* :class:`UnmetError`: a valid job that cannot be met, exit code 1.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

__all__ = [
    "InputError",
    "JobError",
    "ModelCardError",
    "NotationError",
    "Problem",
    "StockFileError",
    "StockbiasError",
    "UnmetError",
    "printable",
]


def printable(text: str) -> str:
    """``text`` on one line: line breaks, tabs and other unprintable characters escaped
    (``\\n``, ``\\t``, ``\\x1b``, ``\\u2028``) so that a message stays one line and
    cannot move the terminal's cursor."""
    if text.isprintable():
        return text
    return "".join(c if c.isprintable() else repr(c)[1:-1] for c in text)


class StockbiasError(Exception):
    """Base class of every error stockbias raises on purpose.

    Parameters
    ----------
    message : str
        What is wrong, in the user's terms.
    file : str or Path, optional
        The file the problem is in.
    line : int, optional
        Physical line number in that file (1-based).
    column : str, optional
        Column, key or field name, or the command-line option (``"--netlist"``).
    text : str, optional
        The offending text exactly as found.
    """

    exit_code = 2
    #: What the place inside the file is called in messages ("column" in a CSV).
    field_label = "column"

    def __init__(
        self,
        message: str,
        *,
        file: str | Path | None = None,
        line: int | None = None,
        column: str | None = None,
        text: str | None = None,
    ) -> None:
        super().__init__(message)
        self.message = message
        self.file = str(file) if file is not None else None
        self.line = line
        self.column = column
        self.text = text

    def located(
        self,
        *,
        file: str | Path | None = None,
        line: int | None = None,
        column: str | None = None,
    ) -> StockbiasError:
        """Return a copy of this error with the place filled in where unknown."""
        return type(self)(
            self.message,
            file=self.file if self.file is not None else file,
            line=self.line if self.line is not None else line,
            column=self.column if self.column is not None else column,
            text=self.text,
        )

    def one_line(self) -> str:
        """The error as one line: ``file:line: column 'col': message (text 'x')``.

        A ``column`` that starts with ``-`` is a command-line option and reads
        ``option '--netlist': message``.
        """
        place = ""
        if self.file is not None:
            place = self.file
            if self.line is not None:
                place += f":{self.line}"
            place += ": "
        elif self.line is not None:
            place = f"line {self.line}: "
        col = ""
        if self.column is not None and self.column.startswith("-"):
            col = f"option '{self.column}': "  # a command-line option, not a place in a file
        elif self.column is not None:
            col = f"{self.field_label} '{self.column}': "
        txt = f" (text '{self.text}')" if self.text is not None else ""
        return printable(f"{place}{col}{self.message}{txt}")

    def __str__(self) -> str:
        return self.one_line()


class InputError(StockbiasError, ValueError):
    """Bad input: a malformed file, option or value.  Exit code 2."""


class NotationError(InputError):
    """Text that is not a valid quantity in engineering notation."""


class ModelCardError(InputError):
    """A SPICE model library that is unreadable or holds a malformed ``.model`` card."""

    field_label = "parameter"


class JobError(InputError):
    """A job file that is malformed or contradicts itself."""

    field_label = "key"


@dataclass(frozen=True)
class Problem:
    """One problem found in a stock file.

    Attributes
    ----------
    line : int
        Physical line number (1-based); 0 for the file as a whole.
    column : str
        Column name ('' for the whole row or file).
    text : str
        The offending text exactly as found.
    message : str
        What is wrong.
    """

    line: int
    column: str
    text: str
    message: str

    def to_dict(self) -> dict[str, object]:
        return {"line": self.line, "column": self.column, "text": self.text,
                "message": self.message}

    def one_line(self, file: str) -> str:
        col = f" column '{self.column}':" if self.column else ""
        txt = f" (text '{self.text}')" if self.text != "" else ""
        return printable(f"{file}:{self.line}:{col} {self.message}{txt}")


class StockFileError(InputError):
    """A stock file with one or more problems; all of them are in :attr:`problems`."""

    def __init__(self, file: str | Path, problems: list[Problem]) -> None:
        first = problems[0]
        super().__init__(first.message, file=file, line=first.line,
                         column=first.column or None, text=first.text)
        self.problems = list(problems)

    def lines(self) -> list[str]:
        """Every problem as its own one-line message."""
        return [p.one_line(self.file or "") for p in self.problems]


class UnmetError(StockbiasError):
    """A valid job that cannot be met (no feasible design, a failing check).  Exit 1."""

    exit_code = 1

"""The one exception type that bad input raises.

Every problem a user can fix in their files or options is an :class:`InputError`. It carries the file,
line and column where they apply, so the command line can print one precise line and exit with 2.
"""
from __future__ import annotations


class InputError(ValueError):
    """A problem with user input: a file, a value, an option.

    ``str(err)`` reads ``file, line L, column C: message`` with the parts that are known; a cell
    of a spreadsheet reads ``book.xlsx#Sheet, row R, column B`` (``unit="row"``, column letter).
    """

    def __init__(self, message: str, file: str | None = None, line: int | None = None,
                 column: int | str | None = None, *, unit: str = "line"):
        self.message = message
        self.file = None if file is None else str(file)
        self.line = line
        self.column = column
        self.unit = unit
        super().__init__(str(self))

    def __str__(self) -> str:
        where = []
        if self.file is not None:
            where.append(self.file)
        if self.line is not None:
            where.append(f"{self.unit} {self.line}")
        if self.column is not None:
            col = self.column
            where.append(f"column {col}" if isinstance(col, int) or self.unit == "row"
                         else f"column '{col}'")
        prefix = ", ".join(where)
        return f"{prefix}: {self.message}" if prefix else self.message


class ImpossibleEvidenceError(InputError):
    """The readouts cannot be explained by any status vector under the assay model."""

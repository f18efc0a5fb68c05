"""The one exception type that bad input raises.

Every problem a user can fix in their files or options is an :class:`InputError`. It carries the file,
line and column where they apply, so the command line can print one precise line and exit with 2.
"""
from __future__ import annotations

import re

_MARKED = re.compile(r"`([A-Za-z_][^`\n]*)`")


class InputError(ValueError):
    """A problem with user input: a file, a value, an option.

    ``str(err)`` reads ``file, line L, column C: message`` with the parts that are known; a cell
    of a spreadsheet reads ``book.xlsx#Sheet, row R, column B`` (``unit="row"``, column letter).
    A Python parameter named in the message may be marked with backticks (```pools` must be ...``):
    the marks are not shown, and the parameter is listed in ``parameters`` so that a front end can
    show its own spelling (see :meth:`renamed`). ``parameters`` may also be given; then the first
    whole-word mention of each is the parameter.
    """

    def __init__(self, message: str, file: str | None = None, line: int | None = None,
                 column: int | str | None = None, *, unit: str = "line",
                 parameters: tuple[str, ...] = ()):
        marked = tuple(_MARKED.findall(message))
        self.template = message if marked else None
        self.message = _MARKED.sub(r"\1", message)
        self.file = None if file is None else str(file)
        self.line = line
        self.column = column
        self.unit = unit
        self.parameters = tuple(dict.fromkeys(marked + tuple(parameters)))
        super().__init__(str(self))

    def renamed(self, names) -> "InputError":
        """The same error with each named parameter spelt as ``names(parameter)`` says.

        The command line passes a function from parameter to flag (``damping`` -> ``--damping``).
        Marked mentions are replaced; a parameter listed without a mark is replaced at its first
        mention as a whole word.
        """
        message = self.message
        if self.template is not None:
            message = _MARKED.sub(lambda m: names(m.group(1)), self.template)
        for p in self.parameters:
            if self.template is not None and f"`{p}`" in self.template:
                continue
            message = re.sub(rf"(?<![\w.-]){re.escape(p)}(?![\w])", lambda _: names(p), message,
                             count=1)
        err = InputError(message, self.file, self.line, self.column, unit=self.unit)
        err.__class__ = type(self)  # the same kind of error (subclasses add no state of their own)
        err.__dict__.update({k: v for k, v in self.__dict__.items()
                             if k not in ("message", "parameters", "template")})
        return err

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

"""The one exception type that bad input raises.

Every problem a user can fix in their files or options is an :class:`InputError`. It carries the file,
line and column where they apply, so the command line can print one precise line and exit with 2.
"""
from __future__ import annotations

import re


class InputError(ValueError):
    """A problem with user input: a file, a value, an option.

    ``str(err)`` reads ``file:line:column: message`` with the parts that are known.
    ``parameters`` lists the Python parameters the message names (its first mention of each is the
    parameter itself), so a front end can show its own spelling: see :meth:`renamed`.
    """

    def __init__(self, message: str, file: str | None = None, line: int | None = None,
                 column: int | str | None = None, *, parameters: tuple[str, ...] = ()):
        self.message = message
        self.file = None if file is None else str(file)
        self.line = line
        self.column = column
        self.parameters = tuple(parameters)
        super().__init__(str(self))

    def renamed(self, names) -> "InputError":
        """The same error with each named parameter spelt as ``names(parameter)`` says.

        The command line passes a function from parameter to flag (``damping`` -> ``--damping``);
        only the first mention of each parameter, as a whole word, is replaced.
        """
        message = self.message
        for p in self.parameters:
            message = re.sub(rf"(?<![\w.-]){re.escape(p)}(?![\w])", lambda _: names(p), message,
                             count=1)
        err = type(self)(message, self.file, self.line, self.column)
        err.__dict__.update({k: v for k, v in self.__dict__.items()
                             if k not in ("message", "parameters")})
        return err

    def __str__(self) -> str:
        where = []
        if self.file is not None:
            where.append(self.file)
        if self.line is not None:
            where.append(f"line {self.line}")
        if self.column is not None:
            col = self.column
            where.append(f"column {col}" if isinstance(col, int) else f"column '{col}'")
        prefix = ", ".join(where)
        return f"{prefix}: {self.message}" if prefix else self.message


class ImpossibleEvidenceError(InputError):
    """The readouts cannot be explained by any status vector under the assay model."""

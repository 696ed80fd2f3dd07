"""The one exception type that carries a user-facing message about bad input."""

from __future__ import annotations


class InputError(Exception):
    """Bad input: a message naming the file, the row/line and the column/key.

    The CLI prints ``str(err)`` and exits with code 2; no traceback is shown.
    """

    def __init__(self, message: str, *, file: str | None = None, row: int | None = None,
                 line: int | None = None, column: str | None = None, key: str | None = None):
        self.message = message
        self.file = file
        self.row = row
        self.line = line
        self.column = column
        self.key = key
        super().__init__(self.__str__())

    def __str__(self) -> str:
        where = []
        if self.file:
            where.append(str(self.file))
        if self.line is not None:
            where.append(f"line {self.line}")
        if self.row is not None:
            where.append(f"row {self.row}")
        if self.column:
            where.append(f"column '{self.column}'")
        if self.key:
            where.append(f"key '{self.key}'")
        prefix = ", ".join(where)
        return f"{prefix}: {self.message}" if prefix else self.message

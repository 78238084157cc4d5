"""Errors that reach the user as a clear message and exit code 2."""

from __future__ import annotations

from pathlib import Path


class InputError(Exception):
    """Bad input from the user: a case file, a suite file, an option.

    The message names the file (when there is one), the field and what is
    wrong.  The command line turns it into exit code 2 before anything is
    computed or cached.
    """

    def __init__(self, message: str, path: str | Path | None = None, field: str | None = None):
        self.path = None if path is None else str(path)
        self.field = field
        self.detail = message
        where = []
        if self.path:
            where.append(self.path)
        if field:
            where.append(f"field '{field}'")
        prefix = ": ".join(where)
        super().__init__(f"{prefix}: {message}" if prefix else message)


class Refused(InputError):
    """Code declined a problem beyond a limit it states (a register too wide, a determinant space
    too large).  ``str()`` is the one-line reason; the runner records it as status ``error`` with
    that reason and no traceback (the refusal is the method's answer, not a crash)."""

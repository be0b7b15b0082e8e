"""The package's exceptions: the library's errors with the same message and location."""

from __future__ import annotations


class FdtempError(Exception):
    """Any error of fdtemp; ``str(e)`` is the line the command line prints after ``error:``."""

    def __init__(self, text: str, message: str, file: str | None = None,
                 line: int | None = None, column: int | None = None):
        super().__init__(text)
        #: What was wrong, without the location.
        self.message = message
        #: The file (or ``<DataFrame>``, ``<arrays>``) the problem is in, if any.
        self.file = file
        #: 1-based line, if the problem sits on one line.
        self.line = line
        #: 1-based column (field), if the problem sits in one field.
        self.column = column

    @property
    def location(self) -> str | None:
        """``file:line:col`` as the command line writes it (None when there is no file)."""
        if self.file is None:
            return None
        parts = [self.file]
        if self.line is not None:
            parts.append(str(self.line))
            if self.column is not None:
                parts.append(str(self.column))
        return ":".join(parts)


class InputError(FdtempError, ValueError):
    """The content of the input is not what was expected (with its location)."""


class SettingError(FdtempError, ValueError):
    """An option is out of its allowed range."""


class AnalysisError(FdtempError, ValueError):
    """The data are valid but the analysis asked for is not possible on them."""


class FileError(FdtempError, OSError):
    """A file could not be read or written."""


_KINDS = {"input": InputError, "setting": SettingError, "analysis": AnalysisError,
          "io": FileError}


def call(fn, *args):
    """Calls a native function, raising its errors as the classes above."""
    from . import _native

    try:
        return fn(*args)
    except _native.NativeError as e:
        kind, text, file, line, column, message = e.args
        raise _KINDS[kind](text, message, file, line, column) from None

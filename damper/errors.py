"""Error types shared by every layer.

A :class:`CaseError` is a problem with the user's input: the command line turns
it into one line naming the file, the key path and the value, and exit code 2.
"""

from __future__ import annotations


class DamperError(Exception):
    """Base class of every error damper reports to the user without a traceback."""


class CaseError(DamperError):
    """An invalid case file.

    Parameters
    ----------
    message : str
        What is wrong, in plain words.
    path : str, optional
        Key path inside the case, e.g. ``conditions[2].airspeed``.
    value : object, optional
        The offending value as the user wrote it.
    file : str, optional
        The case file.
    line : int, optional
        1-based line of the value in the file, when known.
    """

    _UNSET = object()

    def __init__(self, message, path="", value=_UNSET, file="", line=None):
        self.message = message
        self.path = path
        self.value = value
        self.file = file
        self.line = line
        super().__init__(self.format())

    def with_location(self, file=None, line=None):
        """Return a copy that also names the file (and line)."""
        return CaseError(
            self.message,
            self.path,
            self.value,
            file if file is not None else self.file,
            line if line is not None else self.line,
        )

    def format(self) -> str:
        """The one-line message shown to the user."""
        where = self.file or "<case>"
        if self.line:
            where += f":{self.line}"
        parts = [where]
        if self.path:
            parts.append(self.path)
        head = ": ".join(parts)
        if self.value is not CaseError._UNSET:
            head += f" = {_show(self.value)}"
        return f"{head}: {self.message}"


def _show(value) -> str:
    text = repr(value)
    if len(text) > 60:
        text = text[:57] + "..."
    return text


class RunDirectoryError(DamperError):
    """An output directory that would overwrite an earlier run."""

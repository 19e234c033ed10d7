"""Error types shared by every layer.

A :class:`CaseError` is a problem with the user's input: the command line turns
it into one line naming the file, the key path and the value, and exit code 2.
"""

from __future__ import annotations

import re

_PLAIN_WORD = re.compile(r"^[A-Za-z_][A-Za-z0-9_ ./*-]*$")


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
    """The value as the user would have written it in YAML, cut to one short line."""
    text = _yaml_like(value, 60)
    if len(text) > 60:
        text = text[:57] + "..."
    return text


class Raw(str):
    """A value shown to the user exactly as written in the file (no quotes)."""


def _yaml_like(value, budget: int, inner: bool = False) -> str:
    """Flow-style YAML-ish text of `value`; stops early once `budget` characters are used.

    Bounded on purpose: a value can be a huge or alias-shared nested structure,
    and ``repr`` of it could take very long or recurse too deeply.
    """
    if isinstance(value, Raw):
        return str(value)[: budget + 3]
    if value is None:
        return "null"
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        if value != value:
            return ".nan"
        if value in (float("inf"), float("-inf")):
            return ".inf" if value > 0 else "-.inf"
        return repr(value)
    if isinstance(value, int):
        if abs(value) >= 10**60:
            return "a number with more than 60 digits"
        return repr(value)
    if isinstance(value, str):
        if inner and _PLAIN_WORD.match(value):
            return value[: budget + 3]
        return repr(value[: budget + 3])
    if isinstance(value, (list, tuple, dict)):
        is_map = isinstance(value, dict)
        items = value.items() if is_map else value
        parts, used = [], 2
        for item in items:
            if used > budget:
                parts.append("...")
                break
            if is_map:
                piece = f"{_yaml_like(item[0], budget - used, True)}: {_yaml_like(item[1], budget - used, True)}"
            else:
                piece = _yaml_like(item, budget - used, True)
            parts.append(piece)
            used += len(piece) + 2
        inner = ", ".join(parts)
        return "{" + inner + "}" if is_map else "[" + inner + "]"
    return kind(value)


def kind(value) -> str:
    """What a parsed YAML value is, in the user's words (``a list``, ``text`` ...)."""
    if value is None:
        return "nothing"
    if isinstance(value, bool):
        return "a yes/no value"
    if isinstance(value, dict):
        return "a section"
    if isinstance(value, (list, tuple)):
        return "a list"
    if isinstance(value, str):
        return "text"
    if isinstance(value, (int, float)):
        return "a number"
    import datetime

    if isinstance(value, (datetime.date, datetime.datetime)):
        return "a date"
    if isinstance(value, bytes):
        return "binary data"
    if isinstance(value, (set, frozenset)):
        return "a set"
    return "a " + type(value).__name__


class RunDirectoryError(DamperError):
    """An output directory that holds another run, a user's files, or a run in progress."""


class OutputError(DamperError):
    """An OS error on the output path (disk full, read-only, permission ...): the user's to fix, exit 2."""


class Interrupted(BaseException):
    """SIGTERM arrived (SIGINT raises KeyboardInterrupt). Not an Exception, so no handler swallows it.

    Attributes
    ----------
    signal_number : int
    """

    def __init__(self, signal_number):
        super().__init__(signal_number)
        self.signal_number = signal_number

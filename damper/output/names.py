"""File names of plots: condition names as safe, unique slugs."""

from __future__ import annotations

import re

_WINDOWS_RESERVED = {"con", "prn", "aux", "nul", *(f"com{k}" for k in range(1, 10)), *(f"lpt{k}" for k in range(1, 10))}


def safe_name(name: str) -> str:
    """A filesystem-safe slug of a condition name (lower case, ``[a-z0-9._-]``)."""
    s = re.sub(r"[^A-Za-z0-9._-]+", "-", str(name)).strip("-._").lower()[:80].strip("-._")
    if not s:
        s = "condition"
    if s.split(".")[0] in _WINDOWS_RESERVED:
        s = "condition-" + s
    return s


def plot_slugs(names) -> list:
    """The file slug of every condition: :func:`safe_name`, made unique by a numeric suffix."""
    taken, out = set(), []
    for name in names:
        base = safe_name(name)
        slug, n = base, 2
        while slug in taken:
            slug, n = f"{base}-{n}", n + 1
        taken.add(slug)
        out.append(slug)
    return out


__all__ = ["plot_slugs", "safe_name"]

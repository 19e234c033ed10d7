"""One verdict per run: every requirement a run judged, in one object.

The terminal's last lines, the report's first section, the exit status and the top-level
``verdict`` object of every JSON document all come from a :class:`Verdict` built once per run
(docs/verdict.md). A part of the run (``design``, ``schedule``, ``robustness``, ``responses``,
``failures``) contributes its items: every requirement it found not met, and one summary item of
its own (``condition`` None, ``requirement`` ``"all"``).

Exit statuses (documented in docs/verdict.md and ``damper --help``): 0 every requirement met,
3 some requirement not met (the analysis itself succeeded), 2 bad input or unusable output
location, 1 a bug in damper, 130/143 interrupted.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

#: The parts of a run that carry requirements, in the order the verdict lists them.
PARTS = ("design", "schedule", "robustness", "responses", "failures")

#: Exit status of a run whose analysis succeeded but some requirement is not met.
EXIT_NOT_MET = 3


@dataclass(frozen=True)
class Detail:
    """The number behind one item.

    Attributes
    ----------
    value : float or None
        What was found, in `unit`.
    lower, upper : float or None
        The required band in `unit` (None: no bound on that side).
    slack : float or None
        Distance to the nearer bound in `unit`, positive inside the band (None: not a number).
    unit : str
        Unit of value, bounds and slack ("" for a ratio, "1" for a fraction).
    """

    value: float | None = None
    lower: float | None = None
    upper: float | None = None
    slack: float | None = None
    unit: str = ""

    def doc(self) -> dict:
        return {k: _num(getattr(self, k)) for k in ("value", "lower", "upper", "slack")} | {"unit": self.unit}


@dataclass(frozen=True)
class Item:
    """One judged requirement.

    Attributes
    ----------
    part : str
        One of :data:`PARTS`.
    condition : str or None
        The condition (or schedule point, sample set) it concerns; None for a run-level item.
    requirement : str
        The requirement's key (``damping_ratio``, ``gain_margin``, ...) or ``"all"`` for a summary.
    met : bool
        Whether it is met.
    detail : Detail
        The number behind it.
    text : str
        One line for people (the terminal and the report show it).
    """

    part: str
    condition: str | None
    requirement: str
    met: bool
    detail: Detail = Detail()
    text: str = ""

    def __post_init__(self):
        if self.part not in PARTS:
            raise ValueError(f"verdict part {self.part!r} is not one of {PARTS}")

    def doc(self) -> dict:
        return {
            "part": self.part,
            "condition": self.condition,
            "requirement": self.requirement,
            "met": bool(self.met),
            "detail": self.detail.doc(),
            "text": self.text,
        }


@dataclass(frozen=True)
class Verdict:
    """Every judged item of a run (or of one part of it).

    Attributes
    ----------
    items : tuple of Item
        Every requirement not met, and one summary item per part judged.
    """

    items: tuple = ()

    @property
    def met(self) -> bool:
        """True when every item is met (a verdict with no items judged nothing and is met)."""
        return all(i.met for i in self.items)

    @property
    def parts(self) -> tuple:
        """The parts judged, in :data:`PARTS` order."""
        have = {i.part for i in self.items}
        return tuple(p for p in PARTS if p in have)

    def summary(self, part: str) -> Item | None:
        """The summary item of `part` (None when the part was not judged)."""
        for i in self.items:
            if i.part == part and i.condition is None and i.requirement == "all":
                return i
        return None

    def only(self, *parts: str) -> "Verdict":
        """The items of some parts (a JSON document carries the verdict of the parts it contains)."""
        return Verdict(tuple(i for i in self.items if i.part in parts))

    def __add__(self, other: "Verdict") -> "Verdict":
        order = {p: k for k, p in enumerate(PARTS)}
        items = sorted(self.items + other.items, key=lambda i: order[i.part])  # stable within a part
        return Verdict(tuple(items))

    def doc(self) -> dict:
        """The ``verdict`` object of the JSON documents (``parts``: the parts this one judged)."""
        return {"met": self.met, "parts": list(self.parts), "items": [i.doc() for i in self.items]}

    @classmethod
    def from_doc(cls, doc) -> "Verdict":
        """The verdict a JSON document's ``verdict`` object holds (what :meth:`doc` wrote).

        Raises ValueError on an object that is not one.
        """
        if not isinstance(doc, dict) or not isinstance(doc.get("items"), list):
            raise ValueError("not a verdict object")
        items = []
        for i in doc["items"]:
            d = i.get("detail") or {}
            items.append(Item(i["part"], i.get("condition"), str(i["requirement"]), bool(i["met"]),
                              Detail(d.get("value"), d.get("lower"), d.get("upper"), d.get("slack"), d.get("unit", "")),
                              str(i.get("text", ""))))
        return cls(tuple(items))

    def exit_status(self) -> int:
        """0 when met, :data:`EXIT_NOT_MET` otherwise."""
        return 0 if self.met else EXIT_NOT_MET

    def lines(self, limit: int = 12) -> list:
        """The terminal's verdict lines: one per part, then its items not met (at most `limit` a part;
        the JSON documents list them all)."""
        if not self.items:
            return ["verdict: nothing judged"]
        head = "verdict: every requirement met" if self.met else "verdict: NOT MET"
        out = [head]
        for p in self.parts:
            s = self.summary(p)
            if s is not None:
                out.append(f"  {p}: {'met' if s.met else 'NOT MET'}" + (f" - {s.text}" if s.text else ""))
            misses = [i for i in self.items if i.part == p and not i.met and i is not s]
            for i in misses[:limit]:
                where = f"{i.condition}: " if i.condition else ""
                what = "every requirement" if i.requirement == "all" else i.requirement
                out.append(f"    not met: {where}{what}" + (f" ({i.text})" if i.text else ""))
            if len(misses) > limit:
                out.append(f"    ... and {len(misses) - limit} more (every item is in the JSON's verdict object)")
        return out


def _num(x):
    if x is None:
        return None
    x = float(x)
    return x if math.isfinite(x) else None


def fraction_text(k: int, n: int) -> str:
    """`k` of `n` as a percentage that never rounds a fraction below 1 up to 100 % (nor above 0 to 0 %).

    The distance to 0 or 100 % is shown to at least two significant digits. Examples: 1999 of
    2000 -> "99.95 %", 2000 of 2000 -> "100 %", 1 of 100000 -> "0.001 %", 1441 of 2000 -> "72.0 %".
    """
    if n <= 0:
        return "-"
    if k == n:
        return "100 %"
    if k == 0:
        return "0 %"
    p = 100.0 * k / n
    gap = min(p, 100.0 - p)  # distance to the nearer whole: shown to two significant digits at least
    digits = max(1, math.ceil(-math.log10(gap)) + 1)
    text = f"{p:.{digits}f}"
    if digits > 1:
        text = text.rstrip("0")
    return f"{text} %"

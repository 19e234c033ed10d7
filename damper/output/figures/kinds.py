"""A kind of figure: the file stem it is written under and the caption the report gives it."""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class FigureKind:
    """One kind of figure of a family.

    Attributes
    ----------
    stem : str
        The part of the file name that tells the kind (a suffix after the condition's slug,
        e.g. ``root-locus``, or a prefix, e.g. ``scatter``).
    caption : str
        The report's caption of every figure of this kind.
    """

    stem: str
    caption: str


__all__ = ["FigureKind"]

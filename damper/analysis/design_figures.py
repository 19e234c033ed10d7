"""What the design figures draw beyond the search's result, computed once before they are queued.

The figure functions in :mod:`damper.output.figures.design` compute nothing: they receive a
:class:`DesignFigureInputs` with the open-loop poles (root locus) and each condition's loop
response at the chosen gain (loop-response figure).
"""

from __future__ import annotations

from dataclasses import dataclass

from .locus import OpenLoopPoles, open_loop_poles
from .loop_curves import LoopCurve, loop_curve


@dataclass(frozen=True)
class DesignFigureInputs:
    """The inputs of a design run's figures that the search result does not hold.

    Attributes
    ----------
    open_loop : OpenLoopPoles
        K = 0 poles of every condition, 1/s.
    loop_curves : tuple of LoopCurve
        Each condition's loop response at its chosen gain (exact delay).
    """

    open_loop: OpenLoopPoles
    loop_curves: tuple


def design_figure_inputs(case, design) -> DesignFigureInputs:
    """The open-loop poles and the loop curves at the chosen gains of every condition of `design`.

    Parameters
    ----------
    case : Case
    design : DesignResult
        Of :func:`damper.analysis.search.search` on `case`.

    Returns
    -------
    DesignFigureInputs
    """
    curves = tuple(loop_curve(case, design.chosen, i) for i in range(len(design.conditions)))
    return DesignFigureInputs(open_loop=open_loop_poles(case), loop_curves=curves)


__all__ = ["DesignFigureInputs", "LoopCurve", "OpenLoopPoles", "design_figure_inputs"]

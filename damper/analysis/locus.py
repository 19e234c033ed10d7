"""The root locus's one value that the search does not hold: the open-loop (K = 0) poles.

The closed-loop poles over the sweep and at the chosen gain are in the
:class:`~damper.analysis.search.DesignResult`; the figure also marks where the branches
start. They are the eigenvalues of the library's closed-loop matrix at zero gain (delay as
its Pade approximant, like every eigenvalue view), picked by
:func:`damper.measures.modes.closed_loop_modes` on the short-period states.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class OpenLoopPoles:
    """Open-loop (K = 0) poles of every condition of a case.

    Attributes
    ----------
    poles_1_s : ndarray of complex
        1/s, shape (n_conditions, n_states), in the order of
        :func:`damper.measures.modes.closed_loop_modes`.
    """

    poles_1_s: np.ndarray


def open_loop_poles(case) -> OpenLoopPoles:
    """Open-loop (K = 0) poles of every condition of `case` (Pade delay).

    Parameters
    ----------
    case : Case

    Returns
    -------
    OpenLoopPoles
    """
    from ..measures.modes import closed_loop_modes
    from ..model.loop import closed_loop_matrix
    from .assess import build_loop

    loop = build_loop(case, np.zeros(len(case.conditions)))
    A, _, layout = closed_loop_matrix(loop)
    A = np.broadcast_to(A, (len(case.conditions),) + A.shape[-2:])
    return OpenLoopPoles(poles_1_s=closed_loop_modes(A, layout.alpha, layout.q).eigenvalues)


__all__ = ["OpenLoopPoles", "open_loop_poles"]

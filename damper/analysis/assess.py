"""Assess given gains at every condition of a case (batched over conditions x gains)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..case.model import Case
from ..measures.margins import Margins, loop_margins
from ..measures.modes import ClosedLoopModes, SecondOrderMode, bare_short_period, closed_loop_modes
from ..model.loop import Loop, StateLayout, closed_loop_matrix


@dataclass(frozen=True)
class Assessment:
    """Measures of the loop at a batch of (condition, gain) points.

    Attributes
    ----------
    gains : ndarray
        Pitch-rate gain K, s; shape ``S`` (the batch shape, conditions first).
    bare : SecondOrderMode
        Bare-airframe short period (conditions only, broadcast to ``S``).
    modes : ClosedLoopModes
        Closed-loop eigen-analysis (delays as Pade of ``pade_order``).
    margins : Margins
        Loop broken at the actuator input (exact delays).
    layout : StateLayout
        State order of the closed-loop model.
    pade_order : int or None
        Pade order used for the delay in eigenvalue work (None: no delay).
    """

    gains: np.ndarray
    bare: SecondOrderMode
    modes: ClosedLoopModes
    margins: Margins
    layout: StateLayout
    pade_order: int | None


def build_loop(case: Case, gains) -> Loop:
    """The case's loops with `gains` (s) broadcast against the conditions axis.

    Parameters
    ----------
    case : Case
    gains : array_like
        Shape ``()``, ``(n_conditions,)`` or ``(n_conditions, n_gains)``.
    """
    d = case.derivatives()
    g = np.asarray(gains, dtype=float)
    n = len(case.conditions)
    if g.ndim == 0:
        g = np.full(n, float(g))
    if g.shape[0] != n:
        raise ValueError(f"gains have {g.shape[0]} rows for {n} conditions")
    extra = g.ndim - 1
    d = _expand(d, extra)
    return Loop(d, case.loop.hardware(), g)


def _expand(obj, extra):
    from ..model.batch import map_arrays

    return map_arrays(obj, lambda a: a.reshape(a.shape + (1,) * extra)) if extra else obj


def assess_loop(loop: Loop, w=None) -> Assessment:
    """Every measure of a batch of loops (any batch shape)."""
    A, _, layout = closed_loop_matrix(loop)
    from ..model.batch import batch_shape

    shape = batch_shape(loop)
    A = np.broadcast_to(A, shape + A.shape[-2:])
    modes = closed_loop_modes(A, layout.alpha, layout.q)
    margins = loop_margins(loop, stable=modes.stable, w=w)
    bare = bare_short_period(loop.airframe)
    delay = loop.hardware.delay
    return Assessment(
        gains=np.broadcast_to(np.asarray(loop.gain, dtype=float), shape),
        bare=bare,
        modes=modes,
        margins=margins,
        layout=layout,
        pade_order=None if delay is None else int(delay.pade_order),
    )


def assess(case: Case, gains) -> Assessment:
    """Assess `gains` (s) at every condition of `case`; see :func:`build_loop` for shapes."""
    return assess_loop(build_loop(case, gains), w=case.settings.grid())

"""Assess given gains at every condition of a case (batched over conditions x gains)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..case.model import Case
from ..measures.handling import control_anticipation, equivalent_system, load_factor_per_alpha, pitch_bandwidth
from ..measures.margins import Margins, loop_margins
from ..measures.modes import (
    ClosedLoopModes,
    SecondOrderMode,
    approximation_differs,
    bare_phugoid,
    bare_short_period,
    closed_loop_modes,
    two_state_short_period,
)
from ..model import airframes
from ..model.batch import batch_shape, map_arrays
from ..model.loop import Loop, StateLayout, closed_loop_matrix
from ..quantities import quantity
from ..requirements.criteria import CriteriaResult, evaluate
from ..requirements.spec import Requirements, build_requirements, levels


@dataclass(frozen=True)
class Assessment:
    """Measures of the loop at a batch of (condition, gain) points (arrays of batch shape ``S``).

    Attributes
    ----------
    gains : ndarray
        Pitch-rate gain K, s.
    bare : SecondOrderMode
        Bare-airframe short period (broadcasts against ``S``).
    modes : ClosedLoopModes
        Closed-loop eigen-analysis (delays as Pade of ``pade_order``).
    margins : Margins
        Loop broken at the actuator input (exact delays).
    equivalent : EquivalentFit
        Low-order equivalent system of q / pilot command (exact delays).
    bandwidth : AttitudeBandwidth or None
        Pitch-attitude bandwidth and phase delay, when computed.
    n_alpha : ndarray
        n/alpha of the bare airframe, g per rad.
    inv_t_theta2 : ndarray
        1/T_theta2 of the bare airframe, 1/s.
    layout : StateLayout
    pade_order : int or None
    criteria : CriteriaResult or None
        Requirements evaluated, when requirements were given.
    levels : dict or None
        Best level met per criterion and overall (when a preset category is known).
    bare_phugoid : SecondOrderMode or None
        Bare-airframe phugoid of a longitudinal airframe (None for the short-period model).
    two_state : SecondOrderMode or None
        Closed-loop short period of the two-state approximation at the same gain and
        hardware (:func:`damper.measures.modes.two_state_short_period`), longitudinal only.
    two_state_differs : ndarray of bool or None
        It differs from the four-state short period beyond the tolerances of
        :func:`damper.measures.modes.approximation_differs`, longitudinal only.
    equivalent_plain : EquivalentFit or None
        Longitudinal only: the short-period form fitted to the full response, phugoid
        included (its mismatch shows the phugoid in the band); `equivalent` is then the fit
        with the closed-loop phugoid's known factor taken out
        (:func:`damper.measures.handling.equivalent_system` with ``phugoid``).

    The closed-loop phugoid is ``modes.phugoid`` (NaN for the short-period model).
    """

    gains: np.ndarray = quantity("s", key="gain_s")
    bare: SecondOrderMode
    modes: ClosedLoopModes
    margins: Margins
    equivalent: object
    bandwidth: object
    n_alpha: np.ndarray = quantity("g/rad", key="n_alpha_g_per_rad")
    inv_t_theta2: np.ndarray
    layout: StateLayout
    pade_order: int | None
    criteria: CriteriaResult | None = None
    levels: dict | None = None
    bare_phugoid: SecondOrderMode | None = None
    two_state: SecondOrderMode | None = None
    two_state_differs: np.ndarray | None = None
    equivalent_plain: object = None

    def damping_ratio(self, measure="equivalent"):
        """Short-period damping ratio by `measure` ('equivalent' or 'modal')."""
        return self.equivalent.damping_ratio if measure == "equivalent" else self.modes.short_period.damping_ratio

    def natural_frequency(self, measure="equivalent"):
        """Short-period natural frequency, rad/s, by `measure`."""
        return self.equivalent.natural_frequency if measure == "equivalent" else self.modes.short_period.natural_frequency

    def cap(self, measure="equivalent"):
        """Control anticipation parameter, (rad/s^2)/g, with the `measure` frequency."""
        return self.natural_frequency(measure) ** 2 / self.n_alpha


def build_loop(case: Case, gains) -> Loop:
    """The case's loops with `gains` (s) broadcast against the conditions axis.

    Parameters
    ----------
    case : Case
    gains : array_like
        Shape ``()``, ``(n_conditions,)`` or ``(n_conditions, ...)``.
    """
    d = case.derivatives()
    g = np.asarray(gains, dtype=float)
    n = len(case.conditions)
    if g.ndim == 0:
        g = np.full(n, float(g))
    if g.shape[0] != n:
        raise ValueError(f"gains have {g.shape[0]} rows for {n} conditions")
    extra = g.ndim - 1
    if extra:
        d = map_arrays(d, lambda a: a.reshape(a.shape + (1,) * extra))
    return Loop(d, case.loop.hardware(), g)


#: What :func:`assess_loop` computes: every measure, or what the criteria need.
SCOPES = ("all", "criteria")


def assess_loop(loop: Loop, w=None, requirements: Requirements | None = None, with_bandwidth=False,
                scope="all") -> Assessment:
    """Every measure of a batch of loops (any batch shape ``S``).

    Parameters
    ----------
    loop : Loop
    w : ndarray, optional
        Coarse frequency grid of the margins, rad/s.
    requirements : Requirements, optional
        Evaluated when given.
    with_bandwidth : bool
        Compute the pitch-attitude bandwidth even when no criterion needs it.
    scope : {"all", "criteria"}
        ``"criteria"``: what the requirements' criteria and levels read, and the modes,
        margins and fits the search's figures draw, for the many evaluations whose only
        use is a verdict (the gain search, schedule design, robustness samples): the
        disk-margin peak is searched only when a criterion needs it (else the margins' disk
        fields are None), and a longitudinal loop's extras (two-state short period, plain
        equivalent fit, bare phugoid) are left out (None). Every measure computed is the
        same, bit for bit, in either scope.
    """
    if scope not in SCOPES:
        raise ValueError(f"scope must be one of {SCOPES}, not {scope!r}")
    everything = scope == "all"
    A, _, layout = closed_loop_matrix(loop)
    shape = batch_shape(loop)
    A = np.broadcast_to(A, shape + A.shape[-2:])
    modes = closed_loop_modes(A, layout.alpha, layout.q, layout.u, layout.theta)
    disk = everything or (requirements is not None and requirements.needs_disk_margin)
    margins = loop_margins(loop, stable=modes.stable, w=w, disk=disk)
    free_zero = bool(requirements.free_zero) if requirements is not None else False
    # a longitudinal loop: the closed-loop phugoid's known factor is taken out before the
    # short-period form is fitted (docs/theory.md section 8); the plain form's fit is kept too
    phugoid = modes.phugoid if airframes.is_longitudinal(loop.airframe) else None
    equivalent = equivalent_system(loop, free_zero=free_zero, phugoid=phugoid)
    need_bw = with_bandwidth or (requirements is not None and requirements.needs_bandwidth)
    bandwidth = pitch_bandwidth(loop) if need_bw else None
    delay = loop.hardware.delay
    result = Assessment(
        gains=np.broadcast_to(np.asarray(loop.gain, dtype=float), shape),
        bare=bare_short_period(loop.airframe),
        modes=modes,
        margins=margins,
        equivalent=equivalent,
        bandwidth=bandwidth,
        n_alpha=np.broadcast_to(load_factor_per_alpha(loop.airframe), shape),
        inv_t_theta2=np.broadcast_to(airframes.inverse_t_theta2(loop.airframe), shape),
        layout=layout,
        pade_order=None if delay is None else int(delay.pade_order),
        **(_longitudinal_measures(loop, modes, free_zero) if everything else {}),
    )
    if requirements is None:
        return result
    crit = evaluate(requirements.criteria, result)
    lv = levels(requirements, result)
    from dataclasses import replace

    return replace(result, criteria=crit, levels=lv)


def _longitudinal_measures(loop: Loop, modes: ClosedLoopModes, free_zero: bool) -> dict:
    """Bare phugoid, the two-state approximation and the plain-form equivalent fit of a
    longitudinal loop (empty for a short-period one)."""
    if not airframes.is_longitudinal(loop.airframe):
        return {}
    two = two_state_short_period(loop)
    return {
        "bare_phugoid": bare_phugoid(loop.airframe),
        "two_state": two,
        "two_state_differs": approximation_differs(modes.short_period, two),
        "equivalent_plain": equivalent_system(loop, free_zero=free_zero),
    }


def assess(case: Case, gains, with_bandwidth=True) -> Assessment:
    """Assess `gains` (s) at every condition of `case` against its requirements."""
    return assess_loop(
        build_loop(case, gains), w=case.settings.grid(), requirements=case.requirements, with_bandwidth=with_bandwidth
    )


__all__ = ["Assessment", "assess", "assess_loop", "build_loop", "control_anticipation", "Margins", "ClosedLoopModes"]

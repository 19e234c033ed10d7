"""The failure study of a design run: every condition at its chosen gain, in batches.

:func:`run_failures` reads the case (``failures:``, ``loop.authority``, the responses'
inputs), studies :data:`~damper.analysis.batches.BATCH_CONDITIONS` conditions at a time
(:func:`damper.analysis.failure_study.study_failures`), keeps each condition's record (the
JSON contract of docs/failures.md), how long the damper saturates in the design's own
responses, and the hardover histories of the conditions with the least slack (for the
figures), and intersects the authority windows over every condition.

The lower edge of each window comes from the design's responses simulated with the case's
authority: when the damper does not saturate in any of them their demand is the edge
(:func:`damper.analysis.authority.required_authority_from_responses`); otherwise (or without
an authority) the responses are simulated once more with an unbounded authority
(:func:`damper.analysis.authority.required_authority`).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..quantities import quantity
from . import authority as au
from .failure_case import failure_spec, servo_limits
from .failure_spec import FailureSpec, ServoLimits

#: Conditions whose hardover transients are kept for the figures (least slack first).
FIGURE_CONDITIONS = 4
#: Samples (conditions x frequencies x steps) of one batch's oscillatory search at most: a
#: long recognition time studies fewer conditions at a time (about 200 MB of time histories).
BATCH_SAMPLES = 2_000_000


def default_batch(spec: FailureSpec) -> int:
    """Conditions studied together: :data:`damper.analysis.batches.BATCH_CONDITIONS`, fewer when
    one condition's frequency search holds more than ``BATCH_SAMPLES / BATCH_CONDITIONS``
    samples (at least one)."""
    from .batches import BATCH_CONDITIONS

    per_condition = spec.time_grid()[1] * (spec.frequency_points if "oscillatory" in spec.kinds else 2)
    return max(1, min(BATCH_CONDITIONS, BATCH_SAMPLES // per_condition))


@dataclass(frozen=True)
class Saturation:
    """How long the damper sits at its authority in one of the design's responses (one condition).

    Attributes
    ----------
    input : str
        The response's input.
    time_at_authority_limit_s : float
        s during which the damper's demand is at or beyond its authority.
    time_at_authority_rate_limit_s : float
        s during which its own rate limit acts.
    peak_damper_demand_rad : float
        Largest |damper demand| (before its limits), rad.
    duration_s : float
        The simulated time, s.
    """

    input: str
    time_at_authority_limit_s: float = quantity("s")
    time_at_authority_rate_limit_s: float = quantity("s")
    peak_damper_demand_rad: float = quantity("rad")
    duration_s: float = quantity("s")


@dataclass(frozen=True)
class FailureRun:
    """The failure study of every condition of a design.

    Attributes
    ----------
    spec : FailureSpec
    servo : ServoLimits
    names : tuple of str
        Condition names.
    gains : ndarray
        The chosen gains, s.
    records : tuple of dict
        Per condition: the design.json contract of docs/failures.md (plain values).
    met : ndarray of bool
        Per condition (:attr:`damper.analysis.failure_study.FailureStudy.met`).
    saturation : tuple of tuple of Saturation
        Per condition, per response input (empty without an authority).
    window : AuthorityWindow
        Every condition's window (edges in rad, flat over the conditions).
    common : CommonWindow
        The intersection over every condition and its reason.
    worst : tuple of (int, float, TimeHistory)
        The hardover's condition index, tightest slack and time histories over the
        recognition time, for at most :data:`FIGURE_CONDITIONS` conditions with the least
        slack (empty when the hardover is not studied).
    """

    spec: FailureSpec
    servo: ServoLimits
    names: tuple
    gains: np.ndarray = quantity("s", key="gain_s")
    records: tuple
    met: np.ndarray
    saturation: tuple
    window: au.AuthorityWindow
    common: au.CommonWindow
    worst: tuple

    @property
    def summary(self) -> dict:
        """The top-level ``failures`` entry of the JSON contract: the common window and its
        reason, and (beyond the contract) the edges that set it, rad (null: unbounded)."""
        c = self.common
        return {"authority_window_rad": None if c.window_rad is None else [_num(x) for x in c.window_rad],
                "authority_window_reason": c.reason,
                "required_authority_rad": _num(self.window.lower_rad[c.lower_index]),
                "largest_safe_authority_rad": _num(self.window.upper_rad[c.upper_index]),
                "set_by": {"lower": self.names[c.lower_index[0]],
                           "upper": self.names[c.upper_index[0]] if np.isfinite(self.window.upper_rad[c.upper_index])
                           else None}}


def _saturation(responses) -> tuple:
    """Per condition of a batch, the :class:`Saturation` of every response."""
    n = len(responses.responses[0].augmented_measures.peak_damper_demand)
    out = []
    for i in range(n):
        rows = []
        for res in responses.responses:
            m = res.augmented_measures
            rows.append(Saturation(res.input.label, float(m.time_at_authority_limit[i]),
                                   float(m.time_at_authority_rate_limit[i]), float(m.peak_damper_demand[i]),
                                   float(responses.spec.duration)))
        out.append(tuple(rows))
    return tuple(out)


def _lower_edge(sub, gains, loop, servo):
    """The window's lower edge of a batch and the damper's saturation in its responses."""
    from .response import respond_case, resolve_responses

    rs = resolve_responses(sub)
    if servo.authority is not None:
        responses = respond_case(sub, gains, rs, authority=servo.authority,
                                 authority_rate_limit=servo.authority_rate_limit)
        saturation = _saturation(responses)
        try:
            return au.required_authority_from_responses(responses.responses), saturation
        except ValueError:  # the damper saturates: its demand there is not the unsaturated one
            pass
    else:
        saturation = tuple(() for _ in sub.conditions)
    lower = au.required_authority(loop, rs.inputs, duration=rs.duration, step=rs.step, rate_limit=servo.rate_limit,
                                  travel=servo.travel, authority_rate_limit=servo.authority_rate_limit)
    return lower, saturation


def _concat(windows):
    """One :class:`~damper.analysis.authority.AuthorityWindow` of every batch's conditions."""
    def cat(get):
        return np.concatenate([np.asarray(get(w)).reshape(-1) for w in windows])

    kinds = windows[0].upper.by_kind
    upper = au.UpperEdge(cat(lambda w: w.upper.value_rad), cat(lambda w: w.upper.kind),
                         cat(lambda w: w.upper.binding_limit), cat(lambda w: w.upper.slack),
                         cat(lambda w: w.upper.converged), {k: cat(lambda w, k=k: w.upper.by_kind[k]) for k in kinds})
    return au.AuthorityWindow(cat(lambda w: w.lower_rad), cat(lambda w: w.upper_rad), cat(lambda w: w.lower_input),
                              upper)


def run_failures(case, gains, spec: FailureSpec | None = None, batch: int | None = None) -> FailureRun | None:
    """The failure study of `case` at `gains` (s, one per condition), `batch` conditions at a
    time (default :func:`default_batch`); None when the case has
    no ``failures:`` section and no `spec` is given, or no conditions."""
    from .assess import build_loop
    from .batches import condition_batches, sub_case
    from .failure_study import study_failures

    spec = spec or failure_spec(case)
    if spec is None or not case.conditions:
        return None
    servo = servo_limits(case)
    gains = np.broadcast_to(np.asarray(gains, dtype=float), (len(case.conditions),))
    records, met, saturation, windows, worst = [], [], [], [], []
    for a, b in condition_batches(len(case.conditions), batch or default_batch(spec)):
        sub = sub_case(case, range(a, b))
        loop = build_loop(sub, gains[a:b])
        lower, sat = _lower_edge(sub, gains[a:b], loop, servo)
        study = study_failures(loop, servo, spec, requirements=case.requirements, w=case.settings.grid(),
                               required=lower, names=sub.names)
        records += [study.record(i) for i in range(b - a)]
        met.append(np.asarray(study.met).reshape(-1))
        saturation += list(sat)
        windows.append(study.window)
        if study.hardover is not None:
            slack = np.asarray(study.hardover.tightest_slack, dtype=float).reshape(-1)
            worst += [(a + i, float(slack[i]), _owned(study.hardover.history.take(i))) for i in range(b - a)]
            worst = sorted(worst, key=lambda w: (w[1], w[0]))[:FIGURE_CONDITIONS]
    window = _concat(windows)
    common = au.intersect(window, case.names)
    return FailureRun(spec, servo, case.names, np.array(gains), tuple(records), np.concatenate(met),
                      tuple(saturation), window, common, tuple(worst))


def _owned(history):
    """A time history whose arrays are its own (a view would keep the batch's arrays alive)."""
    from dataclasses import replace

    return replace(history, **{k: np.array(getattr(history, k)) for k in history.SERIES
                               if getattr(history, k) is not None})


def _num(x):
    x = float(x)
    return x if np.isfinite(x) else None


__all__ = ["BATCH_SAMPLES", "FIGURE_CONDITIONS", "FailureRun", "Saturation", "default_batch", "run_failures"]

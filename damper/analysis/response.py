"""Time responses of the augmented loop with actuator and damper limits (batched).

The aircraft answers a pilot input (doublet, step, pulse) or a vertical gust
(sharp-edged or 1-cosine). Both the augmented loop (damper gain K) and the bare
airframe (K = 0, same actuator and limits) are simulated in one batched pass.

The pieces live in their own modules and are re-exported here:

* :mod:`damper.analysis.response_inputs`: :class:`Input`, :func:`pilot_command`,
  :func:`gust_velocity`, :func:`gust_angle`, :func:`input_end`;
* :mod:`damper.analysis.simulation`: :func:`simulate` (fixed-step RK4 with a nonlinear
  actuator, the damper's authority and its own rate limit, an exact delay) and
  :class:`TimeHistory`;
* :mod:`damper.analysis.response_measures`: :func:`measure` and :class:`ResponseMeasures`.

This module pairs the augmented and bare runs (:func:`respond`) and reads the case's
``responses`` section (:func:`resolve_responses`, :func:`respond_case`).
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np

from ..case.sections import DEFAULT_OUTPUT_STEP as _OUTPUT_STEP
from ..model.batch import batch_shape, map_arrays
from ..model.loop import Loop
from ..quantities import quantity
from .response_inputs import (  # noqa: F401 (re-exported)
    EDGE_TOL,
    GUST_KINDS,
    KINDS,
    PILOT_KINDS,
    Input,
    gust_angle,
    gust_velocity,
    input_end,
    pilot_command,
)
from .response_measures import (  # noqa: F401 (re-exported)
    OSCILLATORY_RATIO,
    PEAK_FLOOR,
    SETTLING_BAND,
    STEP_REFERENCE_RATIO,
    ResponseMeasures,
    measure,
)
from .simulation import DELAY_MODEL, MAX_SAMPLES, METHOD, TimeHistory, simulate  # noqa: F401 (re-exported)

#: ``authority_rate_limit`` default of :func:`respond` and :func:`respond_case`: the
#: damper command's rate limit is the actuator's rate limit (none without one).
SAME_AS_ACTUATOR = "actuator"


def damper_rate_limit(authority_rate_limit, rate_limit):
    """The damper command's own rate limit, rad/s: `authority_rate_limit`, or the actuator's
    `rate_limit` when it is :data:`SAME_AS_ACTUATOR` (None: no limit)."""
    if isinstance(authority_rate_limit, str):
        if authority_rate_limit != SAME_AS_ACTUATOR:
            raise ValueError(f"authority_rate_limit must be a number, None or {SAME_AS_ACTUATOR!r}")
        return rate_limit
    return authority_rate_limit


def _broadcast(loop: Loop, shape):
    return map_arrays(loop, lambda a: np.broadcast_to(a, shape))


# ---------------------------------------------------------------------------
# Bare and augmented together
# ---------------------------------------------------------------------------


@dataclass(frozen=True)
class Response:
    """Augmented and bare responses to one input (batch shape S).

    Attributes
    ----------
    input : Input
    augmented, bare : TimeHistory
        With the loop's gain; with K = 0 (same actuator and limits).
    augmented_measures, bare_measures : ResponseMeasures
    rate_limit, travel : float or None
        Actuator rate limit, rad/s, and travel, rad.
    authority : float or None
        The damper's authority, rad (None: none).
    authority_rate_limit : float or None
        The damper command's own rate limit, rad/s (None: none), as used.
    """

    input: Input
    augmented: TimeHistory
    bare: TimeHistory
    augmented_measures: ResponseMeasures
    bare_measures: ResponseMeasures
    rate_limit: object = None
    travel: object = None
    authority: object = None
    authority_rate_limit: object = None


def respond(loop: Loop, inp: Input, *, duration, step=1e-3, rate_limit=None, travel=None, authority=None,
            authority_rate_limit=SAME_AS_ACTUATOR) -> Response:
    """Simulate `loop` and its bare airframe (K = 0) in one batched pass.

    The bare airframe keeps the actuator and its limits (the pilot command
    reaches the surface through it), so the two differ only by the damper.
    Parameters as in :func:`simulate`; `authority_rate_limit` defaults to the actuator's
    `rate_limit` (:func:`damper_rate_limit`) and acts only with an `authority`.
    """
    shape = batch_shape(loop)
    both = _broadcast(loop, shape)
    both = map_arrays(both, lambda a: np.stack([a, a]))
    g = np.broadcast_to(np.asarray(loop.gain, dtype=float), shape)
    both = replace(both, gain=np.stack([g, np.zeros_like(g)]))
    inp2 = map_arrays(inp, lambda a: np.stack([np.broadcast_to(a, shape)] * 2))
    auth_rate = damper_rate_limit(authority_rate_limit, rate_limit)

    def lim(x):
        return None if x is None else np.stack([np.broadcast_to(np.asarray(x, dtype=float), shape)] * 2)

    hist = simulate(both, inp2, duration=duration, step=step, rate_limit=lim(rate_limit), travel=lim(travel),
                    authority=lim(authority), authority_rate_limit=lim(auth_rate))
    aug, bare = hist.take(0), hist.take(1)
    return Response(inp, aug, bare, measure(aug), measure(bare), rate_limit, travel, authority,
                    auth_rate if authority is not None else None)


# ---------------------------------------------------------------------------
# From a case
# ---------------------------------------------------------------------------


@dataclass(frozen=True)
class ResolvedResponses:
    """What to simulate at each condition: the case's ``responses`` section resolved, or the default.

    The section as written (its times in SI, defaults that need no airframe) is
    :class:`damper.case.sections.ResponseSettings`, built by the case layer;
    :func:`resolve_responses`, the one resolver, turns it into this: every input an
    :class:`Input` with its defaults filled in, the doublet's half-period from each
    condition's bare short period (a measure: below the case layer's reach), and each
    input checked to end before the simulated time (a gust's end depends on the airspeed).

    Attributes
    ----------
    duration : float
        s.
    step : float
        Integration and record step, s.
    output_step : float
        Step of the CSV files and plots, s.
    inputs : tuple of Input
        Numeric fields of shape ``(n_conditions,)`` or scalars.
    default : bool
        True when the case has no ``responses`` section.
    """

    duration: float = quantity("s")
    step: float = quantity("s")
    output_step: float = quantity("s")
    inputs: tuple
    default: bool = False


DEFAULT_DURATION = 10.0
DEFAULT_STEP = 1e-3
DEFAULT_OUTPUT_STEP = _OUTPUT_STEP  # the case layer's default (one value)
DEFAULT_START = 0.5
DEFAULT_DOUBLET_AMPLITUDE = np.deg2rad(2.0)  # nose-up: a pull first


def default_half_period(d):
    """Doublet half-period, s: half the bare short-period period (``pi / w_d``),
    ``pi / w_n`` when the bare pair is not oscillatory, 0.5 s when divergent;
    kept within 0.1-5 s."""
    from ..measures.modes import bare_short_period

    sp = bare_short_period(d)
    hp = np.where(np.isfinite(sp.period), 0.5 * sp.period, np.pi / sp.natural_frequency)
    hp = np.where(np.isfinite(hp), hp, 0.5)
    return np.clip(hp, 0.1, 5.0)


def _default_duration(case) -> float:
    """Default simulated time, s: 10 for the short-period model, 60 for the longitudinal one."""
    from ..case.speed_terms import default_duration

    return default_duration(getattr(case, "model", "short_period"))


def resolve_responses(case) -> ResolvedResponses:
    """The case's response settings resolved per condition; the default is one pull-first doublet of 2 deg.

    The default doublet starts at 0.5 s with a half-period of half the bare
    short-period period at each condition (:func:`default_half_period`); 10 s (60 s for the
    longitudinal model) at 1 ms.

    The section's times and their checks are the case layer's
    (:class:`damper.case.sections.ResponseSettings`); the default half-period depends on
    each condition's airframe and is resolved here.

    Raises
    ------
    CaseError
        An input that does not end before the simulated time does.
    """
    from ..case.sections import InputSettings
    from ..errors import CaseError

    d = case.derivatives()
    given = case.responses
    if given is None:
        inp = Input("doublet", amplitude=DEFAULT_DOUBLET_AMPLITUDE, start=DEFAULT_START,
                    half_period=default_half_period(d), name="doublet")
        return ResolvedResponses(_default_duration(case), DEFAULT_STEP, DEFAULT_OUTPUT_STEP, (inp,), default=True)
    duration, step, out_step = given.duration_s, given.step_s, given.output_step_s
    inputs = []
    for i, it in enumerate(given.inputs or (InputSettings("doublet"),)):
        inp = Input(
            it.kind,
            amplitude=(DEFAULT_DOUBLET_AMPLITUDE if it.amplitude_rad is None else it.amplitude_rad),
            start=DEFAULT_START if it.start_s is None else it.start_s,
            half_period=default_half_period(d) if it.half_period_s is None else it.half_period_s,
            duration=it.duration_s or 0.0,
            gust_velocity=it.gust_velocity_m_s or 0.0,
            gust_length=it.gust_length_m or 0.0,
            name=it.name or f"{it.kind}",
        )
        end = np.max(input_end(inp, d.airspeed))
        if not end < duration:
            raise CaseError(
                f"the input ends at {end:.4g} s, not before responses.duration = {duration:.4g} s",
                f"responses.inputs[{i}]", file=case.file,
            )
        inputs.append(inp)
    names = [x.name for x in inputs]
    inputs = [replace(x, name=f"{x.name}-{i + 1}") if names.count(x.name) > 1 else x for i, x in enumerate(inputs)]
    return ResolvedResponses(float(duration), float(step), float(out_step), tuple(inputs))


#: Former names (the resolved settings were called a spec).
ResponseSpec = ResolvedResponses
response_spec = resolve_responses


@dataclass(frozen=True)
class CaseResponses:
    """Responses of every condition of a case to every input.

    Attributes
    ----------
    spec : ResolvedResponses
    gains : ndarray
        K, s, shape ``(n_conditions,)`` (or with a gains axis).
    responses : tuple of Response
        One per input, batch shape of `gains`.
    rate_limit, travel : float or None
        rad/s, rad (from the case's actuator).
    notes : tuple of str
    authority : float or None
        The damper's authority, rad (None: none).
    authority_rate_limit : float or None
        The damper command's own rate limit, rad/s, as used (None: none).
    """

    spec: ResolvedResponses
    gains: np.ndarray = quantity("s", key="gain_s")
    responses: tuple
    rate_limit: float | None = quantity("rad/s", default=None)
    travel: float | None = quantity("rad", default=None)
    notes: tuple = field(default=())
    authority: float | None = quantity("rad", default=None)
    authority_rate_limit: float | None = quantity("rad/s", default=None)


#: Default of :func:`respond_case`'s authority and its rate limit: the case's ``loop.authority``
#: and ``loop.authority_rate_limit`` (else the actuator's rate limit).
FROM_CASE = "case"


def respond_case(case, gains, spec: ResolvedResponses | None = None, *, authority=FROM_CASE,
                 authority_rate_limit=FROM_CASE) -> CaseResponses:
    """Simulate every input of `spec` (default :func:`resolve_responses`) at every condition.

    Parameters
    ----------
    case : Case
    gains : array_like
        K, s: scalar, ``(n_conditions,)`` or ``(n_conditions, n_gains)``.
    authority : float or None or "case"
        The damper's authority, rad (None: none; default :data:`FROM_CASE`: the case's
        ``loop.authority``).
    authority_rate_limit : float or None or "actuator" or "case"
        The damper command's own rate limit, rad/s (default: the case's
        ``loop.authority_rate_limit``, else the actuator's).
    """
    from .assess import build_loop

    if isinstance(authority, str) and authority == FROM_CASE:
        authority = getattr(case.loop, "authority", None)
    if isinstance(authority_rate_limit, str) and authority_rate_limit == FROM_CASE:
        own = getattr(case.loop, "authority_rate_limit", None)
        authority_rate_limit = SAME_AS_ACTUATOR if own is None else own

    spec = spec or resolve_responses(case)
    loop = build_loop(case, gains)
    shape = batch_shape(loop)
    extra = len(shape) - 1
    out, notes = [], []
    for inp in spec.inputs:
        inp_b = map_arrays(inp, lambda a: a.reshape(a.shape + (1,) * extra) if a.ndim else a)
        res = respond(loop, inp_b, duration=spec.duration, step=spec.step,
                      rate_limit=case.loop.rate_limit, travel=case.loop.travel, authority=authority,
                      authority_rate_limit=authority_rate_limit)
        res = replace(res, input=inp)
        out.append(res)
        notes.extend(n for n in res.augmented.notes if n not in notes)
    return CaseResponses(spec, np.broadcast_to(np.asarray(loop.gain, dtype=float), shape), tuple(out),
                         case.loop.rate_limit, case.loop.travel, tuple(notes), authority,
                         damper_rate_limit(authority_rate_limit, case.loop.rate_limit) if authority is not None else None)

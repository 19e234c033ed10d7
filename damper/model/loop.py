"""The pitch-rate loop: airframe, hardware and gain, batched.

Signal flow (series servo; see docs/theory.md)::

    pilot command r --(+)--> actuator --> airframe --> rate sensor --> washout
                     ^                     (q)                          |
                     |                                               filters
                     +---- -sign(M_delta) K  <-------- delay <----------+

The loop is broken at the actuator input. With the plant ``P(s)`` from the
actuator input to the delayed, filtered pitch-rate measurement, the damper
command is ``u_d = -sign(M_delta) K y`` and the loop transfer function in the
negative-feedback convention (closed loop stable iff ``1 + L`` has no zeros in
the right half-plane) is::

    L(s) = sign(M_delta) K P(s)

Positive ``K`` (seconds: rad of elevator per rad/s of pitch rate) adds damping.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from . import airframe as af
from . import airframes
from .batch import batch_shape, expand
from .elements import Delay


@dataclass(frozen=True)
class Hardware:
    """The loop's hardware; a missing (``None``) element is ideal.

    Attributes
    ----------
    actuator : element or None
        Servo from command to elevator, e.g. :class:`~damper.model.elements.Lag`.
    sensor : element or None
        Rate gyro dynamics.
    washout : element or None
        :class:`~damper.model.elements.Washout`.
    filters : tuple of elements
        Further filters in the feedback path (notch, lead-lag, lags), in order.
    delay : Delay or None
        Total pure delay (computation plus half a sample).
    """

    actuator: object = None
    sensor: object = None
    washout: object = None
    filters: tuple = ()
    delay: Delay | None = None

    def feedback_elements(self) -> tuple:
        """Elements after the airframe, in signal order."""
        items = [self.sensor, self.washout, *self.filters, self.delay]
        return tuple(e for e in items if e is not None)


@dataclass(frozen=True)
class Loop:
    """One pitch-rate loop per batch element.

    Attributes
    ----------
    airframe : Derivatives or LongitudinalDerivatives
        Bare-airframe derivatives (batched): the two-state short period
        (:class:`damper.model.airframe.Derivatives`) or the four-state longitudinal model
        (:class:`damper.model.longitudinal.LongitudinalDerivatives`); the type is the
        same for the whole batch.
    hardware : Hardware
        Loop hardware (batched parameters, one structure).
    gain : ndarray
        Pitch-rate gain K, s (rad elevator per rad/s pitch rate).
    """

    airframe: af.Derivatives | airframes.LongitudinalDerivatives
    hardware: Hardware = field(default_factory=Hardware)
    gain: np.ndarray = 0.0


def feedback_sign(d: af.Derivatives):
    """``sign(M_delta)``: the factor making positive gain add damping."""
    return np.sign(np.asarray(d.M_delta, dtype=float))


# --------------------------------------------------------------------------
# Frequency domain (exact delays)
# --------------------------------------------------------------------------


def _with_axis(loop: Loop) -> Loop:
    return expand(loop, -1)


def actuator_response(loop: Loop, s):
    """Actuator position per command at `s` (1 if ideal). `loop` already expanded."""
    act = loop.hardware.actuator
    return act.response(s) if act is not None else np.ones_like(s)


def feedback_response(loop: Loop, s):
    """Measurement path (sensor, washout, filters, delay) at `s`. `loop` already expanded."""
    out = np.ones_like(s)
    for element in loop.hardware.feedback_elements():
        out = out * element.response(s)
    return out


def _plant_expanded(x: Loop, s):
    return actuator_response(x, s) * airframes.pitch_rate_response(x.airframe, s) * feedback_response(x, s)


def _loop_expanded(x: Loop, s):
    k = feedback_sign(x.airframe) * np.asarray(x.gain, dtype=float)
    return k * _plant_expanded(x, s)


def plant_response(loop: Loop, w):
    """``P(jw)``: filtered, delayed pitch-rate measurement per actuator command (1/s).

    Parameters
    ----------
    loop : Loop
        Batch shape ``S``.
    w : array_like
        Frequencies, rad/s, shape broadcastable to ``S + (k,)``.

    Returns
    -------
    ndarray of complex, shape ``S + (k,)``
    """
    return _plant_expanded(_with_axis(loop), 1j * np.asarray(w, dtype=float))


def loop_response(loop: Loop, w):
    """Loop transfer function ``L(jw) = sign(M_delta) K P(jw)`` broken at the actuator input.

    Returns complex array of shape ``S + (k,)`` (dimensionless).
    """
    return _loop_expanded(_with_axis(loop), 1j * np.asarray(w, dtype=float))


def loop_response_rational(loop: Loop, w):
    """``L(jw)`` without its pure delay (the rational part), shape ``S + (k,)``.

    ``|L| = |rational part|`` (a delay is all-pass) and ``arg L = arg(rational) - w T``.
    """
    x = _with_axis(loop)
    s = 1j * np.asarray(w, dtype=float)
    k = feedback_sign(x.airframe) * np.asarray(x.gain, dtype=float)
    out = k * actuator_response(x, s) * airframes.pitch_rate_response(x.airframe, s)
    for element in x.hardware.feedback_elements():
        if element is not x.hardware.delay:
            out = out * element.response(s)
    return out


def loop_response_function(loop: Loop):
    """A fast evaluator ``f(w) -> L(jw)`` for a fixed loop (the expansion is done once).

    ``w`` must broadcast against ``S + (k,)``.
    """
    x = _with_axis(loop)
    return lambda w: _loop_expanded(x, 1j * np.asarray(w, dtype=float))


def loop_response_at_zero(loop: Loop):
    """``L(0)`` (real, exact), shape ``S``."""
    return np.real(loop_response(loop, np.zeros(1))[..., 0])


def pilot_pitch_rate_response(loop: Loop, w):
    """Closed-loop pitch rate per nose-up pilot command, ``q/c (jw)`` (1/s).

    The command ``c`` (rad, positive nose-up) reaches the actuator input as
    ``sign(M_delta) c`` (:func:`damper.model.airframe.nose_up_surface`), so ``q/c`` starts
    positive for either sign of ``M_delta``.
    """
    x = _with_axis(loop)
    s = 1j * np.asarray(w, dtype=float)
    forward = actuator_response(x, s) * airframes.pitch_rate_response(x.airframe, s)
    k = feedback_sign(x.airframe) * np.asarray(x.gain, dtype=float)
    return af.nose_up_surface(x.airframe) * forward / (1.0 + k * forward * feedback_response(x, s))


# --------------------------------------------------------------------------
# State space (Pade delays)
# --------------------------------------------------------------------------


@dataclass(frozen=True)
class StateLayout:
    """Where each block's states sit in the assembled state vector.

    Attributes
    ----------
    n : int
        Number of states.
    alpha, q : int
        Indices of the airframe's angle of attack (rad) and pitch rate (rad/s).
    blocks : tuple of (label, start, stop)
        Slices of each block, in signal order.
    u, theta : int or None
        Indices of the forward-speed perturbation (m/s) and the pitch attitude (rad) of a
        longitudinal airframe; None for the two-state short period.
    """

    n: int
    alpha: int
    q: int
    blocks: tuple
    u: int | None = None
    theta: int | None = None


def _airframe_block(d):
    """The airframe's state space with pitch rate as its output (2 or 4 states)."""
    A, B = airframes.state_matrices(d)
    shape = A.shape[:-2]
    C = np.zeros(shape + (1, A.shape[-1]))
    C[..., 0, airframes.state_names(d).index("q")] = 1.0
    D = np.zeros(shape + (1, 1))
    return A, B, C, D


def _series(blocks):
    """Series connection of batched SISO blocks, first block first.

    Returns ``A, B, C, D`` of the chain with block states stacked in order.
    """
    shape = np.broadcast_shapes(*(blk[0].shape[:-2] for blk in blocks))
    n = sum(blk[0].shape[-1] for blk in blocks)
    A = np.zeros(shape + (n, n))
    B = np.zeros(shape + (n, 1))
    cy = np.zeros(shape + (1, 0))  # output row of the chain so far
    dy = np.ones(shape + (1, 1))
    start = 0
    for Ai, Bi, Ci, Di in blocks:
        ni = Ai.shape[-1]
        stop = start + ni
        if ni:
            A[..., start:stop, start:stop] = Ai
            if start:
                A[..., start:stop, :start] = Bi @ cy
            B[..., start:stop, :] = Bi @ dy
        cy = np.concatenate([np.broadcast_to(Di @ cy, shape + (1, start)), np.broadcast_to(Ci, shape + (1, ni))], -1)
        dy = np.broadcast_to(Di @ dy, shape + (1, 1))
        start = stop
    return A, B, cy, dy


def plant_state_space(loop: Loop):
    """State space of ``P`` (actuator input to measurement), delays as Pade.

    Returns
    -------
    (A, B, C, D) : batched arrays
        Shapes ``S + (n, n)``, ``S + (n, 1)``, ``S + (1, n)``, ``S + (1, 1)``; ``D`` is zero.
    layout : StateLayout
    """
    hw = loop.hardware
    blocks, labels = [], []
    if hw.actuator is not None:
        blocks.append(hw.actuator.state_space())
        labels.append("actuator")
    blocks.append(_airframe_block(loop.airframe))
    labels.append("airframe")
    names = {id(hw.sensor): "sensor", id(hw.washout): "washout", id(hw.delay): "delay"}
    for element in hw.feedback_elements():
        blocks.append(element.state_space())
        labels.append(names.get(id(element), "filter"))
    A, B, C, D = _series(blocks)
    spans, start = [], 0
    for label, blk in zip(labels, blocks):
        n = blk[0].shape[-1]
        spans.append((label, start, start + n))
        start += n
    start_air = next(s for s in spans if s[0] == "airframe")[1]
    names = airframes.state_names(loop.airframe)
    at = {name: start_air + i for i, name in enumerate(names)}
    layout = StateLayout(
        n=start, alpha=at["alpha"], q=at["q"], blocks=tuple(spans), u=at.get("u"), theta=at.get("theta")
    )
    return (A, B, C, D), layout


def closed_loop_matrix(loop: Loop):
    """Closed-loop state matrix ``A + B (-sign(M_delta) K) C`` (Pade delays).

    Returns
    -------
    A_cl : ndarray, shape ``S + (n, n)``, 1/s
    B : ndarray, shape ``S + (n, 1)``: pilot command (at the actuator input) to state derivatives
    layout : StateLayout
    """
    (A, B, C, _), layout = plant_state_space(loop)
    kfb = -feedback_sign(loop.airframe) * np.asarray(loop.gain, dtype=float)
    A_cl = A + (kfb[..., None, None] * B) @ C
    return A_cl, B, layout


def to_control(loop: Loop, index=(), kind="closed"):
    """Export one loop of the batch as a python-control ``StateSpace``.

    Parameters
    ----------
    loop : Loop
    index : tuple
        Batch index of the loop to export.
    kind : {"closed", "open", "loop"}
        ``"closed"``: pilot command to (alpha rad, q rad/s), and for a longitudinal
        airframe also (u m/s, theta rad), in that order; ``"open"``: the plant
        ``P`` (actuator input to measurement); ``"loop"``: ``L = sign(M_delta) K P``.
        Delays are Pade approximants of the configured order.
    """
    import control

    if kind == "closed":
        A, B, layout = closed_loop_matrix(loop)
        shape = batch_shape(loop)
        A = np.broadcast_to(A, shape + A.shape[-2:])[index]
        B = np.broadcast_to(B, shape + B.shape[-2:])[index]
        outputs = [i for i in (layout.alpha, layout.q, layout.u, layout.theta) if i is not None]
        C = np.zeros((len(outputs), layout.n))
        C[np.arange(len(outputs)), outputs] = 1.0
        return control.ss(A, B, C, np.zeros((len(outputs), 1)))
    (A, B, C, D), layout = plant_state_space(loop)
    shape = batch_shape(loop)
    A, B, C, D = (np.broadcast_to(m, shape + m.shape[-2:])[index] for m in (A, B, C, D))
    if kind == "open":
        return control.ss(A, B, C, D)
    if kind == "loop":
        g = np.broadcast_to(feedback_sign(loop.airframe) * np.asarray(loop.gain, dtype=float), shape)[index]
        return control.ss(A, B, g * C, g * D)
    raise ValueError(f"kind must be 'closed', 'open' or 'loop', not {kind!r}")

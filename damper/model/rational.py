"""The loop's rational part as real factors of degree at most two, evaluated exactly.

Broken at the actuator input (docs/theory.md, section 3) the loop is::

    L(s) = k * prod_i n_i(s) / prod_j d_j(s) * exp(-s T)

with ``k = sign(M_delta) K`` times the elements' constant gains, and every factor a real
polynomial ``c0 + c1 s + c2 s^2``. The elements and the two-state airframe give their
factors as they stand (nothing is factorised numerically); the four-state longitudinal
airframe gives the ``s`` of ``q = s theta`` and its attitude numerator as they stand, and its
characteristic quartic factorised numerically from its roots (stacked companion-matrix
eigenvalues, :mod:`damper.model.factorise`): conjugate pairs and pairs of real roots as
quadratics, an odd real root as a linear factor, the same number of factors for every
member of a batch, with the roots at the origin that numerator and denominator share
cancelled exactly beforehand (:func:`damper.model.longitudinal.pitch_rate_polynomials`).
The factored form then equals the loop to the rounding of those roots (about 1e-14
relative; tested against the direct evaluation). At ``s = jw`` a factor is
``(c0 - c2 w^2) + j c1 w``:

* its phase ``atan2(c1 w, c0 - c2 w^2)`` is continuous for ``w > 0`` when ``c1 != 0``
  (the imaginary part keeps its sign), so the phase of ``L`` is the exact sum of the
  factor phases minus ``w T``: no unwrapping, no grid;
* its phase is monotone in ``w`` except for a quadratic with ``c0 c2 < 0`` (two real roots
  of opposite sign), whose phase turns once, at ``w = sqrt(-c0 / c2)``;
* its squared magnitude ``c2^2 x^2 + (c1^2 - 2 c0 c2) x + c0^2`` is a polynomial in
  ``x = w^2``, monotone in ``x`` on either side of ``x = (2 c0 c2 - c1^2) / (2 c2^2)``.

Those facts make the margins exact (gain crossings as polynomial roots) and let every
frequency-domain search bound how far the phase and gain can move between two
frequencies (:mod:`damper.measures.margins`).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from . import airframe as af
from . import airframes
from .batch import flatten
from .elements import Delay


@dataclass(frozen=True)
class FactoredLoop:
    """A flat batch of loops in factored form (``N`` loops).

    Attributes
    ----------
    gain : ndarray, shape (N,)
        Real constant ``k`` (sign included), dimensionless.
    num, den : ndarray, shape (3, F, N)
        Numerator and denominator factors: ``num[k, i]`` is the coefficient ``c_k`` of
        factor ``i`` in ``c0 + c1 s + c2 s^2`` (units such that each element's ratio is
        its own). The loop axis is last so that numpy's inner loops run along it.
    delay : ndarray, shape (N,)
        Pure delay ``T``, s (0 when there is none).
    """

    gain: np.ndarray
    num: np.ndarray
    den: np.ndarray
    delay: np.ndarray

    @property
    def size(self) -> int:
        return int(self.gain.shape[0])

    def take(self, rows) -> "FactoredLoop":
        """The loops at `rows` (integer array), in that order."""
        return FactoredLoop(self.gain[rows], self.num[:, :, rows], self.den[:, :, rows], self.delay[rows])


def _stack(factors, n):
    """(3, F, N) array from a list of (c0, c1, c2) tuples of broadcastable arrays."""
    out = np.zeros((3, len(factors), n))
    for i, f in enumerate(factors):
        for k in range(3):
            out[k, i] = np.broadcast_to(np.asarray(f[k], dtype=float), (n,))
    return out


def _factored(flat, n, gain, elements) -> FactoredLoop:
    """Factored form of ``gain`` times the airframe's q/delta times ``elements`` (flat loop)."""
    num, den = airframes.pitch_rate_factors(flat.airframe)
    delay = np.zeros(n)
    gain = np.broadcast_to(gain, (n,)).copy()
    for element in elements:
        if element is None:
            continue
        if isinstance(element, Delay):  # a pure delay anywhere in the path adds its time
            delay = delay + np.broadcast_to(np.asarray(element.time, dtype=float), (n,))
            continue
        k, nf, df = element.factors()
        gain = gain * np.broadcast_to(np.asarray(k, dtype=float), (n,))
        num.extend(nf)
        den.extend(df)
    return FactoredLoop(gain, _stack(num, n), _stack(den, n), delay)


def factored_loop(loop) -> tuple[FactoredLoop, tuple]:
    """Factored form of every loop in the batch: ``L = sign(M_delta) K A P_q F``.

    Parameters
    ----------
    loop : Loop
        Any batch shape ``S``.

    Returns
    -------
    FactoredLoop
        ``N = prod(S)`` loops, flattened in C order.
    shape : tuple
        ``S``.
    """
    from .loop import feedback_sign

    flat, shape = flatten(loop)
    n = int(np.prod(shape)) if shape else 1
    gain = feedback_sign(flat.airframe) * np.asarray(flat.gain, dtype=float)
    hw = flat.hardware
    return _factored(flat, n, gain, (hw.actuator, *hw.feedback_elements())), shape


def factored_forward(loop) -> tuple[FactoredLoop, tuple]:
    """Factored form of the pilot's path: pitch rate per nose-up command, ``sign(M_delta) A P_q``.

    Same layout as :func:`factored_loop`; the command is counted positive nose-up
    (:func:`damper.model.airframe.nose_up_surface`).
    """
    flat, shape = flatten(loop)
    n = int(np.prod(shape)) if shape else 1
    return _factored(flat, n, af.nose_up_surface(flat.airframe), (flat.hardware.actuator,)), shape


# ----------------------------------------------------------------------------------
# evaluation at s = jw
# ----------------------------------------------------------------------------------


def factor_values(fl: FactoredLoop, w):
    """Per-factor phases (rad) and squared magnitudes at ``jw``.

    Parameters
    ----------
    fl : FactoredLoop
        ``M`` loops.
    w : ndarray, shape (K, M)
        Frequencies, rad/s (> 0): ``K`` per loop, the loop axis last.

    Returns
    -------
    num_phase, den_phase : ndarray, shapes (Fn, K, M) and (Fd, K, M)
        Phases of the factors, rad; ``arg L = arg k + sum(num_phase) - sum(den_phase) - w T``.
    num_sq, den_sq : ndarray, shapes (Fn, K, M) and (Fd, K, M)
        ``|n_i(jw)|^2`` and ``|d_j(jw)|^2``: ``|L|^2 = k^2 prod(num_sq) / prod(den_sq)``.

    Notes
    -----
    The loop axis is last and the factor axis first, so that every operation (and every
    sum or product over the factors) runs over long contiguous rows of loops.
    """
    ww = w * w
    out = []
    for coef in (fl.num, fl.den):
        re, im = _factor_parts(coef, w, ww)
        out.append((np.arctan2(im, re), re * re + im * im))
    (num_phase, num_sq), (den_phase, den_sq) = out
    return num_phase, den_phase, num_sq, den_sq


def _factor_parts(coef, w, ww):
    """Real and imaginary parts of every factor at ``jw`` (``w`` (K, M), ``ww = w * w``): (F, K, M) each."""
    c0, c1, c2 = coef[0][:, None, :], coef[1][:, None, :], coef[2][:, None, :]
    return c0 - c2 * ww, c1 * w


def gain_phase(fl: FactoredLoop) -> np.ndarray:
    """``arg k``: 0 or pi rad, shape (M,)."""
    return np.where(fl.gain < 0, np.pi, 0.0)


def log_gain(fl: FactoredLoop) -> np.ndarray:
    """``ln |k|``, shape (M,) (``-inf`` for a zero gain)."""
    with np.errstate(divide="ignore"):
        return np.log(np.abs(fl.gain))


def evaluate(fl: FactoredLoop, w):
    """Exact ``ln |L(jw)|`` and continuous phase ``arg L(jw)`` (rad, delay included).

    Parameters
    ----------
    fl : FactoredLoop
        ``M`` loops.
    w : ndarray, shape (M, K)
        rad/s (> 0).

    Returns
    -------
    logmag, phase : ndarray, shape (M, K)
    """
    wt = np.ascontiguousarray(np.asarray(w, dtype=float).T)
    nph, dph, nsq, dsq = factor_values(fl, wt)
    return _logmag(fl, nsq, dsq).T, _phase(fl, wt, nph, dph).T


def _logmag(fl, nsq, dsq):
    """``ln |L|`` from the factors' squared magnitudes (K, M)."""
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        return log_gain(fl) + 0.5 * np.log(nsq.prod(0) / dsq.prod(0))


def _phase(fl, wt, nph, dph):
    """``arg L`` (rad, delay included) from the factors' phases (K, M)."""
    return gain_phase(fl) + nph.sum(0) - dph.sum(0) - wt * fl.delay


def _leads(part: FactoredLoop, whole: FactoredLoop) -> bool:
    """Whether ``part``'s factors are the leading factors of ``whole``'s, loop for loop."""
    fn, fd = part.num.shape[1], part.den.shape[1]
    return (part.size == whole.size and fn <= whole.num.shape[1] and fd <= whole.den.shape[1]
            and np.array_equal(whole.num[:, :fn], part.num) and np.array_equal(whole.den[:, :fd], part.den))


def evaluate_both(fl: FactoredLoop, part: FactoredLoop, w):
    """``evaluate(fl, w)`` and ``evaluate(part, w)``, bit for bit.

    When ``part``'s factors lead ``fl``'s (the pilot's forward path and the loop: the
    airframe's and the actuator's factors come first in both), each factor is evaluated
    once: a factor's value does not depend on the others, and the sums and products over
    the leading rows run in the same order as over ``part``'s own.
    """
    if not _leads(part, fl):
        return evaluate(fl, w), evaluate(part, w)
    wt = np.ascontiguousarray(np.asarray(w, dtype=float).T)
    nph, dph, nsq, dsq = factor_values(fl, wt)
    fn, fd = part.num.shape[1], part.den.shape[1]
    whole = (_logmag(fl, nsq, dsq).T, _phase(fl, wt, nph, dph).T)
    lead = (_logmag(part, nsq[:fn], dsq[:fd]).T, _phase(part, wt, nph[:fn], dph[:fd]).T)
    return whole, lead


def evaluate_logmag(fl: FactoredLoop, w):
    """``ln |L(jw)|`` alone, shape (M, K): the first result of :func:`evaluate`, bit for bit,
    without the phases (no arctangent)."""
    wt = np.ascontiguousarray(np.asarray(w, dtype=float).T)
    ww = wt * wt
    sq = []
    for coef in (fl.num, fl.den):
        re, im = _factor_parts(coef, wt, ww)
        sq.append(re * re + im * im)
    return _logmag(fl, *sq).T


def evaluate_phase(fl: FactoredLoop, w):
    """``arg L(jw)`` alone (rad, delay included), shape (M, K): the second result of
    :func:`evaluate`, bit for bit, without the magnitudes."""
    wt = np.ascontiguousarray(np.asarray(w, dtype=float).T)
    ww = wt * wt
    ph = [np.arctan2(im, re) for re, im in (_factor_parts(coef, wt, ww) for coef in (fl.num, fl.den))]
    return _phase(fl, wt, *ph).T


def response(fl: FactoredLoop, w):
    """``L(jw)`` (complex, dimensionless), shape (M, K)."""
    logmag, phase = evaluate(fl, w)
    with np.errstate(over="ignore", invalid="ignore"):
        return np.exp(logmag + 1j * phase)


def at_zero(fl: FactoredLoop) -> np.ndarray:
    """``L(0)`` (real), shape (M,): the limit ``w -> 0`` (``+-inf`` with more poles than zeros
    at the origin, 0 with more zeros; origin factors that cancel are taken out)."""

    def lowest(coef):
        """Per loop: power of s at the origin, and the product of the lowest coefficients."""
        c0, c1, c2 = coef
        power = np.where(c0 != 0, 0, np.where(c1 != 0, 1, 2))
        value = np.where(c0 != 0, c0, np.where(c1 != 0, c1, c2))
        return power.sum(0), np.prod(value, 0)

    pn, vn = lowest(fl.num)
    pd, vd = lowest(fl.den)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = fl.gain * vn / vd
        return np.where(pn > pd, 0.0, np.where(pn < pd, np.copysign(np.inf, ratio), ratio))


# ----------------------------------------------------------------------------------
# squared magnitude as a polynomial in x = w^2
# ----------------------------------------------------------------------------------


def _poly_mul(a, b):
    """Batched product of polynomials (lowest power first): (M, p), (M, q) -> (M, p + q - 1)."""
    out = np.zeros((a.shape[0], a.shape[1] + b.shape[1] - 1))
    for j in range(b.shape[1]):
        out[:, j : j + a.shape[1]] += a * b[:, j : j + 1]
    return out


def _squared_magnitude(coef):
    """Product over factors of ``|f(jw)|^2`` as a polynomial in ``x = w^2`` (lowest first)."""
    c0, c1, c2 = coef
    quad = np.stack([c0 * c0, c1 * c1 - 2.0 * c0 * c2, c2 * c2], -1)  # (F, M, 3)
    out = np.ones((coef.shape[2], 1))
    for i in range(coef.shape[1]):
        out = _poly_mul(out, quad[i])
    return out


def crossing_polynomial(fl: FactoredLoop) -> np.ndarray:
    """``k^2 |N(jw)|^2 - |D(jw)|^2`` as a polynomial in ``x = w^2``, lowest power first.

    Its positive real roots are exactly the squared gain-crossing frequencies (the delay
    is all-pass). Shape (M, d + 1) with ``d`` the larger of the two degrees.
    """
    nn = _squared_magnitude(fl.num) * (fl.gain * fl.gain)[:, None]
    dd = _squared_magnitude(fl.den)
    size = max(nn.shape[1], dd.shape[1])
    out = np.zeros((fl.size, size))
    out[:, : nn.shape[1]] += nn
    out[:, : dd.shape[1]] -= dd
    return out

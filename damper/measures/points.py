"""A loop evaluated at one frequency per loop, many times over (the margins' searches).

The searches of :mod:`damper.measures.margins` (regula falsi on the gain and phase
crossings, golden sections on the disk-margin peak and the phase's tangencies) evaluate
the same loops again and again, each at its own frequency. :func:`prepared` gathers once
what does not change between evaluations: the numerator's and the denominator's factor
coefficients in one array (numerator first), ``arg k`` and ``ln |k|``. Each evaluation
then makes one pass over all the factors instead of one per group.

Every value equals :func:`damper.model.rational.evaluate` (and its magnitude-only and
phase-only forms) at ``w[:, None]`` bit for bit: each factor's real and imaginary parts,
phase and squared magnitude are the same operations on the same numbers, and the sums
and products over the factors run over arrays of the same shape in the same order.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..model.rational import FactoredLoop, gain_phase, log_gain


@dataclass(frozen=True)
class PreparedLoops:
    """``M`` loops ready for evaluation at one frequency each.

    Attributes
    ----------
    coef : ndarray, shape (3, Fn + Fd, M)
        Coefficients ``(c0, c1, c2)`` of every factor ``c0 + c1 s + c2 s^2``, the
        numerator's ``Fn`` first (units such that each element's ratio is its own).
    n_num : int
        ``Fn``.
    arg_k : ndarray, shape (M,)
        ``arg k``, 0 or pi rad.
    log_k : ndarray, shape (M,)
        ``ln |k|`` (``-inf`` for a zero gain).
    delay : ndarray, shape (M,)
        Pure delay, s.
    """

    coef: np.ndarray
    n_num: int
    arg_k: np.ndarray
    log_k: np.ndarray
    delay: np.ndarray

    def take(self, rows) -> "PreparedLoops":
        """The loops at `rows` (integer array), in that order."""
        return PreparedLoops(self.coef.take(rows, axis=2), self.n_num, self.arg_k.take(rows), self.log_k.take(rows),
                             self.delay.take(rows))


def prepared(fl: FactoredLoop) -> PreparedLoops:
    """:class:`PreparedLoops` of `fl` (its ``M`` loops, in order)."""
    return PreparedLoops(np.concatenate([fl.num, fl.den], axis=1), fl.num.shape[1], gain_phase(fl), log_gain(fl),
                         fl.delay)


def _parts(p: PreparedLoops, w):
    """``w`` as (1, M), and every factor's real and imaginary parts at ``jw``, (F, 1, M) each."""
    wt = np.ascontiguousarray(np.asarray(w, dtype=float)).reshape(1, -1)
    ww = wt * wt
    c0, c1, c2 = p.coef[0][:, None, :], p.coef[1][:, None, :], p.coef[2][:, None, :]
    return wt, c0 - c2 * ww, c1 * wt


def _logmag(p: PreparedLoops, sq):
    """``ln |L|`` (1, M) from every factor's squared magnitude (F, 1, M)."""
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        return p.log_k + 0.5 * np.log(sq[: p.n_num].prod(0) / sq[p.n_num :].prod(0))


def _phase(p: PreparedLoops, wt, ph):
    """``arg L`` (1, M), rad, delay included, from every factor's phase (F, 1, M)."""
    return p.arg_k + ph[: p.n_num].sum(0) - ph[p.n_num :].sum(0) - wt * p.delay


def logmag_phase(p: PreparedLoops, w):
    """Exact ``ln |L|`` (nepers) and ``arg L`` (rad) of each loop at its own ``w`` (rad/s, shape (M,))."""
    wt, re, im = _parts(p, w)
    ph = np.arctan2(im, re)
    sq = re * re + im * im
    return _logmag(p, sq)[0], _phase(p, wt, ph)[0]


def phase(p: PreparedLoops, w):
    """``arg L`` (rad) alone: the second result of :func:`logmag_phase`, bit for bit."""
    wt, re, im = _parts(p, w)
    return _phase(p, wt, np.arctan2(im, re))[0]


def logmag(p: PreparedLoops, w):
    """``ln |L|`` (nepers) alone: the first result of :func:`logmag_phase`, bit for bit."""
    _, re, im = _parts(p, w)
    return _logmag(p, re * re + im * im)[0]

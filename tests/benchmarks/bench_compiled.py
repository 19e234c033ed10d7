"""Would a compiled loop beat numpy here? The interval accumulation of
``damper.measures.freqset._accumulate`` (every factor's phase and squared magnitude at every
frequency, with their bounds on every interval) written as a numba loop with the same
operations per element, timed against numpy on the robustness study's own loops, and the
two compared. Also each one's ``arctan2``.

    pip install numba   # in a scratch environment: damper does not depend on numba
    python tests/benchmarks/bench_compiled.py

Not collected by pytest (tests/benchmarks is excluded in pyproject.toml). docs/performance.md
("What the unmet targets are up against") has its result.
"""

import math
import os
import sys
import time

import numpy as np

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
sys.path.insert(0, ROOT)
sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))

try:
    import numba
except ImportError:
    sys.exit("this benchmark needs numba (pip install numba in a scratch environment)")

from damper.measures import freqset  # noqa: E402
from damper.model.rational import factored_loop, gain_phase  # noqa: E402


@numba.njit(error_model="numpy")
def acc_kernel(coef, sign, w, ww, phase, th_lo, th_hi, prod, m_lo, m_hi):
    """freqset._accumulate's operations, element by element (sign +1: numerator, -1: denominator)."""
    F = coef.shape[1]
    K, M = w.shape
    ph_prev = np.empty(M); sq_prev = np.empty(M)
    for i in range(F):
        c0 = coef[0, i]; c1 = coef[1, i]; c2 = coef[2, i]
        for k in range(K):
            for m in range(M):
                re = c0[m] - c2[m] * ww[k, m]
                im = c1[m] * w[k, m]
                ph = np.arctan2(im, re)
                sq = re * re + im * im
                if sign > 0:
                    phase[k, m] += ph
                else:
                    phase[k, m] -= ph
                prod[k, m] *= sq
                if k > 0:
                    a = ph_prev[m]; b = sq_prev[m]
                    lo = min(a, ph); hi = max(a, ph)
                    slo = min(b, sq); shi = max(b, sq)
                    if sign > 0:
                        th_lo[k-1, m] += lo; th_hi[k-1, m] += hi
                        m_lo[k-1, m] *= slo; m_hi[k-1, m] *= shi
                    else:
                        th_lo[k-1, m] -= hi; th_hi[k-1, m] -= lo
                        m_lo[k-1, m] /= shi; m_hi[k-1, m] /= slo
                ph_prev[m] = ph; sq_prev[m] = sq


def setup(fl, w):
    """The accumulators as intervals_between starts them."""
    k, m = w.shape
    g_p = gain_phase(fl)
    phase = g_p - w * fl.delay
    th_lo = np.empty((k - 1, m)); th_lo[...] = g_p
    return phase, th_lo, th_lo.copy(), np.ones_like(w), np.ones_like(w), np.ones((k-1, m)), np.ones((k-1, m))


def numpy_way(fl, w):
    """freqset._accumulate over the numerator, then the denominator."""
    phase, th_lo, th_hi, num, den, m_lo, m_hi = setup(fl, w)
    ww = w * w
    buf = (np.empty_like(w), np.empty_like(w), np.empty_like(w), np.empty_like(th_lo), np.empty_like(th_lo))
    with np.errstate(all="ignore"):
        freqset._accumulate(fl.num, 1, w, ww, (phase, th_lo, th_hi, num, m_lo, m_hi), buf)
        freqset._accumulate(fl.den, -1, w, ww, (phase, th_lo, th_hi, den, m_lo, m_hi), buf)
    return phase, th_lo, th_hi, num, den, m_lo, m_hi


def compiled_way(fl, w):
    """The same with the compiled loop."""
    phase, th_lo, th_hi, num, den, m_lo, m_hi = setup(fl, w)
    ww = w * w
    acc_kernel(np.ascontiguousarray(fl.num), 1, w, ww, phase, th_lo, th_hi, num, m_lo, m_hi)
    acc_kernel(np.ascontiguousarray(fl.den), -1, w, ww, phase, th_lo, th_hi, den, m_lo, m_hi)
    return phase, th_lo, th_hi, num, den, m_lo, m_hi


@numba.njit
def _atan2_loop(y, x, out):
    for i in range(x.size):
        out[i] = math.atan2(y[i], x[i])


def arctan2_ns():
    """ns per element of numpy's arctan2 and of the compiled loop's, on 56,100 elements."""
    rng = np.random.default_rng(1)
    x, y = rng.random(56_100) + 0.1, rng.random(56_100) - 0.5
    out = np.empty_like(x)
    _atan2_loop(y, x, out)
    res = []
    for fn in (lambda: np.arctan2(y, x, out=out), lambda: _atan2_loop(y, x, out)):
        ts = []
        for _ in range(21):
            t = time.perf_counter()
            fn()
            ts.append(time.perf_counter() - t)
        res.append(float(np.median(ts)) / x.size * 1e9)
    return res


def main():
    from bench_cluster import study_case

    from damper.analysis.robustness import resolve_axes, uncertainty_spec
    from damper.analysis.uncertainty import sample_rows, sampled_loop

    # 51 samples of the robustness benchmark's study at its 20 conditions: 1,020 loops
    case = study_case(20, 2000)
    g = np.full(20, 0.15)
    axes = resolve_axes(case, uncertainty_spec(case), g)
    u = sample_rows(axes, 1, 0, 51)
    fl, _ = factored_loop(sampled_loop(case, axes, g, np.arange(20)[:, None], u[None, :, :]))
    n = fl.size
    w, _ = freqset.base_frequencies(fl, case.settings.grid())  # the points base_intervals evaluates
    a = numpy_way(fl, w)
    b = compiled_way(fl, w)
    same = all(np.array_equal(x, y, equal_nan=True) for x, y in zip(a, b))
    worst = max(float(np.nanmax(np.abs(x - y) / np.maximum(np.abs(x), 1e-300))) for x, y in zip(a, b))
    print("K x M =", w.shape, "bit for bit:", same, "largest relative difference:", worst)
    tn, tc = [], []
    for _ in range(7):  # interleaved, medians
        for fn, times in ((numpy_way, tn), (compiled_way, tc)):
            t = time.perf_counter()
            fn(fl, w)
            times.append(time.perf_counter() - t)
    print(f"numpy {np.median(tn)/n*1e6:.2f} us/loop, compiled {np.median(tc)/n*1e6:.2f} us/loop, "
          f"compiled/numpy {np.median(tc)/np.median(tn):.2f}")
    a_np, a_nb = arctan2_ns()
    print(f"arctan2: numpy {a_np:.2f} ns per element, compiled loop {a_nb:.2f} ns")


if __name__ == "__main__":
    main()

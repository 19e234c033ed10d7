"""Speed benchmark: damper's batched engine against the per-case python-control workflow
and against the numerical floor, measured in ONE run on the same cases (ratios, not
absolute times, are the result; the machine is shared and noisy).

    python tests/benchmarks/bench_engine.py [--quick]

(a) per-case python-control: build the loop from blocks (tf/ss, pade, series), close it
    with ``feedback``, take the poles and the short-period damping, ``stability_margins``;
(b) damper: ``closed_loop_matrix`` + ``closed_loop_modes`` + ``loop_margins`` on the batch
    (every crossing, gain/phase/delay/disk margins);
(c) floor: the minimal exact computation: ``np.linalg.eigvals`` on the same stack of closed
    loops + the roots of every loop's gain-crossing polynomial (stacked companion matrices).
Also the batched equivalent-system fit against a per-system scipy least_squares loop,
``damper --help`` start-up and ``damper design`` on the largest demo case; at the end the
peak memory of large cases and studies and the time damper takes to stop
(bench_limits.py, which also runs on its own).
Not collected by pytest (tests/benchmarks is excluded in pyproject.toml).
"""

from __future__ import annotations

import os
import subprocess
import sys
import time

import numpy as np

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
sys.path.insert(0, ROOT)

from damper.measures.margins import loop_margins  # noqa: E402
from damper.measures.modes import closed_loop_modes  # noqa: E402
from damper.model.airframe import Derivatives, state_matrices  # noqa: E402
from damper.model.elements import Delay, Lag, Washout  # noqa: E402
from damper.model.loop import Hardware, Loop, closed_loop_matrix  # noqa: E402

TAU_ACT, TAU_GYRO, TAU_WASH, DELAY, PADE = 1 / 20.0, 0.01, 1.0, 0.02, 2


def cases(n, seed=7):
    """Invented random airframes and gains (benchmark data only)."""
    rng = np.random.default_rng(seed)
    d = Derivatives(
        airspeed=rng.uniform(40, 250, n),
        Z_alpha=-rng.uniform(80, 1500, n),
        Z_q=np.zeros(n),
        Z_delta=-rng.uniform(0, 40, n),
        M_alpha=-rng.uniform(1, 30, n),
        M_alpha_dot=-rng.uniform(0, 1, n),
        M_q=-rng.uniform(0.4, 4, n),
        M_delta=-rng.uniform(5, 50, n),
    )
    hw = Hardware(actuator=Lag(TAU_ACT), sensor=Lag(TAU_GYRO), washout=Washout(TAU_WASH), delay=Delay(np.asarray(DELAY), PADE))
    return Loop(d, hw, rng.uniform(0.05, 0.6, n))


def per_case_control(loop, idx):
    """The idiomatic script: python-control objects per case."""
    import control

    A, B = state_matrices(loop.airframe)
    act = control.tf([1], [TAU_ACT, 1])
    gyro = control.tf([1], [TAU_GYRO, 1])
    wash = control.tf([TAU_WASH, 0], [TAU_WASH, 1])
    num, den = control.pade(DELAY, PADE)
    dly = control.tf(num, den)
    out = []
    for i in idx:
        air = control.ss(A[i], B[i], [[0.0, 1.0]], [[0.0]])
        k = np.sign(loop.airframe.M_delta[i]) * loop.gain[i]
        L = control.series(act, air, gyro, wash, dly) * k
        cl = control.feedback(L, 1)
        poles = cl.poles()
        # short period: the complex pair nearest the bare airframe's frequency
        wn, zeta, _ = control.damp(cl, doprint=False)
        gm, pm, _, wpc, wgc, _ = control.stability_margins(L)
        out.append((np.sort_complex(poles), gm, pm))
    return out


def damper_engine(loop):
    A, _, lay = closed_loop_matrix(loop)
    modes = closed_loop_modes(A, lay.alpha, lay.q)
    margins = loop_margins(loop, stable=modes.stable)
    return modes, margins


def floor(loop, chunk=1024):
    """Stacked closed-loop eigenvalues plus the roots of the gain-crossing polynomials (the
    minimal exact computation: every gain crossing, no phase or disk search), in the same
    chunks as the engine."""
    from damper.measures.margins import _polynomial_roots
    from damper.model.rational import crossing_polynomial, factored_loop

    A, _, _ = closed_loop_matrix(loop)
    lam = np.linalg.eigvals(A)
    n = A.shape[0]
    count = 0
    for start in range(0, n, chunk):
        fl, _ = factored_loop(take(loop, slice(start, min(n, start + chunk))))
        roots = _polynomial_roots(crossing_polynomial(fl))
        count += int(np.sum(roots.real > 0))
    return lam, count


def timed(fn, *args, repeat=1):
    best = np.inf
    out = None
    for _ in range(repeat):
        t = time.perf_counter()
        out = fn(*args)
        best = min(best, time.perf_counter() - t)
    return best, out


def take(loop, sl):
    from damper.model.batch import flatten, take as tk

    flat, _ = flatten(loop)
    return tk(flat, sl)


def check_agreement(loop, sample):
    """Poles and margins of (a) and (b) agree on a sample."""
    sub = take(loop, sample)
    ref = per_case_control(loop, sample)
    modes, margins = damper_engine(sub)
    worst_pole = 0.0
    for j, (poles, gm, pm) in enumerate(ref):
        ours = np.sort_complex(modes.eigenvalues[j])
        worst_pole = max(worst_pole, np.max(np.abs(ours - poles) / np.maximum(1, np.abs(poles))))
        if np.isfinite(gm) and gm > 1:
            assert abs(margins.gain_margin_db[j] - 20 * np.log10(gm)) < 0.05, (j, margins.gain_margin_db[j], gm)
    return worst_pole


def bench_equivalent(n):
    """The batched fit (single start with fallback, and all six starts) against per-system
    scipy ``least_squares`` scripts: six generic starts, and one start with an analytic
    Jacobian (the fair single-start comparison)."""
    from scipy.optimize import least_squares

    from damper.measures.equivalent import fit_equivalent_system, fit_frequencies
    from damper.measures.handling import pilot_log_response
    from damper.model.airframe import inverse_t_theta2
    from damper.model.batch import flatten

    loop = cases(n, seed=11)
    w = fit_frequencies()
    flat, _ = flatten(loop)
    log_h = pilot_log_response(flat, w)
    z = inverse_t_theta2(flat.airframe)
    t_batch, fit = timed(lambda: fit_equivalent_system(w, log_h, z, log_response=True))
    t_six, fit6 = timed(lambda: fit_equivalent_system(w, log_h, z, log_response=True, starts="all"))
    t_j20, fit_j20 = timed(lambda: fit_equivalent_system(w, log_h, z, log_response=True, starts="fallback"))
    H = np.exp(log_h)
    m = min(n, 100)
    s = 1j * w
    c_g, c_p = 20.0 / np.log(10.0), np.sqrt(0.01745) * 180.0 / np.pi

    def resid(p, h, zero):
        kq, zeta, wn, tau = p
        he = kq * (s + zero) * np.exp(-tau * s) / (s * s + 2 * zeta * wn * s + wn * wn)
        r = he / h
        return np.concatenate([20 * np.log10(np.abs(r)), np.sqrt(0.01745) * np.degrees(np.angle(r))])

    def jac(p, h, zero):
        kq, zeta, wn, tau = p
        d = s * s + 2 * zeta * wn * s + wn * wn
        cols = [np.full(w.size, 1.0 / kq + 0j), -2 * wn * s / d, -(2 * zeta * s + 2 * wn) / d, -s]  # d ln he / dp
        return np.column_stack([np.concatenate([c_g * c.real, c_p * c.imag]) for c in cols])

    bounds = ([-np.inf, 1e-3, 1e-3, 0], [np.inf, 50, 500, 1])
    t = time.perf_counter()
    worse = 0
    for i in range(m):  # six generic starts per system (no help from the batched answer)
        k0 = float(np.abs(H[i, 0]) * 9.0 / max(z[i], 1e-3)) * np.sign(H[i, 0].real or 1.0)
        best = np.inf
        for zeta0 in (0.3, 0.7, 1.5):
            for tau0 in (0.0, 0.08):
                r = least_squares(resid, [k0, zeta0, 3.0, tau0], args=(H[i], z[i]), bounds=bounds)
                best = min(best, 2 * r.cost * 20 / w.size)
        worse += best < fit.mismatch[i] * (1 - 1e-6) - 1e-9
    t_six_scipy = (time.perf_counter() - t) / m * n
    t = time.perf_counter()
    for i in range(m):  # one start, analytic Jacobian
        k0 = float(np.abs(H[i, 0]) * 9.0 / max(z[i], 1e-3)) * np.sign(H[i, 0].real or 1.0)
        least_squares(resid, [k0, 0.7, 3.0, 0.0], jac=jac, args=(H[i], z[i]), bounds=bounds)
    t_one_scipy = (time.perf_counter() - t) / m * n
    print(f"  (scipy with six starts found a lower cost than the batched fit on {worse} of {m} systems; "
          f"the batched fit fell back to six starts on {int(np.sum(fit.fallback))} of {n})")
    same = np.allclose(fit.mismatch, fit6.mismatch, rtol=1e-6, atol=1e-9)
    print(f"  batched single start with fallback (default rule, above J = 100) {t_batch:.2f} s, all six starts "
          f"{t_six:.2f} s (ratio {t_six / t_batch:.2f}; mismatches {'equal' if same else 'differ'} to 1e-6)")
    same_j20 = np.allclose(fit_j20.mismatch, fit6.mismatch, rtol=1e-6, atol=1e-9)
    print(f"  starts='fallback' (the rule before, above J = 20): {t_j20:.2f} s, fell back on {int(np.sum(fit_j20.fallback))} "
          f"of {n} (ratio to six starts {t_six / t_j20:.2f}; mismatches {'equal' if same_j20 else 'differ'} to 1e-6)")
    return t_batch, t_six_scipy, t_one_scipy, t_six / t_batch


def bench_equivalent_study(samples=100, n_conditions=20, repeat=5):
    """The fit on the robustness study's own loops (:func:`bench_robustness`'s case, `samples`
    per condition): each start rule, interleaved, medians. Returns {rule: (s, fallbacks)}."""
    sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
    from bench_cluster import study_case

    from damper.analysis.uncertainty import resolve_axes, sample_rows, sampled_loop, uncertainty_spec
    from damper.measures.equivalent import fit_equivalent_system, fit_frequencies
    from damper.measures.handling import pilot_log_response
    from damper.model.airframe import inverse_t_theta2
    from damper.model.batch import flatten

    case = study_case(n_conditions, samples)
    spec = uncertainty_spec(case)
    gains = np.full(n_conditions, 0.15)
    axes = resolve_axes(case, spec, gains)
    u = sample_rows(axes, spec.seed, 0, samples)
    flat, _ = flatten(sampled_loop(case, axes, gains, np.arange(n_conditions)[:, None], u[None, :, :]))
    w = fit_frequencies()
    log_h, z = pilot_log_response(flat, w), inverse_t_theta2(flat.airframe)
    times = {rule: [] for rule in ("fallback", "basin", "all")}
    for _ in range(repeat):
        for rule in times:
            t, fit = timed(lambda: fit_equivalent_system(w, log_h, z, log_response=True, starts=rule))
            times[rule].append((t, int(np.sum(fit.fallback))))
    return {rule: (float(np.median([t for t, _ in v])), v[0][1]) for rule, v in times.items()}


def bench_robustness(samples=10_000, n_conditions=20, processes=None, workers=None):
    """Robustness study of `samples` x `n_conditions`: the uncertain demo's conditions, cycled
    with airspeeds scaled 0.9-1.1 (benchmark data only), at K = 0.15 s everywhere.
    `processes`/`workers` as :func:`damper.analysis.robustness.robustness` (None: its default)."""
    sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
    from bench_cluster import study_case

    from damper.analysis.robustness import robustness, uncertainty_spec

    case = study_case(n_conditions, samples)
    spec = uncertainty_spec(case)
    t = time.perf_counter()
    r = robustness(case, 0.15, spec, processes=processes, workers=workers)
    return time.perf_counter() - t, r.evaluations


def main(quick=False):
    print(f"damper engine benchmark, {time.strftime('%Y-%m-%d')}, {os.cpu_count()} cores, numpy {np.__version__}")
    sizes = [2000] if quick else [2000, 200_000]
    m = 100 if quick else 300
    for n in sizes:
        loop = cases(n)
        sample = np.arange(min(m, n))
        per_case_control(loop, np.arange(5))  # warm-up: python-control's first calls import and cache
        t_a_sub, _ = timed(per_case_control, loop, sample)
        t_a = t_a_sub / len(sample) * n  # per-case cost extrapolated from the sample
        # median of 5, interleaved so that both see the same load (the machine is shared)
        pairs = [(timed(damper_engine, loop)[0], timed(floor, loop)[0]) for _ in range(5)]
        t_b, t_c = (float(np.median(col)) for col in zip(*pairs))
        err = check_agreement(loop, np.arange(min(50, n)))
        print(f"N = {n:>7}: (a) python-control per case {t_a / n * 1e6:8.1f} us/case (measured on {len(sample)})")
        print(f"           (b) damper batched          {t_b / n * 1e6:8.1f} us/case")
        print(f"           (c) floor eigvals + crossing roots {t_c / n * 1e6:8.1f} us/case")
        print(f"           a/b = {t_a / t_b:7.1f}   b/c = {t_b / t_c:5.2f}   (poles agree to {err:.1e} relative)")
        summary = {"a/b": t_a / t_b, "b/c": t_b / t_c}  # the largest N is the one quoted
    t_batch, t_six, t_one, loes_speedup = bench_equivalent(2000)
    print(f"equivalent-system fit, 2000 systems: batched {t_batch:.2f} s; per-system least_squares (extrapolated "
          f"from 100) x 6 starts {t_six:.1f} s (ratio {t_six / t_batch:.0f}), x 1 start with analytic Jacobian "
          f"{t_one:.1f} s (ratio {t_one / t_batch:.0f})")
    print("equivalent-system fit on the robustness study's 2000 loops (medians of 5, interleaved): " + "; ".join(
        f"starts={rule!r} {t / 2000 * 1e6:.0f} us/system (fallback on {fb})" for rule, (t, fb) in bench_equivalent_study().items()))
    samples = 2000 if quick else 10_000
    # threads against local processes (2 workers each), interleaved, median of 3 pairs
    runs = {"threads": [], "processes": []}
    for _ in range(1 if quick else 3):
        for kind in runs:
            runs[kind].append(bench_robustness(samples, processes=(kind == "processes"), workers=2))
    evals = runs["threads"][0][1]
    t_thr = float(np.median([t for t, _ in runs["threads"]]))
    t_proc = float(np.median([t for t, _ in runs["processes"]]))
    t_rob = min(t_thr, t_proc)
    print(f"robustness {samples} samples x 20 conditions ({evals} loops with corners and worst-case search), "
          f"2 workers, median of {len(runs['threads'])}: threads {t_thr:.1f} s ({t_thr / evals * 1e6:.0f} us per loop), "
          f"processes {t_proc:.1f} s ({t_proc / evals * 1e6:.0f} us per loop); processes/threads = {t_proc / t_thr:.2f}")
    summary.update(loes_speedup=loes_speedup, robust_s=t_rob)
    demo = [sys.executable, "-m", "damper", "design", "cases/utility_single_aft_cg.yaml", "--out", None]
    first = [sys.executable, "-m", "damper", "assess", "cases/utility_single_aft_cg.yaml", "--gain", "0.1"]
    summary["design_demo_s"] = _median_of(5, demo)
    summary["assess_first_answer_s"] = _median_of(9, first)
    print(f"damper design on the demo (figures, responses, report): {summary['design_demo_s']:.2f} s; damper assess "
          f"--gain 0.1: {summary['assess_first_answer_s']:.3f} s (wall, medians)")
    print(f"damper --help: {_median_of(5, [sys.executable, '-m', 'damper', '--help']):.3f} s (median of 5)")
    import tempfile

    with tempfile.TemporaryDirectory() as tmp:
        # the demos with their 2,000 samples, and again with 10,000 (issue target: the largest
        # demo, with envelope, schedule verification and robustness, is the regional twin-jet)
        big = {}
        for name in ("regional_twinjet_envelope", "utility_single_uncertain"):
            with open(os.path.join(ROOT, "cases", name + ".yaml")) as f:
                text = f.read()
            assert "\n  samples: 2000\n" in text
            big[name] = os.path.join(tmp, name + "_10k.yaml")
            with open(big[name], "w") as f:
                f.write(text.replace("\n  samples: 2000\n", "\n  samples: 10000\n"))
        runs = [("cases/regional_twinjet_envelope.yaml", "regional twin-jet (2-D schedule, 12-point robustness), 2,000 samples"),
                (big["regional_twinjet_envelope"], "regional twin-jet, 10,000 samples (the largest demo)"),
                ("cases/utility_single_uncertain.yaml", "uncertain utility demo (7 conditions), 2,000 samples"),
                (big["utility_single_uncertain"], "uncertain utility demo, 10,000 samples")]
        for k, (case, label) in enumerate(runs):
            t = time.perf_counter()
            done = subprocess.run([sys.executable, "-m", "damper", "design", case, "--out", os.path.join(tmp, f"run{k}")],
                                  capture_output=True, cwd=ROOT)
            if done.returncode not in (0, 3):  # 3: a requirement not met, a result like any other
                raise RuntimeError(f"damper design {case} failed (exit {done.returncode}): {done.stderr.decode()[-500:]}")
            print(f"damper design, {label}: {time.perf_counter() - t:.1f} s")
    # peak memory of large cases and studies, and how fast damper stops (issue 17), from a fresh
    # process: Linux starts a forked child's peak resident set at its parent's, and this one
    # holds the 200,000 loops above (about 0.9 GB), which every command's peak would report
    sys.stdout.flush()
    subprocess.run([sys.executable, os.path.join(os.path.dirname(os.path.abspath(__file__)), "bench_limits.py"),
                    *(["--quick"] if quick else [])], cwd=ROOT, check=True)
    # one line a script can read (robust_10k_x20_s is the study above: 2,000 samples with --quick)
    print(f"SUMMARY a/b={summary['a/b']:.1f} b/c={summary['b/c']:.2f} loes_speedup={summary['loes_speedup']:.2f} "
          f"robust_10k_x20_s={summary['robust_s']:.1f} design_demo_s={summary['design_demo_s']:.2f} "
          f"assess_first_answer_s={summary['assess_first_answer_s']:.3f}")


def _median_of(k, argv):
    """Median wall time of `k` runs of a damper command (``None`` in argv: a new --out each run), s."""
    import tempfile

    times = []
    for _ in range(k):
        with tempfile.TemporaryDirectory() as tmp:
            cmd = [os.path.join(tmp, "run") if a is None else a for a in argv]
            t = time.perf_counter()
            subprocess.run(cmd, capture_output=True, cwd=ROOT)  # exit 3 (a requirement missed) is a result too
            times.append(time.perf_counter() - t)
    return float(np.median(times))


if __name__ == "__main__":
    main(quick="--quick" in sys.argv)

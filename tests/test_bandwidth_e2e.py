"""Pitch-attitude bandwidth and phase delay through ``damper assess --json``, against the
definitions computed here from the equations (no damper measure code).

Definitions (MIL-STD-1797A guidance on the attitude response, from memory; also
shared/references.md s.1): on theta/command with the command positive nose-up,
omega_180 is the first frequency (from the low end) where the phase reaches -180 deg,
omega_BW,phase where it reaches -135 deg, omega_BW,gain where the gain is 6 dB above its
value at omega_180 (the crossing nearest below omega_180), omega_BW the smaller, and
tau_p = -(phase(2 omega_180) + 180 deg) / (57.3 * 2 omega_180) s (exact 180/pi here).

The oracle closes the loop itself: theta/c = sign(M_delta) A(s) P_q(s) / (1 + L(s)) / s with
L = sign(M_delta) K A P_q F e^{-sT} (docs/theory.md s.3), P_q from the airframe's state
matrices by a linear solve, on 200,000 log-spaced points from 0.01 to 1000 rad/s, crossings
polished by brentq. Tolerance [derived]: 1e-6 relative on frequencies and the phase delay
(ours bisects 40 times in log-frequency from a grid cell, about 1e-12 of it).
"""

from __future__ import annotations

import io
import json
from contextlib import redirect_stdout

import numpy as np
import pytest
from scipy.optimize import brentq

from damper.cli import main

V = 80.0  # m/s
BASE = dict(Z_alpha=-420.0, Z_q=0.0, Z_delta=-25.0, M_alpha=-9.0, M_alpha_dot=-0.6, M_q=-1.8)
GAIN = 0.25  # s


def case_text(M_delta, washout, filters, delay, Z_delta=BASE["Z_delta"]):
    lines = [
        "title: bandwidth check (invented numbers)",
        "aircraft: {mass: 2000, pitch_inertia: 3000}",
        "conditions:",
        "  - name: c",
        f"    airspeed: {V}",
        "    altitude: 0",
        "    derivatives: {" + ", ".join(f"{k}: {v}" for k, v in {**BASE, "Z_delta": Z_delta, "M_delta": M_delta}.items()) + "}",
        "loop:",
        "  actuator: {bandwidth: 25}",
    ]
    if washout:
        lines.append(f"  washout: {{time_constant: {washout}}}")
    if filters:
        lines.append("  filters:")
        lines += [f"    - {f}" for f in filters]
    if delay:
        lines.append(f"  delay: {delay}")
    return "\n".join(lines) + "\n"


def oracle(M_delta, washout, filters, delay):
    """Bandwidth measures of theta per nose-up command, from the equations."""
    a11, a12, b1 = BASE["Z_alpha"] / V, 1 + BASE["Z_q"] / V, BASE["Z_delta"] / V
    a21 = BASE["M_alpha"] + BASE["M_alpha_dot"] * a11
    a22 = BASE["M_q"] + BASE["M_alpha_dot"] * a12
    b2 = M_delta + BASE["M_alpha_dot"] * b1
    A = np.array([[a11, a12], [a21, a22]])
    B = np.array([b1, b2])
    sg = np.sign(M_delta)

    def H(w):
        w = np.atleast_1d(np.asarray(w, dtype=float))
        s = 1j * w
        M = s[:, None, None] * np.eye(2) - A
        pq = np.linalg.solve(M, np.broadcast_to(B, (s.size, 2))[..., None])[:, 1, 0]
        act = 1 / (s / 25.0 + 1)
        F = np.exp(-s * delay)
        if washout:
            F = F * washout * s / (washout * s + 1)
        for kind, *par in filters:
            if kind == "lead_lag":
                F = F * (par[0] * s + 1) / (par[1] * s + 1)
            elif kind == "notch":
                wn, zn, zd = par
                F = F * (s * s + 2 * zn * wn * s + wn**2) / (s * s + 2 * zd * wn * s + wn**2)
        L = sg * GAIN * act * pq * F
        return sg * act * pq / (1 + L) / s

    w = np.logspace(-2, 3, 200_000)
    h = H(w)
    ph = np.unwrap(np.angle(h))
    gain = 20 * np.log10(np.abs(h))

    def phase_at(x, i):
        return ph[i] + float(np.angle(H(x)[0] / h[i]))

    def first_crossing(level):
        i = int(np.argmax(ph <= level))
        if ph[i] > level or i == 0:
            return np.nan
        return brentq(lambda x: phase_at(x, i - 1) - level, w[i - 1], w[i], xtol=1e-14, rtol=1e-14)

    w180 = first_crossing(-np.pi)
    wbp = first_crossing(-0.75 * np.pi)
    if not np.isfinite(w180):
        return dict(w180=np.nan, wbp=wbp, wbg=np.nan, tau=np.nan)
    g180 = 20 * np.log10(abs(H(w180)[0]))
    below = np.nonzero((w < w180) & (gain >= g180 + 6.0))[0]
    wbg = np.nan
    if below.size:
        i = below[-1]
        top = min(w[i + 1], w180)
        wbg = brentq(lambda x: 20 * np.log10(abs(H(x)[0])) - g180 - 6.0, w[i], top, xtol=1e-14, rtol=1e-14)
    i180 = int(np.searchsorted(w, w180))
    sub = w180 * np.exp2(np.linspace(0, 1, 2001))
    sub_ph = phase_at(w180, i180 - 1) + np.concatenate([[0], np.cumsum(np.angle(H(sub[1:]) / H(sub[:-1])))])
    tau = -(sub_ph[-1] + np.pi) / (2 * w180)
    return dict(w180=w180, wbp=wbp, wbg=wbg, tau=tau)


FILTERS_YAML = {
    "lead_lag": "{kind: lead_lag, lead_time_constant: 0.08, lag_time_constant: 0.03}",
    "notch": "{kind: notch, frequency: 40, depth_damping: 0.02, width_damping: 0.5}",
}
CASES = [
    # (M_delta, washout time constant or None, filters, delay s)
    (-12.0, None, [], 0.0),
    (12.0, None, [], 0.0),
    (-12.0, 1.0, [], 0.02),
    (12.0, 1.0, [], 0.02),
    (-12.0, 1.5, [("lead_lag", 0.08, 0.03), ("notch", 40.0, 0.02, 0.5)], 0.03),
    (12.0, 1.5, [("lead_lag", 0.08, 0.03), ("notch", 40.0, 0.02, 0.5)], 0.03),
]


@pytest.mark.parametrize("M_delta,washout,filters,delay", CASES)
def test_attitude_bandwidth_through_assess_json(tmp_path, M_delta, washout, filters, delay):
    path = tmp_path / "case.yaml"
    path.write_text(case_text(M_delta, washout, [FILTERS_YAML[f[0]] for f in filters], delay), encoding="utf-8")
    out = io.StringIO()
    with redirect_stdout(out):
        assert main(["assess", str(path), "--gain", str(GAIN), "--json"]) in (0, 3)
    h = json.loads(out.getvalue())["conditions"][0]["closed_loop"]["handling"]
    o = oracle(M_delta, washout, filters, delay)
    assert np.isfinite(o["w180"]) and np.isfinite(o["wbp"])  # the check is live: every case has both
    assert h["attitude_phase_crossover_rad_s"] == pytest.approx(o["w180"], rel=1e-6)
    assert h["bandwidth_phase_rad_s"] == pytest.approx(o["wbp"], rel=1e-6)
    if np.isfinite(o["wbg"]):
        assert h["bandwidth_gain_rad_s"] == pytest.approx(o["wbg"], rel=1e-6)
    else:
        assert h["bandwidth_gain_rad_s"] is None
    assert h["bandwidth_rad_s"] == pytest.approx(np.fmin(o["wbp"], o["wbg"]), rel=1e-6)
    assert h["phase_delay_s"] == pytest.approx(o["tau"], rel=1e-6, abs=1e-9)


def test_both_signs_of_m_delta_give_the_same_bandwidth(tmp_path):
    # [derived] flipping the signs of M_delta and Z_delta together flips the surface
    # convention only: with the nose-up command the attitude response, and every
    # bandwidth measure, is the same.
    res = []
    for sg in (-1.0, 1.0):
        path = tmp_path / f"case{sg}.yaml"
        path.write_text(case_text(12.0 * sg, 1.0, [], 0.02, Z_delta=-25.0 * -sg), encoding="utf-8")
        out = io.StringIO()
        with redirect_stdout(out):
            main(["assess", str(path), "--gain", str(GAIN), "--json"])
        res.append(json.loads(out.getvalue())["conditions"][0]["closed_loop"]["handling"])
    for key in ("attitude_phase_crossover_rad_s", "bandwidth_rad_s", "phase_delay_s"):
        assert res[0][key] == pytest.approx(res[1][key], rel=1e-9)

"""``damper sweep``: no margin values on rows whose closed loop is unstable (table, CSV, JSON).

The oracle of stability is written here from the equations (docs/theory.md section 1,
the project's design notes s.4): short period in stability axes,
``alpha' = Z_alpha/V alpha + q + Z_delta/V delta``,
``q' = M_alpha alpha + M_alpha_dot alpha' + M_q q + M_delta delta``, a second-order servo
``delta'' = wn^2 (u - delta) - 2 zeta wn delta'`` and the damper command
``u = -sign(M_delta) K q``; the closed loop is stable when every eigenvalue (numpy) has a
negative real part. No damper code is used for the oracle.
"""

from __future__ import annotations

import contextlib
import os
import csv
import io
import json

import numpy as np
import pytest

from damper.cli import main

V = 80.0  # m/s
D = {"Z_alpha": -330.0, "Z_delta": -20.0, "M_alpha": -14.0, "M_alpha_dot": -0.4, "M_q": -1.0, "M_delta": -22.0}
WN, ZETA = 20.0, 0.5  # servo, rad/s and -

CASE = f"""
title: Invented light aircraft, sweep check
aircraft: {{mass: "2400 kg", pitch_inertia: "5200 kg*m**2"}}
conditions:
  - name: cruise
    airspeed: {V}
    altitude: "2000 m"
    derivatives: {{{", ".join(f"{k}: {v}" for k, v in D.items())}}}
loop:
  actuator: {{natural_frequency: {WN}, damping_ratio: {ZETA}}}
requirements:
  preset: {{standard: MIL-F-8785C, level: 1, category: B}}
"""
GAIN_MIN, GAIN_MAX, POINTS = 0.05, 20.0, 15
MARGINS = ("gain_margin_db", "gain_margin_low_db", "phase_margin_deg", "delay_margin_s", "disk_margin")


def oracle_stable(k):
    """Closed-loop stability at gain k (s) from the eigenvalues of the equations above."""
    za, zd, ma, mad, mq, md = (D[n] for n in ("Z_alpha", "Z_delta", "M_alpha", "M_alpha_dot", "M_q", "M_delta"))
    # states alpha, q, delta, delta'
    a_row = np.array([za / V, 1.0, zd / V, 0.0])
    u_gain = -np.sign(md) * k  # u = u_gain * q
    A = np.array(
        [
            a_row,
            np.array([ma, mq, md, 0.0]) + mad * a_row,
            [0.0, 0.0, 0.0, 1.0],
            [0.0, WN**2 * u_gain, -(WN**2), -2.0 * ZETA * WN],
        ]
    )
    return bool(np.all(np.linalg.eigvals(A).real < 0.0))


@pytest.fixture(scope="module")
def outputs(tmp_path_factory):
    d = tmp_path_factory.mktemp("sweep")
    case = d / "case.yaml"
    case.write_text(CASE)
    args = ["sweep", str(case), "--condition", "cruise", "--gain-min", str(GAIN_MIN), "--gain-max", str(GAIN_MAX),
            "--points", str(POINTS)]
    buf = io.StringIO()
    with contextlib.redirect_stdout(buf):
        assert main(args + ["--csv", str(d / "sweep.csv")]) == 0
    table = buf.getvalue()
    buf = io.StringIO()
    with contextlib.redirect_stdout(buf):
        assert main(args + ["--json"]) == 0
    doc = json.loads(buf.getvalue())
    rows = list(csv.DictReader(io.StringIO((d / "sweep.csv").read_text())))
    gains = np.logspace(np.log10(GAIN_MIN), np.log10(GAIN_MAX), POINTS)
    return gains, table, rows, doc


def test_the_sweep_spans_stable_and_unstable_loops(outputs):
    gains, *_ = outputs
    flags = [oracle_stable(k) for k in gains]
    assert any(flags) and not all(flags)  # [derived] 3 asymptotes at +-60 deg: the servo goes unstable


def test_json_has_no_margin_values_on_unstable_rows(outputs):
    gains, _, _, doc = outputs
    assert len(doc["rows"]) == POINTS
    for k, row in zip(gains, doc["rows"]):
        assert row["gain_s"] == pytest.approx(k, rel=1e-12)
        assert row["stable"] == oracle_stable(k), k
        m = row["margins"]
        if not oracle_stable(k):
            values = [m[key] for key in m if key not in ("gain_crossings", "phase_crossings", "delay_model")]
            assert values and all(v is None for v in values), (k, m)
            # the crossings stay listed: an unstable loop of this kind crosses -180 deg with |L| > 1
            assert m["phase_crossings"], k
        else:
            assert m["gain_margin_db"] is not None and m["disk_margin"] is not None, k


def test_csv_has_empty_margin_cells_on_unstable_rows(outputs):
    gains, _, rows, _ = outputs
    assert len(rows) == POINTS
    for k, row in zip(gains, rows):
        assert (row["stable"] == "True") == oracle_stable(k), k
        if oracle_stable(k):
            assert row["gain_margin_db"] != "" and row["disk_margin"] != "", k
        else:
            assert all(row[c] == "" for c in MARGINS), (k, row)


def test_table_shows_no_margin_values_on_unstable_rows(outputs):
    gains, table, _, _ = outputs
    lines = table.splitlines()
    start = next(n for n, line in enumerate(lines) if line.startswith("------"))
    body = lines[start + 1 : start + 1 + POINTS]
    for k, line in zip(gains, body):
        cells = line.split()
        # columns: K, zeta eq, zeta modal, wn eq, wn modal, stable, GM, PM, delay m., disk, meets all
        assert float(cells[0]) == pytest.approx(k, rel=1e-3)
        assert cells[5] == ("yes" if oracle_stable(k) else "NO"), line
        if not oracle_stable(k):
            assert cells[6:10] == ["-"] * 4, line
        else:
            float(cells[6])  # a number: the gain margin of a stable loop with a phase crossing
    assert "closed loop unstable: no margins" in table


DEMOS = sorted(
    os.path.join(os.path.dirname(os.path.dirname(os.path.abspath(__file__))), "cases", f)
    for f in os.listdir(os.path.join(os.path.dirname(os.path.dirname(os.path.abspath(__file__))), "cases"))
    if f.endswith(".yaml")
)


@pytest.mark.parametrize("case", DEMOS, ids=[os.path.basename(c) for c in DEMOS])
def test_sweep_json_on_every_demo_case(case):
    """Up to 20 s the demo loops go unstable ([derived] from their sweeps): null margins there."""
    buf = io.StringIO()
    with contextlib.redirect_stdout(buf):
        assert main(["assess", case, "--gain", "0.1", "--json"]) in (0, 3)  # 3: a requirement not met
    name = json.loads(buf.getvalue())["conditions"][0]["name"]
    buf = io.StringIO()
    with contextlib.redirect_stdout(buf):
        assert main(["sweep", case, "--condition", name, "--points", "9", "--gain-max", "20", "--json"]) == 0
    rows = json.loads(buf.getvalue())["rows"]
    assert len(rows) == 9
    assert any(not row["stable"] for row in rows)  # the check below is not empty
    for row in rows:
        if not row["stable"]:
            assert all(row["margins"][k] is None for k in MARGINS), row["margins"]

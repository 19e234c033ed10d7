"""One verdict everywhere (docs/verdict.md): the exit status, the terminal's verdict lines, the
``verdict`` objects of the JSON documents and the report's first section agree, and the items
name the right numbers.

Oracles: the closed-loop short-period damping is computed here from the equations (state
matrices of the airframe and a first-order actuator, numpy eigenvalues), nothing imported from
damper's measures; the schedule and robustness verdicts are checked against the documents'
own per-point records, which are counted here.
"""

from __future__ import annotations

import glob
import html
import io
import json
import os
import re
from contextlib import redirect_stderr, redirect_stdout

import numpy as np
import pytest

from damper.cli import main
from damper.verdict import Verdict, fraction_text

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
DEMOS = sorted(glob.glob(os.path.join(ROOT, "cases", "*.yaml")))


def run(*argv):
    out, err = io.StringIO(), io.StringIO()
    with redirect_stdout(out), redirect_stderr(err):
        code = main([str(a) for a in argv])
    return code, out.getvalue(), err.getvalue()


# --- an item's number against the equations ------------------------------------------
V = 80.0  # m/s
BASE = dict(Z_alpha=-120.0, Z_q=0.0, Z_delta=-10.0, M_alpha=-9.0, M_alpha_dot=-0.3, M_q=-0.8)
ACT = 25.0  # rad/s, first-order actuator
BAND = (0.60, 0.75)  # invented requirement band on the modal damping ratio


def case_text(M_delta):
    d = {**BASE, "M_delta": M_delta}
    return "\n".join([
        "title: verdict check (invented numbers)",
        "aircraft: {mass: 2000, pitch_inertia: 3000}",
        "conditions:",
        "  - name: c",
        f"    airspeed: {V}",
        "    altitude: 0",
        "    derivatives: {" + ", ".join(f"{k}: {v}" for k, v in d.items()) + "}",
        "loop:",
        f"  actuator: {{bandwidth: {ACT}}}",
        "requirements:",
        "  damping_measure: modal",
        f"  damping_ratio: {{min: {BAND[0]}, max: {BAND[1]}}}",
    ]) + "\n"


def modal_damping(M_delta, K):
    """Short-period damping of the loop closed through the actuator (docs/theory.md s.1: the
    damper commands delta = -sign(M_delta) K q, so it always opposes the pitch rate)."""
    a11, a12, b1 = BASE["Z_alpha"] / V, 1 + BASE["Z_q"] / V, BASE["Z_delta"] / V
    a21 = BASE["M_alpha"] + BASE["M_alpha_dot"] * a11
    a22 = BASE["M_q"] + BASE["M_alpha_dot"] * a12
    b2 = M_delta + BASE["M_alpha_dot"] * b1
    # states alpha, q, delta; delta' = ACT (u - delta), u = -sign(M_delta) K q
    A = np.array([[a11, a12, b1], [a21, a22, b2], [0.0, -ACT * np.sign(M_delta) * K, -ACT]])
    lam = np.linalg.eigvals(A)
    pair = lam[np.abs(lam.imag) > 1e-9]
    assert pair.size == 2, lam
    return float(-pair[0].real / abs(pair[0]))


@pytest.mark.parametrize("M_delta", [-12.0, 12.0])
@pytest.mark.parametrize("K", [0.0, 0.17, 0.6])
def test_assess_verdict_items_carry_the_oracle_damping(tmp_path, M_delta, K):
    path = tmp_path / "case.yaml"
    path.write_text(case_text(M_delta), encoding="utf-8")
    code, out, err = run("assess", path, "--gain", K, "--json")
    doc = json.loads(out)
    zeta = modal_damping(M_delta, K)
    met = BAND[0] <= zeta <= BAND[1]
    assert code == (0 if met else 3), (zeta, err)
    v = doc["verdict"]
    assert v["met"] is met and v["parts"] == ["design"]
    items = [i for i in v["items"] if i["requirement"] == "damping_ratio"]
    if met:
        assert not items
    else:
        (item,) = items
        d = item["detail"]
        assert item["condition"] == "c" and item["met"] is False
        assert d["value"] == pytest.approx(zeta, rel=1e-9)  # Source: the eigenvalues above [derived]
        assert (d["lower"], d["upper"]) == BAND
        assert d["slack"] == pytest.approx(min(zeta - BAND[0], BAND[1] - zeta), rel=1e-9, abs=1e-12)
    code_text, out_text, _ = run("assess", path, "--gain", K)
    assert code_text == code
    assert ("verdict: every requirement met" in out_text) is met
    assert ("verdict: NOT MET" in out_text) is (not met)


def test_the_band_is_really_crossed_between_the_gains():
    """The parametrisation above must exercise both outcomes (else the test could not fail)."""
    z = [modal_damping(md, K) for md in (-12.0, 12.0) for K in (0.0, 0.17, 0.6)]
    inside = [BAND[0] <= x <= BAND[1] for x in z]
    assert True in inside and False in inside, z


# --- the three outputs agree on every demo case -----------------------------------------
def _report_verdict(path):
    """(met, {part: met}) as the report's first section says it."""
    text = open(path, encoding="utf-8").read()
    block = text[text.index('<div class="run-verdict'):]
    block = block[: block.index("</div>")]
    plain = html.unescape(re.sub(r"<[^>]+>", " ", block))
    plain = re.sub(r"\s+", " ", plain)
    met = "Every requirement judged in this run is met." in plain
    assert met or "Some requirement is NOT met." in plain or "Nothing in this run" in plain, plain
    parts = {m.group(1): m.group(2) == "met" for m in re.finditer(r"(design|schedule|robustness|responses|failures)"
                                                                   r" : \S+ (met|MISSED)", plain)}
    return met, parts


def _terminal_verdict(out):
    lines = out.splitlines()
    k = next(i for i, line in enumerate(lines) if line.startswith("verdict: "))
    met = lines[k] == "verdict: every requirement met"
    parts = {}
    for line in lines[k + 1:]:
        m = re.match(r"  (\w+): (met|NOT MET)", line)
        if m:
            parts[m.group(1)] = m.group(2) == "met"
    return met, parts


def _check_part_records(name, doc):
    """The part's verdict from the document's own records, counted here."""
    if name == "design.json" and doc["conditions"]:
        return all(c["feasible"] for c in doc["conditions"])
    if name == "schedule.json":
        return doc["verification"]["failing"] == 0
    if name == "robustness.json":
        ok = True
        for c in doc["conditions"]:
            ok &= c["pass"]["all"]["passed"] == c["samples"]
            ok &= c["corners"]["passed_all"] == c["corners"]["evaluated"]
            ok &= all(w["met"] for w in c["worst"])
        return ok
    if name == "failures.json":  # every studied failure met, the passive level kept, a common window
        ok = doc["failures"]["authority_window_rad"] is not None
        for c in doc["conditions"]:
            f = c["failures"]
            ok &= all(f[k]["met"] is not False for k in ("hardover", "oscillatory", "passive") if k in f)
            ok &= "authority_window_rad" not in f or f["authority_window_rad"] is not None
        return ok
    return None


@pytest.mark.parametrize("case", DEMOS, ids=[os.path.basename(c) for c in DEMOS])
def test_exit_status_terminal_json_and_report_agree(case, tmp_path, shared_run, report_page):
    shared = shared_run(os.path.basename(case))  # design --no-plots (tests/shared_runs.py), read only
    out_dir, code, out, err = shared.path, shared.code, shared.stdout, shared.stderr
    assert code in (0, 3), err
    total = Verdict()
    judged = {}
    for name in ("design.json", "schedule.json", "robustness.json", "failures.json"):
        p = out_dir / name
        if not p.exists():
            continue
        doc = json.loads(p.read_text(encoding="utf-8"))
        assert "verdict" in doc, name
        v = Verdict.from_doc(doc["verdict"])
        assert doc["verdict"]["met"] is v.met
        total = total + v
        own = _check_part_records(name, doc)
        if own is not None:
            part = {"design.json": "design", "schedule.json": "schedule", "robustness.json": "robustness",
                    "failures.json": "failures"}[name]
            judged[part] = v.summary(part).met
            assert judged[part] is own, (name, v.summary(part).text)
    assert code == (0 if total.met else 3)
    t_met, t_parts = _terminal_verdict(out)
    r_met, r_parts = _report_verdict(out_dir / "report.html")
    assert t_met is total.met and r_met is total.met
    expected = {p: total.summary(p).met for p in total.parts}
    assert t_parts == expected and r_parts == expected
    assert judged.items() <= expected.items()
    report = (out_dir / "report.html").read_text(encoding="utf-8")
    empty = [m.start() for m in re.finditer(r"<tbody>\s*</tbody>", report)]
    assert not empty, [report[max(0, k - 300):k] for k in empty]  # no table without a row (envelope cases too)
    _look_at_report(report_page, out_dir / "report.html", tmp_path, total.met)


@pytest.fixture(scope="module")
def report_page(tmp_path_factory):
    """``report_page()``: one headless Chromium page (tests/test_report.py has the browser client)
    for every demo's report, started by the first test that gets that far (without Chromium that
    test's other checks still run before it skips); each report is opened by navigating to it,
    in the page's own browser context. A browser per report started Chromium six times (about
    0.5 s of CPU each)."""
    from .test_report import Page, require_chromium

    pages = []

    def get():
        if not pages:
            pages.append(Page(require_chromium(), str(tmp_path_factory.mktemp("chromium") / "profile"),
                              width=1280, height=900))
        return pages[0]

    yield get
    for page in pages:
        page.close()


def _look_at_report(get_page, path, tmp_path, met):
    """Open the report in headless Chromium: no console error, the verdict box in the first
    screen, the screenshot not blank."""
    from .test_report import _non_blank, console_errors

    page = get_page()
    events = page.open(path.resolve().as_uri())
    top = page.evaluate("document.querySelector('.run-verdict').getBoundingClientRect().top")
    head = page.evaluate("document.querySelector('.run-verdict .verdict-head').textContent")
    shot = page.screenshot(str(tmp_path / "report.png"))
    assert console_errors(events) == []
    assert 0 < top < 900, top  # the verdict is on the first screen
    assert ("Every requirement judged in this run is met." in head) is met, head
    size, colours, dark = _non_blank(shot)
    assert size == (1280, 900) and colours > 20 and dark > 0.02


# --- exit status 3 on each kind of failure -------------------------------------------------
def _demo(name):
    return open(os.path.join(ROOT, "cases", name), encoding="utf-8").read()


def test_infeasible_design_exits_3(tmp_path):
    text = _demo("utility_single_aft_cg.yaml").replace(
        "other_mode_damping: {min: 0.30}", "other_mode_damping: {min: 0.30}\n  gain_margin: {min: 38}")
    path = tmp_path / "c.yaml"
    path.write_text(text, encoding="utf-8")
    code, out, _ = run("design", path, "--out", tmp_path / "r", "--no-plots", "--no-responses", "--no-report")
    assert code == 3
    doc = json.loads((tmp_path / "r" / "design.json").read_text(encoding="utf-8"))
    bad = {c["name"] for c in doc["conditions"] if not c["feasible"]}
    assert bad and {i["condition"] for i in doc["verdict"]["items"] if not i["met"] and i["condition"]} == bad


def test_failing_schedule_exits_3(tmp_path):
    # a damping band (invented) too narrow for one gain per dynamic pressure over the envelope
    text = re.sub(r"damping_ratio: \{min: 0.50, max: 1.30\}.*", "damping_ratio: {min: 0.80, max: 0.84}",
                  _demo("survey_uav_altitude.yaml"))
    # No refinement rounds (max_breakpoints = breakpoints): the band fails between altitudes at
    # one dynamic pressure, which more breakpoints in dynamic pressure cannot mend, and what is
    # checked (exit 3, one verdict item per failing point) does not depend on how many rounds
    # ran; refinement itself: tests/test_schedule.py.
    assert text.count("max_breakpoints: 10") == 1
    text = text.replace("max_breakpoints: 10", "max_breakpoints: 4")
    path = tmp_path / "c.yaml"
    path.write_text(text, encoding="utf-8")
    code, out, _ = run("design", path, "--out", tmp_path / "r", "--no-plots", "--no-responses", "--no-robustness",
                       "--no-report")
    assert code == 3
    doc = json.loads((tmp_path / "r" / "schedule.json").read_text(encoding="utf-8"))
    failing = doc["verification"]["failing"]
    items = [i for i in doc["verdict"]["items"] if i["condition"] is not None]
    assert failing > 0 and len(items) == failing
    assert "  schedule: NOT MET" in out


def test_failing_robustness_exits_3_and_a_required_fraction_is_judged_on_the_interval(tmp_path):
    base = _demo("utility_single_uncertain.yaml")
    path = tmp_path / "c.yaml"
    path.write_text(base, encoding="utf-8")
    code, out, err = run("robust", path, "--gain", "0.05", "--samples", "300", "--no-plots", "--quiet",
                         "--out", tmp_path / "r1")
    doc = json.loads((tmp_path / "r1" / "robustness.json").read_text(encoding="utf-8"))
    every = all(c["pass"]["all"]["passed"] == c["samples"] and c["corners"]["passed_all"] == c["corners"]["evaluated"]
                and all(w["met"] for w in c["worst"]) for c in doc["conditions"])
    assert not every, "the invented uncertainty must make some sample or corner fail at this gain"
    assert code == 3 and doc["verdict"]["met"] is False
    # with a required fraction below the interval's lower bound the same study is met
    lower = doc["joint"]["interval"][0]
    text = base.replace("uncertainty:", f"uncertainty:\n  required_fraction: {max(0.0, lower - 0.01):.4f}", 1)
    path.write_text(text, encoding="utf-8")
    code, out, err = run("robust", path, "--gain", "0.05", "--samples", "300", "--no-plots", "--quiet",
                         "--out", tmp_path / "r2")
    doc2 = json.loads((tmp_path / "r2" / "robustness.json").read_text(encoding="utf-8"))
    assert doc2["joint"]["interval"][0] == pytest.approx(lower, rel=1e-12)
    assert code == 0 and doc2["verdict"]["met"] is True, doc2["verdict"]["items"][0]["text"]
    text = base.replace("uncertainty:", f"uncertainty:\n  required_fraction: {min(1.0, lower + 0.01):.4f}", 1)
    path.write_text(text, encoding="utf-8")
    code, *_ = run("robust", path, "--gain", "0.05", "--samples", "300", "--no-plots", "--quiet",
                   "--out", tmp_path / "r3")
    assert code == 3


# --- fractions ---------------------------------------------------------------------
@pytest.mark.parametrize("k,n", [(1999, 2000), (1, 2000), (99999, 100000), (1, 10**7), (10**7 - 1, 10**7), (5, 7)])
def test_a_fraction_short_of_one_never_prints_as_100(k, n):
    text = fraction_text(k, n)
    value = float(text.rstrip(" %"))
    assert 0 < value < 100, text
    assert abs(value - 100 * k / n) <= 0.5 * 100 * min(k, n - k) / n + 1e-9, text  # [derived] closer than the gap


def test_whole_fractions():
    assert fraction_text(2000, 2000) == "100 %" and fraction_text(0, 2000) == "0 %"

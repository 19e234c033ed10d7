"""The report's views of each condition, of the case (aircraft, loop hardware, conditions,
derivatives), of the requirements and of the time responses.

Formatting only, from design.json and responses.json (:mod:`damper.output.report.build` builds the page).
"""

from __future__ import annotations

import os

from ...requirements.criteria import KINDS
from ..documents.longitudinal import longitudinal_rows
from ..figures.design import KINDS as DESIGN_FIGURES
from ..runfiles import image_uri as _image
from .format import key_label, FT, KT, R2D, DASH, _status, band_text, binding_text, complex_text, f, fixed, pct, requirement_label, roots_text, scaled, unit_text


def _criterion_rows(m) -> list:
    """The requirement rows of one condition: missed first, then the case's order; the tightest marked."""
    criteria = []
    raw_criteria = m.get("criteria") or []
    finite_slacks = [k.get("slack") for k in raw_criteria if k.get("slack") is not None]
    tightest = min(finite_slacks) if finite_slacks else None
    for k in raw_criteria:
        criteria.append(
            {
                "name": requirement_label(k.get("name")),
                "key": k.get("name"),
                "measure": k.get("measure") or "",
                "value": f(k.get("value")),
                "value_none": "none (unbounded)" if k.get("name") in ("gain_margin", "phase_margin") else "not defined",
                "value_is_none": k.get("value") is None,
                "unit": unit_text(k.get("unit")),
                "band": band_text(k.get("lower"), k.get("upper"), k.get("unit")),
                "slack": pct(k.get("slack"), none="unbounded" if k.get("met") else DASH),
                "tightest": tightest is not None and k.get("slack") == tightest,
                "status": _status(k.get("met")),
                "met": bool(k.get("met")),
                "source": k.get("source") or "",
            }
        )
    criteria.sort(key=lambda r: r["met"])  # missed first, then the case's order
    return criteria


def _short_period_rows(bare, sp, eq) -> list:
    rows = [
        ("damping ratio", "\u2013", f(bare.get("damping_ratio"), 3), f(sp.get("damping_ratio"), 3), f(eq.get("damping_ratio"), 3) if eq else DASH),
        ("natural frequency", "rad/s", f(bare.get("natural_frequency_rad_s")), f(sp.get("natural_frequency_rad_s")), f(eq.get("natural_frequency_rad_s")) if eq else DASH),
        ("period", "s", f(bare.get("period_s")), f(sp.get("period_s")), DASH),
        ("time to half amplitude", "s", f(bare.get("time_to_half_s")), f(sp.get("time_to_half_s")), DASH),
    ]
    if bare.get("time_to_double_s") is not None:
        rows.append(("time to double amplitude", "s", f(bare.get("time_to_double_s")), DASH, DASH))
    return rows


#: The equivalent system's rows: label, JSON key, significant digits. The unit shown is
#: the one the key names (key_label: the key rule of damper.quantities, one for documents
#: and report).
EQUIVALENT_ROWS = (
    ("damping ratio \u03b6e", "damping_ratio", 3),
    ("frequency \u03c9e", "natural_frequency_rad_s", 4),
    ("equivalent time delay \u03c4e", "time_delay_s", 3),
    ("zero 1/T\u03b82", "inv_t_theta2_1_s", 4),
    ("gain Kq", "gain_1_s2", 4),
    ("mismatch J", "mismatch", 3),
)


def _equivalent_rows(eq):
    if not eq:
        return None
    rows = [(label, key_label(key)[1] or "\u2013", f(eq.get(key), digits)) for label, key, digits in EQUIVALENT_ROWS]
    return rows + [("fit converged", "", "yes" if eq.get("converged") else "NO")]


def _handling_rows(hq) -> list:
    handling = [
        ("CAP (equivalent frequency)", unit_text(KINDS["cap"].unit), f(hq.get("cap_equivalent"))),
        ("CAP (modal frequency)", unit_text(KINDS["cap"].unit), f(hq.get("cap_modal"))),
        ("n/\u03b1", "g/rad", f(hq.get("n_alpha_g_per_rad"))),
    ]
    for key, label, unit in (
        ("bandwidth_rad_s", "pitch-attitude bandwidth", "rad/s"),
        ("bandwidth_phase_rad_s", "bandwidth (phase)", "rad/s"),
        ("bandwidth_gain_rad_s", "bandwidth (gain)", "rad/s"),
        ("attitude_phase_crossover_rad_s", "attitude \u2212180 deg frequency", "rad/s"),
        ("phase_delay_s", "phase delay", "s"),
    ):
        if key in hq:
            handling.append((label, unit, f(hq.get(key))))
    return handling


def _margin_rows(cl, mg) -> list:
    # a null margin: no such crossing (unbounded) on a stable loop, no margin at all on an unstable one
    unb = "none (unbounded)" if cl.get("stable", True) else "none: closed loop unstable"
    return [
        ("gain margin, gain may rise by", "dB", f(mg.get("gain_margin_db"), 3, unb), f(mg.get("phase_crossover_rad_s"), 4, DASH)),
        ("gain margin, gain may fall by", "dB", f(mg.get("gain_margin_low_db"), 3, unb), DASH),
        ("phase margin (smallest magnitude)", "deg", f(mg.get("phase_margin_deg"), 3, unb), f(mg.get("gain_crossover_rad_s"), 4, DASH)),
        ("delay margin", "s", f(mg.get("delay_margin_s"), 3, unb), DASH),
        ("disk margin \u03b1", "\u2013", f(mg.get("disk_margin"), 3, unb), DASH),
        ("disk gain margin", "\u00b1dB", f(mg.get("disk_gain_margin_db"), 3, unb), DASH),
        ("disk phase margin", "\u00b1deg", f(mg.get("disk_phase_margin_deg"), 3, unb), DASH),
    ]


def _crossing_rows(mg) -> list:
    return [
        # a crossing's offset is a margin only where it sets the reported one (table above)
        {"kind": "gain crossing |L| = 1", "w": f(x.get("frequency_rad_s")), "value": f(x.get("phase_margin_deg"), 4), "unit": "deg from \u2212180 deg"}
        for x in mg.get("gain_crossings") or []
    ] + [
        {"kind": "phase crossing \u2220L = \u2212180 deg", "w": f(x.get("frequency_rad_s")), "value": f(x.get("gain_margin_db"), 4), "unit": "dB below 0 dB"}
        for x in mg.get("phase_crossings") or []
    ]


def _interval_rows(c) -> list:
    intervals = []
    for (a, b), e in zip(c.get("feasible_gains_s") or [], c.get("edges") or [None] * len(c.get("feasible_gains_s") or [])):
        lo = (e or {}).get("lower") or {}
        hi = (e or {}).get("upper") or {}
        intervals.append(
            {
                "low": f(a),
                "high": f(b),
                "low_binding": binding_text(lo.get("binding")) if lo else DASH,
                "high_binding": binding_text(hi.get("binding")) if hi else DASH,
            }
        )
    return intervals


def _figure_rows(files, slug) -> list:
    """The design family's figures of one condition, captions from :mod:`damper.output.figures.design`."""
    figures = []
    for kind in DESIGN_FIGURES:
        src = _image(files, [os.path.join("plots", f"{slug}-{kind.stem}")])
        figures.append({"src": src, "caption": kind.caption, "kind": kind.stem})
    return figures


def _condition_view(i, c, slug, files, summary_cond):
    m = c.get("measures") or {}
    fl = m.get("flight") or {}
    bare = (m.get("bare") or {}).get("short_period") or {}
    cl = m.get("closed_loop") or {}
    sp = cl.get("short_period") or {}
    eq = cl.get("equivalent") or None
    mg = m.get("margins") or {}
    other = cl.get("least_damped_other_mode") or {}
    criteria = _criterion_rows(m)
    intervals = _interval_rows(c)
    level = m.get("level") or {}
    levels = [(requirement_label(k), str(v)) for k, v in level.items() if k != "overall"]
    sweep = c.get("sweep_range_s") or [None, None]

    return {
        "index": i,
        "anchor": f"condition-{i + 1}",
        "name": c.get("name"),
        "note": (summary_cond or {}).get("note"),
        "feasible": bool(c.get("feasible")),
        "status": {"cls": "pass", "symbol": "\u2714", "text": "a gain meets every requirement"}
        if c.get("feasible")
        else {"cls": "fail", "symbol": "\u2718", "text": "NO gain meets every requirement"},
        "gain": f(c.get("chosen_gain_s")),
        "policy": c.get("policy") or "",
        "reason": c.get("reason") or "",
        "intervals": intervals,
        "failing": [(requirement_label(x.get("name")), pct(x.get("slack"))) for x in c.get("failing_at_chosen_gain") or []],
        "sweep": f"{f(sweep[0])} to {f(sweep[1])} s",
        "flight": {
            "speed": f"{fixed(_div(fl.get('airspeed_m_s'), KT), 1)} kt TAS ({f(fl.get('airspeed_m_s'))} m/s)",
            "altitude": f"{fixed(_div(fl.get('altitude_m'), FT), 0)} ft ({f(fl.get('altitude_m'))} m)",
            "mach": fixed(fl.get("mach"), 3),
            "qbar": f"{f(fl.get('dynamic_pressure_pa'))} Pa",
            "mass": f"{f(fl.get('mass_kg'))} kg",
        },
        "stable": cl.get("stable"),
        "ambiguous": bool(sp.get("ambiguous")),
        "closed_delay_model": cl.get("delay_model") or "",
        "sp_rows": _short_period_rows(bare, sp, eq),
        "bare_roots": roots_text(bare.get("roots")),
        "other_mode": {
            "damping": f(other.get("damping_ratio"), 3),
            "eigenvalue": complex_text(other.get("eigenvalue")),
        },
        "eigenvalues": roots_text(cl.get("eigenvalues")),
        "equivalent": _equivalent_rows(eq),
        "equivalent_large_mismatch": bool(eq and eq.get("large_mismatch")),
        "handling": _handling_rows(cl.get("handling") or {}),
        "longitudinal": longitudinal_rows(m, f),
        "margins": _margin_rows(cl, mg),
        "crossings": _crossing_rows(mg),
        "criteria": criteria,
        "missed": sum(1 for k in criteria if not k["met"]),
        "level": level.get("overall", DASH) if level else DASH,
        "levels": levels,
        "figures": _figure_rows(files, slug),
        # summary row
        "zeta_eq": f(eq.get("damping_ratio"), 3) if eq else DASH,
        "zeta_modal": f(sp.get("damping_ratio"), 3),
        "gm": f(mg.get("gain_margin_db"), 3, "none"),
        "pm": f(mg.get("phase_margin_deg"), 3, "none"),
        "dm": f(mg.get("delay_margin_s"), 3, "none"),
        "tau_e": f(eq.get("time_delay_s"), 3) if eq else DASH,
        "intervals_text": ", ".join(f"{x['low']} to {x['high']}" for x in intervals) or "none",
    }


def _div(x, d):
    return None if x is None else float(x) / d


def _case_view(doc):
    s = doc.get("case_summary")
    if not s:
        return None
    a = s.get("aircraft") or {}
    aircraft = [
        ("name", "", a.get("name") or "not given"),
        ("mass", "kg", f(a.get("mass_kg"))),
        ("pitch inertia I\u1d67", "kg m\u00b2", f(a.get("pitch_inertia_kg_m2"))),
        ("wing area S", "m\u00b2", f(a.get("wing_area_m2"), 4, "not given")),
        ("mean chord c", "m", f(a.get("mean_chord_m"), 4, "not given")),
    ]
    conds = []
    for c in s.get("conditions") or []:
        d = c.get("derivatives") or {}
        conds.append(
            {
                "name": c.get("name"),
                "note": c.get("note") or "",
                "source": c.get("derivative_source") or "",
                "tas_kt": fixed(_div(c.get("airspeed_m_s"), KT), 1),
                "tas": f(c.get("airspeed_m_s")),
                "eas_kt": fixed(_div(c.get("equivalent_airspeed_m_s"), KT), 1),
                "alt_ft": fixed(_div(c.get("altitude_m"), FT), 0),
                "alt_m": fixed(c.get("altitude_m"), 0),
                "mach": fixed(c.get("mach"), 3),
                "qbar": f(c.get("dynamic_pressure_pa")),
                "rho": f(c.get("density_kg_m3")),
                "mass": f(c.get("mass_kg")),
                "iy": f(c.get("pitch_inertia_kg_m2")),
                "derivs": [f(d.get(k)) for k in DERIVATIVE_KEYS],
            }
        )
    lp = s.get("loop") or {}
    loop = [
        ("actuator", lp.get("actuator") or DASH),
        ("actuator rate limit", _limit(lp.get("actuator_rate_limit_rad_s"), "deg/s", "rad/s")),
        ("surface travel (pilot plus damper)", _limit(lp.get("actuator_travel_rad"), "deg", "rad", plusminus=True)),
        ("rate sensor", lp.get("rate_sensor") or DASH),
        ("washout", lp.get("washout") or DASH),
    ]
    filters = lp.get("filters") or []
    if filters:
        for k, text in enumerate(filters):
            loop.append((f"filter {k + 1}", text))
    else:
        loop.append(("filters", "none"))
    sr = lp.get("sample_rate_hz")
    loop += [
        ("computation delay", f"{f(lp.get('computation_delay_s'))} s"),
        ("sample rate", f"{f(sr)} Hz (zero-order hold taken as half a sample, {f(0.5 / sr)} s)" if sr else "continuous (not given)"),
        ("total delay", f"{f(lp.get('total_delay_s'))} s: exact exp(\u2212sT) in frequency-domain measures, Pad\u00e9 order {lp.get('pade_order')} for eigenvalues"),
        ("damper command", "\u2212sign(M\u03b4) K q_measured, summed with the pilot command at the actuator input (series servo)"),
        ("loop broken for margins", "at the actuator input, L = sign(M\u03b4) K P"),
    ]
    grid = s.get("frequency_grid_rad_s") or {}
    if grid:
        loop.append(
            ("margin search grid", f"{f(grid.get('low'))} to {f(grid.get('high'))} rad/s, {grid.get('points_per_decade')} points per decade")
        )
    return {
        "aircraft": aircraft,
        "conditions": conds,
        "loop": loop,
        "altitude_kind": s.get("altitude_kind") or "geopotential",
        "derivative_heads": DERIVATIVE_HEADS,
    }


DERIVATIVE_KEYS = ("Z_alpha_m_s2", "Z_q_m_s", "Z_delta_m_s2", "M_alpha_1_s2", "M_alpha_dot_1_s", "M_q_1_s", "M_delta_1_s2")
DERIVATIVE_HEADS = (
    ("Z\u03b1", "m/s\u00b2"),
    ("Zq", "m/s"),
    ("Z\u03b4", "m/s\u00b2"),
    ("M\u03b1", "1/s\u00b2"),
    ("M\u03b1\u0307", "1/s"),
    ("Mq", "1/s"),
    ("M\u03b4", "1/s\u00b2"),
)


def _limit(x, unit_deg, unit_rad, plusminus=False):
    if x is None:
        return "none given"
    pm = "\u00b1" if plusminus else ""
    return f"{pm}{f(float(x) * R2D)} {unit_deg} ({pm}{f(x)} {unit_rad})"


def _requirements_view(doc):
    out = []
    for r in doc.get("requirements") or []:
        out.append(
            {
                "name": requirement_label(r.get("name")),
                "measure": r.get("measure") or "",
                "band": band_text(r.get("lower"), r.get("upper"), r.get("unit")),
                "unit": unit_text(r.get("unit")),
                "source": r.get("source") or "",
            }
        )
    return out


# --- time responses ---------------------------------------------------------------
def _responses_view(doc, files, chosen=None):
    if doc is None:
        return None
    if "_unreadable" in doc:
        return {"error": doc["_unreadable"]}
    sim = doc.get("simulation") or {}
    lim = doc.get("limits") or {}
    settings = [
        ("method", "", sim.get("method")),
        ("time step", "s", f(sim.get("step_s"))),
        ("duration", "s", f(sim.get("duration_s"))),
        ("delay", "", sim.get("delay_model")),
        ("bare airframe", "", sim.get("bare_airframe")),
        ("gust model", "", sim.get("gust_model")),
        ("load factor", "", sim.get("load_factor")),
        ("actuator rate limit", "", _limit(lim.get("rate_limit_rad_s"), "deg/s", "rad/s")),
        ("actuator travel", "", _limit(lim.get("travel_rad"), "deg", "rad", plusminus=True)),
    ]
    rows, figures = [], []
    for c in doc.get("conditions") or []:
        for r in c.get("responses") or []:
            b, a, inp = r.get("bare") or {}, r.get("augmented") or {}, r.get("input") or {}
            k, k_design = c.get("gain_s"), (chosen or {}).get(c.get("name"))
            differs = k is not None and k_design is not None and abs(k - k_design) > 1e-9 * max(abs(k_design), 1e-12)
            rows.append(
                {
                    "condition": c.get("name"),
                    "gain": f(k),
                    "design_gain": f(k_design) if differs else None,
                    "input": inp.get("name") or inp.get("kind") or "",
                    "cells": [
                        (f(b.get("time_to_half_s"), 3), f(a.get("time_to_half_s"), 3)),
                        (f(b.get("settling_time_5pct_s"), 3), f(a.get("settling_time_5pct_s"), 3)),
                        (scaled(b.get("overshoot_ratio"), 100, 3), scaled(a.get("overshoot_ratio"), 100, 3)),
                        (scaled(b.get("peak_pitch_rate_rad_s"), R2D, 3), scaled(a.get("peak_pitch_rate_rad_s"), R2D, 3)),
                        (f(b.get("peak_load_factor_g"), 3), f(a.get("peak_load_factor_g"), 3)),
                        (scaled(b.get("peak_surface_rad"), R2D, 3), scaled(a.get("peak_surface_rad"), R2D, 3)),
                        (scaled(b.get("peak_surface_rate_rad_s"), R2D, 3), scaled(a.get("peak_surface_rate_rad_s"), R2D, 3)),
                        (f(b.get("time_at_rate_limit_s"), 3), f(a.get("time_at_rate_limit_s"), 3)),
                    ],
                }
            )
            stems = sorted({os.path.splitext(p)[0] for p in r.get("files") or [] if p.lower().endswith((".png", ".svg"))})
            for stem in stems:
                src = _image(files, [stem, os.path.join("responses", stem), os.path.join("plots", stem)])
                if src:
                    figures.append(
                        {"src": src, "caption": f"{c.get('name')}: {inp.get('name') or inp.get('kind')}, K = {f(c.get('gain_s'))} s"}
                    )
    return {
        "error": None,
        "settings": settings,
        "notes": list(doc.get("notes") or []),
        "heads": RESPONSE_HEADS,
        "rows": rows,
        "figures": figures,
    }


RESPONSE_HEADS = (
    ("time to half", "s"),
    ("settling 5 %", "s"),
    ("overshoot", "%"),
    ("peak pitch rate", "deg/s"),
    ("peak load factor", "g"),
    ("peak surface", "deg"),
    ("peak surface rate", "deg/s"),
    ("time on rate limit", "s"),
)

"""The design report: one self-contained HTML file built from a finished run directory.

:func:`build_report` reads what the run wrote (``design.json``, and when present
``schedule.json``, ``robustness.json`` and ``responses.json``) plus the plot files,
and renders ``templates/report.html.j2`` with Jinja2 (autoescape on: every piece of
user text, from the case title to a condition name or a command line, is escaped).
Nothing here computes a measure: values are only formatted and converted for
reading (rad to deg, m/s to kt, m to ft). The file is self-contained: plots are
inlined as ``data:`` URIs (SVG when present, PNG otherwise), styles are inline,
there is no script and nothing is loaded from anywhere.

Sections whose JSON is missing show "Not run for this case". The schedule and
robustness documents are rendered from their structure (scalars as a list of
settings, flat dictionaries as key/value tables, lists of dictionaries as tables,
any ``.png``/``.svg`` file they name that exists in the run directory as a figure,
and every plot in ``plots/`` whose name begins with ``schedule`` or ``robust``),
so the report follows those documents as they grow; keys ending in a unit suffix
(``_s``, ``_rad_s``, ``_db``, ``_deg``, ``_pa``, ...) show the unit. Rows with
``met``/``feasible``/``ok``/``pass``/``passed`` false sort first; a long table shows
its failing rows and the first others, and says how many are left out. A top-level
verdict (``passed`` and ``message``) heads the section.

The report date is the current UTC time, or ``SOURCE_DATE_EPOCH`` when set (for a
byte-identical rebuild).
"""

from __future__ import annotations

import datetime as _dt
import json
import math
import os
import re

from ..errors import DamperError
from .longitudinal_out import longitudinal_rows
from .names import plot_slugs
from .runfiles import MAX_SVG_BYTES  # noqa: F401 - part of this module's interface
from .runfiles import image_uri as _image
from .runfiles import read_json as _read_json

#: Files of the run directory the report reads, in the order of its sections.
OPTIONAL_DOCUMENTS = ("schedule.json", "robustness.json", "responses.json")
R2D = 180.0 / math.pi
KT = 0.514444  # m/s per knot (exact: 1852/3600)
FT = 0.3048  # m per foot (exact)

CAUTION_POINTS = (
    "This is preliminary engineering analysis. It is not a certification document.",
    "Flight-control changes affect the safety of flight. Every result here must be validated "
    "by simulation, ground test and flight test.",
    "Whether a design is acceptable is decided under the applicable airworthiness rules by "
    "qualified, licensed engineers, not by this tool.",
    "The models are linear, small-perturbation, short-period approximations: they say nothing "
    "about structural modes, failures, or flight outside the conditions analysed.",
)

# ---------------------------------------------------------------------------------
# number formatting (display only)
# ---------------------------------------------------------------------------------
DASH = "\u2013"


def f(x, digits=4, none=DASH):
    """`x` with `digits` significant digits; None/NaN/inf become `none`."""
    if x is None or isinstance(x, bool):
        return none if x is None else ("yes" if x else "no")
    try:
        v = float(x)
    except (TypeError, ValueError):
        return str(x)
    if not math.isfinite(v):
        return none
    if v == 0:
        return "0"
    a = abs(v)
    if 1e-4 <= a < 1e6:
        text = f"{v:.{digits}g}"
    else:
        text = f"{v:.{max(digits - 1, 1)}e}"
    return text


def fixed(x, decimals, none=DASH):
    if x is None:
        return none
    v = float(x)
    return f"{v:.{decimals}f}" if math.isfinite(v) else none


def scaled(x, factor, digits=4, none=DASH):
    return none if x is None else f(float(x) * factor, digits, none)


def pct(x, none=DASH):
    """A normalised slack as a signed per cent."""
    if x is None:
        return none
    v = 100.0 * float(x)
    return f"{v:+.1f} %" if math.isfinite(v) else none


def complex_text(pair, digits=4):
    if not pair or pair[0] is None:
        return DASH
    re_, im = pair[0], pair[1] or 0.0
    if abs(im) < 1e-12:
        return f(re_, digits)
    sign = "+" if im >= 0 else "-"
    return f"{f(re_, digits)} {sign} {f(abs(im), digits)}j"


def roots_text(roots, digits=4):
    seen, out = set(), []
    for r in roots or []:
        if r[0] is None:
            continue
        key = (round(r[0], 9), round(abs(r[1] or 0.0), 9))
        if key in seen and abs(r[1] or 0.0) > 0:
            continue
        seen.add(key)
        if abs(r[1] or 0.0) > 1e-12:
            out.append(f"{f(r[0], digits)} \u00b1 {f(abs(r[1]), digits)}j")
        else:
            out.append(f(r[0], digits))
    return ", ".join(out) or DASH


def band_text(lower, upper, unit=""):
    u = f" {unit_text(unit)}" if unit_text(unit) else ""
    if lower is not None and upper is not None:
        return f"{f(lower)} to {f(upper)}{u}"
    if lower is not None:
        return f"\u2265 {f(lower)}{u}"
    if upper is not None:
        return f"\u2264 {f(upper)}{u}"
    return "any"


def unit_text(unit):
    """A unit for display: ``(rad/s^2)/g`` -> ``(rad/s²)/g``; no unit for dimensionless."""
    if unit in (None, "", "-"):
        return ""
    return str(unit).replace("^2", "\u00b2").replace("^3", "\u00b3").replace("**2", "\u00b2")


# ---------------------------------------------------------------------------------
# labels
# ---------------------------------------------------------------------------------
REQUIREMENT_LABELS = {
    "stability": "closed-loop stability (largest real part)",
    "damping_ratio": "short-period damping ratio",
    "cap": "control anticipation parameter (CAP)",
    "equivalent_time_delay": "equivalent time delay",
    "gain_margin": "gain margin",
    "phase_margin": "phase margin",
    "other_mode_damping": "damping of the least-damped other mode",
    "natural_frequency": "short-period frequency",
    "delay_margin": "delay margin",
    "disk_margin": "disk margin",
    "bandwidth": "pitch-attitude bandwidth",
    "phase_delay": "phase delay",
}

BINDING_SHORT = {
    "sweep range": "end of the gain sweep",
}

#: Key suffixes that carry a unit, longest first.
UNIT_SUFFIXES = (
    ("_rad_s2", "rad/s\u00b2"),
    ("_rad_s", "rad/s"),
    ("_deg_s", "deg/s"),
    ("_m_s2", "m/s\u00b2"),
    ("_m_s", "m/s"),
    ("_kg_m2", "kg m\u00b2"),
    ("_kg_m3", "kg/m\u00b3"),
    ("_1_s2", "1/s\u00b2"),
    ("_1_s", "1/s"),
    ("_pct", "%"),
    ("_db", "dB"),
    ("_deg", "deg"),
    ("_rad", "rad"),
    ("_kpa", "kPa"),
    ("_pa", "Pa"),
    ("_kg", "kg"),
    ("_hz", "Hz"),
    ("_m2", "m\u00b2"),
    ("_ft", "ft"),
    ("_kt", "kt"),
    ("_m", "m"),
    ("_s", "s"),
    ("_g", "g"),
)


def key_label(key):
    """``(label, unit)`` of a JSON key: ``"gain_margin_db"`` -> ``("gain margin", "dB")``."""
    k = str(key)
    unit = ""
    for suffix, u in UNIT_SUFFIXES:
        if k.lower().endswith(suffix) and len(k) > len(suffix):
            k, unit = k[: -len(suffix)], u
            break
    return k.replace("_", " "), unit


def requirement_label(name):
    return REQUIREMENT_LABELS.get(name, str(name).replace("_", " "))


def binding_text(binding):
    from ..analysis.search import BARE_MEETS

    if binding == BARE_MEETS:
        return "none: K = 0 already meets every requirement"
    if binding in BINDING_SHORT:
        return BINDING_SHORT[binding]
    return requirement_label(binding)


# ---------------------------------------------------------------------------------
# reading the run directory
# ---------------------------------------------------------------------------------
# ---------------------------------------------------------------------------------
# view model
# ---------------------------------------------------------------------------------
def _status(ok):
    """A verdict that does not rely on colour: symbol, word and a class."""
    if ok is None:
        return {"cls": "na", "symbol": "\u2013", "text": "not judged"}
    return {"cls": "pass", "symbol": "\u2714", "text": "met"} if ok else {"cls": "fail", "symbol": "\u2718", "text": "MISSED"}


def _condition_view(i, c, slug, files, summary_cond):
    m = c.get("measures") or {}
    fl = m.get("flight") or {}
    bare = (m.get("bare") or {}).get("short_period") or {}
    cl = m.get("closed_loop") or {}
    sp = cl.get("short_period") or {}
    eq = cl.get("equivalent") or None
    hq = cl.get("handling") or {}
    mg = m.get("margins") or {}
    other = cl.get("least_damped_other_mode") or {}

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

    def sp_rows():
        rows = [
            ("damping ratio", "\u2013", f(bare.get("damping_ratio"), 3), f(sp.get("damping_ratio"), 3), f(eq.get("damping_ratio"), 3) if eq else DASH),
            ("natural frequency", "rad/s", f(bare.get("natural_frequency_rad_s")), f(sp.get("natural_frequency_rad_s")), f(eq.get("natural_frequency_rad_s")) if eq else DASH),
            ("period", "s", f(bare.get("period_s")), f(sp.get("period_s")), DASH),
            ("time to half amplitude", "s", f(bare.get("time_to_half_s")), f(sp.get("time_to_half_s")), DASH),
        ]
        if bare.get("time_to_double_s") is not None:
            rows.append(("time to double amplitude", "s", f(bare.get("time_to_double_s")), DASH, DASH))
        return rows

    equivalent = None
    if eq:
        equivalent = [
            ("damping ratio \u03b6e", "\u2013", f(eq.get("damping_ratio"), 3)),
            ("frequency \u03c9e", "rad/s", f(eq.get("natural_frequency_rad_s"))),
            ("equivalent time delay \u03c4e", "s", f(eq.get("time_delay_s"), 3)),
            ("zero 1/T\u03b82", "1/s", f(eq.get("inv_t_theta2_1_s"))),
            ("gain Kq", "1/s", f(eq.get("gain_1_s"))),
            ("mismatch J", "\u2013", f(eq.get("mismatch"), 3)),
            ("fit converged", "", "yes" if eq.get("converged") else "NO"),
        ]
    handling = [
        ("CAP (equivalent frequency)", "(rad/s\u00b2)/g", f(hq.get("cap_equivalent"))),
        ("CAP (modal frequency)", "(rad/s\u00b2)/g", f(hq.get("cap_modal"))),
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

    # a null margin: no such crossing (unbounded) on a stable loop, no margin at all on an unstable one
    unb = "none (unbounded)" if cl.get("stable", True) else "none: closed loop unstable"
    margins = [
        ("gain margin, gain may rise by", "dB", f(mg.get("gain_margin_db"), 3, unb), f(mg.get("phase_crossover_rad_s"), 4, DASH)),
        ("gain margin, gain may fall by", "dB", f(mg.get("gain_margin_low_db"), 3, unb), DASH),
        ("phase margin (smallest magnitude)", "deg", f(mg.get("phase_margin_deg"), 3, unb), f(mg.get("gain_crossover_rad_s"), 4, DASH)),
        ("delay margin", "s", f(mg.get("delay_margin_s"), 3, unb), DASH),
        ("disk margin \u03b1", "\u2013", f(mg.get("disk_margin"), 3, unb), DASH),
        ("disk gain margin", "\u00b1dB", f(mg.get("disk_gain_margin_db"), 3, unb), DASH),
        ("disk phase margin", "\u00b1deg", f(mg.get("disk_phase_margin_deg"), 3, unb), DASH),
    ]
    crossings = [
        # a crossing's offset is a margin only where it sets the reported one (table above)
        {"kind": "gain crossing |L| = 1", "w": f(x.get("frequency_rad_s")), "value": f(x.get("phase_margin_deg"), 4), "unit": "deg from \u2212180 deg"}
        for x in mg.get("gain_crossings") or []
    ] + [
        {"kind": "phase crossing \u2220L = \u2212180 deg", "w": f(x.get("frequency_rad_s")), "value": f(x.get("gain_margin_db"), 4), "unit": "dB below 0 dB"}
        for x in mg.get("phase_crossings") or []
    ]

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

    level = m.get("level") or {}
    levels = [(requirement_label(k), str(v)) for k, v in level.items() if k != "overall"]
    sweep = c.get("sweep_range_s") or [None, None]
    figures = []
    for suffix, caption in (
        ("root-locus", "Root locus: closed-loop roots as the gain rises (eigenvalues, Pad\u00e9 delay)."),
        ("loop-response", "Loop response L(j\u03c9) at the chosen gain, loop broken at the actuator input (exact delay)."),
        ("gain-sweep", "Gain sweep: damping, margins and feasible gains against the gain K (s)."),
    ):
        figures.append({"src": _image(files, [os.path.join("plots", f"{slug}-{suffix}")]), "caption": caption, "kind": suffix})

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
        "sp_rows": sp_rows(),
        "bare_roots": roots_text(bare.get("roots")),
        "other_mode": {
            "damping": f(other.get("damping_ratio"), 3),
            "eigenvalue": complex_text(other.get("eigenvalue")),
        },
        "eigenvalues": roots_text(cl.get("eigenvalues")),
        "equivalent": equivalent,
        "equivalent_large_mismatch": bool(eq and eq.get("large_mismatch")),
        "handling": handling,
        "longitudinal": longitudinal_rows(m, f),
        "margins": margins,
        "crossings": crossings,
        "criteria": criteria,
        "missed": sum(1 for k in criteria if not k["met"]),
        "level": level.get("overall", DASH) if level else DASH,
        "levels": levels,
        "figures": figures,
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
        ("damper authority (travel)", _limit(lp.get("actuator_travel_rad"), "deg", "rad", plusminus=True)),
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


# --- generic documents (schedule, robustness) ------------------------------------
_SKIP = {"title", "caution", "warnings", "provenance"}
_VERDICT_KEYS = ("met", "feasible", "ok", "pass", "passed", "meets")
#: Rows of a generic table shown in the report (failing rows first, up to MAX_FAILING_ROWS).
MAX_TABLE_ROWS = 40
MAX_FAILING_ROWS = 200
#: Items not met the first section lists per part (the JSON verdict objects hold them all).
GLANCE_ROWS = 10


def _scalar(v):
    return v is None or isinstance(v, (bool, int, float, str))


def _cell(v):
    if isinstance(v, bool):
        return "\u2714 yes" if v else "\u2718 NO"
    if isinstance(v, (int, float)) or v is None:
        return f(v)
    if isinstance(v, str):
        return v
    if isinstance(v, list) and all(_scalar(x) for x in v):
        if len(v) > 12:
            return ", ".join(_cell(x) for x in v[:12]) + f", ... ({len(v)} values)"
        return ", ".join(_cell(x) for x in v)
    if isinstance(v, list) and v and all(isinstance(x, list) and all(_scalar(y) for y in x) for x in v):
        items = ["[" + ", ".join(_cell(y) for y in x) + "]" for x in v[:6]]
        return ", ".join(items) + (f", ... ({len(v)} rows)" if len(v) > 6 else "")
    if isinstance(v, dict) and all(_scalar(x) for x in v.values()):
        return "; ".join(f"{_head(k)} {_cell(x)}" for k, x in v.items())
    text = json.dumps(v, allow_nan=False)
    return text if len(text) <= 160 else text[:157] + "..."


_NUMBER = re.compile(r"^[-+\u2212]?(\d[\d.]*)(e[-+]?\d+)?( ?%)?$|^\u2013$")


def _cells(texts):
    """Table cells as (text, css class): numbers right-aligned, short cells kept on one line."""
    out = []
    for t in texts:
        t = str(t)
        cls = "num nowrap" if _NUMBER.match(t) else ("nowrap" if len(t) <= 14 else "")
        out.append((t, cls))
    return out


def _head(key):
    label, unit = key_label(key)
    return f"{label} ({unit})" if unit else label


def _verdict(row):
    for k in _VERDICT_KEYS:
        if isinstance(row.get(k), bool):
            return row[k]
    return None


def _blocks(obj, files, title="", depth=0):
    """Render blocks (settings lists, tables, figures) of a generic JSON document."""
    blocks, figures = [], []
    pairs, subs = [], []
    for key, v in obj.items():
        if key in _SKIP and depth == 0:
            continue
        if isinstance(v, str) and v.lower().endswith((".png", ".svg")):
            src = _image(files, [os.path.splitext(v)[0]])
            if src:
                figures.append({"src": src, "caption": f"{_head(key)}: {os.path.basename(v)}"})
                continue
        if _scalar(v) or (isinstance(v, list) and all(_scalar(x) for x in v)):
            pairs.append((_head(key), _cell(v)))
        elif isinstance(v, dict) and all(_scalar(x) or isinstance(x, list) for x in v.values()) and depth >= 1:
            pairs.append((_head(key), _cell(v)))
        else:
            subs.append((key, v))
    if pairs:
        blocks.append({"kind": "pairs", "title": title, "rows": pairs})
    for key, v in subs:
        label = (f"{title}: " if title else "") + _head(key)
        if isinstance(v, dict):
            b, fg = _blocks(v, files, label, depth + 1) if depth < 3 else ([{"kind": "pairs", "title": label, "rows": [(k, _cell(x)) for k, x in v.items()]}], [])
            blocks += b
            figures += fg
        elif isinstance(v, list) and v and all(isinstance(x, dict) for x in v):
            cols = []
            for row in v:
                for k in row:
                    if k not in cols and not (isinstance(row[k], str) and row[k].lower().endswith((".png", ".svg", ".csv"))):
                        cols.append(k)
            ordered = sorted(range(len(v)), key=lambda n: (_verdict(v[n]) is not False, n))
            n_fail = sum(1 for row in v if _verdict(row) is False)
            keep = max(MAX_TABLE_ROWS, min(n_fail, MAX_FAILING_ROWS))
            rows = []
            for n in ordered[:keep]:
                row = v[n]
                rows.append({"cells": _cells([_cell(row.get(k)) for k in cols]), "fail": _verdict(row) is False})
            for row in v:
                for k, x in row.items():
                    if isinstance(x, str) and x.lower().endswith((".png", ".svg")):
                        src = _image(files, [os.path.splitext(x)[0]])
                        if src:
                            figures.append({"src": src, "caption": f"{label}: {os.path.basename(x)}"})
            more = len(v) - len(rows)
            blocks.append(
                {
                    "kind": "table",
                    "title": label,
                    "heads": [_head(k) for k in cols],
                    "rows": rows,
                    "more": f"{more} more row{'s' if more != 1 else ''} not shown"
                    + (" (all of them pass)" if n_fail <= len(rows) and n_fail else "")
                    + "; every row is in the JSON file"
                    if more > 0
                    else "",
                }
            )
        else:
            blocks.append({"kind": "pairs", "title": label, "rows": [("value", _cell(v))]})
    return blocks, figures


def _generic_view(doc, files, plot_prefix):
    if doc is None:
        return None
    if "_unreadable" in doc:
        return {"error": doc["_unreadable"]}
    blocks, figures = _blocks(doc, files)
    named = {fg["src"] for fg in figures}
    stems = sorted({os.path.splitext(n)[0][len("plots/"):] for n in files.names("plots")
                    if n[len("plots/"):].startswith(plot_prefix) and n.lower().endswith((".png", ".svg"))})
    for stem in stems:
        src = _image(files, ["plots/" + stem])
        if src and src not in named:
            figures.append({"src": src, "caption": stem.replace("-", " ").replace("_", " ")})
    headline = None
    for key in _VERDICT_KEYS:
        if isinstance(doc.get(key), bool):
            ok = doc[key]
            message = doc.get("message") or doc.get("summary") or ""
            headline = {"status": {"cls": "pass", "symbol": "\u2714", "text": "passed"} if ok
                        else {"cls": "fail", "symbol": "\u2718", "text": "FAILED"},
                        "message": message if isinstance(message, str) else _cell(message)}
            break
    return {
        "error": None,
        "headline": headline,
        "blocks": blocks,
        "figures": figures,
        "warnings": [str(w) for w in doc.get("warnings") or []],
    }


# --- dedicated views of the schedule and robustness documents --------------------
def _pairs(title, rows):
    return {"kind": "pairs", "title": title, "rows": [(a, b) for a, b in rows if b not in (None, "")]}


def _table(title, heads, rows, fails=None, limit=MAX_TABLE_ROWS):
    """A table block: failing rows first, at most `limit` rows (all failing rows up to MAX_FAILING_ROWS)."""
    fails = list(fails) if fails is not None else [False] * len(rows)
    order = sorted(range(len(rows)), key=lambda n: (not fails[n], n))
    keep = max(limit, min(sum(fails), MAX_FAILING_ROWS))
    shown = [{"cells": _cells(rows[n]), "fail": fails[n]} for n in order[:keep]]
    more = len(rows) - len(shown)
    return {
        "kind": "table",
        "title": title,
        "heads": heads,
        "rows": shown,
        "more": f"{more} more row{'s' if more != 1 else ''} not shown (all of them pass); every row is in the JSON file"
        if more > 0
        else "",
    }


def _files_figures(files, names, captions=None):
    stems, out = [], []
    for name in names or []:
        if isinstance(name, str) and name.lower().endswith((".png", ".svg")):
            stem = os.path.splitext(name)[0]
            if stem not in stems:
                stems.append(stem)
    for stem in stems:
        src = _image(files, [stem, os.path.join("plots", stem)])
        if src:
            base = os.path.basename(stem)
            out.append({"src": src, "caption": (captions or {}).get(base.split("-")[0], base.replace("-", " "))})
    return out


def _plot_dir_figures(files, prefixes, captions=None):
    names = [n for n in files.names("plots") if n[len("plots/"):].startswith(prefixes) and n.lower().endswith((".png", ".svg"))]
    return _files_figures(files, names, captions)


def _headline(ok, message):
    return {
        "status": {"cls": "pass", "symbol": "\u2714", "text": "passed"} if ok else {"cls": "fail", "symbol": "\u2718", "text": "FAILED"},
        "message": message or "",
    }


def _part_headline(doc, part):
    """The headline of a section: its part's summary item of the document's verdict object."""
    from ..verdict import Verdict

    try:
        item = Verdict.from_doc(doc.get("verdict")).summary(part)
    except (ValueError, KeyError, TypeError):
        return None
    return None if item is None else _headline(item.met, item.text)


def verdict_view(docs) -> dict:
    """The report's first section: the run's verdict, the sum of the documents' verdict objects.

    Parameters
    ----------
    docs : dict
        File name to parsed JSON document (design.json and whatever optional documents exist).
    """
    from ..verdict import Verdict

    total, unreadable = Verdict(), []
    for name, doc in docs.items():
        if not isinstance(doc, dict) or "verdict" not in doc:
            continue
        try:
            total = total + Verdict.from_doc(doc["verdict"])
        except (ValueError, KeyError, TypeError):
            unreadable.append(name)
    parts = []
    for p in total.parts:
        s = total.summary(p)
        misses = [i for i in total.items if i.part == p and not i.met and i is not s]
        parts.append({
            "part": p,
            "status": _status(s.met if s is not None else not misses),
            "text": s.text if s is not None else "",
            "misses": [{"condition": i.condition or "", "requirement": "every requirement" if i.requirement == "all"
                        else requirement_label(i.requirement), "text": i.text} for i in misses[:GLANCE_ROWS]],
            "more": max(0, len(misses) - GLANCE_ROWS),
        })
    return {"met": total.met, "judged": bool(total.items), "status": _status(total.met), "parts": parts,
            "unreadable": unreadable}


def _schedule_view(doc, files):
    t = doc["table"]
    variables = t["variables"]
    gains = t["gains_s"]
    blocks = [
        _pairs(
            "The schedule",
            [
                ("scheduled on", ", ".join(f"{v['name'].replace('_', ' ')} ({v.get('unit', '')})" for v in variables)),
                ("form", str(t.get("form", "")).replace("_", " ")),
                ("law", t.get("law")),
                ("interpolation", t.get("interpolation")),
                ("gain unit", t.get("gain_unit")),
                ("sign", t.get("sign")),
                ("designed from", doc.get("source")),
                ("configurations", ", ".join(str(x) for x in doc.get("configurations") or [])),
                ("rounds of breakpoint repair", str(doc.get("rounds", ""))),
            ],
        )
    ]
    if len(variables) == 1:
        v = variables[0]
        rows = [[f(b), f(k)] for b, k in zip(v["breakpoints"], gains)]
        blocks.append(_table("Gain table", [f"{v['name'].replace('_', ' ')} ({v.get('unit', '')})", "gain K (s)"], rows, limit=500))
    elif len(variables) == 2:
        v0, v1 = variables
        heads = [f"{v0['name'].replace('_', ' ')} ({v0.get('unit', '')}) \\ {v1['name'].replace('_', ' ')} ({v1.get('unit', '')})"]
        heads += [f(b) for b in v1["breakpoints"]]
        rows = [[f(b)] + [f(k) for k in row] for b, row in zip(v0["breakpoints"], gains)]
        blocks.append(_table("Gain table, K (s)", heads, rows, limit=500))
    bd = doc.get("breakpoint_design") or {}
    if bd.get("gain_s") is not None:
        n = len(bd["gain_s"])
        feas = bd.get("feasible") or [None] * n
        rows = [
            [str(j + 1), f(bd["gain_s"][j]), _cell(feas[j]), pct((bd.get("worst_slack") or [None] * n)[j]),
             binding_text((bd.get("binding") or [""] * n)[j]), str((bd.get("design_points") or [""] * n)[j])]
            for j in range(n)
        ]
        blocks.append(
            _table(
                "Design at each breakpoint",
                ["breakpoint", "gain K (s)", "feasible", "worst slack", "binding requirement", "design points"],
                rows,
                [x is False for x in feas],
                limit=500,
            )
        )
    hist = doc.get("history") or []
    if hist:
        blocks.append(
            _table("Breakpoint repair rounds", ["breakpoints", "failing verification points"],
                   [[_cell(h.get("breakpoints")), _cell(h.get("failing_points"))] for h in hist], limit=100)
        )
    ver = doc.get("verification") or {}
    if ver:
        blocks.append(
            _pairs(
                "Verification between and beyond the breakpoints",
                [
                    ("points checked", str(ver.get("points", ""))),
                    ("points failing", str(ver.get("failing", ""))),
                    ("requirements checked", ", ".join(requirement_label(c) for c in ver.get("criteria") or [])),
                ],
            )
        )
        configs = doc.get("configurations") or []
        rows, fails = [], []
        for r in ver.get("rows") or []:
            cfg = r.get("configuration")
            cfg_name = configs[cfg] if isinstance(cfg, int) and 0 <= cfg < len(configs) else _cell(cfg)
            rows.append(
                [r.get("label", ""), r.get("kind", ""), cfg_name, f(r.get("altitude_m")), f(r.get("airspeed_m_s")),
                 ", ".join(f(x) for x in r.get("variables") or []), f(r.get("gain_s")), _cell(r.get("passed")),
                 pct(r.get("worst_slack")), binding_text(r.get("binding")) if r.get("binding") else DASH,
                 f(r.get("damping_ratio"), 3), f(r.get("smallest_gain_margin_db"), 3, "none")]
            )
            fails.append(r.get("passed") is False)
        names = " / ".join(v["name"].replace("_", " ") for v in variables)
        units = " / ".join(v.get("unit", "") for v in variables)
        blocks.append(
            _table(
                "Verification points",
                ["point", "kind", "configuration", "altitude (m)", "true airspeed (m/s)", f"{names} ({units})", "gain K (s)",
                 "verdict", "worst slack", "binding requirement", "damping ratio (\u2013)", "smallest gain margin (dB)"],
                rows,
                fails,
            )
        )
    figures = _plot_dir_figures(files, ("schedule",))
    return {
        "error": None,
        "headline": _part_headline(doc, "schedule") or (_headline(bool(doc.get("passed")), doc.get("message"))
                                                          if isinstance(doc.get("passed"), bool) else None),
        "blocks": blocks,
        "figures": figures,
        "warnings": [str(w) for w in doc.get("warnings") or []],
    }


def _interval_text(iv):
    if not iv or iv[0] is None:
        return DASH
    return f"{100 * iv[0]:.1f} to {100 * iv[1]:.1f} %"


def _robustness_view(doc, files):
    m = doc.get("method") or {}
    joint = doc.get("joint") or {}
    conf = m.get("confidence")
    blocks = [
        _pairs(
            "Method",
            [
                ("conditions studied", m.get("conditions_studied")),
                ("samples", _cell(m.get("samples"))),
                ("seed", _cell(m.get("seed"))),
                ("confidence of the intervals", f"{100 * conf:.0f} %" if isinstance(conf, (int, float)) else None),
                ("corners evaluated", f"{m.get('corners_evaluated')}" + (" (all)" if m.get("corners_complete") else "")),
                ("loops evaluated", f"{m['loops_evaluated']:,}" if isinstance(m.get("loops_evaluated"), int)
                 else _cell(m.get("loops_evaluated"))),
                ("sampling", m.get("sampling")),
                ("normal distributions", m.get("normal")),
                ("corners", m.get("corners")),
                ("worst-case refinement", m.get("refinement") if isinstance(m.get("refinement"), str) else _cell(m.get("refinement"))),
                ("pass-fraction interval", m.get("interval")),
                ("sensitivity", m.get("sensitivity")),
                ("centre-of-gravity model", m.get("cg_model")),
                ("frequency domain", m.get("frequency_domain")),
            ],
        )
    ]
    params = doc.get("parameters") or []
    if params and all(isinstance(p, dict) for p in params):
        cols = []
        for p in params:
            for k, v in p.items():
                flat = _scalar(v) or (isinstance(v, list) and all(_scalar(x) for x in v))
                if k not in cols and flat:
                    cols.append(k)
        cells = [[unit_text(p.get(k)) if k == "unit" else _cell(p.get(k)) for k in cols] for p in params]
        block = _table("Uncertain parameters", [_head(k) for k in cols], cells, limit=200)
        block["more"] = "the nominal value and bounds of every parameter at every condition are in robustness.json"
        blocks.append(block)
    rows, fails = [], []
    worst_blocks, missed_at = [], []
    for c in doc.get("conditions") or []:
        pa = (c.get("pass") or {}).get("all") or {}
        worst = [w for w in c.get("worst") or [] if isinstance(w, dict)]
        slack_of = lambda w: w["slack"] if isinstance(w.get("slack"), (int, float)) else (-1e300 if w.get("slack") == "-inf" else 1e300)  # noqa: E731
        tightest = min(worst, key=slack_of) if worst else None
        frac = pa.get("fraction")
        worst_missed = bool(tightest) and slack_of(tightest) < 0
        ok = frac is not None and frac >= 1.0 and not worst_missed
        if worst_missed:
            missed_at.append(c.get("name", ""))
        rows.append(
            [
                c.get("name", ""),
                f(c.get("gain_s")),
                _cell((c.get("nominal") or {}).get("all_met")),
                f"{pa.get('passed', DASH)} of {c.get('samples', DASH)}",
                DASH if frac is None else f"{100 * frac:.1f} %",
                _interval_text(pa.get("interval")),
                requirement_label(tightest["criterion"]) if tightest else DASH,
                (pct(tightest["slack"]) if isinstance(tightest.get("slack"), (int, float)) else str(tightest.get("slack"))) if tightest else DASH,
                (c.get("sensitivity") or {}).get("top_driver") or DASH,
                f"{(c.get('corners') or {}).get('passed_all', DASH)} of {(c.get('corners') or {}).get('evaluated', DASH)}",
            ]
        )
        fails.append(not ok)
        wrows, wfails = [], []
        for w in worst:
            sl = w.get("slack")
            wrows.append(
                [
                    requirement_label(w.get("criterion")),
                    (f(w.get("value")) + (f" {unit_text(w.get('unit'))}" if unit_text(w.get("unit")) else "")) if w.get("value") is not None else (w.get("value_note") or DASH),
                    pct(sl) if isinstance(sl, (int, float)) else str(sl),
                    _cell(w.get("met")),
                    "; ".join(f"{k} {f(v)}" for k, v in (w.get("parameters") or {}).items()),
                ]
            )
            wfails.append(w.get("met") is False)
        if wrows:
            worst_blocks.append(
                _table(f"Worst cases found at {c.get('name', '')}", ["requirement", "worst value", "slack", "met", "parameters there"], wrows, wfails, limit=100)
            )
    blocks.append(
        _table(
            "Pass fraction per condition",
            ["condition", "gain K (s)", "nominal meets all", "samples meeting every requirement", "fraction",
             "interval", "tightest requirement in the worst case", "its slack", "main driver", "corners meeting all"],
            rows,
            fails,
            limit=500,
        )
    )
    blocks += worst_blocks
    headline = _part_headline(doc, "robustness")
    figures = _files_figures(
        files,
        doc.get("files") or [],
        {"scatter": "damping ratio against the smallest gain margin, every sample", "sensitivity": "which parameters drive the worst slack",
         "pass": "fraction of samples meeting every requirement, per condition, with its interval"},
    )
    if not figures:
        figures = _plot_dir_figures(files, ("pass-fraction", "scatter-", "sensitivity-", "robust"))
    return {
        "error": None,
        "headline": headline,
        "blocks": blocks,
        "figures": figures,
        "warnings": [str(w) for w in doc.get("warnings") or []],
    }


def _section_view(doc, files, dedicated, prefix):
    """The dedicated view of a document, or the generic one when its structure is not the known one."""
    if doc is None or "_unreadable" in doc:
        return _generic_view(doc, files, prefix)
    try:
        return dedicated(doc, files)
    except (KeyError, TypeError, ValueError, AttributeError, IndexError):
        return _generic_view(doc, files, prefix)


# --- provenance -------------------------------------------------------------------
def _report_date():
    epoch = os.environ.get("SOURCE_DATE_EPOCH")
    if epoch and epoch.strip().isdigit():
        t = _dt.datetime.fromtimestamp(int(epoch), tz=_dt.timezone.utc)
    else:
        t = _dt.datetime.now(tz=_dt.timezone.utc)
    return t.strftime("%Y-%m-%d %H:%M UTC")


def _file_date(path):
    t = _dt.datetime.fromtimestamp(os.path.getmtime(path), tz=_dt.timezone.utc)
    return t.strftime("%Y-%m-%d %H:%M UTC")


def _library_versions():
    from importlib import metadata

    from .. import __version__

    out = [("damper", __version__)]
    for dist in ("numpy", "scipy", "control", "matplotlib", "pint", "PyYAML", "Jinja2"):
        try:
            out.append((dist, metadata.version(dist)))
        except metadata.PackageNotFoundError:
            out.append((dist, "not installed"))
    return out


def _provenance_view(design, hashes, docs, run_files):
    p = design.get("provenance") or {}
    seed = p.get("seed")
    rows = [
        ("input file", p.get("input_file") or DASH),
        ("input SHA-256", p.get("input_sha256") or DASH),
        ("tool", f"{p.get('tool', 'damper')} {p.get('tool_version', '')}".strip()),
        ("Python", p.get("python") or DASH),
        ("numpy", p.get("numpy") or DASH),
        ("scipy", p.get("scipy") or DASH),
        ("seed", "none (the design uses no random numbers)" if seed is None else str(seed)),
        ("command line", p.get("command") or DASH),
        ("design written", _file_date(os.path.join(run_files.root, "design.json"))),
        ("report built", _report_date()),
    ]
    files = [{"name": "design.json", "sha": hashes.get("design.json"), "same": None, "seed": None,
              "command": p.get("command"), "other": False}]
    for name in OPTIONAL_DOCUMENTS:
        d = docs.get(name)
        if d is None:
            continue
        dp = d.get("provenance") if isinstance(d, dict) else None
        dp = dp if isinstance(dp, dict) else {}
        sha = dp.get("input_sha256")
        files.append(
            {
                "name": name,
                "sha": hashes.get(name),
                "same": None if sha is None else sha == p.get("input_sha256"),
                "seed": dp.get("seed"),
                "command": dp.get("command"),
                "other": False,
            }
        )
    listed = {x["name"] for x in files}
    for name in run_files.names(""):
        if name in listed or name == "report.html":
            continue
        files.append({"name": name, "sha": run_files.listed[name], "same": None, "seed": None, "command": None,
                      "other": True})
    n_plots = sum(1 for n in run_files.names("plots") if n.lower().endswith((".png", ".svg")))
    return {"rows": rows, "files": files, "libraries": _library_versions(), "n_plots": n_plots}


# ---------------------------------------------------------------------------------
# entry points
# ---------------------------------------------------------------------------------
def report_context(run_dir, files=None) -> dict:
    """Everything the template shows, formatted (no measure is computed here).

    `files` (a :class:`~damper.output.runfiles.RunFiles`) names what the report may read;
    by default the files the directory's manifest (or journal) lists, with matching hashes.
    """
    from .runfiles import RunFiles

    run_dir = os.fspath(run_dir)
    if not os.path.isdir(run_dir):
        raise DamperError(f"{run_dir}: not a directory; give the directory of a finished 'damper design' run")
    files = files if files is not None else RunFiles.of_directory(run_dir)
    design, sha = _read_json(files, "design.json", required=True)
    if not isinstance(design, dict) or not isinstance(design.get("conditions"), list):
        raise DamperError(f"{os.path.join(run_dir, 'design.json')}: not a design document (no conditions); rerun 'damper design'")
    hashes = {"design.json": sha}
    docs = {}
    for name in OPTIONAL_DOCUMENTS:
        d, h = _read_json(files, name, required=False)
        if d is not None:
            docs[name] = d if isinstance(d, dict) else {"_unreadable": "not a JSON object"}
            hashes[name] = h
    summary = design.get("case_summary") or {}
    summary_conds = {c.get("name"): c for c in summary.get("conditions") or []}
    names = [c.get("name") for c in design["conditions"]]
    slugs = plot_slugs(names)
    conditions = [
        _condition_view(i, c, slugs[i], files, summary_conds.get(c.get("name")))
        for i, c in enumerate(design["conditions"])
    ]
    drawn = design.get("figures") if isinstance(design.get("figures"), dict) else None
    if drawn is not None:  # a large case draws figures for some conditions only (design.json says which)
        some = set(drawn.get("drawn_for") or ())
        for view in conditions:
            if view["name"] not in some:
                for fg in view["figures"]:
                    fg["missing"] = f"no figure for this condition: {drawn.get('rule', '')}"
    failing_first = sorted(conditions, key=lambda c: (c["feasible"], c["index"]))
    infeasible = [c for c in conditions if not c["feasible"]]
    level_values = [c["level"] for c in conditions if c["level"] != DASH]
    worst_level = None
    if level_values:
        worst_level = max(level_values, key=lambda v: v if isinstance(v, int) else 99)
    prov = _provenance_view(design, hashes, docs, files)
    return {
        "title": design.get("title") or "untitled case",
        "report_date": dict(prov["rows"])["report built"],
        "input_sha": (design.get("provenance") or {}).get("input_sha256") or "",
        "caution": design.get("caution") or "",
        "caution_points": CAUTION_POINTS,
        "warnings": [str(w) for w in design.get("warnings") or []],
        "damping_measure": design.get("damping_measure") or "equivalent",
        "requirements": _requirements_view(design),
        "case": _case_view(design),
        "conditions": failing_first,
        "run_verdict": verdict_view({"design.json": design, **docs}),
        "n_conditions": len(conditions),
        "n_infeasible": len(infeasible),
        "infeasible_names": [c["name"] for c in infeasible],
        "worst_level": worst_level,
        "policy_reasons": sorted({c["reason"] for c in conditions if c["reason"]}),
        "schedule": _section_view(docs.get("schedule.json"), files, _schedule_view, "schedule"),
        "robustness": _section_view(docs.get("robustness.json"), files, _robustness_view, "robust"),
        "responses": _responses_view(
            docs.get("responses.json"), files, {c.get("name"): c.get("chosen_gain_s") for c in design["conditions"]}
        ),
        "provenance": prov,
        "run_state": {"complete": files.complete, "changed": list(files.changed)},
        "any_plots": any(fg["src"] for c in conditions for fg in c["figures"]),
    }


def _environment():
    from jinja2 import Environment, FileSystemLoader, StrictUndefined

    here = os.path.join(os.path.dirname(os.path.abspath(__file__)), "templates")
    return Environment(
        loader=FileSystemLoader(here),
        autoescape=True,  # every value is HTML-escaped unless marked safe (nothing is)
        undefined=StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
        keep_trailing_newline=True,
    )


def build_report(run_dir, files=None) -> str:
    """The HTML text of the design report of a run directory.

    Parameters
    ----------
    run_dir : str or path
        A directory holding ``design.json`` (and optionally ``schedule.json``,
        ``robustness.json``, ``responses.json`` and the plots).
    files : RunFiles, optional
        What the report may read (default: what the run's manifest or journal lists,
        with matching SHA-256; see :mod:`damper.output.runfiles`).

    Raises
    ------
    DamperError
        If `run_dir` holds no run or no readable design document.
    """
    context = report_context(run_dir, files)
    return _environment().get_template("report.html.j2").render(**context)


def write_report(run_dir, files=None) -> str:
    """Build the report and write ``run_dir/report.html`` atomically; returns its path."""
    from .files import write_atomic

    html = build_report(run_dir, files)
    return write_atomic(os.path.join(os.fspath(run_dir), "report.html"), html)


def refresh_report(run):
    """Rebuild the report of the run directory `run` (a :class:`~damper.output.rundir.RunDirectory`
    held by this process) if it holds a design run with a report.

    For commands that add files to a run (``respond``, ``robust``), so the report never
    describes files that have since been replaced. Returns the path, or None when there
    was no report to refresh.
    """
    from .journal import part
    from .runfiles import RunFiles

    listed = run.files()
    if "design.json" in listed and os.path.isfile(os.path.join(run.root, "report.html")):
        with part("report"):
            return write_report(run.root, RunFiles.verified(run.root, listed))
    return None


__all__ = ["build_report", "refresh_report", "report_context", "write_report"]

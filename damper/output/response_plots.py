"""Outputs of the time responses: plots (PNG, SVG), CSV tables, JSON and the terminal table.

Nothing is computed here beyond unit conversion for display (rad to deg); the
histories and measures come from :mod:`damper.analysis.response`.
matplotlib is imported inside the plotting function (Agg backend).
"""

from __future__ import annotations

import math
import re

import numpy as np

from .jsonout import CAUTION, num, provenance
from .text import fmt, table

#: Our plot colours: augmented (deep teal), bare (warm grey-brown), limits (brick red).
AUGMENTED_COLOUR = "#00696b"
BARE_COLOUR = "#a0785a"
LIMIT_COLOUR = "#b3362b"
INPUT_COLOUR = "#5b5b8f"

R2D = 180.0 / math.pi

#: Excursions beyond which a small-perturbation (linear) model is commonly taken as no longer
#: valid (common practice, round values): (history field, display scale, limit, unit, name).
SMALL_PERTURBATION_LIMITS = (
    ("theta", R2D, 10.0, "deg", "pitch attitude"),
    ("alpha", R2D, 10.0, "deg", "angle of attack"),
    ("load_factor", 1.0, 1.0, "g", "load factor increment"),
)


def linear_range_note(bare, augmented):
    """The plot's note when a drawn history leaves the small-perturbation range, else "".

    Compares the largest drawn excursions (bare and augmented) with
    :data:`SMALL_PERTURBATION_LIMITS`; returns the text and the exceeded fields.
    """
    over, fields = [], []
    for name, scale, limit, unit, label in SMALL_PERTURBATION_LIMITS:
        peak = max(float(np.nanmax(np.abs(np.asarray(getattr(h, name))))) * scale for h in (bare, augmented))
        if peak > limit:
            over.append(f"{label} reaches {peak:.3g} {unit} (beyond about {limit:g} {unit})")
            fields.append(name)
    if not over:
        return "", ()
    text = ("Outside the small-perturbation range: " + "; ".join(over) + ". The linear model (common practice: "
            "attitude and angle of attack within about 10 deg, load factor within about 1 g of trim) shows the trend, "
            "not reliable values; scale the input down or check with a nonlinear simulation.")
    return text, tuple(fields)


def safe_name(text: str) -> str:
    """A file-name fragment from a label (letters, digits, '.', '_', '-')."""
    out = re.sub(r"[^A-Za-z0-9._-]+", "_", text).strip("._")
    return out[:60] or "x"


def file_stem(i_condition: int, condition: str, j_input: int, label: str) -> str:
    """``response-<nn>-<condition>-<m>-<input>`` (numbered, so names never collide)."""
    return f"response-{i_condition + 1:02d}-{safe_name(condition)}-{j_input + 1}-{safe_name(label)}"


# ---------------------------------------------------------------------------
# Plots
# ---------------------------------------------------------------------------


def plot_response(stem, bare, augmented, *, title, subtitle="", rate_limit=None, travel=None, stride=1):
    """Bare and augmented histories of one condition on shared axes; PNG and SVG.

    Parameters
    ----------
    stem : str
        Path without extension; ``.png`` and ``.svg`` are written.
    bare, augmented : TimeHistory
        One condition each (1-D series).
    title, subtitle : str
    rate_limit, travel : float or None
        rad/s and rad, drawn as dashed lines on the surface panels.
    stride : int
        Plot every `stride`-th sample.

    Returns
    -------
    list of str
        The files written.
    """
    import matplotlib

    from .figures import new_figure, save_figure

    t = bare.time[::stride]

    def s(h, name, scale=1.0):
        return np.asarray(getattr(h, name))[::stride] * scale

    gust = bool(np.any(np.asarray(augmented.gust_alpha) != 0))
    panels = [
        ("q", R2D, "pitch rate\ndeg/s"),
        ("alpha", R2D, "angle of attack\ndeg"),
        ("theta", R2D, "pitch attitude\ndeg"),
        ("load_factor", 1.0, "load factor\nincrement, g"),
        ("surface", R2D, "surface\ndeg"),
        ("surface_rate", R2D, "surface rate\ndeg/s"),
    ]
    style = {"font.size": 8.5, "axes.spines.top": False, "axes.spines.right": False, "svg.hashsalt": "damper"}
    note, exceeded = linear_range_note(bare, augmented)
    with matplotlib.rc_context(style):
        fig = new_figure(7.5, 10.0)
        # fixed margins (inches converted to fractions) instead of a layout pass: one draw per file
        top_in = 1.1 if note else 0.7
        fig.subplots_adjust(left=0.95 / 7.5, right=1.0 - 0.15 / 7.5, bottom=0.5 / 10.0, top=1.0 - top_in / 10.0,
                            hspace=0.12)
        axes = fig.subplots(len(panels), 1, sharex=True)
        for ax, (name, scale, label) in zip(axes, panels):
            ax.plot(t, s(bare, name, scale), color=BARE_COLOUR, lw=1.2, label="bare airframe (K = 0)")
            ax.plot(t, s(augmented, name, scale), color=AUGMENTED_COLOUR, lw=1.6, label="with damper")
            ax.set_ylabel(label)
            ax.grid(True, color="#e4e4e4", lw=0.6)
            ax.axhline(0.0, color="#9a9a9a", lw=0.5)
        ax_alpha = axes[1]
        if gust:
            ax_alpha.plot(t, s(augmented, "gust_alpha", R2D), color=INPUT_COLOUR, lw=1.0, ls=":",
                          label="gust angle w/V")
        ax_surf, ax_rate = axes[4], axes[5]
        if not gust:
            ax_surf.plot(t, s(augmented, "pilot", R2D), color=INPUT_COLOUR, lw=1.0, ls=":", label="pilot command")
        if travel is not None and math.isfinite(travel):
            for sign in (1, -1):
                ax_surf.axhline(sign * travel * R2D, color=LIMIT_COLOUR, lw=1.0, ls="--",
                                label="travel limit" if sign > 0 else None)
        if rate_limit is not None and math.isfinite(rate_limit):
            for sign in (1, -1):
                ax_rate.axhline(sign * rate_limit * R2D, color=LIMIT_COLOUR, lw=1.0, ls="--",
                                label="rate limit" if sign > 0 else None)
        axes[0].legend(loc="upper right", fontsize=7.5, frameon=False, ncol=2)
        for ax in (ax_alpha, ax_surf, ax_rate):
            handles, labels = ax.get_legend_handles_labels()
            extra = [(hd, lb) for hd, lb in zip(handles, labels) if lb not in ("bare airframe (K = 0)", "with damper")]
            if extra:
                ax.legend(*zip(*extra), loc="upper right", fontsize=7.5, frameon=False)
        axes[-1].set_xlabel("time, s")
        axes[-1].set_xlim(t[0], t[-1])
        fig.align_ylabels(axes)
        fig.suptitle(title, fontsize=10, x=0.02, y=0.985, ha="left")
        if subtitle:
            fig.text(0.02, 0.955, subtitle, fontsize=8, ha="left", color="#444444")
        if note:
            import textwrap

            fig.text(0.02, 0.945, textwrap.fill(note, 125), fontsize=7.5, ha="left", va="top", color=LIMIT_COLOUR)
            for ax, (name, scale, label) in zip(axes, panels):
                for field, _, limit, _, _ in SMALL_PERTURBATION_LIMITS:
                    if field == name and field in exceeded:
                        for sign in (1, -1):
                            ax.axhline(sign * limit, color=LIMIT_COLOUR, lw=0.7, ls=":", alpha=0.8)
        written = save_figure(fig, stem, dpi=110)
    return written


# ---------------------------------------------------------------------------
# CSV
# ---------------------------------------------------------------------------

CSV_SERIES = (
    ("alpha", "alpha_rad"),
    ("q", "q_rad_s"),
    ("theta", "theta_rad"),
    ("load_factor", "nz_g"),
    ("surface", "surface_rad"),
    ("surface_rate", "surface_rate_rad_s"),
    ("command", "actuator_command_rad"),
    ("rate_limited", "at_rate_limit"),
    ("position_limited", "at_travel_limit"),
)


def response_csv(bare, augmented, stride=1) -> str:
    """CSV text of one condition: time, inputs, then bare and augmented series (SI units in headers)."""
    cols = [("time_s", bare.time), ("pilot_command_rad", augmented.pilot), ("gust_alpha_rad", augmented.gust_alpha)]
    for prefix, h in (("bare", bare), ("augmented", augmented)):
        for name, head in CSV_SERIES:
            cols.append((f"{prefix}_{head}", getattr(h, name)))
    lines = [",".join(c[0] for c in cols)]
    data = [np.asarray(c[1])[::stride] for c in cols]
    for row in zip(*data):
        lines.append(",".join(_csv_value(v) for v in row))
    return "\n".join(lines) + "\n"


def _csv_value(v) -> str:
    if isinstance(v, (bool, np.bool_)):
        return "1" if v else "0"
    v = float(v)
    if not math.isfinite(v):
        return ""
    return f"{v:.9g}"


# ---------------------------------------------------------------------------
# JSON and table
# ---------------------------------------------------------------------------


def _measures(m, i) -> dict:
    return {
        "time_to_half_s": num(m.time_to_half[i]),
        "settling_time_5pct_s": num(m.settling_time[i]),
        "overshoot_ratio": num(m.overshoot[i]),
        "peak_pitch_rate_rad_s": num(m.peak_pitch_rate[i]),
        "peak_alpha_rad": num(m.peak_alpha[i]),
        "peak_load_factor_g": num(m.peak_load_factor[i]),
        "peak_surface_rad": num(m.peak_surface[i]),
        "peak_surface_rate_rad_s": num(m.peak_surface_rate[i]),
        "time_at_rate_limit_s": num(m.time_at_rate_limit[i]),
        "time_at_travel_limit_s": num(m.time_at_position_limit[i]),
        "input_end_s": num(m.input_end[i]),
    }


def _authority_measures(res, i) -> dict:
    """The damper's authority in one augmented response (only when the case sets an authority, so the
    documents of cases without one are unchanged): time at the authority and at its rate limit, s,
    and the largest damper demand before its limits, rad."""
    if res.authority is None:
        return {}
    m = res.augmented_measures

    def at(x):
        return None if x is None else num(np.asarray(x, dtype=float).reshape(-1)[i])

    return {
        "time_at_authority_limit_s": at(m.time_at_authority_limit),
        "time_at_authority_rate_limit_s": at(m.time_at_authority_rate_limit),
        "peak_damper_demand_rad": at(m.peak_damper_demand),
    }


def _input_json(inp, i) -> dict:
    def at(x):
        a = np.asarray(x, dtype=float).reshape(-1)
        return num(a[i] if a.size > 1 else a[0])

    out = {"name": inp.label, "kind": inp.kind, "start_s": at(inp.start)}
    if not inp.is_gust:
        out["amplitude_rad"] = at(inp.amplitude)
    if inp.kind == "doublet":
        out["half_period_s"] = at(inp.half_period)
    if inp.kind == "pulse":
        out["duration_s"] = at(inp.duration)
    if inp.is_gust:
        out["gust_velocity_m_s"] = at(inp.gust_velocity)
    if inp.kind == "gust_one_minus_cosine":
        out["gust_length_m"] = at(inp.gust_length)
    return out


def response_document(case, result, command=None, files=None) -> dict:
    """The JSON document of ``damper respond`` (SI units; NaN as null).

    Parameters
    ----------
    case : Case
    result : CaseResponses
        With a gains array of shape ``(n_conditions,)``.
    files : dict or None
        ``{(i_condition, j_input): [paths]}`` written alongside.
    """
    from ..analysis.response import DELAY_MODEL, METHOD

    spec = result.spec
    conds = []
    for i, c in enumerate(case.conditions):
        runs = []
        for j, res in enumerate(result.responses):
            runs.append(
                {
                    "input": _input_json(res.input, i),
                    "bare": _measures(res.bare_measures, i),
                    "augmented": _measures(res.augmented_measures, i) | _authority_measures(res, i),
                    "files": list((files or {}).get((i, j), [])),
                }
            )
        conds.append(
            {"name": c.name, "gain_s": num(result.gains[i]), "airspeed_m_s": num(c.airspeed), "responses": runs}
        )
    return {
        "title": case.title,
        "caution": CAUTION,
        "warnings": list(case.warnings),
        "notes": list(result.notes),
        "simulation": {
            "method": METHOD,
            "step_s": spec.step,
            "duration_s": spec.duration,
            "output_step_s": spec.output_step,
            "delay_model": DELAY_MODEL,
            "default_inputs": spec.default,
            "bare_airframe": "gain 0 with the same actuator and limits",
            "gust_model": "alpha_g = w_g / V added to the aerodynamic angle of attack; M_alpha_dot alpha_g' neglected",
            "load_factor": "n_z = -(Z_alpha (alpha + alpha_g) + Z_q q + Z_delta delta) / g0",
        },
        "limits": {"rate_limit_rad_s": None if result.rate_limit is None else num(result.rate_limit),
                   "travel_rad": None if result.travel is None else num(result.travel)},
        "conditions": conds,
        "provenance": provenance(case, command),
    }


def response_table(doc) -> str:
    """The terminal table of ``damper respond`` (angles in deg for reading)."""
    headers = [
        "condition",
        "input",
        "t half bare\ns",
        "t half aug\ns",
        "settle aug\ns",
        "oversh. bare\n%",
        "oversh. aug\n%",
        "peak q aug\ndeg/s",
        "peak nz bare\ng",
        "peak nz aug\ng",
        "peak surf\ndeg",
        "peak rate\ndeg/s",
        "at rate lim\ns",
        "at travel\ns",
    ]
    rows = []
    for c in doc["conditions"]:
        for r in c["responses"]:
            b, a = r["bare"], r["augmented"]

            def deg(x):
                return None if x is None else x * R2D

            def pct(x):
                return None if x is None else 100.0 * x

            rows.append(
                [
                    c["name"],
                    r["input"]["name"],
                    fmt(b["time_to_half_s"], ".3g"),
                    fmt(a["time_to_half_s"], ".3g"),
                    fmt(a["settling_time_5pct_s"], ".3g"),
                    fmt(pct(b["overshoot_ratio"]), ".1f"),
                    fmt(pct(a["overshoot_ratio"]), ".1f"),
                    fmt(deg(a["peak_pitch_rate_rad_s"]), ".3g"),
                    fmt(b["peak_load_factor_g"], ".3f"),
                    fmt(a["peak_load_factor_g"], ".3f"),
                    fmt(deg(a["peak_surface_rad"]), ".3g"),
                    fmt(deg(a["peak_surface_rate_rad_s"]), ".3g"),
                    fmt(a["time_at_rate_limit_s"], ".3f"),
                    fmt(a["time_at_travel_limit_s"], ".3f"),
                ]
            )
    lim = doc["limits"]
    rl = "none" if lim["rate_limit_rad_s"] is None else f"{lim['rate_limit_rad_s'] * R2D:.4g} deg/s"
    tr = "none" if lim["travel_rad"] is None else f"{lim['travel_rad'] * R2D:.4g} deg"
    sim = doc["simulation"]
    legend = [
        "t half: time to half amplitude of the pitch-rate envelope from its first peak after the input ends; "
        "settle: to within 5 % after the input ends; '-': not reached in the record.",
        "oversh.: first opposite-sign pitch-rate peak over the first peak. nz: normal load factor increment. "
        "surf/rate: actuator (aug = with damper).",
        f"Actuator limits: rate {rl}, travel {tr}. {sim['method']}, step {sim['step_s'] * 1000:g} ms, "
        f"{sim['duration_s']:g} s; delay {sim['delay_model']}.",
    ]
    return table(headers, rows, ["<", "<"] + [">"] * (len(headers) - 2)) + "\n" + "\n".join(legend)

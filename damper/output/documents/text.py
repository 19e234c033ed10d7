"""Plain-text tables for the terminal."""

from __future__ import annotations

import math


def fmt(x, spec=".3g", none="-"):
    """Format a number; None/NaN become `none`."""
    if x is None:
        return none
    if isinstance(x, bool):
        return "yes" if x else "no"
    if isinstance(x, str):
        return x
    if not math.isfinite(float(x)):
        return none
    return format(float(x), spec)


def table(headers, rows, aligns=None) -> str:
    """A simple aligned table. `headers` may have two lines separated by newline."""
    heads = [h.split("\n") for h in headers]
    depth = max(len(h) for h in heads)
    heads = [h + [""] * (depth - len(h)) for h in heads]
    cells = [[str(c) for c in r] for r in rows]
    widths = [max([len(x) for x in heads[j]] + [len(r[j]) for r in cells]) for j in range(len(headers))]
    aligns = aligns or ["<"] + [">"] * (len(headers) - 1)
    lines = []
    for k in range(depth):
        lines.append("  ".join(format(heads[j][k], f"{aligns[j]}{widths[j]}") for j in range(len(headers))).rstrip())
    lines.append("  ".join("-" * w for w in widths))
    for r in cells:
        lines.append("  ".join(format(r[j], f"{aligns[j]}{widths[j]}") for j in range(len(headers))).rstrip())
    return "\n".join(lines)


def assess_table(doc) -> str:
    """The terminal table of ``damper assess``."""
    headers = [
        "condition",
        "K\ns",
        "bare\nzeta",
        "bare wn\nrad/s",
        "loop\nzeta",
        "loop wn\nrad/s",
        "stable",
        "GM up\ndB",
        "GM down\ndB",
        "PM\ndeg",
        "crossover\nrad/s",
        "delay m.\ns",
        "disk\nmargin",
    ]
    rows = []
    notes = []
    for c in doc["conditions"]:
        sp = c["closed_loop"]["short_period"]
        m = c["margins"]
        mark = "*" if sp["ambiguous"] else ""
        if mark:
            notes.append(c["name"])
        rows.append(
            [
                c["name"],
                fmt(c["gain_s"], ".4g"),
                fmt(c["bare"]["short_period"]["damping_ratio"], ".3f"),
                fmt(c["bare"]["short_period"]["natural_frequency_rad_s"], ".3g"),
                fmt(sp["damping_ratio"], ".3f") + mark,
                fmt(sp["natural_frequency_rad_s"], ".3g"),
                "yes" if c["closed_loop"]["stable"] else "NO",
                fmt(m["gain_margin_db"], ".1f", "none"),
                fmt(m["gain_margin_low_db"], ".1f", "none"),
                fmt(m["phase_margin_deg"], ".1f", "none"),
                fmt(m["gain_crossover_rad_s"], ".3g"),
                fmt(m["delay_margin_s"], ".3f", "none"),
                fmt(m["disk_margin"], ".2f"),
            ]
        )
    out = table(headers, rows) + "\n\n" + handling_table(doc)
    from .longitudinal import longitudinal_table

    lon = longitudinal_table(doc["conditions"])
    out = out + ("\n\n" + lon if lon else "")
    legend = [
        "zeta: damping ratio; wn: natural frequency. Loop modes use a Pade delay; margins use the exact delay.",
        "GM/PM 'none': no such crossing (unbounded in that direction). Loop broken at the actuator input.",
    ]
    if notes:
        legend.append("* modal short period ambiguous (coalesces with a hardware mode): " + ", ".join(notes))
    return out + "\n" + "\n".join(legend)


def handling_table(doc) -> str:
    """Equivalent system, CAP, level and the requirements' verdict per condition."""
    from ...requirements.criteria import KINDS

    headers = [
        "condition",
        "equiv.\nzeta",
        "equiv. wn\nrad/s",
        "tau_e\ns",
        "mismatch",
        "CAP\n" + KINDS["cap"].unit,
        "bandwidth\nrad/s",
        "phase del.\ns",
        "level",
        "requirements",
    ]
    rows = []
    for c in doc["conditions"]:
        eq = c["closed_loop"].get("equivalent") or {}
        h = c["closed_loop"].get("handling") or {}
        crit = c.get("criteria") or []
        failing = [k for k in crit if not k["met"]]
        if not crit:
            verdict = "-"
        elif not failing:
            verdict = "all met"
        else:
            verdict = "fails: " + ", ".join(
                f"{k['name']} ({fmt(k['slack'], '+.2f', 'undefined')})" for k in failing
            )
        level = (c.get("level") or {}).get("overall", "-")
        rows.append(
            [
                c["name"],
                fmt(eq.get("damping_ratio"), ".3f"),
                fmt(eq.get("natural_frequency_rad_s"), ".3g"),
                fmt(eq.get("time_delay_s"), ".3f"),
                fmt(eq.get("mismatch"), ".2f") + ("!" if eq.get("large_mismatch") else ""),
                fmt(h.get("cap_equivalent"), ".3g"),
                fmt(h.get("bandwidth_rad_s"), ".3g"),
                fmt(h.get("phase_delay_s"), ".3f"),
                str(level),
                verdict,
            ]
        )
    aligns = ["<"] + [">"] * 8 + ["<"]
    note = "Equivalent system: pitch rate to pilot command, exact delays. ! mismatch large: a low-order equivalent does not describe the response well."
    return table(headers, rows, aligns) + "\n" + note


def pct(x, rounding="nearest"):
    """Per cent with one decimal; 'down'/'up' never show 100.0 or 0.0 for a fraction short of it."""
    if x is None:
        return "-"
    v = 100.0 * x
    if rounding == "down":
        v = math.floor(v * 10.0 + 1e-9) / 10.0
    elif rounding == "up":
        v = math.ceil(v * 10.0 - 1e-9) / 10.0
    return f"{v:.1f}"

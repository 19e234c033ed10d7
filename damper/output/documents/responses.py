"""Outputs of the time responses: plots (PNG, SVG), CSV tables, JSON and the terminal table.

Nothing is computed here beyond unit conversion for display (rad to deg); the
histories and measures come from :mod:`damper.analysis.response`.
matplotlib is imported inside the plotting function (Agg backend).
"""

from __future__ import annotations

import math

import numpy as np

from .jsonout import CAUTION, provenance
from .serialize import point
from .text import fmt, table

R2D = 180.0 / math.pi

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
    lines.extend(",".join(row) for row in zip(*(_csv_column(np.asarray(c[1])[::stride]) for c in cols)))
    return "\n".join(lines) + "\n"


def _csv_column(values: np.ndarray) -> list:
    """The CSV text of every value of one column (formatted a column at a time): flags as 1/0,
    numbers to 9 significant digits, non-finite numbers as empty fields."""
    if values.dtype == np.bool_:
        return np.where(values, "1", "0").tolist()
    numbers = values.astype(float)
    return [f"{v:.9g}" if ok else "" for v, ok in zip(numbers.tolist(), np.isfinite(numbers).tolist())]


# ---------------------------------------------------------------------------
# JSON and table
# ---------------------------------------------------------------------------


#: The :class:`~damper.analysis.response_measures.ResponseMeasures` values of a response, in the
#: document's order (keys and units from the fields' metadata, :mod:`damper.quantities`), and those
#: written only when the case sets an authority.
MEASURES = ("time_to_half", "settling_time", "overshoot", "peak_pitch_rate", "peak_alpha", "peak_load_factor",
            "peak_surface", "peak_surface_rate", "time_at_rate_limit", "time_at_position_limit", "input_end")
AUTHORITY_MEASURES = ("time_at_authority_limit", "time_at_authority_rate_limit", "peak_damper_demand")


def _measures(m, i) -> dict:
    return point(m, i, MEASURES)


def _authority_measures(res, i) -> dict:
    """The damper's authority in one augmented response (only when the case sets an authority, so the
    documents of cases without one are unchanged): time at the authority and at its rate limit, s,
    and the largest damper demand before its limits, rad."""
    if res.authority is None:
        return {}
    return point(res.augmented_measures, i, AUTHORITY_MEASURES, flat=True)


def _input_json(inp, i) -> dict:
    """The ``input`` object of one response: the :class:`~damper.analysis.response_inputs.Input`
    fields its kind uses, in the document's order (values broadcast over the conditions)."""
    names = ["start"]
    names += [] if inp.is_gust else ["amplitude"]
    names += ["half_period"] if inp.kind == "doublet" else []
    names += ["duration"] if inp.kind == "pulse" else []
    names += ["gust_velocity"] if inp.is_gust else []
    names += ["gust_length"] if inp.kind == "gust_one_minus_cosine" else []
    return {"name": inp.label, "kind": inp.kind, **point(inp, i, names, flat=True)}


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
    from ...analysis.response import DELAY_MODEL, METHOD

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
            {"name": c.name, **point(result, i, ("gains",)), **point(c, None, ("airspeed",)), "responses": runs}
        )
    return {
        "title": case.title,
        "caution": CAUTION,
        "warnings": list(case.warnings),
        "notes": list(result.notes),
        "simulation": {
            "method": METHOD,
            **point(spec, None, ("step", "duration", "output_step")),  # floats: written as before
            "delay_model": DELAY_MODEL,
            "default_inputs": spec.default,
            "bare_airframe": "gain 0 with the same actuator and limits",
            "gust_model": "alpha_g = w_g / V added to the aerodynamic angle of attack; M_alpha_dot alpha_g' neglected",
            "load_factor": "n_z = -(Z_alpha (alpha + alpha_g) + Z_q q + Z_delta delta) / g0",
        },
        "limits": point(result, None, ("rate_limit", "travel")),
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

"""The longitudinal model's part of the outputs: phugoid and two-state approximation entries, and their table.

Computes nothing: it reads an :class:`damper.analysis.assess.Assessment` (JSON entries) or
the JSON entries (terminal table, report). A short-period case's entries are left exactly
as they were (no key is added), so its documents are unchanged byte for byte.
"""

from __future__ import annotations

from ...analysis.tolerances import DAMPING_TOLERANCE, FREQUENCY_TOLERANCE
from .serialize import point
from .text import fmt, table


#: The values each part writes, in the document's order (keys and units from the fields'
#: metadata, :mod:`damper.quantities`): a phugoid and the two-state short period
#: (:class:`~damper.measures.modes.SecondOrderMode`), the equivalent system's plain form
#: (:class:`~damper.measures.equivalent.EquivalentFit`) and the speed derivatives
#: (:class:`~damper.model.longitudinal.LongitudinalDerivatives`).
PHUGOID = ("damping_ratio", "natural_frequency", "period", "time_to_double")
TWO_STATE = ("damping_ratio", "natural_frequency")
PLAIN_FORM = ("damping_ratio", "natural_frequency", "time_delay", "mismatch")
SPEED_DERIVATIVES = ("X_u", "X_alpha", "Z_u", "M_u", "X_delta", "flight_path_angle")


def _mode(mode, index, ambiguous=None) -> dict:
    """``{damping_ratio, natural_frequency_rad_s, period_s, time_to_double_s, ambiguous}`` of one pair."""
    return {
        **point(mode, index, PHUGOID),
        "ambiguous": None if ambiguous is None else bool(ambiguous[index]),
    }


def _insert_after(d: dict, after: str, items: dict) -> dict:
    out = {}
    for k, v in d.items():
        out[k] = v
        if k == after:
            out.update(items)
    return out


def with_longitudinal(entry: dict, cond, result, index, bare_index) -> dict:
    """`entry` (one condition's ``assess`` structure) with the longitudinal model's keys.

    Adds ``model``, ``flight.flight_path_angle_rad``, ``bare.phugoid``, ``closed_loop.phugoid``
    and ``closed_loop.short_period_two_state`` (``{damping_ratio, natural_frequency_rad_s,
    differs, damping_tolerance, frequency_tolerance_relative}``). Returns `entry` itself for a
    short-period assessment (``result.bare_phugoid`` is None).
    """
    if getattr(result, "bare_phugoid", None) is None:
        return entry
    modes = result.modes
    two = result.two_state
    entry = _insert_after(entry, "gain_s", {"model": "longitudinal"})
    entry["flight"] = {**entry["flight"], **point(cond, None, ("flight_path_angle",))}
    entry["bare"] = {**entry["bare"], "phugoid": _mode(result.bare_phugoid, bare_index)}
    plain = result.equivalent_plain
    eq = entry["closed_loop"].get("equivalent")
    if eq is not None:
        eq = {**eq, "phugoid_factor_removed": True,
              "plain_form": {**point(plain, index, PLAIN_FORM), "converged": bool(plain.converged[index])}}
        entry["closed_loop"] = {**entry["closed_loop"], "equivalent": eq}
    entry["closed_loop"] = _insert_after(
        entry["closed_loop"],
        "short_period",
        {
            "phugoid": _mode(modes.phugoid, index, modes.phugoid_ambiguous),
            "short_period_two_state": {
                **point(two, index, TWO_STATE),
                "differs": bool(result.two_state_differs[index]),
                "damping_tolerance": DAMPING_TOLERANCE,
                "frequency_tolerance_relative": FREQUENCY_TOLERANCE,
            },
        },
    )
    return entry


def speed_derivatives_summary(d) -> dict:
    """The speed derivatives and flight-path angle of a longitudinal airframe for ``case_summary``
    (empty for a short-period airframe): ``X_u_1_s``, ``X_alpha_m_s2``, ``Z_u_1_s``, ``M_u_1_m_s``,
    ``X_delta_m_s2``, ``flight_path_angle_rad``."""
    if not hasattr(d, "M_u"):
        return {}
    return point(d, None, SPEED_DERIVATIVES)


def longitudinal_table(conditions) -> str:
    """Terminal table of the phugoid and the two-state approximation ("" without a longitudinal entry).

    Parameters
    ----------
    conditions : iterable of dict
        ``assess`` structures of conditions (:func:`damper.output.documents.jsonout.condition_result`).
    """
    rows, differ = [], []
    for c in conditions:
        if c.get("model") != "longitudinal":
            continue
        cl = c["closed_loop"]
        bare, ph, sp, two = c["bare"]["phugoid"], cl["phugoid"], cl["short_period"], cl["short_period_two_state"]
        if two["differs"]:
            differ.append(c["name"])
        rows.append([
            c["name"],
            fmt(bare["damping_ratio"], ".3f"),
            fmt(bare["natural_frequency_rad_s"], ".3g"),
            fmt(ph["damping_ratio"], ".3f") + ("*" if ph["ambiguous"] else ""),
            fmt(ph["natural_frequency_rad_s"], ".3g"),
            fmt(ph["period_s"], ".3g"),
            fmt(ph["time_to_double_s"], ".3g", "stable"),
            fmt(sp["damping_ratio"], ".3f"),
            fmt(two["damping_ratio"], ".3f"),
            fmt(sp["natural_frequency_rad_s"], ".3g"),
            fmt(two["natural_frequency_rad_s"], ".3g"),
            "DIFFERS" if two["differs"] else "agrees",
        ])
    if not rows:
        return ""
    headers = ["condition", "bare ph.\nzeta", "bare ph.\nwn rad/s", "loop ph.\nzeta", "loop ph.\nwn rad/s",
               "loop ph.\nperiod s", "loop ph.\nT2 s", "SP zeta\n4-state", "SP zeta\n2-state", "SP wn\n4-state",
               "SP wn\n2-state", "2-state\nmodel"]
    notes = [
        "Longitudinal model: phugoid (ph.) bare and closed loop; short period (SP) of the four-state loop beside "
        "the two-state approximation at the same gain.",
        f"DIFFERS: damping ratios more than {DAMPING_TOLERANCE:g} apart or frequencies more than "
        f"{100 * FREQUENCY_TOLERANCE:g} % apart. T2: time to double (stable: none). * phugoid pick ambiguous.",
    ]
    if differ:
        notes.append("The two-state approximation misleads at: " + ", ".join(differ))
    return table(headers, rows, ["<"] + [">"] * 10 + ["<"]) + "\n" + "\n".join(notes)


def longitudinal_rows(measures: dict, fmt_number) -> list | None:
    """Report rows ``(label, unit, value)`` of one condition's phugoid and two-state approximation.

    Parameters
    ----------
    measures : dict
        One condition's ``assess`` structure.
    fmt_number : callable
        ``fmt_number(x, digits)``: the report's number formatting.

    Returns
    -------
    list of tuple or None
        None for a short-period condition.
    """
    if measures.get("model") != "longitudinal":
        return None
    cl = measures["closed_loop"]
    bare, ph, two = measures["bare"]["phugoid"], cl["phugoid"], cl["short_period_two_state"]
    plain = (cl.get("equivalent") or {}).get("plain_form") or {}
    return [
        ("flight-path angle", "deg", fmt_number(_deg(measures["flight"].get("flight_path_angle_rad")), 3)),
        ("phugoid damping ratio, bare", "\u2013", fmt_number(bare["damping_ratio"], 3)),
        ("phugoid damping ratio, closed loop", "\u2013", fmt_number(ph["damping_ratio"], 3)),
        ("phugoid frequency, bare", "rad/s", fmt_number(bare["natural_frequency_rad_s"], 4)),
        ("phugoid frequency, closed loop", "rad/s", fmt_number(ph["natural_frequency_rad_s"], 4)),
        ("phugoid period, closed loop", "s", fmt_number(ph["period_s"], 4)),
        ("phugoid time to double, closed loop", "s", fmt_number(ph["time_to_double_s"], 4)
         if ph["time_to_double_s"] is not None else "none (not divergent)"),
        ("phugoid pick ambiguous", "", "yes" if ph["ambiguous"] else "no"),
        ("short-period damping, two-state model", "\u2013", fmt_number(two["damping_ratio"], 3)),
        ("short-period frequency, two-state model", "rad/s", fmt_number(two["natural_frequency_rad_s"], 4)),
        (f"two-state model differs (> {DAMPING_TOLERANCE:g} damping or {100 * FREQUENCY_TOLERANCE:g} % frequency)",
         "", "YES" if two["differs"] else "no"),
        ("mismatch J of the short-period form fitted with the phugoid left in (the equivalent system above has its factor taken out)", "\u2013", fmt_number(plain.get("mismatch"), 3)),
    ]


def _deg(x):
    import math

    return None if x is None else math.degrees(x)

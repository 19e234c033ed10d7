"""``damper sweep`` outputs: one document per sweep, and its table and CSV made from it.

The document is built once from the library's :class:`~damper.analysis.assess.Assessment`
at the swept gains; the terminal table, the CSV and ``--json`` all read it, so they agree.
A row whose closed loop is unstable has no margins: every margin value is ``null`` in the
JSON, an empty cell in the CSV and ``-`` in the table (its crossings stay listed in the
JSON, as crossings).
"""

from __future__ import annotations

import math

from .jsonout import CAUTION, margins_object, num, provenance
from .serialize import point

#: CSV columns that hold margins (empty on an unstable row), in the order written.
MARGIN_COLUMNS = ("gain_margin_db", "gain_margin_low_db", "phase_margin_deg", "delay_margin_s", "disk_margin")
#: Every CSV column, in the order written.
CSV_COLUMNS = (
    "gain_s",
    "damping_equivalent",
    "damping_modal",
    "frequency_equivalent_rad_s",
    "frequency_modal_rad_s",
    "ambiguous",
    "stable",
    *MARGIN_COLUMNS,
    "all_met",
)
NOTE_UNSTABLE = "closed loop unstable: no margins (the crossings are listed in --json)"


def sweep_rows(result) -> list:
    """One row per swept gain of a flat ``Assessment`` (batch shape ``(points,)``).

    Parameters
    ----------
    result : Assessment
        The assessment at the swept gains, one condition.

    Returns
    -------
    list of dict
        ``gain_s`` (s), damping ratios (-), frequencies (rad/s), ``stable``, ``all_met`` and
        ``margins`` (the design.json ``margins`` object, margin values ``null`` when unstable).
    """
    import numpy as np

    rows = []
    for j in range(np.size(result.gains)):
        stable = bool(result.modes.stable[j])
        rows.append(
            {
                **point(result, j, ("gains",)),
                "damping_equivalent": num(result.equivalent.damping_ratio[j]),
                "damping_modal": num(result.modes.short_period.damping_ratio[j]),
                "frequency_equivalent_rad_s": num(result.equivalent.natural_frequency[j]),
                "frequency_modal_rad_s": num(result.modes.short_period.natural_frequency[j]),
                "ambiguous": bool(result.modes.ambiguous[j]),
                "stable": stable,
                "all_met": bool(result.criteria.all_met[j]),
                "margins": margins_object(result.margins, (j,), stable=stable),
            }
        )
    return rows


def sweep_document(case, condition, rows, command=None) -> dict:
    """The ``damper sweep --json`` document.

    Parameters
    ----------
    case : Case
    condition : str
        The swept condition's name.
    rows : list of dict
        :func:`sweep_rows`.
    command : str, optional
        The command line, for the provenance.
    """
    return {
        "title": case.title,
        "caution": CAUTION,
        "condition": condition,
        "warnings": list(case.warnings),
        "note": "margin values are null where the closed loop is unstable (no margins there); "
        "crossings are listed as found",
        "rows": rows,
        "provenance": provenance(case, command),
    }


def _cell(row, key):
    return row["margins"][key] if key in MARGIN_COLUMNS else row[key]


def sweep_table(rows) -> str:
    """The terminal table (margins ``-`` where the closed loop is unstable, ``none`` where unbounded)."""
    from .text import fmt, table

    headers = ["K\ns", "zeta\nequiv.", "zeta\nmodal", "wn equiv.\nrad/s", "wn modal\nrad/s", "stable", "GM\ndB",
               "PM\ndeg", "delay m.\ns", "disk\nmargin", "meets\nall"]
    body = []
    for r in rows:
        m = r["margins"]
        unbounded = "none" if r["stable"] else "-"  # null: no crossing when stable, no margin when unstable
        body.append(
            [fmt(r["gain_s"], ".4g"), fmt(r["damping_equivalent"], ".3f"),
             fmt(r["damping_modal"], ".3f") + ("*" if r["ambiguous"] else ""),
             fmt(r["frequency_equivalent_rad_s"], ".3g"), fmt(r["frequency_modal_rad_s"], ".3g"),
             "yes" if r["stable"] else "NO", fmt(m["gain_margin_db"], ".1f", unbounded),
             fmt(m["phase_margin_deg"], ".1f", unbounded), fmt(m["delay_margin_s"], ".3f", unbounded),
             fmt(m["disk_margin"], ".2f"), "yes" if r["all_met"] else "no"]
        )
    if rows and "marked" in rows[0]:  # damper sweep --design / --schedule
        headers.append("gain\nof")
        for line, r in zip(body, rows):
            line.append(r["marked"])
    notes = ["* modal pick ambiguous. 'none': no such crossing (unbounded)."]
    if any(not r["stable"] for r in rows):
        notes.append(f"'-' in the margin columns of a row with stable NO: {NOTE_UNSTABLE}.")
    return table(headers, body) + "\n" + "\n".join(notes)


def sweep_csv(rows) -> str:
    """The CSV text (empty cells: undefined, or no margin because the closed loop is unstable)."""
    columns = CSV_COLUMNS + (("marked",) if rows and "marked" in rows[0] else ())  # the designed/scheduled row
    lines = [",".join(columns)]
    for r in rows:
        cells = []
        for c in columns:
            v = _cell(r, c)
            cells.append("" if v is None or (isinstance(v, float) and not math.isfinite(v)) else str(v))
        lines.append(",".join(cells))
    return "\n".join(lines) + "\n"


__all__ = ["CSV_COLUMNS", "MARGIN_COLUMNS", "sweep_csv", "sweep_document", "sweep_rows", "sweep_table"]

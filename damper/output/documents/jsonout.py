"""JSON structures of results (NaN and infinities become ``null``)."""

from __future__ import annotations

import json
import math
import os

import numpy as np

from .serialize import num, point


def clean(obj):
    """Recursively turn numpy values into JSON-ready Python values."""
    if isinstance(obj, dict):
        return {str(k): clean(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [clean(v) for v in obj]
    if isinstance(obj, (np.bool_, bool)):
        return bool(obj)
    if isinstance(obj, (np.integer,)):
        return int(obj)
    if isinstance(obj, (float, np.floating)):
        return num(obj)
    if isinstance(obj, np.ndarray):
        return clean(obj.tolist())
    return obj


class JsonText(str):
    """A part of a document already serialised by :func:`dump_part` (kept as text: a few kB
    instead of the tens of kB its dicts and floats would hold in memory)."""


def dump_part(obj) -> JsonText:
    """Serialise one part of a larger document now; :func:`dumps` splices it in unchanged."""
    return JsonText(json.dumps(clean(obj), indent=2, allow_nan=False))


def dumps(obj) -> str:
    """Deterministic JSON text (sorted keys off: our dicts are built in a fixed order).

    Parts given as :class:`JsonText` are spliced in at their place and depth: the text is
    byte for byte what serialising the original objects in place would give.
    """
    parts = []

    def mark(x):
        if isinstance(x, JsonText):
            parts.append(x)
            return f"\x00part{len(parts) - 1}\x00"
        if isinstance(x, dict):
            return {k: mark(v) for k, v in x.items()}
        if isinstance(x, (list, tuple)):
            return [mark(v) for v in x]
        return x

    text = json.dumps(clean(mark(obj)), indent=2, allow_nan=False) + "\n"
    if not parts:
        return text
    out, pos = [], 0
    for k, part in enumerate(parts):
        token = json.dumps(f"\x00part{k}\x00")
        at = text.index(token, pos)
        indent = at - (text.rfind("\n", 0, at) + 1)
        out.append(text[pos:at])
        out.append(part.replace("\n", "\n" + " " * indent))
        pos = at + len(token)
    out.append(text[pos:])
    return "".join(out)


def _finite(values):
    return [num(v) for v in np.asarray(values).ravel() if math.isfinite(float(v))]


#: The values each part of :func:`condition_result` writes, in the document's order (keys and
#: units from the fields' metadata, :mod:`damper.quantities`): the condition's flight state
#: (:class:`~damper.case.model.Condition`), the bare and closed-loop short period
#: (:class:`~damper.measures.modes.SecondOrderMode`), the equivalent system
#: (:class:`~damper.measures.equivalent.EquivalentFit`) and the attitude bandwidth
#: (:class:`~damper.measures.bandwidth.AttitudeBandwidth`).
FLIGHT = ("airspeed", "equivalent_airspeed", "altitude_input", "mach", "dynamic_pressure", "mass")
BARE_MODE = ("damping_ratio", "natural_frequency", "period", "time_to_half", "time_to_double")
CLOSED_LOOP_MODE = ("damping_ratio", "natural_frequency", "period", "time_to_half")
EQUIVALENT = ("damping_ratio", "natural_frequency", "time_delay", "gain", "inv_t_theta2", "mismatch")
BANDWIDTH = ("phase_crossover", "bandwidth_phase", "bandwidth_gain", "bandwidth", "phase_delay")


def condition_result(case, result, index) -> dict:
    """The ``assess`` structure of one (condition, gain) point.

    Parameters
    ----------
    case : Case
    result : Assessment
    index : tuple
        Batch index; its first entry is the condition.
    """
    i = index[0]
    cond = case.conditions[i]
    bare = result.bare
    modes = result.modes
    mg = result.margins
    bi = (i,) + (0,) * (np.ndim(bare.damping_ratio) - 1) if np.ndim(bare.damping_ratio) else ()
    sp = modes.short_period
    eig = modes.eigenvalues[index]
    entry = {
        "name": cond.name,
        **point(result, index, ("gains",)),
        "flight": point(cond, None, FLIGHT),
        "bare": {
            "short_period": {
                **point(bare, bi, BARE_MODE),
                "roots": [[num(z.real), num(z.imag)] for z in bare.roots[bi]],
            }
        },
        "closed_loop": {
            "stable": bool(modes.stable[index]),
            "eigenvalues": [[num(z.real), num(z.imag)] for z in eig],
            "short_period": {
                **point(sp, index, CLOSED_LOOP_MODE),
                "ambiguous": bool(modes.ambiguous[index]),
            },
            "least_damped_other_mode": {
                "damping_ratio": num(modes.other_damping_ratio[index]),
                "eigenvalue": [num(modes.other_eigenvalue[index].real), num(modes.other_eigenvalue[index].imag)],
            },
            "delay_model": "none" if result.pade_order is None else f"pade order {result.pade_order}",
            "equivalent": _equivalent(result, index),
            "handling": _handling(result, index),
        },
        "margins": margins_object(mg, index),
        "criteria": _criteria(result, index),
        "level": _level(result, index),
    }
    from .longitudinal import with_longitudinal

    return with_longitudinal(entry, cond, result, index, bi)


def margins_object(mg, index, stable=None) -> dict:
    """The ``margins`` object of one batch point of a :class:`~damper.measures.margins.Margins`.

    Every margin value is ``null`` where the library found none (no such crossing, or the
    closed loop unstable); the crossings are listed either way.

    Parameters
    ----------
    mg : Margins
    index : tuple
        Batch index.
    stable : bool, optional
        Closed-loop stability at this point; False makes every margin value ``null`` here as
        well (a crossing's value of an unstable loop is not a margin).
    """
    gx = mg.gain_crossings_rad_s[index]
    gpm = mg.phase_margins_deg[index]
    px = mg.phase_crossings_rad_s[index]
    pgm = mg.gain_margins_db[index]
    values = point(mg, index, MARGIN_VALUES)
    out = {
        **values,
        "gain_crossings": [
            {"frequency_rad_s": num(w), "phase_margin_deg": num(p)}
            for w, p in zip(gx, gpm)
            if math.isfinite(w)
        ],
        "phase_crossings": [
            {"frequency_rad_s": num(w), "gain_margin_db": num(g)}
            for w, g in zip(px, pgm)
            if math.isfinite(w)
        ],
        "delay_model": "exact",
    }
    if stable is False:
        out.update({key: None for key in values})
    return out


#: The :class:`~damper.measures.margins.Margins` values :func:`margins_object` writes, in order
#: (``null`` on an unstable loop); each field's name is its key (it ends with its unit).
MARGIN_VALUES = (
    "gain_margin_db",
    "gain_margin_low_db",
    "phase_margin_deg",
    "phase_margin_signed_deg",
    "gain_crossover_rad_s",
    "phase_crossover_rad_s",
    "delay_margin_s",
    "disk_margin",
    "disk_gain_margin_db",
    "disk_phase_margin_deg",
)


def _equivalent(result, index):
    eq = result.equivalent
    if eq is None:
        return None
    return {
        **point(eq, index, EQUIVALENT),
        "converged": bool(eq.converged[index]),
        "large_mismatch": bool(eq.mismatch[index] > MISMATCH_WARNING),
        "delay_model": "exact",
    }


#: Mismatch above which a low-order equivalent system is said not to describe the
#: aircraft well (a commonly quoted guideline of the LOES method; from memory).
MISMATCH_WARNING = 10.0


def _handling(result, index):
    out = {
        **point(result, index, ("n_alpha",)),
        "cap_equivalent": num(result.cap("equivalent")[index]),
        "cap_modal": num(result.cap("modal")[index]),
    }
    bw = result.bandwidth
    if bw is not None:
        out.update(point(bw, index, BANDWIDTH))
    return out


def _criteria(result, index):
    cr = result.criteria
    if cr is None:
        return None
    out = []
    for k, c in enumerate(cr.criteria):
        out.append(
            {
                "name": c.name,
                "measure": c.measure or None,
                "value": num(cr.values[(k,) + tuple(index)]),
                "unit": c.kind.unit,
                "lower": num(c.lower),
                "upper": num(c.upper),
                "slack": num(cr.slacks[(k,) + tuple(index)]),
                "met": bool(cr.met[(k,) + tuple(index)]),
                "source": c.source,
            }
        )
    return out


def _level(result, index):
    lv = result.levels
    if lv is None:
        return None
    return {k: int(v[index]) if int(v[index]) <= 3 else "worse than 3" for k, v in lv.items()}


def _scipy_version() -> str:
    """scipy's ``__version__``, read from its ``version.py`` when nothing has imported scipy yet.

    Importing scipy costs about 40 ms, a tenth of the first answer of ``damper assess``, which
    needs nothing else from it; ``importlib.metadata`` is slower still. Anything unexpected in
    that file falls back to the import.
    """
    import importlib.util
    import re
    import sys

    if "scipy" not in sys.modules:
        try:
            spec = importlib.util.find_spec("scipy")
            folder = (spec.submodule_search_locations or [None])[0] if spec else None
            with open(os.path.join(folder, "version.py"), encoding="utf-8") as f:
                found = re.search(r'^version = "([^"]+)"$', f.read(), re.M)
            if found and "dev" not in found.group(1) and "+" not in found.group(1):
                return found.group(1)
        except (OSError, TypeError, ValueError):
            pass
    import scipy

    return scipy.__version__


def provenance(case, command=None, seed=None) -> dict:
    """Input hash, tool and library versions, seed and command line."""
    import platform
    import sys

    from ... import __version__

    return {
        "input_file": case.file,
        "input_sha256": case.sha256,
        "tool": "damper",
        "tool_version": __version__,
        "python": platform.python_version(),
        "numpy": np.__version__,
        "scipy": _scipy_version(),
        "seed": seed,
        "command": command if command is not None else " ".join(["damper", *sys.argv[1:]]),
    }


def assess_document(case, result, command=None) -> dict:
    """The whole ``damper assess --json`` document."""
    n = len(case.conditions)
    conds = [condition_result(case, result, (i,)) for i in range(n)]
    return {
        "title": case.title,
        "caution": CAUTION,
        "warnings": list(case.warnings),
        "conditions": conds,
        "provenance": provenance(case, command),
    }


CAUTION = (
    "Preliminary engineering analysis. Flight-control changes affect the safety of flight: "
    "validate by simulation, ground and flight test, and have the design approved under the "
    "applicable airworthiness rules by qualified engineers."
)


def with_verdict(doc: dict, verdict) -> dict:
    """`doc` with a top-level ``verdict`` object (:class:`damper.verdict.Verdict`) after its caution.

    Every JSON document of a run carries the verdict of the parts it contains, from the same object
    the terminal, the report and the exit status read.
    """
    out = {}
    for k, v in doc.items():
        if k != "verdict":
            out[k] = v
        if k == "caution":
            out["verdict"] = verdict.doc()
    if "verdict" not in out:
        out = {"verdict": verdict.doc(), **out}
    return out

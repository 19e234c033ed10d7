"""Checks of a case at load time: hardware and delay ranges, finite models, grid and sample
counts, Mach numbers, control power, and the warnings on coefficients, loop and physics
(:func:`damper.case.load.load_case` calls them; each raises :class:`~damper.errors.CaseError`
with the key path and line, or returns warning texts)."""

from __future__ import annotations

import numpy as np

from ..atmosphere import RHO0, geopotential_from_geometric, standard_atmosphere
from ..errors import CaseError
from ..model.airframe import Derivatives
from .ranges import MAX_MACH, MIN_CONTROL_POWER_RATIO, RANGES
from .speed_terms import default_duration, SPEED_COEFFICIENTS


def _raw(doc, *keys):
    """The value at a key path as the user wrote it (None if absent)."""
    node = doc
    for key in keys:
        try:
            node = node[key]
        except (KeyError, IndexError, TypeError):
            return None
    return node


def _line(doc, *keys):
    """Best-effort line of a key path in the parsed document."""
    node, line = doc, None
    for key in keys:
        try:
            lines = node.lines
            line = lines[key]
            node = node[key]
        except (AttributeError, KeyError, IndexError, TypeError):
            break
    return line


#: Most samples of one condition's oscillatory-failure search (recognition time / step x
#: frequency points; about 400 MB of time histories).
MAX_FAILURE_SAMPLES = 4_000_000

#: Most margin-search grid points accepted (the default grid has 601).
MAX_GRID_POINTS = 100_001

#: Largest magnitude of a short-period matrix entry (1/s, 1/s^2) damper computes with.
#: Real airframes are below 1e4; far beyond, products in the loop overflow.
MAX_MODEL_ENTRY = 1e8

#: Range of hardware time constants (s) and frequencies (rad/s) damper computes with.
HARDWARE_RANGE = (1e-6, 1e6)

#: Longest and shortest non-zero total delay (computation delay plus half a sample), s.
MAX_TOTAL_DELAY = 1.0
MIN_TOTAL_DELAY = 1e-6

_TIME_KEYS = ("time_constant", "lead_time_constant", "lag_time_constant")
_FREQUENCY_KEYS = ("bandwidth", "natural_frequency", "frequency")


def _check_hardware_range(values, doc):
    """Refuse positive but absurd hardware numbers (e.g. 5e-324 s) before they overflow the loop model."""
    low, high = HARDWARE_RANGE
    sections = [(("loop", k), values[k]) for k in ("actuator", "rate_sensor", "washout")]
    sections += [(("loop", "filters", i), f) for i, f in enumerate(values["filters"])]
    for where, sec in sections:
        if not sec:
            continue
        for key in _TIME_KEYS + _FREQUENCY_KEYS:
            v = sec.get(key)
            if v is None or (v == 0 and key == "lead_time_constant"):
                continue
            if not low <= v <= high:
                unit = "s" if key in _TIME_KEYS else "rad/s"
                path = ".".join(str(w) if not isinstance(w, int) else f"[{w}]" for w in where).replace(".[", "[")
                raise CaseError(
                    f"is outside the range damper computes with ({low:g} to {high:g} {unit})",
                    f"{path}.{key}",
                    _raw(doc, *where, key),
                    line=_line(doc, *where, key) or _line(doc, *where),
                )
    total = values["delay"] + (0.5 / values["sample_rate"] if values["sample_rate"] else 0.0)
    if 0.0 < total < MIN_TOTAL_DELAY:
        key = "delay" if values["delay"] > 0 else "sample_rate"
        raise CaseError(
            f"gives a delay of {total:.3g} s, shorter than damper computes with ({MIN_TOTAL_DELAY:g} s; its Pade "
            f"approximant would overflow): {'use 0' if key == 'delay' else 'leave the sample rate out'} for no delay",
            f"loop.{key}",
            _raw(doc, "loop", key),
            line=_line(doc, "loop", key),
        )
    if total > MAX_TOTAL_DELAY:
        raise CaseError(
            f"half a sample ({0.5 / values['sample_rate']:.4g} s) plus the delay is {total:.4g} s; at most "
            f"{MAX_TOTAL_DELAY:g} s",
            "loop.sample_rate",
            _raw(doc, "loop", "sample_rate"),
            line=_line(doc, "loop", "sample_rate"),
        )


def _check_finite_model(d, path, name, line):
    """Refuse a condition whose numbers overflow or are far outside physics (every input finite)."""
    from ..model.airframes import is_longitudinal, state_matrices

    with np.errstate(all="ignore"):
        A, B = state_matrices(d)
        values = [float(getattr(d, k)) for k in type(d).__dataclass_fields__]
        entries = np.abs(np.concatenate([np.ravel(A), np.ravel(B)]))
        finite = bool(np.all(np.isfinite(entries))) and all(np.isfinite(values))
        largest = float(np.max(entries)) if finite else np.inf
    if not finite or largest > MAX_MODEL_ENTRY:
        size = "is not finite (its numbers overflow)" if not finite else f"has an entry of {largest:.3g}"
        raise CaseError(
            f"the {'longitudinal' if is_longitudinal(d) else 'short-period'} model of this condition {size}; damper computes with entries up to "
            f"{MAX_MODEL_ENTRY:g}: check the units and magnitudes of airspeed, mass, inertia and derivatives",
            path,
            line=line,
        )


#: Most verification-grid points of an envelope (altitudes x speeds x configurations).
MAX_ENVELOPE_POINTS = 200_000
#: Most integration steps of a time response (duration / step).
MAX_RESPONSE_STEPS = 2_000_000


def _check_counts(values, doc):
    """Refuse grids and step counts too large to compute, before anything is built."""
    s = values["analysis"]
    if s["frequency_low"] < s["frequency_high"]:
        decades = np.log10(s["frequency_high"] / s["frequency_low"])
        n_grid = max(2, int(round(decades * s["points_per_decade"])) + 1) if decades < 1e4 else np.inf  # Settings.grid
        if n_grid > MAX_GRID_POINTS:
            raise CaseError(
                f"the margin-search grid would have {n_grid:.6g} points (decades x points_per_decade); at most "
                f"{MAX_GRID_POINTS}: narrow frequency_low..frequency_high or lower points_per_decade",
                "analysis",
                line=_line(doc, "analysis"),
            )
    env = values.get("envelope")
    if env is not None:
        grid = env.get("grid") or {}
        n = grid.get("altitudes", 9) * grid.get("speeds", 17) * max(1, len(env.get("configurations") or ()))
        if n > MAX_ENVELOPE_POINTS:
            raise CaseError(f"the verification grid would have {n} points (altitudes x speeds x configurations); "
                            f"at most {MAX_ENVELOPE_POINTS}", "envelope.grid", line=_line(doc, "envelope", "grid"))
    resp = values.get("responses")
    duration = None if resp is None else resp["duration"] or default_duration(values["model"])
    if resp is not None and duration / resp["step"] > MAX_RESPONSE_STEPS:
        raise CaseError(f"gives {duration / resp['step']:.3g} steps (duration / step); at most "
                        f"{MAX_RESPONSE_STEPS:g}: use a larger step or a shorter duration", "responses.step",
                        _raw(doc, "responses", "step"), line=_line(doc, "responses", "step"))


def _check_mach(v, a_sound, c, doc, i, line):
    """Every speed key, not only mach, stays within the Mach limit at its altitude."""
    if v / a_sound <= MAX_MACH:
        return
    key = "airspeed" if c["airspeed"] is not None else "equivalent_airspeed" if c["equivalent_airspeed"] is not None \
        else "mach"
    raise CaseError(
        f"is Mach {v / a_sound:.3g} at this altitude; damper accepts at most Mach {MAX_MACH:g} "
        f"({RANGES['mach'].why})",
        f"conditions[{i}].{key}",
        _raw(doc, "conditions", i, key),
        line=_line(doc, "conditions", i, key) or line,
    )


def _check_envelope_mach(values, doc):
    """The envelope's largest true or equivalent airspeed stays within the Mach limit at every altitude of it."""
    env = values["envelope"]
    for key in ("airspeed", "equivalent_airspeed"):
        rng = env.get(key)
        if not rng or env.get("altitude") is None:
            continue
        h = np.linspace(env["altitude"]["min"], env["altitude"]["max"], 201)
        if values["atmosphere"]["altitude_kind"] == "geometric":
            h = geopotential_from_geometric(h)
        try:
            air = standard_atmosphere(np.clip(h, -2000.0, 84852.0))
        except ValueError:
            return  # an altitude outside the atmosphere is refused where the grid is built
        v = rng["max"] * (np.sqrt(RHO0 / air.density) if key == "equivalent_airspeed" else 1.0)
        mach = float(np.max(v / air.speed_of_sound))
        if mach > MAX_MACH:
            raise CaseError(
                f"is Mach {mach:.3g} somewhere in the envelope's altitude range; damper accepts at most Mach "
                f"{MAX_MACH:g} ({RANGES['mach'].why})",
                f"envelope.{key}.max",
                _raw(doc, "envelope", key, "max"),
                line=_line(doc, "envelope", key, "max") or _line(doc, "envelope", key),
            )


def _check_control_power(d, c, doc, i, line):
    """Refuse an elevator so weak against the airframe's own moments that it has no effect on the numbers."""
    m_delta = abs(float(d.M_delta))
    others = max(abs(float(d.M_alpha)), abs(float(d.M_q)), abs(float(d.M_alpha_dot)))
    if others > 0 and m_delta < MIN_CONTROL_POWER_RATIO * others:
        form, key = ("coefficients", "Cm_delta") if c["coefficients"] is not None else ("derivatives", "M_delta")
        raise CaseError(
            f"gives M_delta = {float(d.M_delta):.3g} 1/s^2, below {MIN_CONTROL_POWER_RATIO:g} of the largest other "
            f"pitching-moment derivative ({others:.3g}): the elevator would have no effect; check the value and its "
            "unit",
            f"conditions[{i}].{form}.{key}",
            _raw(doc, "conditions", i, form, key),
            line=_line(doc, "conditions", i, form, key) or line,
        )


def _coefficient_warnings(coefficients, where):
    """Per-degree values given as plain numbers (which are per radian) are the usual slip."""
    out = []
    cla = coefficients["CL_alpha"]
    if 0 < cla < RANGES["CL_alpha"].usual_low:
        out.append(
            f"{where}: CL_alpha = {cla:.4g} per rad is very small (usual 2 to 6 per rad): a per-degree value? "
            f"write e.g. '{cla:.4g} 1/deg'"
        )
    return out


def _loop_warnings(loop):
    out = []
    if loop.travel is not None and loop.travel > RANGES["travel"].usual_high:
        out.append(
            f"loop.actuator.travel = {loop.travel:.4g} rad ({np.degrees(loop.travel):.4g} deg) is unusually large: "
            "plain numbers are radians; write e.g. '10 deg'"
        )
    if loop.authority is not None and loop.authority > RANGES["travel"].usual_high:
        out.append(f"loop.authority = {loop.authority:.4g} rad ({np.degrees(loop.authority):.4g} deg) is unusually "
                   "large: plain numbers are radians; write e.g. '2 deg'")
    if loop.authority is not None and loop.travel is not None and loop.authority > loop.travel:
        out.append(f"loop.authority ({np.degrees(loop.authority):.4g} deg) exceeds loop.actuator.travel "
                   f"({np.degrees(loop.travel):.4g} deg): the surface travel limits the damper first")
    if loop.rate_limit is not None and loop.rate_limit > RANGES["rate_limit"].usual_high:
        out.append(
            f"loop.actuator.rate_limit = {loop.rate_limit:.4g} rad/s ({np.degrees(loop.rate_limit):.4g} deg/s) is "
            "unusually large: plain numbers are rad/s; write e.g. '60 deg/s'"
        )
    return out


def _physics_warnings(d: Derivatives, where: str):
    """Suspicious but analysable physics."""
    out = []
    v = float(d.airspeed)
    a11 = float(d.Z_alpha) / v
    a12 = 1.0 + float(d.Z_q) / v
    a21 = float(d.M_alpha) + float(d.M_alpha_dot) * a11
    a22 = float(d.M_q) + float(d.M_alpha_dot) * a12
    if float(d.M_q) > 0:
        out.append(f"{where}: M_q = {float(d.M_q):.4g} 1/s is positive (pitch damping derivative normally negative)")
    if float(d.M_alpha) > 0:
        out.append(f"{where}: M_alpha = {float(d.M_alpha):.4g} 1/s^2 is positive: statically unstable airframe")
    elif a11 * a22 - a12 * a21 < 0:
        out.append(f"{where}: the short-period characteristic polynomial has a negative constant term: divergent airframe")
    if float(d.M_delta) > 0:
        out.append(
            f"{where}: M_delta = {float(d.M_delta):.4g} 1/s^2 is positive: unusual for elevator trailing-edge-down positive "
            "(the damper command sign follows it)"
        )
    if float(d.Z_alpha) > 0:
        out.append(f"{where}: Z_alpha = {float(d.Z_alpha):.4g} m/s^2 is positive (lift normally gives Z_alpha < 0)")
    return out


_TABLE_KEYS = ("CL_alpha", "CD", "CL_delta", "Cm_alpha", "Cm_alpha_dot", "Cm_q", "Cm_delta", "CL_q") + SPEED_COEFFICIENTS


def _check_aero_tables(aero, doc):
    """Every coefficient table has one value per Mach breakpoint; Mach ascends."""
    mach = aero["mach"]
    if any(b <= a for a, b in zip(mach, mach[1:])):
        raise CaseError("Mach breakpoints must ascend", "aerodynamics.mach", list(mach), line=_line(doc, "aerodynamics", "mach"))
    for key in _TABLE_KEYS:
        table = aero.get(key)
        if table is not None and len(table) != len(mach):
            raise CaseError(
                f"has {len(table)} values for {len(mach)} Mach breakpoints",
                f"aerodynamics.{key}",
                line=_line(doc, "aerodynamics", key),
            )

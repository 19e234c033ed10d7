"""Read a case file into a validated :class:`~damper.case.model.Case`."""

from __future__ import annotations

import hashlib
import os

import numpy as np

from ..atmosphere import RHO0, geopotential_from_geometric, standard_atmosphere
from ..errors import CaseError
from ..model.airframe import Derivatives, from_coefficients
from ..requirements.spec import build_requirements
from . import schema
from .model import Aircraft, Case, Condition, ElementSpec, LoopSpec, Settings
from .ranges import MAX_MACH, MIN_CONTROL_POWER_RATIO, RANGES
from .speed_terms import (
    LONGITUDINAL,
    default_duration,
    SPEED_COEFFICIENTS,
    check_model_keys,
    per_unit,
    speed_terms_from_coefficients,
    speed_terms_from_derivatives,
)
from .yamlio import read_yaml


def load_case(path) -> Case:
    """Read, validate and resolve a case file.

    Parameters
    ----------
    path : str or os.PathLike

    Raises
    ------
    CaseError
        Any problem with the file, naming the file, key path and value.
    """
    from ..readfile import NotARegularFile, read_regular_file

    path = os.fspath(path)
    try:
        data = read_regular_file(path, schema_max_bytes() + 1)  # never read more than the limit
    except FileNotFoundError:
        raise CaseError("no such file", file=path) from None
    except IsADirectoryError:
        raise CaseError("is a directory, not a case file", file=path) from None
    except NotARegularFile as exc:
        raise CaseError(f"is {exc.kind}, not a regular file: give a case file (damper never reads from a pipe or a "
                        "device, which could block or never end)", file=path) from None
    except OSError as exc:
        raise CaseError(f"cannot read the file ({exc.strerror})", file=path) from None
    except ValueError:  # e.g. a NUL character in the name
        raise CaseError("is not a usable file name", file=path) from None
    return load_case_text(data, path)


def schema_max_bytes() -> int:
    from .yamlio import MAX_BYTES

    return MAX_BYTES


def load_case_text(data, file="<case>") -> Case:
    """Validate a case given as bytes or text. `file` names it in messages."""
    if isinstance(data, str):
        data = data.encode("utf-8", "surrogatepass")
    sha = hashlib.sha256(data).hexdigest()
    try:
        if len(data) > schema_max_bytes():
            raise CaseError(f"is too large for a case file (more than {schema_max_bytes()} bytes)")
        try:
            text = data.decode("utf-8")
        except UnicodeDecodeError as exc:
            line = data[: exc.start].count(b"\n") + 1
            raise CaseError(
                f"is not UTF-8 text (byte 0x{data[exc.start]:02x} on this line); save the file as UTF-8", line=line
            ) from None
        if text.startswith("\ufeff"):  # a byte-order mark some editors write
            text = text[1:]
        doc = read_yaml(text)
        if doc is None:
            raise CaseError("the file is empty (a case needs at least title, aircraft and conditions)")
        values = schema.check(doc)
        return _build(values, file, sha, doc)
    except CaseError as exc:
        raise exc.with_location(file=file) from None


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


def _element(kind_hint, values):
    if values is None:
        return None
    if values.get("natural_frequency") is not None or values.get("damping_ratio") is not None:
        return ElementSpec(
            "second_order",
            (("natural_frequency", values["natural_frequency"]), ("damping_ratio", values["damping_ratio"])),
        )
    if values.get("bandwidth") is not None:
        return ElementSpec("lag", (("time_constant", 1.0 / values["bandwidth"]),))
    if values.get("time_constant") is not None:
        return ElementSpec(kind_hint, (("time_constant", values["time_constant"]),))
    return None


_FILTER_KEYS = {
    "lag": ("time_constant",),
    "lead_lag": ("lead_time_constant", "lag_time_constant"),
    "notch": ("frequency", "depth_damping", "width_damping"),
    "second_order": ("natural_frequency", "damping_ratio"),
}


def _build_loop(values, doc) -> LoopSpec:
    act = values["actuator"]
    sensor = values["rate_sensor"]
    for name, sec in (("actuator", act), ("rate_sensor", sensor)):
        if sec is None:
            continue
        has_wn = sec.get("natural_frequency") is not None
        has_zeta = sec.get("damping_ratio") is not None
        if has_wn != has_zeta:
            missing = "damping_ratio" if has_wn else "natural_frequency"
            raise CaseError(
                f"a second-order {name.replace('_', ' ')} needs both natural_frequency and damping_ratio; {missing} is missing",
                f"loop.{name}",
                line=_line(doc, "loop", name),
            )
    filters = []
    for i, f in enumerate(values["filters"]):
        needed = _FILTER_KEYS[f["kind"]]
        for key in needed:
            if f.get(key) is None:
                raise CaseError(
                    f"a {f['kind']} filter needs {' and '.join(needed) if len(needed) < 3 else ', '.join(needed)}; "
                    f"{key} is missing",
                    f"loop.filters[{i}]",
                    line=_line(doc, "loop", "filters", i),
                )
        extra = [k for k, v in f.items() if k != "kind" and v is not None and k not in needed]
        if extra:
            raise CaseError(
                f"key {extra[0]!r} does not belong to a {f['kind']} filter (it takes {', '.join(needed)})",
                f"loop.filters[{i}]",
                line=_line(doc, "loop", "filters", i),
            )
        if f["kind"] == "notch" and not f["depth_damping"] < f["width_damping"]:
            raise CaseError(
                f"must be less than width_damping ({f['width_damping']:g}) for a notch (equal is no notch; "
                "larger is a peak)",
                f"loop.filters[{i}].depth_damping",
                _raw(doc, "loop", "filters", i, "depth_damping"),
                line=_line(doc, "loop", "filters", i, "depth_damping") or _line(doc, "loop", "filters", i),
            )
        filters.append(ElementSpec(f["kind"], tuple((k, f[k]) for k in needed)))
    _check_hardware_range(values, doc)
    washout = values["washout"]
    return LoopSpec(
        actuator=_element("lag", act),
        sensor=_element("lag", sensor),
        washout=ElementSpec("washout", (("time_constant", washout["time_constant"]),)) if washout else None,
        filters=tuple(filters),
        delay=values["delay"],
        sample_rate=values["sample_rate"],
        pade_order=values["pade_order"],
        rate_limit=(act or {}).get("rate_limit"),
        travel=(act or {}).get("travel"),
    )


def _resolve_derivatives(raw, mass, inertia, airspeed):
    """Turn validated ``(value, dimension)`` pairs into per-unit-mass/inertia values (short-period keys)."""
    out = {}
    for key, item in raw.items():
        if key not in Derivatives.__dataclass_fields__:
            continue  # the speed terms: speed_terms.speed_terms_from_derivatives
        value, dim = item if isinstance(item, tuple) else (item, None)
        out[key] = per_unit(key, value, dim, mass, inertia)
    return Derivatives(airspeed=np.asarray(airspeed), **{k: np.asarray(v) for k, v in out.items()})


def _airframe(c, aircraft, qbar, v, mass, inertia, gamma, longitudinal):
    """The bare-airframe model of one validated condition `c` (either model; SI arguments:
    dynamic pressure Pa, true airspeed m/s, mass kg, pitch inertia kg m^2, flight-path angle rad)."""
    if c["coefficients"] is not None:
        flight = dict(dynamic_pressure=qbar, airspeed=v, mass=mass, pitch_inertia=inertia,
                      wing_area=aircraft.wing_area, mean_chord=aircraft.mean_chord)
        if longitudinal:
            return speed_terms_from_coefficients(c["coefficients"], gamma, **flight)
        short = {key: x for key, x in c["coefficients"].items() if key not in SPEED_COEFFICIENTS}
        return from_coefficients(**flight, **short)
    d = _resolve_derivatives(c["derivatives"], mass, inertia, v)
    return speed_terms_from_derivatives(d, c["derivatives"], mass, inertia, gamma) if longitudinal else d


def _build(values, file, sha, doc) -> Case:
    _check_counts(values, doc)
    check_model_keys(values, lambda *k: _raw(doc, *k), lambda *k: _line(doc, *k))
    longitudinal = values["model"] == LONGITUDINAL
    a = values["aircraft"]
    aircraft = Aircraft(a["name"], a["mass"], a["pitch_inertia"], a["wing_area"], a["mean_chord"])
    altitude_kind = values["atmosphere"]["altitude_kind"]
    conditions = []
    seen = {}
    warnings = []
    for i, c in enumerate(values["conditions"]):
        path = f"conditions[{i}]"
        line = _line(doc, "conditions", i)
        name = c["name"]
        if name in seen:
            raise CaseError(
                f"duplicate condition name (also conditions[{seen[name]}])", f"{path}.name", name, line=line
            )
        seen[name] = i
        h = c["altitude"]
        if altitude_kind == "geometric":
            h = float(geopotential_from_geometric(h))
        try:
            air = standard_atmosphere(h)
        except ValueError as exc:
            raise CaseError(
                f"is {float(h):.6g} m geopotential: {exc}",
                f"{path}.altitude",
                _raw(doc, "conditions", i, "altitude"),
                line=_line(doc, "conditions", i, "altitude") or line,
            ) from None
        rho = float(air.density)
        a_sound = float(air.speed_of_sound)
        if c["airspeed"] is not None:
            v = c["airspeed"]
        elif c["equivalent_airspeed"] is not None:
            v = c["equivalent_airspeed"] * np.sqrt(RHO0 / rho)
        else:
            v = c["mach"] * a_sound
        v = float(v)
        _check_mach(v, a_sound, c, doc, i, line)
        qbar = 0.5 * rho * v * v
        gamma = float(c["flight_path_angle"] or 0.0)
        mass = c["mass"] if c["mass"] is not None else aircraft.mass
        inertia = c["pitch_inertia"] if c["pitch_inertia"] is not None else aircraft.pitch_inertia
        if c["coefficients"] is not None:
            absent = [f"aircraft.{k}" for k in ("wing_area", "mean_chord") if getattr(aircraft, k) is None]
            if absent:
                raise CaseError(
                    f"coefficients need {' and '.join(absent)}, which {'is' if len(absent) == 1 else 'are'} not given",
                    f"{path}.coefficients",
                    line=_line(doc, "conditions", i, "coefficients"),
                )
        with np.errstate(over="ignore", invalid="ignore"):  # overflow: refused just below, with a message
            d = _airframe(c, aircraft, qbar, v, mass, inertia, gamma, longitudinal)
        source = "coefficients" if c["coefficients"] is not None else "derivatives"
        d = type(d)(**{k: np.asarray(float(getattr(d, k))) for k in type(d).__dataclass_fields__})
        _check_finite_model(d, path, name, line)
        _check_control_power(d, c, doc, i, line)
        warnings.extend(_physics_warnings(d, f"{path} ({name})"))
        if c["coefficients"] is not None:
            warnings.extend(_coefficient_warnings(c["coefficients"], f"{path} ({name})"))
        conditions.append(
            Condition(
                name=name,
                airspeed=v,
                altitude=float(h),
                altitude_input=float(c["altitude"]),
                density=rho,
                speed_of_sound=a_sound,
                mach=v / a_sound,
                dynamic_pressure=qbar,
                mass=float(mass),
                pitch_inertia=float(inertia),
                derivatives=d,
                source=source,
                note=c["note"],
                configuration=c.get("configuration"),
                flight_path_angle=gamma,
            )
        )
    if not conditions and values["envelope"] is None:
        raise CaseError("give a list of conditions, or an envelope with aerodynamics", "conditions", line=_line(doc, "title"))
    if values["envelope"] is not None:
        for key in ("wing_area", "mean_chord"):
            if getattr(aircraft, key) is None:
                raise CaseError(f"an envelope needs aircraft.{key} (its derivatives come from coefficients)", "envelope",
                                line=_line(doc, "envelope"))
        if values["aerodynamics"] is None:
            raise CaseError("an envelope needs an aerodynamics section (coefficient tables against Mach)", "envelope",
                            line=_line(doc, "envelope"))
        _check_aero_tables(values["aerodynamics"], doc)
        _check_envelope_mach(values, doc)
    loop = _build_loop(values["loop"], doc)
    warnings.extend(_loop_warnings(loop))
    s = values["analysis"]
    if not s["frequency_low"] < s["frequency_high"]:
        # blame the key the user wrote (both: frequency_low)
        low_given = _raw(doc, "analysis", "frequency_low") is not None
        high_given = _raw(doc, "analysis", "frequency_high") is not None
        if low_given or not high_given:
            other = "" if high_given else ", the default"
            raise CaseError(
                f"must be below analysis.frequency_high ({s['frequency_high']:g} 1/s{other})",
                "analysis.frequency_low",
                _raw(doc, "analysis", "frequency_low"),
                line=_line(doc, "analysis", "frequency_low"),
            )
        raise CaseError(
            f"must be above analysis.frequency_low ({s['frequency_low']:g} 1/s, the default)",
            "analysis.frequency_high",
            _raw(doc, "analysis", "frequency_high"),
            line=_line(doc, "analysis", "frequency_high"),
        )
    settings = Settings(s["frequency_low"], s["frequency_high"], s["points_per_decade"])
    requirements = build_requirements(values["requirements"], model=values["model"])
    return Case(
        title=values["title"],
        model=values["model"],
        file=file,
        sha256=sha,
        aircraft=aircraft,
        altitude_kind=altitude_kind,
        conditions=tuple(conditions),
        loop=loop,
        settings=settings,
        requirements=requirements,
        warnings=tuple(warnings),
        raw=values,
    )


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

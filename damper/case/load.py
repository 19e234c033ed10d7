"""Read a case file into a validated :class:`~damper.case.model.Case`."""

from __future__ import annotations

import hashlib
import os

import numpy as np

from ..atmosphere import RHO0, geopotential_from_geometric, standard_atmosphere
from ..errors import CaseError
from ..model.airframe import Derivatives, from_coefficients
from ..model.elements import FILTER_KINDS, parameter_names
from ..requirements.spec import build_requirements
from . import schema
from .checks import (  # noqa: F401 - the checks live in their own module
    _check_aero_tables,
    _check_control_power,
    _check_counts,
    _check_envelope_mach,
    _check_finite_model,
    _check_hardware_range,
    _check_mach,
    _coefficient_warnings,
    _line,
    _loop_warnings,
    _physics_warnings,
    _raw,
    MAX_FAILURE_SAMPLES,
)
from .envelope import envelope_sections
from .failures import failures_from_values
from .model import Aircraft, Case, Condition, ElementSpec, LoopSpec, Settings
from .sections import requirements_given, response_settings, schedule_settings, turbulence_settings
from .speed_terms import (
    LONGITUDINAL,
    SPEED_COEFFICIENTS,
    check_model_keys,
    per_unit,
    speed_terms_from_coefficients,
    speed_terms_from_derivatives,
)
from .uncertainty import check_uncertainty, uncertainty_from_values
from .written import as_written, plain_number_warnings, written_quantities
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
        return _build(values, file, sha, doc, text)
    except CaseError as exc:
        raise exc.with_location(file=file) from None


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


_FILTER_KEYS = {kind: parameter_names(kind) for kind in FILTER_KINDS}  # the element registry


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
        authority=values.get("authority"),
        authority_rate_limit=values.get("authority_rate_limit"),
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


def _condition(c, i, aircraft, altitude_kind, longitudinal, doc):
    """One validated condition `c` (``conditions[i]``) resolved: atmosphere, speed, airframe model.

    Returns
    -------
    condition : Condition
    warnings : list of str
    """
    path = f"conditions[{i}]"
    line = _line(doc, "conditions", i)
    name = c["name"]
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
    coefficients = c["coefficients"]
    if coefficients is not None:
        absent = [f"aircraft.{k}" for k in ("wing_area", "mean_chord") if getattr(aircraft, k) is None]
        if absent:
            raise CaseError(
                f"coefficients need {' and '.join(absent)}, which {'is' if len(absent) == 1 else 'are'} not given",
                f"{path}.coefficients",
                line=_line(doc, "conditions", i, "coefficients"),
            )
    with np.errstate(over="ignore", invalid="ignore"):  # overflow: refused just below, with a message
        d = _airframe(c, aircraft, qbar, v, mass, inertia, gamma, longitudinal)
    d = type(d)(**{k: np.asarray(float(getattr(d, k))) for k in type(d).__dataclass_fields__})
    _check_finite_model(d, path, name, line)
    _check_control_power(d, c, doc, i, line)
    warnings = list(_physics_warnings(d, f"{path} ({name})"))
    if coefficients is not None:
        warnings.extend(_coefficient_warnings(coefficients, f"{path} ({name})"))
    condition = Condition(
        name=name, airspeed=v, altitude=float(h), altitude_input=float(c["altitude"]), density=rho,
        speed_of_sound=a_sound, mach=v / a_sound, dynamic_pressure=qbar, mass=float(mass),
        pitch_inertia=float(inertia), derivatives=d,
        source="coefficients" if coefficients is not None else "derivatives",
        note=c["note"], configuration=c.get("configuration"), written=as_written(_raw(doc, "conditions", i)),
        flight_path_angle=gamma,
        lift_curve_slope_per_rad=None if coefficients is None else float(coefficients["CL_alpha"]),
    )
    return condition, warnings


def _conditions(values, aircraft, doc):
    """Every condition resolved (names unique); ``(conditions, warnings)``."""
    longitudinal = values["model"] == LONGITUDINAL
    conditions, warnings, seen = [], [], {}
    for i, c in enumerate(values["conditions"]):
        if c["name"] in seen:
            raise CaseError(f"duplicate condition name (also conditions[{seen[c['name']]}])", f"conditions[{i}].name",
                            c["name"], line=_line(doc, "conditions", i))
        seen[c["name"]] = i
        condition, said = _condition(c, i, aircraft, values["atmosphere"]["altitude_kind"], longitudinal, doc)
        conditions.append(condition)
        warnings.extend(said)
    return tuple(conditions), warnings


def _check_envelope(values, aircraft, doc, has_conditions):
    """An envelope needs the reference geometry and the aerodynamic tables; a case needs conditions or one."""
    if not has_conditions and values["envelope"] is None:
        raise CaseError("give a list of conditions, or an envelope with aerodynamics", "conditions", line=_line(doc, "title"))
    if values["envelope"] is None:
        return
    for key in ("wing_area", "mean_chord"):
        if getattr(aircraft, key) is None:
            raise CaseError(f"an envelope needs aircraft.{key} (its derivatives come from coefficients)", "envelope",
                            line=_line(doc, "envelope"))
    if values["aerodynamics"] is None:
        raise CaseError("an envelope needs an aerodynamics section (coefficient tables against Mach)", "envelope",
                        line=_line(doc, "envelope"))
    _check_aero_tables(values["aerodynamics"], doc)
    _check_envelope_mach(values, doc)


def _check_failures(values, loop, doc):
    """A failure study needs an authority to run to, and a bounded oscillatory search."""
    fs = values.get("failures")
    if fs is None:
        return
    if loop.authority is None and loop.travel is None:
        raise CaseError("a failure study needs loop.authority (or loop.actuator.travel for a full-authority damper)",
                        "failures", line=_line(doc, "failures"))
    if (fs["recognition_time"] or 3.0) / fs["step"] * fs["frequency_points"] > MAX_FAILURE_SAMPLES:
        raise CaseError(f"recognition_time / step x frequency_points must be at most {MAX_FAILURE_SAMPLES:.0e} "
                        "samples (memory of one condition's frequency search): use a larger step", "failures.step",
                        _raw(doc, "failures", "step"), line=_line(doc, "failures", "step") or _line(doc, "failures"))


def _settings(values, doc) -> Settings:
    """The ``analysis`` section; the frequency range must be ordered (blaming the key the user wrote)."""
    s = values["analysis"]
    if not s["frequency_low"] < s["frequency_high"]:
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
    return Settings(s["frequency_low"], s["frequency_high"], s["points_per_decade"])


def _build(values, file, sha, doc, text="") -> Case:
    """The :class:`Case` of validated values `values` (SI) read from the parsed document `doc`."""
    _check_counts(values, doc)
    check_model_keys(values, lambda *k: _raw(doc, *k), lambda *k: _line(doc, *k))
    a = values["aircraft"]
    aircraft = Aircraft(a["name"], a["mass"], a["pitch_inertia"], a["wing_area"], a["mean_chord"])
    altitude_kind = values["atmosphere"]["altitude_kind"]
    conditions, warnings = _conditions(values, aircraft, doc)
    _check_envelope(values, aircraft, doc, bool(conditions))
    warnings.extend(plain_number_warnings(conditions, values["envelope"], altitude_kind))
    loop = _build_loop(values["loop"], doc)
    warnings.extend(_loop_warnings(loop))
    _check_failures(values, loop, doc)
    check_uncertainty(values, loop, aircraft, doc)
    settings = _settings(values, doc)
    envelope, aerodynamics = envelope_sections(values, aircraft)
    return Case(
        title=values["title"],
        model=values["model"],
        file=file,
        sha256=sha,
        text=text,
        written=written_quantities(doc),
        aircraft=aircraft,
        altitude_kind=altitude_kind,
        conditions=conditions,
        loop=loop,
        settings=settings,
        requirements=build_requirements(values["requirements"], model=values["model"]),
        requirements_given=requirements_given(values, doc),
        warnings=tuple(warnings),
        envelope=envelope,
        aerodynamics=aerodynamics,
        schedule=schedule_settings(values, doc),
        responses=response_settings(values, doc),
        turbulence=turbulence_settings(values, doc),
        uncertainty=uncertainty_from_values(values.get("uncertainty")),
        failures=failures_from_values(values.get("failures")),
    )

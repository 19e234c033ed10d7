"""Read a case file into a validated :class:`~damper.case.model.Case`."""

from __future__ import annotations

import hashlib
import os

import numpy as np

from ..atmosphere import RHO0, geopotential_from_geometric, standard_atmosphere
from ..errors import CaseError
from ..model.airframe import Derivatives, from_coefficients
from . import schema
from .model import Aircraft, Case, Condition, ElementSpec, LoopSpec, Settings
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
    path = os.fspath(path)
    try:
        with open(path, "rb") as fh:
            data = fh.read(schema_max_bytes() + 1)
    except FileNotFoundError:
        raise CaseError("no such file", file=path) from None
    except IsADirectoryError:
        raise CaseError("is a directory, not a case file", file=path) from None
    except OSError as exc:
        raise CaseError(f"cannot read the file ({exc.strerror})", file=path) from None
    return load_case_text(data, path)


def schema_max_bytes() -> int:
    from .yamlio import MAX_BYTES

    return MAX_BYTES


def load_case_text(data, file="<case>") -> Case:
    """Validate a case given as bytes or text. `file` names it in messages."""
    if isinstance(data, str):
        data = data.encode("utf-8")
    sha = hashlib.sha256(data).hexdigest()
    try:
        try:
            text = data.decode("utf-8")
        except UnicodeDecodeError:
            raise CaseError("is not UTF-8 text") from None
        doc = read_yaml(text)
        if doc is None:
            raise CaseError("the file is empty")
        values = schema.check(doc)
        return _build(values, file, sha, doc)
    except CaseError as exc:
        raise exc.with_location(file=file) from None


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
                    f"a {f['kind']} filter needs {', '.join(needed)}; {key} is missing",
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
                "a notch needs depth_damping < width_damping",
                f"loop.filters[{i}].depth_damping",
                f["depth_damping"],
                line=_line(doc, "loop", "filters", i),
            )
        filters.append(ElementSpec(f["kind"], tuple((k, f[k]) for k in needed)))
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
    """Turn validated ``(value, dimension)`` pairs into per-unit-mass/inertia values."""
    out = {}
    for key, item in raw.items():
        value, dim = item if isinstance(item, tuple) else (item, None)
        if dim in ("force", "force_time"):
            value = value / mass
        elif dim in ("moment", "moment_time"):
            value = value / inertia
        out[key] = value
    return Derivatives(airspeed=np.asarray(airspeed), **{k: np.asarray(v) for k, v in out.items()})


def _build(values, file, sha, doc) -> Case:
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
            raise CaseError(str(exc), f"{path}.altitude", c["altitude"], line=line) from None
        rho = float(air.density)
        a_sound = float(air.speed_of_sound)
        if c["airspeed"] is not None:
            v = c["airspeed"]
        elif c["equivalent_airspeed"] is not None:
            v = c["equivalent_airspeed"] * np.sqrt(RHO0 / rho)
        else:
            v = c["mach"] * a_sound
        v = float(v)
        qbar = 0.5 * rho * v * v
        mass = c["mass"] if c["mass"] is not None else aircraft.mass
        inertia = c["pitch_inertia"] if c["pitch_inertia"] is not None else aircraft.pitch_inertia
        if c["coefficients"] is not None:
            for key in ("wing_area", "mean_chord"):
                if getattr(aircraft, key) is None:
                    raise CaseError(
                        f"coefficients need aircraft.{key}", f"{path}.coefficients", line=_line(doc, "conditions", i, "coefficients")
                    )
            d = from_coefficients(
                dynamic_pressure=qbar,
                airspeed=v,
                mass=mass,
                pitch_inertia=inertia,
                wing_area=aircraft.wing_area,
                mean_chord=aircraft.mean_chord,
                **c["coefficients"],
            )
            source = "coefficients"
        else:
            d = _resolve_derivatives(c["derivatives"], mass, inertia, v)
            source = "derivatives"
        d = Derivatives(**{k: np.asarray(float(getattr(d, k))) for k in Derivatives.__dataclass_fields__})
        warnings.extend(_physics_warnings(d, f"{path} ({name})"))
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
            )
        )
    loop = _build_loop(values["loop"], doc)
    s = values["analysis"]
    if not s["frequency_low"] < s["frequency_high"]:
        raise CaseError(
            "analysis.frequency_low must be below analysis.frequency_high",
            "analysis.frequency_low",
            s["frequency_low"],
            line=_line(doc, "analysis", "frequency_low"),
        )
    settings = Settings(s["frequency_low"], s["frequency_high"], s["points_per_decade"])
    return Case(
        title=values["title"],
        file=file,
        sha256=sha,
        aircraft=aircraft,
        altitude_kind=altitude_kind,
        conditions=tuple(conditions),
        loop=loop,
        settings=settings,
        warnings=tuple(warnings),
        raw=values,
    )


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

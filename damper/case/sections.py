"""The ``schedule:``, ``responses:``, ``turbulence:`` and ``requirements:`` sections as frozen data (SI).

Each builder takes the validated values (:func:`damper.case.schema.check`) and the parsed
document (for the line and the text of a key in a message), checks the rules that span
keys or sections, and returns the section's dataclass (None when the case leaves the
section out). The analysis reads these; it never reads the case's dicts. The envelope,
aerodynamics, uncertainty and failures sections have their own modules
(:mod:`damper.case.envelope`, :mod:`damper.case.uncertainty`, :mod:`damper.case.failures`).
"""

from __future__ import annotations

from dataclasses import dataclass

from ..errors import CaseError
from ..model.dryden import TurbulenceSpec
from .checks import _line, _raw
from .speed_terms import default_duration

# ---------------------------------------------------------------------------
# schedule
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class ScheduleSettings:
    """The ``schedule:`` section: how the gain schedule is shaped and refined.

    Attributes
    ----------
    variables : tuple of str
        One variable (1-D table) or ``altitude`` and a speed variable (2-D table), from
        ``dynamic_pressure`` (Pa), ``equivalent_airspeed`` (m/s), ``mach``, ``altitude`` (m)
        and ``airspeed`` (m/s).
    form : str
        ``table`` or ``inverse_dynamic_pressure`` (K = K_ref q_ref / q).
    breakpoints : int
        Breakpoints per variable to start from.
    max_breakpoints : int
        Most breakpoints per variable after refinement (0: never add).
    """

    variables: tuple = ("dynamic_pressure",)
    form: str = "table"
    breakpoints: int = 5
    max_breakpoints: int = 12


def schedule_settings(values, doc) -> ScheduleSettings | None:
    """The validated ``schedule`` section as :class:`ScheduleSettings` (None: no section).

    Raises
    ------
    CaseError
        A form or a 2-D table the variables (or the case's envelope) do not allow.
    """
    s = values.get("schedule")
    if s is None:
        return None
    variables = tuple(s["variables"])
    if s["form"] == "inverse_dynamic_pressure" and variables != ("dynamic_pressure",):
        raise CaseError("needs variables [dynamic_pressure] (K = K_ref q_ref / q)", "schedule.form", s["form"],
                        line=_line(doc, "schedule", "form") or _line(doc, "schedule"))
    if len(variables) == 2:
        where = dict(path="schedule.variables", line=_line(doc, "schedule", "variables") or _line(doc, "schedule"))
        if "altitude" not in variables or variables[0] == variables[1]:
            raise CaseError("a 2-D schedule needs altitude and one speed variable, e.g. [altitude, mach]", **where)
        if values.get("envelope") is None:
            raise CaseError("a 2-D schedule needs an envelope with aerodynamic tables (a schedule over the "
                            "conditions has one variable)", **where)
    return ScheduleSettings(variables, s["form"], int(s["breakpoints"]), int(s["max_breakpoints"]))


# ---------------------------------------------------------------------------
# responses
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class InputSettings:
    """One input of the ``responses:`` section as given (None: the analysis's default).

    Attributes
    ----------
    kind : str
        ``doublet``, ``step``, ``pulse``, ``gust_sharp`` or ``gust_one_minus_cosine``.
    name : str or None
        Label for tables and file names (None: the kind).
    start_s : float or None
        Time the input begins, s.
    amplitude_rad : float or None
        Pilot command, rad of surface, positive nose-up.
    half_period_s : float or None
        Doublet: duration of each half, s (None: half the bare short-period period of each
        condition, :func:`damper.analysis.response.default_half_period`).
    duration_s : float or None
        Pulse: duration, s.
    gust_velocity_m_s : float or None
        Gust: vertical velocity, m/s, positive upward.
    gust_length_m : float or None
        1-cosine gust: length, m.
    """

    kind: str
    name: str | None = None
    start_s: float | None = None
    amplitude_rad: float | None = None
    half_period_s: float | None = None
    duration_s: float | None = None
    gust_velocity_m_s: float | None = None
    gust_length_m: float | None = None


@dataclass(frozen=True)
class ResponseSettings:
    """The ``responses:`` section as written, its times resolved (SI).

    What needs a condition's airframe (a doublet's default half-period from the bare short
    period, whether an input ends in time) is resolved by the analysis:
    :func:`damper.analysis.response.resolve_responses` gives the
    :class:`~damper.analysis.response.ResolvedResponses` that is simulated.

    Attributes
    ----------
    duration_s : float
        Simulated time, s (the model's default when not given,
        :func:`damper.case.speed_terms.default_duration`).
    step_s : float
        Integration and record step, s.
    output_step_s : float
        Step of the CSV files and plots, s (default: the larger of the step and 0.01 s).
    inputs : tuple of InputSettings
        Empty: one default doublet.
    """

    duration_s: float
    step_s: float
    output_step_s: float
    inputs: tuple = ()


#: Default step of the CSV files and plots, s.
DEFAULT_OUTPUT_STEP = 0.01


def response_settings(values, doc) -> ResponseSettings | None:
    """The validated ``responses`` section as :class:`ResponseSettings` (None: no section).

    Raises
    ------
    CaseError
        A step too long for the duration or an output step below the step (too many steps:
        :func:`damper.case.checks._check_counts`).
    """
    r = values.get("responses")
    if r is None:
        return None
    duration = float(r["duration"] or default_duration(values["model"]))
    step = float(r["step"])
    out_step = float(r["output_step"] if r.get("output_step") is not None else max(step, DEFAULT_OUTPUT_STEP))

    def refuse(message, key):
        raise CaseError(message, f"responses.{key}", _raw(doc, "responses", key),
                        line=_line(doc, "responses", key) or _line(doc, "responses"))

    if step > duration / 10:
        refuse(f"must be at most a tenth of responses.duration ({duration:g} s)", "step")
    if out_step < step:
        refuse(f"must not be smaller than responses.step ({step:g} s)", "output_step")
    inputs = tuple(
        InputSettings(kind=it["kind"], name=it.get("name"), start_s=it.get("start"), amplitude_rad=it.get("amplitude"),
                      half_period_s=it.get("half_period"), duration_s=it.get("duration"),
                      gust_velocity_m_s=it.get("gust_velocity"), gust_length_m=it.get("gust_length"))
        for it in r.get("inputs") or ()
    )
    return ResponseSettings(duration, step, out_step, inputs)


# ---------------------------------------------------------------------------
# turbulence
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class TurbulenceSettings:
    """The ``turbulence:`` section.

    Attributes
    ----------
    spec : damper.model.dryden.TurbulenceSpec
        Explicit intensity and scale length, or the standard's.
    ground_elevation_m : float
        m: the standard's values are read at each condition's altitude minus this.
    """

    spec: TurbulenceSpec
    ground_elevation_m: float = 0.0


def turbulence_settings(values, doc) -> TurbulenceSettings | None:
    """The validated ``turbulence`` section as :class:`TurbulenceSettings` (None: no section)."""
    t = values.get("turbulence")
    if not t:
        return None
    try:
        if t.get("severity"):
            spec = TurbulenceSpec.from_severity(t["severity"])
        else:
            keys = ("gust_rms", "scale_length", "wind_speed_20ft", "exceedance_probability")
            spec = TurbulenceSpec(**{k: t.get(k) for k in keys})
    except ValueError as exc:  # the section's own check refuses these first; kept as a case error
        raise CaseError(str(exc), "turbulence", line=_line(doc, "turbulence")) from None
    return TurbulenceSettings(spec, float(t.get("ground_elevation") or 0.0))


# ---------------------------------------------------------------------------
# requirements (as written; the criteria are damper.requirements.spec.Requirements)
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class RequirementsPreset:
    """``requirements.preset``: the handling-qualities standard the case names.

    Attributes
    ----------
    standard : str
    level : int
        Level of flying qualities required (1-3).
    category : str
        Flight-phase category A, B or C.
    aircraft_class : str or None
    """

    standard: str
    level: int
    category: str
    aircraft_class: str | None = None


@dataclass(frozen=True)
class RequirementsGiven:
    """What the ``requirements:`` section names beside its criteria.

    Attributes
    ----------
    preset : RequirementsPreset or None
    own_keys : tuple of str
        The keys of the case's own requirements given (bands and limits; not the presets), in
        the schema's order.
    turbulence_load_factor_rms_max_g : float or None
        Largest rms incremental load factor in the case's turbulence, g.
    rate_limit_exceedances_max_per_s : float or None
        Largest expected surface-rate excursions beyond the rate limit, 1/s.
    """

    preset: RequirementsPreset | None = None
    own_keys: tuple = ()
    turbulence_load_factor_rms_max_g: float | None = None
    rate_limit_exceedances_max_per_s: float | None = None


#: The turbulence requirements: case key -> field of :class:`RequirementsGiven`.
TURBULENCE_REQUIREMENTS = {
    "turbulence_load_factor_rms": "turbulence_load_factor_rms_max_g",
    "rate_limit_exceedances": "rate_limit_exceedances_max_per_s",
}


def requirements_given(values, doc) -> RequirementsGiven:
    """The preset, the own keys and the turbulence limits of the validated ``requirements`` section.

    Raises
    ------
    CaseError
        A turbulence requirement without a ``turbulence:`` section.
    """
    req = values.get("requirements") or {}
    p = req.get("preset")
    preset = RequirementsPreset(p["standard"], int(p["level"]), p["category"], p.get("aircraft_class")) if p else None
    own = tuple(k for k, v in req.items() if isinstance(v, dict) and k not in ("preset", "margins_preset") and v)
    limits = {}
    for key, name in TURBULENCE_REQUIREMENTS.items():
        if req.get(key):
            limits[name] = float(req[key]["max"])
            if not values.get("turbulence"):
                raise CaseError("needs a turbulence: section (the turbulence the requirement applies in)",
                                f"requirements.{key}", line=_line(doc, "requirements", key))
    return RequirementsGiven(preset, own, **limits)


__all__ = ["DEFAULT_OUTPUT_STEP", "InputSettings", "RequirementsGiven", "RequirementsPreset",
           "ResponseSettings", "ScheduleSettings", "TURBULENCE_REQUIREMENTS", "TurbulenceSettings",
           "requirements_given", "response_settings", "schedule_settings", "turbulence_settings"]

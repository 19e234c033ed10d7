"""The ``uncertainty:`` section as frozen data (SI): what is uncertain and how it is explored.

:func:`uncertainty_from_values` turns the validated section (keys:
:mod:`damper.case.uncertainty_schema`) into an :class:`UncertaintySpec`; the study that
samples it is :mod:`damper.analysis.uncertainty` and :mod:`damper.analysis.robustness`
(docs/robustness.md).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import CaseError
from .checks import _line, _raw

#: Parameters that are speed derivatives of the longitudinal model (a short-period case has none).
SPEED_PARAMETERS = ("X_u", "X_alpha", "Z_u", "M_u")

@dataclass(frozen=True)
class UncertainParameter:
    """One uncertain parameter as the case gives it (SI).

    Attributes
    ----------
    name : str
        A key of :data:`damper.case.uncertainty_schema.PARAMETERS`.
    distribution : str
        ``"uniform"`` or ``"normal"``.
    relative : float or None
        Spread as a fraction of ``|nominal|``.
    absolute : float or None
        Spread in the parameter's SI unit.
    sigma : float or None
        Normal: standard deviation as a fraction of the spread (None: ``1 / truncate``).
    truncate : float
        Normal: truncation in standard deviations.
    path : str
        Case-file key path, for messages.
    """

    name: str
    distribution: str = "uniform"
    relative: float | None = None
    absolute: float | None = None
    sigma: float | None = None
    truncate: float = 3.0
    path: str = ""

    @property
    def half_width_factor(self) -> float:
        """Half-width of the sampled range per unit spread (1 for uniform)."""
        if self.distribution == "uniform":
            return 1.0
        sigma = self.sigma if self.sigma is not None else 1.0 / self.truncate
        return self.truncate * sigma

    def spread(self, nominal) -> np.ndarray:
        """The spread at each condition, in the parameter's unit."""
        nominal = np.asarray(nominal, dtype=float)
        if self.relative is not None:
            return self.relative * np.abs(nominal)
        return np.full(nominal.shape, float(self.absolute))


@dataclass(frozen=True)
class CgShift:
    """Centre-of-gravity shift, uniform on [low, high] fractions of the mean chord (aft positive).

    Attributes
    ----------
    low, high : float
        dx/c.
    lift_curve_slope : float or None
        CL_alpha per rad (None: the condition's coefficients, else ``-Z_alpha m / (qbar S)``).
    """

    low: float
    high: float
    lift_curve_slope: float | None = None


@dataclass(frozen=True)
class UncertaintySpec:
    """What is uncertain and how it is explored.

    Attributes
    ----------
    samples : int
        Monte Carlo samples (each applied at every condition).
    seed : int
    confidence : float
        Of the Clopper-Pearson intervals.
    parameters : tuple of UncertainParameter
    cg_shift : CgShift or None
    max_corner_axes : int
        All corners when the active axes are at most this many, else a random subset.
    corner_subset : int
        Corners drawn when there are more axes.
    refine_starts : int
        Worst evaluated points each local search starts from.
    refine_iterations : int
        Iterations of each compass search (each moves or halves the step).
    refine_min_step : float
        Smallest step of the compass search, in normalised coordinates.
    chunk : int
        Loops per :func:`assess_loop` call.
    schedule_points : int
        With a schedule: the verification points studied (see
        :mod:`damper.analysis.schedule_points`).
    required_fraction : float or None
        The fraction of samples that must meet every requirement at every condition, judged on
        the lower bound of its interval at `confidence`; None: every sample, corner and
        worst-case point must (:func:`damper.analysis.verdicts.robustness_verdict`).
    """

    samples: int = 2000
    seed: int = 1
    confidence: float = 0.95
    parameters: tuple = ()
    cg_shift: CgShift | None = None
    max_corner_axes: int = 12
    corner_subset: int = 4096
    refine_starts: int = 3
    refine_iterations: int = 24
    refine_min_step: float = 1.0 / 64.0
    chunk: int = 2048
    schedule_points: int = 12
    required_fraction: float | None = None


def uncertainty_from_values(section) -> UncertaintySpec | None:
    """The validated ``uncertainty`` section (SI values) as an :class:`UncertaintySpec` (None: no section)."""
    if section is None:
        return None
    params = tuple(
        UncertainParameter(
            name=p["name"],
            distribution=p.get("distribution", "uniform"),
            relative=p.get("relative"),
            absolute=p.get("absolute"),
            sigma=p.get("sigma"),
            truncate=p.get("truncate", 3.0),
            path=f"uncertainty.parameters[{k}]",
        )
        for k, p in enumerate(section.get("parameters") or ())
    )
    cg = section.get("cg_shift")
    cg = CgShift(float(cg["range"][0]), float(cg["range"][1]), cg.get("lift_curve_slope")) if cg else None
    return UncertaintySpec(
        samples=int(section.get("samples", 2000)),
        seed=int(section.get("seed", 1)),
        confidence=float(section.get("confidence", 0.95)),
        parameters=params,
        cg_shift=cg,
        schedule_points=int(section.get("schedule_points", 12)),
        required_fraction=None if section.get("required_fraction") is None else float(section["required_fraction"]),
    )


def check_uncertainty(values, loop, aircraft, doc) -> None:
    """Refuse uncertain parameters the case's model or loop does not have, and a CG shift without its geometry.

    Parameters
    ----------
    values : dict
        The validated case (SI).
    loop : damper.case.model.LoopSpec
    aircraft : damper.case.model.Aircraft
    doc : dict
        The parsed document (lines and values as written).

    The spreads are checked against each condition's nominal value where the study's
    conditions are known (:func:`damper.analysis.uncertainty.resolve_axes`).
    """
    section = values.get("uncertainty")
    if section is None:
        return
    for k, p in enumerate(section.get("parameters") or ()):
        problem = _missing_parameter(p["name"], values["model"], loop)
        if problem:
            raise CaseError(problem, f"uncertainty.parameters[{k}].name", p["name"],
                            line=_line(doc, "uncertainty", "parameters", k, "name")
                            or _line(doc, "uncertainty", "parameters", k))
    cg = section.get("cg_shift")
    if cg is None:
        return
    line = _line(doc, "uncertainty", "cg_shift")
    if aircraft.mean_chord is None:
        raise CaseError("a CG shift needs aircraft.mean_chord", "uncertainty.cg_shift", line=line)
    if cg.get("lift_curve_slope") is not None and aircraft.wing_area is None:
        raise CaseError("a CG shift with lift_curve_slope needs aircraft.wing_area", "uncertainty.cg_shift.lift_curve_slope",
                        _raw(doc, "uncertainty", "cg_shift", "lift_curve_slope"), line=line)


def _missing_parameter(name, model, loop) -> str:
    """Why the case has no `name` to make uncertain ('' when it has)."""
    if name in SPEED_PARAMETERS and model != "longitudinal":
        return "is a speed derivative of the longitudinal model; this case's model is short_period"
    actuator, sensor = loop.actuator, loop.sensor
    if name == "actuator_bandwidth" and actuator is None:
        return "the loop's actuator is ideal; give loop.actuator to make its bandwidth uncertain"
    if name == "actuator_time_constant" and (actuator is None or actuator.kind != "lag"):
        return ("needs a first-order actuator (loop.actuator.bandwidth or time_constant); use actuator_bandwidth for "
                "a second-order one")
    if name == "sensor_time_constant" and (sensor is None or sensor.kind != "lag"):
        return "needs a first-order rate sensor (loop.rate_sensor.time_constant)"
    if name == "delay" and not loop.total_delay > 0:
        return "the loop has no delay; give loop.delay or loop.sample_rate to make it uncertain"
    return ""


__all__ = ["SPEED_PARAMETERS", "check_uncertainty", "CgShift", "UncertainParameter", "UncertaintySpec", "uncertainty_from_values"]

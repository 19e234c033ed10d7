"""The validated, immutable case (SI units throughout)."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..model.airframe import Derivatives
from ..model import elements
from ..model.elements import Delay
from ..model.loop import Hardware
from ..quantities import quantity, quantity_property
from .envelope import Aerodynamics, Envelope
from .failure_spec import FailureSpec
from .sections import RequirementsGiven, ResponseSettings, ScheduleSettings, TurbulenceSettings
from .uncertainty import UncertaintySpec


@dataclass(frozen=True)
class Aircraft:
    """Mass properties and reference geometry.

    Attributes
    ----------
    name : str or None
    mass : float
        kg.
    pitch_inertia : float
        kg m^2.
    wing_area : float or None
        m^2.
    mean_chord : float or None
        m.
    """

    name: str | None
    mass: float = quantity("kg")
    pitch_inertia: float = quantity("kg m^2")
    wing_area: float | None = quantity("m^2")
    mean_chord: float | None = quantity("m")


@dataclass(frozen=True)
class Condition:
    """One flight condition with its resolved dimensional derivatives.

    Attributes
    ----------
    name : str
    airspeed : float
        True airspeed, m/s.
    altitude : float
        Geopotential altitude, m.
    altitude_input : float
        Altitude as given (geometric or geopotential, per the case), m.
    density : float
        kg/m^3.
    speed_of_sound : float
        m/s.
    mach : float
    dynamic_pressure : float
        Pa.
    mass : float
        kg.
    pitch_inertia : float
        kg m^2.
    derivatives : Derivatives
        Scalars, per unit mass/inertia, SI.
    source : str
        ``"derivatives"`` or ``"coefficients"``.
    note : str or None
    configuration : str or None
        Mass / CG configuration label (schedules interpolate within one configuration).
    flight_path_angle : float
        Trim flight-path angle, rad, positive climbing (0 for the short-period model).
    written : tuple of damper.case.written.Written
        The speed key and the altitude as the case file wrote them (empty for conditions
        damper made, e.g. envelope points).
    lift_curve_slope_per_rad : float or None
        CL_alpha, per rad, when the condition is given by coefficients (None otherwise, and
        for conditions damper made); the CG-shift effect of a robustness study uses it.

    `derivatives` is a :class:`~damper.model.airframe.Derivatives` for a short-period case and a
    :class:`~damper.model.longitudinal.LongitudinalDerivatives` for a longitudinal one.
    """

    name: str
    airspeed: float = quantity("m/s")
    altitude: float = quantity("m", key="geopotential_altitude_m", doc="geopotential (the atmosphere's)")
    altitude_input: float = quantity("m", key="altitude_m", doc="as given (geometric or geopotential, per the case)")
    density: float = quantity("kg/m^3")
    speed_of_sound: float = quantity("m/s")
    mach: float = quantity("")
    dynamic_pressure: float = quantity("Pa")
    mass: float = quantity("kg")
    pitch_inertia: float = quantity("kg m^2")
    derivatives: Derivatives
    source: str
    note: str | None = None
    configuration: str | None = None
    flight_path_angle: float = quantity("rad", default=0.0)
    written: tuple = field(default=(), compare=False)
    lift_curve_slope_per_rad: float | None = None

    @quantity_property("m/s")
    def equivalent_airspeed(self) -> float:
        """Equivalent airspeed, m/s."""
        from ..atmosphere import RHO0

        return float(self.airspeed * np.sqrt(self.density / RHO0))


@dataclass(frozen=True)
class ElementSpec:
    """One hardware element as the case gave it.

    Attributes
    ----------
    kind : str
        A key of the element registry :data:`damper.model.elements.ELEMENTS` (``lag``,
        ``second_order``, ``lead_lag``, ``notch``, ``washout``).
    params : tuple of (name, float)
        SI parameters.
    """

    kind: str
    params: tuple

    def get(self, name, default=None):
        return dict(self.params).get(name, default)

    def build(self):
        """The model element (the registry :data:`damper.model.elements.ELEMENTS`)."""
        return elements.build(self.kind, dict(self.params))

    def describe(self) -> str:
        """The element in words (its class's ``describe``), or its kind when not registered."""
        return self.build().describe() if self.kind in elements.ELEMENTS else self.kind


@dataclass(frozen=True)
class LoopSpec:
    """The loop hardware as given (SI).

    Attributes
    ----------
    actuator, sensor, washout : ElementSpec or None
        None is ideal.
    filters : tuple of ElementSpec
    delay : float
        Computation delay, s.
    sample_rate : float or None
        Hz.
    pade_order : int
    rate_limit : float or None
        Actuator rate limit, rad/s.
    travel : float or None
        Surface travel, +/- rad, on the sum of pilot and damper commands.
    authority : float or None
        The damper's own authority (series-servo stroke), +/- rad of surface (None: none).
    authority_rate_limit : float or None
        The damper command's own rate limit, rad/s, as given (None: the actuator's rate
        limit, see :meth:`damper_rate_limit`).
    """

    actuator: ElementSpec | None = None
    sensor: ElementSpec | None = None
    washout: ElementSpec | None = None
    filters: tuple = ()
    delay: float = quantity("s", key="computation_delay_s", default=0.0, doc="computation delay")
    sample_rate: float | None = quantity("Hz", default=None)
    pade_order: int = 2
    rate_limit: float | None = quantity("rad/s", key="actuator_rate_limit_rad_s", default=None, doc="the actuator's")
    travel: float | None = quantity("rad", key="actuator_travel_rad", default=None, doc="the actuator's, +/-")
    authority: float | None = quantity("rad", default=None)
    authority_rate_limit: float | None = quantity("rad/s", default=None)

    @property
    def damper_rate_limit(self) -> float | None:
        """The damper command's rate limit, rad/s: its own, else the actuator's (None: none)."""
        return self.authority_rate_limit if self.authority_rate_limit is not None else self.rate_limit

    @quantity_property("s")
    def total_delay(self) -> float:
        """Computation delay plus half a sample (zero-order hold), s."""
        half = 0.5 / self.sample_rate if self.sample_rate else 0.0
        return self.delay + half

    def hardware(self) -> Hardware:
        """Model hardware (scalar parameters; broadcast against any batch)."""
        delay = Delay(np.asarray(self.total_delay), self.pade_order) if self.total_delay > 0 else None
        return Hardware(
            actuator=self.actuator.build() if self.actuator else None,
            sensor=self.sensor.build() if self.sensor else None,
            washout=self.washout.build() if self.washout else None,
            filters=tuple(f.build() for f in self.filters),
            delay=delay,
        )


@dataclass(frozen=True)
class Settings:
    """Numerical settings.

    Attributes
    ----------
    frequency_low, frequency_high : float
        Frequency range of the phase-crossing search, rad/s (gain crossings are exact at
        every frequency).
    points_per_decade : int
        Density of the coarse log grid under the loop's own points (see
        :mod:`damper.measures.freqset`).
    """

    frequency_low: float = 1e-3
    frequency_high: float = 1e3
    points_per_decade: int = 5

    def grid(self) -> np.ndarray:
        """The coarse frequency grid of the margin search, rad/s."""
        decades = np.log10(self.frequency_high / self.frequency_low)
        n = max(2, int(round(decades * self.points_per_decade)) + 1)
        return np.logspace(np.log10(self.frequency_low), np.log10(self.frequency_high), n)


@dataclass(frozen=True)
class Case:
    """A validated case.

    Attributes
    ----------
    title : str
    file : str
        Where it was read from.
    sha256 : str
        SHA-256 of the file's bytes.
    aircraft : Aircraft
    altitude_kind : str
    conditions : tuple of Condition
    loop : LoopSpec
    settings : Settings
    requirements : damper.requirements.spec.Requirements
    warnings : tuple of str
        Suspicious physics (analysed anyway).
    model : str
        ``"short_period"`` or ``"longitudinal"`` (the bare-airframe model of every condition).
    text : str
        The case file's text as read (provenance; `sha256` is of its bytes).
    written : tuple of damper.case.written.Written
        Every quantity as the file wrote it, by full key path (its SI value is in the
        section's field; see :meth:`written_text`).
    requirements_given : damper.case.sections.RequirementsGiven
        The requirements section's preset, own keys and turbulence limits.
    envelope : damper.case.envelope.Envelope or None
    aerodynamics : damper.case.envelope.Aerodynamics or None
        Given with an envelope.
    schedule : damper.case.sections.ScheduleSettings or None
    responses : damper.case.sections.ResponseSettings or None
        None: the default doublet.
    turbulence : damper.case.sections.TurbulenceSettings or None
    uncertainty : damper.case.uncertainty.UncertaintySpec or None
    failures : damper.case.failure_spec.FailureSpec or None

    Every section is parsed and checked here; no later layer reads the file's values.
    """

    title: str
    file: str
    sha256: str
    aircraft: Aircraft
    altitude_kind: str
    conditions: tuple
    loop: LoopSpec
    settings: Settings = field(default_factory=Settings)
    requirements: object = None
    warnings: tuple = ()
    model: str = "short_period"
    text: str = field(default="", compare=False, repr=False)
    written: tuple = field(default=(), compare=False, repr=False)
    requirements_given: RequirementsGiven = field(default_factory=RequirementsGiven)
    envelope: Envelope | None = None
    aerodynamics: Aerodynamics | None = field(default=None, compare=False)
    schedule: ScheduleSettings | None = None
    responses: ResponseSettings | None = None
    turbulence: TurbulenceSettings | None = None
    uncertainty: UncertaintySpec | None = None
    failures: FailureSpec | None = None

    def written_text(self, path: str) -> str | None:
        """The quantity at key path `path` (``loop.actuator.bandwidth``) as the file wrote it (None: not written)."""
        return next((w.text for w in self.written if w.key == path), None)

    @property
    def names(self) -> tuple:
        return tuple(c.name for c in self.conditions)

    @property
    def longitudinal(self) -> bool:
        """The case uses the four-state longitudinal model."""
        return self.model == "longitudinal"

    def derivatives(self):
        """All conditions' derivatives as one batch of shape (n_conditions,) (the model's type)."""
        ds = [c.derivatives for c in self.conditions]
        kind = type(ds[0]) if ds else Derivatives
        fields = kind.__dataclass_fields__
        return kind(**{f: np.array([float(getattr(d, f)) for d in ds]) for f in fields})

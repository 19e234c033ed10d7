"""What is uncertain and how it is sampled: the ``uncertainty:`` section, axes, samples.

Every uncertain quantity is one *axis* with a normalised coordinate ``u`` in [-1, 1]; its
value at condition ``i`` is ``centre_i + half_i u`` (``centre`` the case's nominal,
``half`` the spread, or for a normal parameter ``truncate * sigma``). One sample is one
vector ``u``, applied at every condition (docs/robustness.md).

**Samples in shards.** Sample ``g`` (0-based) is row ``g`` of
``np.random.default_rng(seed).random((samples, p))`` (uniform; a normal axis takes the
inverse CDF of the same draw). Any block of rows is regenerated from the seed and the
row index alone: the generator (PCG64) is advanced by ``g p`` draws, so a shard of
:data:`SHARD_SAMPLES` samples, or any single sample, can be recomputed anywhere, and the
samples do not depend on how the study is cut into shards or chunks.
"""

from __future__ import annotations

import dataclasses
import itertools
from dataclasses import dataclass

import numpy as np

from ..case.uncertainty import CgShift, UncertainParameter, UncertaintySpec  # the case's types
from ..errors import CaseError
from ..model.elements import Delay, Lag, SecondOrderLag
from ..model.loop import Loop

#: Samples per shard: the unit of work (and of regeneration) of a Monte Carlo study.
SHARD_SAMPLES = 4096

#: Derivative axes (fields of :class:`~damper.model.airframe.Derivatives`).
DERIVATIVE_AXES = ("M_alpha", "M_q", "M_alpha_dot", "M_delta", "Z_alpha", "Z_delta", "Z_q", "X_u", "X_alpha", "Z_u", "M_u")
#: Axes of the longitudinal model's speed derivatives (a short-period case has none).
SPEED_AXES = ("X_u", "X_alpha", "Z_u", "M_u")
#: Units of each axis, for outputs.
AXIS_UNITS = {
    "M_alpha": "1/s^2",
    "M_q": "1/s",
    "M_alpha_dot": "1/s",
    "M_delta": "1/s^2",
    "Z_alpha": "m/s^2",
    "Z_delta": "m/s^2",
    "Z_q": "m/s",
    "X_u": "1/s",
    "X_alpha": "m/s^2",
    "Z_u": "1/s",
    "M_u": "1/(m s)",
    "mass": "kg",
    "pitch_inertia": "kg m^2",
    "actuator_bandwidth": "rad/s",
    "actuator_time_constant": "s",
    "sensor_time_constant": "s",
    "delay": "s",
    "loop_gain": "s",
    "cg_shift": "fraction of mean chord (aft +)",
}
_POSITIVE = ("mass", "pitch_inertia", "actuator_bandwidth", "actuator_time_constant", "sensor_time_constant", "delay")


# ---------------------------------------------------------------------------------
# The specification
# ---------------------------------------------------------------------------------
def uncertainty_spec(case, samples=None, seed=None, **overrides) -> UncertaintySpec:
    """The case's ``uncertainty:`` section as an :class:`UncertaintySpec` (defaults if absent).

    `samples` and `seed` override the case's values (e.g. from the command line).
    """
    spec = case.uncertainty or UncertaintySpec()
    given = {k: int(v) for k, v in (("samples", samples), ("seed", seed)) if v is not None}
    return dataclasses.replace(spec, **given, **overrides) if given or overrides else spec


# ---------------------------------------------------------------------------------
# Axes: nominal, centre and half-width of every uncertain quantity at every condition
# ---------------------------------------------------------------------------------
@dataclass(frozen=True)
class Axes:
    """The uncertain quantities, resolved at the case's conditions.

    Attributes
    ----------
    names : tuple of str
        Parameter names in case order, then ``"cg_shift"``.
    units : tuple of str
    distributions : tuple of str
    truncations : tuple of float
        Normal axes: truncation in standard deviations (the sampled ``u = z / truncate``).
    nominal, centre, half : ndarray, shape (p, n_conditions)
        Physical values: value = centre + half u.
    cg_effect : ndarray, shape (n_conditions,)
        Delta M_alpha per unit dx/c, 1/s^2 (zero without a CG shift).
    cg_source : tuple of str
        Where each condition's CL_alpha for the CG effect came from.
    """

    names: tuple
    units: tuple
    distributions: tuple
    truncations: tuple
    nominal: np.ndarray
    centre: np.ndarray
    half: np.ndarray
    cg_effect: np.ndarray
    cg_source: tuple

    @property
    def active(self) -> np.ndarray:
        """Indices of axes with a non-zero width at some condition."""
        return np.flatnonzero(np.any(self.half > 0, axis=1))

    def values(self, i, u) -> np.ndarray:
        """Physical values at condition `i` of normalised point(s) `u` (..., p)."""
        return self.centre[:, i] + self.half[:, i] * np.asarray(u, dtype=float)

    def bounds(self, i):
        """(low, high) physical values of every axis at condition `i`."""
        return self.centre[:, i] - self.half[:, i], self.centre[:, i] + self.half[:, i]


def _nominal_of(case, name, gains, path):
    """Nominal value of a parameter at every condition (raises CaseError if not in the loop)."""
    loop = case.loop
    d = case.derivatives()
    n = len(case.conditions)
    if name in SPEED_AXES and not hasattr(d, name):
        raise CaseError("is a speed derivative of the longitudinal model; this case's model is short_period",
                        path + ".name", name)
    if name in DERIVATIVE_AXES:
        return np.asarray(getattr(d, name), dtype=float)
    if name == "mass":
        return np.array([c.mass for c in case.conditions], dtype=float)
    if name == "pitch_inertia":
        return np.array([c.pitch_inertia for c in case.conditions], dtype=float)
    if name == "loop_gain":
        return np.asarray(gains, dtype=float)
    hw = loop.hardware()
    if name == "actuator_bandwidth":
        if isinstance(hw.actuator, Lag):
            return np.full(n, 1.0 / float(hw.actuator.time_constant))
        if isinstance(hw.actuator, SecondOrderLag):
            return np.full(n, float(hw.actuator.natural_frequency))
        raise CaseError("the loop's actuator is ideal; give loop.actuator to make its bandwidth uncertain", path + ".name", name)
    if name == "actuator_time_constant":
        if isinstance(hw.actuator, Lag):
            return np.full(n, float(hw.actuator.time_constant))
        raise CaseError(
            "needs a first-order actuator (loop.actuator.bandwidth or time_constant); use actuator_bandwidth for a second-order one",
            path + ".name",
            name,
        )
    if name == "sensor_time_constant":
        if isinstance(hw.sensor, Lag):
            return np.full(n, float(hw.sensor.time_constant))
        raise CaseError("needs a first-order rate sensor (loop.rate_sensor.time_constant)", path + ".name", name)
    if name == "delay":
        if hw.delay is None:
            raise CaseError("the loop has no delay; give loop.delay or loop.sample_rate to make it uncertain", path + ".name", name)
        return np.full(n, float(hw.delay.time))
    raise CaseError("unknown parameter", path + ".name", name)


def _cg_effect(case, cg: CgShift):
    """Delta M_alpha per unit dx/c at every condition (1/s^2) and the CL_alpha source."""
    a = case.aircraft
    if a.mean_chord is None:
        raise CaseError("a CG shift needs aircraft.mean_chord", "uncertainty.cg_shift")
    d = case.derivatives()
    effect, source = [], []
    for i, c in enumerate(case.conditions):
        given = c.lift_curve_slope_per_rad  # the condition's coefficients.CL_alpha (None: not given)
        if cg.lift_curve_slope is not None or given is not None:
            if a.wing_area is None:
                raise CaseError("a CG shift with lift_curve_slope needs aircraft.wing_area", "uncertainty.cg_shift")
            cla = float(cg.lift_curve_slope) if cg.lift_curve_slope is not None else float(given)
            src = "uncertainty.cg_shift.lift_curve_slope" if cg.lift_curve_slope is not None else "coefficients.CL_alpha"
            effect.append(cla * c.dynamic_pressure * a.wing_area * a.mean_chord / c.pitch_inertia)
        else:
            # normal-force slope CN_alpha = CL_alpha + CD = -Z_alpha m / (qbar S)
            effect.append(-float(d.Z_alpha[i]) * c.mass * a.mean_chord / c.pitch_inertia)
            src = "normal-force slope from Z_alpha"
        source.append(src)
    return np.array(effect, dtype=float), tuple(source)


def resolve_axes(case, spec: UncertaintySpec, gains) -> Axes:
    """Nominal, centre and half-width of every axis at every condition (validated)."""
    n = len(case.conditions)
    names, units, dists, truncs, nominal, centre, half = [], [], [], [], [], [], []
    for p in spec.parameters:
        nom = _nominal_of(case, p.name, gains, p.path)
        h = p.spread(nom) * p.half_width_factor
        key = "relative" if p.relative is not None else "absolute"
        if p.name in _POSITIVE and np.any(nom - h <= 0):
            i = int(np.argmax(nom - h <= 0))
            raise CaseError(
                f"lets {p.name} reach {nom[i] - h[i]:.4g} {AXIS_UNITS[p.name]} at {case.conditions[i].name} "
                f"(nominal {nom[i]:.4g}); it must stay positive",
                f"{p.path}.{key}",
                p.relative if p.relative is not None else p.absolute,
            )
        if p.name == "M_delta" and np.any(h >= np.abs(nom)):
            raise CaseError(
                "lets M_delta reach zero (the damper's sign is fixed by design); keep the spread below |M_delta|",
                f"{p.path}.{key}",
                p.relative if p.relative is not None else p.absolute,
            )
        names.append(p.name)
        units.append(AXIS_UNITS[p.name])
        dists.append(p.distribution)
        truncs.append(float(p.truncate) if p.distribution == "normal" else 0.0)
        nominal.append(nom)
        centre.append(nom)
        half.append(h)
    effect = np.zeros(n)
    source = ("none",) * n
    if spec.cg_shift is not None:
        cg = spec.cg_shift
        effect, source = _cg_effect(case, cg)
        names.append("cg_shift")
        units.append(AXIS_UNITS["cg_shift"])
        dists.append("uniform")
        truncs.append(0.0)
        nominal.append(np.zeros(n))
        centre.append(np.full(n, 0.5 * (cg.low + cg.high)))
        half.append(np.full(n, 0.5 * (cg.high - cg.low)))
    p = len(names)
    shape = (p, n)
    return Axes(
        names=tuple(names),
        units=tuple(units),
        distributions=tuple(dists),
        truncations=tuple(truncs),
        nominal=np.array(nominal, dtype=float).reshape(shape),
        centre=np.array(centre, dtype=float).reshape(shape),
        half=np.array(half, dtype=float).reshape(shape),
        cg_effect=effect,
        cg_source=source,
    )


# ---------------------------------------------------------------------------------
# Sampling
# ---------------------------------------------------------------------------------
def _to_u(axes: Axes, r) -> np.ndarray:
    """Normalised coordinates from uniform draws `r` (..., p) on [0, 1)."""
    from scipy.special import ndtr, ndtri

    u = 2.0 * r - 1.0
    for k, (dist, t) in enumerate(zip(axes.distributions, axes.truncations)):
        if dist == "normal":
            lo = ndtr(-t)
            z = ndtri(lo + r[..., k] * (1.0 - 2.0 * lo))
            u[..., k] = np.clip(z / t, -1.0, 1.0)
    return u


def sample_rows(axes: Axes, seed: int, start: int, count: int) -> np.ndarray:
    """Samples ``start`` to ``start + count - 1`` of the study, shape (count, p).

    Row ``g`` is row ``g`` of ``default_rng(seed).random((samples, p))`` mapped to ``u``,
    found by advancing the generator ``g p`` draws: no other row is drawn. Uniform axes:
    ``u`` uniform on [-1, 1]. Normal axes: ``u = z / truncate`` with ``z`` standard normal
    truncated to [-truncate, truncate] (inverse CDF of the same uniform draw).
    """
    p = len(axes.names)
    bits = np.random.PCG64(seed)
    bits.advance(int(start) * p)
    r = np.random.Generator(bits).random((int(count), p))
    return _to_u(axes, r)


def sample_at(axes: Axes, seed: int, indices) -> np.ndarray:
    """The samples of the given global indices, shape (len(indices), p)."""
    indices = np.asarray(indices, dtype=np.int64).reshape(-1)
    rows = [sample_rows(axes, seed, int(g), 1) for g in indices]
    return np.concatenate(rows) if rows else np.zeros((0, len(axes.names)))


def draw_samples(axes: Axes, samples: int, seed: int) -> np.ndarray:
    """All samples of a study, shape (samples, p): shard after shard (:func:`sample_rows`)."""
    parts = [sample_rows(axes, seed, s, min(SHARD_SAMPLES, samples - s)) for s in range(0, samples, SHARD_SAMPLES)]
    return np.concatenate(parts) if parts else np.zeros((0, len(axes.names)))


def corner_points(axes: Axes, spec: UncertaintySpec):
    """Corners of the active axes (inactive axes at 0): all, or a seeded subset.

    Returns
    -------
    u : ndarray, shape (n_corners, p)
    complete : bool
        True when every corner is included.
    """
    active = axes.active
    p = len(axes.names)
    pa = len(active)
    if pa == 0:
        return np.zeros((0, p)), True
    if pa <= spec.max_corner_axes:
        bits = np.array(list(itertools.product((-1.0, 1.0), repeat=pa)))
        complete = True
    else:
        rng = np.random.default_rng([spec.seed, 2])
        count = min(spec.corner_subset, 2**pa)
        idx = np.sort(rng.choice(2**pa, size=count, replace=False))
        bits = ((idx[:, None] >> np.arange(pa)[None, ::-1]) & 1) * 2.0 - 1.0
        complete = count == 2**pa
    u = np.zeros((bits.shape[0], p))
    u[:, active] = bits
    return u, complete


def sampled_loop(case, axes: Axes, gains, cidx, u) -> Loop:
    """Loops at condition indices `cidx` (batch shape B) and normalised points `u` (B + (p,)).

    `cidx` and `u[..., 0]` broadcast against each other (e.g. (n, 1) and (1, m)).
    ``u = None`` gives the nominal loops (every axis at the case's value, e.g. no CG
    shift even when the CG range is not centred on zero).
    """
    d0 = case.derivatives()
    cidx = np.asarray(cidx)
    u = None if u is None else np.asarray(u, dtype=float)
    kind = type(d0)  # either airframe model: the longitudinal fields survive the sampling
    fields = {f: np.asarray(getattr(d0, f), dtype=float)[cidx] for f in kind.__dataclass_fields__}
    gain = np.asarray(gains, dtype=float)[cidx]
    hw = case.loop.hardware()
    changes = {}
    scale_z = scale_m = None

    def value(k):
        if u is None:
            return axes.nominal[k][cidx]
        return axes.centre[k][cidx] + axes.half[k][cidx] * u[..., k]

    for k, name in enumerate(axes.names):
        if name in DERIVATIVE_AXES:
            fields[name] = value(k)
        elif name == "cg_shift":
            fields["M_alpha"] = fields["M_alpha"] + axes.cg_effect[cidx] * value(k)
        elif name == "mass":
            scale_z = axes.nominal[k][cidx] / value(k)
        elif name == "pitch_inertia":
            scale_m = axes.nominal[k][cidx] / value(k)
        elif name == "loop_gain":
            gain = value(k)
        elif name == "actuator_bandwidth":
            b = value(k)
            if isinstance(hw.actuator, Lag):
                changes["actuator"] = Lag(np.asarray(hw.actuator.time_constant) * (axes.nominal[k][cidx] / b))
            else:
                changes["actuator"] = dataclasses.replace(hw.actuator, natural_frequency=b)
        elif name == "actuator_time_constant":
            changes["actuator"] = Lag(value(k))
        elif name == "sensor_time_constant":
            changes["sensor"] = Lag(value(k))
        elif name == "delay":
            changes["delay"] = Delay(value(k), hw.delay.pade_order)
    if scale_z is not None:
        for f in ("Z_alpha", "Z_q", "Z_delta", "X_u", "X_alpha", "Z_u", "X_delta"):
            if f in fields:
                fields[f] = fields[f] * scale_z
    if scale_m is not None:
        for f in ("M_alpha", "M_alpha_dot", "M_q", "M_delta", "M_u"):
            if f in fields:
                fields[f] = fields[f] * scale_m
    if changes:
        hw = dataclasses.replace(hw, **changes)
    return Loop(kind(**fields), hw, gain)


__all__ = [
    "AXIS_UNITS",
    "Axes",
    "CgShift",
    "DERIVATIVE_AXES",
    "SHARD_SAMPLES",
    "UncertainParameter",
    "UncertaintySpec",
    "corner_points",
    "draw_samples",
    "resolve_axes",
    "sample_at",
    "sample_rows",
    "sampled_loop",
    "uncertainty_spec",
]

"""Robustness of a damper design to derivative, mass, CG, hardware and gain uncertainty.

Method (docs/robustness.md has the full statement):

* Every uncertain quantity is one *axis* with a normalised coordinate ``u`` in [-1, 1];
  its value at condition ``i`` is ``centre_i + half_i u`` (``centre`` the case's nominal,
  ``half`` the spread, or for a normal parameter ``truncate * sigma``). One sample is one
  vector ``u``, applied at every condition (the errors are fully correlated across
  conditions: one airframe, one set of data), so the joint pass fraction over all
  conditions is meaningful.
* **Monte Carlo**: ``samples`` vectors from ``np.random.default_rng(seed)`` (uniform, or a
  truncated normal by the inverse-CDF method), evaluated as batches of shape
  (conditions, samples-in-chunk) with one :func:`damper.analysis.assess.assess_loop` call
  per chunk (about ``chunk`` loops each), optionally on a thread pool (numpy releases the
  GIL in its linear algebra). Results do not depend on the number of workers.
* **Corners**: all ``2^p`` corners of the active axes when ``p <= 12``, else a seeded random
  subset of distinct corners (4096).
* **Worst-case refinement**: for the damping-ratio criterion and each margin criterion at
  each condition, a projected compass (coordinate pattern) search in the box
  ``[-1, 1]^p`` starts from the worst few evaluated points (samples and corners) and only
  accepts strict decreases of the criterion's slack, so the refined worst is never better
  than the worst evaluated point. All searches poll in one batch per iteration.
* **Pass fractions** with a Clopper-Pearson interval; **sensitivity** as the Spearman rank
  correlation of each axis with each criterion's slack (and with the worst slack).

CG shift (aft positive, fraction ``dx/c`` of the mean chord)::

    Delta Cm_alpha = CL_alpha dx/c        Delta M_alpha = CL_alpha qbar S c (dx/c) / Iy

The matching changes of ``M_alpha_dot``, ``M_q`` and ``M_delta`` (tail arm ``l_t``
shortened by ``dx``: relative changes of order ``dx / l_t``) and of ``Z_q`` are neglected.

Zero uncertainty gives exactly the nominal answer: every transformation is the identity
at ``u = 0`` bit for bit (``nominal + 0``, ratios ``x / x = 1``).
"""

from __future__ import annotations

import dataclasses
import itertools
import os
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass

import numpy as np

from ..errors import CaseError
from ..model.airframe import Derivatives
from ..model.elements import Delay, Lag, SecondOrderLag
from ..model.loop import Loop
from ..requirements.criteria import Criterion, measure_values
from .assess import assess_loop

#: Criteria whose worst case is refined by the local search.
REFINED_CRITERIA = ("damping_ratio", "gain_margin", "phase_margin", "delay_margin", "disk_margin")
#: Derivative axes (fields of :class:`~damper.model.airframe.Derivatives`).
DERIVATIVE_AXES = ("M_alpha", "M_q", "M_alpha_dot", "M_delta", "Z_alpha", "Z_delta", "Z_q")
#: Units of each axis, for outputs.
AXIS_UNITS = {
    "M_alpha": "1/s^2",
    "M_q": "1/s",
    "M_alpha_dot": "1/s",
    "M_delta": "1/s^2",
    "Z_alpha": "m/s^2",
    "Z_delta": "m/s^2",
    "Z_q": "m/s",
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


def uncertainty_spec(case, samples=None, seed=None, **overrides) -> UncertaintySpec:
    """The case's ``uncertainty:`` section as an :class:`UncertaintySpec` (defaults if absent).

    `samples` and `seed` override the case's values (e.g. from the command line).
    """
    raw = (case.raw or {}).get("uncertainty") or {}
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
        for k, p in enumerate(raw.get("parameters") or ())
    )
    cg = raw.get("cg_shift")
    cg = CgShift(float(cg["range"][0]), float(cg["range"][1]), cg.get("lift_curve_slope")) if cg else None
    spec = UncertaintySpec(
        samples=int(samples if samples is not None else raw.get("samples", 2000)),
        seed=int(seed if seed is not None else raw.get("seed", 1)),
        confidence=float(raw.get("confidence", 0.95)),
        parameters=params,
        cg_shift=cg,
        schedule_points=int(raw.get("schedule_points", 12)),
    )
    return dataclasses.replace(spec, **overrides) if overrides else spec


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
    raw_conditions = {c.get("name"): c for c in (case.raw or {}).get("conditions") or ()}
    d = case.derivatives()
    effect, source = [], []
    for i, c in enumerate(case.conditions):
        coefs = (raw_conditions.get(c.name) or {}).get("coefficients")
        if cg.lift_curve_slope is not None or coefs is not None:
            if a.wing_area is None:
                raise CaseError("a CG shift with lift_curve_slope needs aircraft.wing_area", "uncertainty.cg_shift")
            cla = float(cg.lift_curve_slope) if cg.lift_curve_slope is not None else float(coefs["CL_alpha"])
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
def draw_samples(axes: Axes, samples: int, seed: int) -> np.ndarray:
    """Normalised samples ``u``, shape (samples, p), from ``np.random.default_rng(seed)``.

    Uniform axes: ``u`` uniform on [-1, 1]. Normal axes: ``u = z / truncate`` with ``z``
    standard normal truncated to [-truncate, truncate] (inverse CDF of one uniform draw).
    """
    from scipy.special import ndtr, ndtri

    rng = np.random.default_rng(seed)
    r = rng.random((samples, len(axes.names)))
    u = 2.0 * r - 1.0
    for k, (dist, t) in enumerate(zip(axes.distributions, axes.truncations)):
        if dist == "normal":
            lo = ndtr(-t)
            z = ndtri(lo + r[:, k] * (1.0 - 2.0 * lo))
            u[:, k] = np.clip(z / t, -1.0, 1.0)
    return u


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


# ---------------------------------------------------------------------------------
# Building and evaluating sampled loops
# ---------------------------------------------------------------------------------
def sampled_loop(case, axes: Axes, gains, cidx, u) -> Loop:
    """Loops at condition indices `cidx` (batch shape B) and normalised points `u` (B + (p,)).

    `cidx` and `u[..., 0]` broadcast against each other (e.g. (n, 1) and (1, m)).
    ``u = None`` gives the nominal loops (every axis at the case's value, e.g. no CG
    shift even when the CG range is not centred on zero).
    """
    d0 = case.derivatives()
    cidx = np.asarray(cidx)
    u = None if u is None else np.asarray(u, dtype=float)
    fields = {f: np.asarray(getattr(d0, f), dtype=float)[cidx] for f in Derivatives.__dataclass_fields__}
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
        for f in ("Z_alpha", "Z_q", "Z_delta"):
            fields[f] = fields[f] * scale_z
    if scale_m is not None:
        for f in ("M_alpha", "M_alpha_dot", "M_q", "M_delta"):
            fields[f] = fields[f] * scale_m
    if changes:
        hw = dataclasses.replace(hw, **changes)
    return Loop(Derivatives(**fields), hw, gain)


def _gain_margin_criterion():
    return Criterion("gain_margin", -np.inf, np.inf, "")


def evaluate_points(case, axes: Axes, gains, cidx, u) -> dict:
    """Assess sampled loops; arrays of the batch shape (criteria first for values/slacks)."""
    loop = sampled_loop(case, axes, gains, cidx, u)
    req = case.requirements
    a = assess_loop(loop, w=case.settings.grid(), requirements=req)
    shape = a.criteria.values.shape[1:]
    return {
        "values": a.criteria.values,
        "slacks": a.criteria.slacks,
        "damping": np.broadcast_to(a.damping_ratio(req.damping_measure), shape),
        "gain_margin": np.broadcast_to(measure_values(_gain_margin_criterion(), a), shape),
        "phase_margin": np.broadcast_to(a.margins.phase_margin_deg, shape),
        "unconverged": np.broadcast_to(~np.asarray(a.equivalent.converged, dtype=bool), shape),
        "ambiguous": np.broadcast_to(np.asarray(a.modes.ambiguous, dtype=bool), shape),
    }


def _evaluate_flat(case, axes, gains, cidx, u, chunk, pool=None):
    """Evaluate flat points (cidx (M,), u (M, p)) in chunks; concatenate."""
    m = len(cidx)
    starts = list(range(0, m, chunk)) or [0]

    def one(s):
        return evaluate_points(case, axes, gains, cidx[s : s + chunk], u[s : s + chunk])

    parts = list(pool.map(one, starts)) if pool is not None else [one(s) for s in starts]
    return {k: np.concatenate([p[k] for p in parts], axis=-1) for k in parts[0]}


# ---------------------------------------------------------------------------------
# Statistics
# ---------------------------------------------------------------------------------
def clopper_pearson(k, n, confidence=0.95):
    """Exact (Clopper-Pearson) binomial confidence interval of a fraction ``k / n``.

    ``lower = B^-1(a/2; k, n - k + 1)`` (0 when k = 0), ``upper = B^-1(1 - a/2; k + 1, n - k)``
    (1 when k = n), ``a = 1 - confidence``, ``B^-1`` the beta quantile.

    Returns
    -------
    lower, upper : ndarray
    """
    from scipy.special import betaincinv  # the beta quantile (scipy.stats.beta.ppf), without importing scipy.stats

    k = np.asarray(k, dtype=float)
    n = np.asarray(n, dtype=float)
    a = 1.0 - confidence
    with np.errstate(invalid="ignore", divide="ignore"):
        lo = np.where(k > 0, betaincinv(np.maximum(k, 1e-300), n - k + 1.0, a / 2.0), 0.0)
        hi = np.where(k < n, betaincinv(k + 1.0, np.maximum(n - k, 1e-300), 1.0 - a / 2.0), 1.0)
    return lo, hi


def average_ranks(a):
    """1-based ranks along the last axis of `a` (r, N), tied values sharing their mean rank.

    The ``"average"`` method of ``scipy.stats.rankdata``, row by row, in numpy (importing
    scipy.stats costs more than ranking 10,000 samples): infinite values rank as the
    extremes, and a row holding NaN is all NaN (scipy's default ``nan_policy``).
    """
    a = np.asarray(a, dtype=float)
    n = a.shape[-1]
    order = np.argsort(a, axis=-1, kind="stable")
    v = np.take_along_axis(a, order, -1)
    idx = np.broadcast_to(np.arange(n), a.shape)
    first = np.ones(a.shape, dtype=bool)  # first of a run of equal sorted values
    first[..., 1:] = v[..., 1:] != v[..., :-1]
    last = np.ones(a.shape, dtype=bool)
    last[..., :-1] = first[..., 1:]
    start = np.maximum.accumulate(np.where(first, idx, 0), axis=-1)
    end = np.flip(np.minimum.accumulate(np.flip(np.where(last, idx, n - 1), -1), axis=-1), -1)
    ranks = np.empty(a.shape)
    np.put_along_axis(ranks, order, 0.5 * (start + end) + 1.0, -1)
    return np.where(np.isnan(a).any(-1, keepdims=True), np.nan, ranks)


def spearman(x, y):
    """Spearman rank correlation of every row of `x` (p, N) with every row of `y` (q, N).

    Average ranks for ties (:func:`average_ranks`); infinite values rank as the
    extremes. Constant rows give NaN. Returns shape (p, q).
    """
    rx = average_ranks(x)
    ry = average_ranks(y)
    rx = rx - rx.mean(-1, keepdims=True)
    ry = ry - ry.mean(-1, keepdims=True)
    num = rx @ ry.T
    den = np.sqrt(np.sum(rx * rx, -1))[:, None] * np.sqrt(np.sum(ry * ry, -1))[None, :]
    with np.errstate(invalid="ignore", divide="ignore"):
        rho = num / den
    return np.where(den > 0, rho, np.nan)


# ---------------------------------------------------------------------------------
# Results
# ---------------------------------------------------------------------------------
@dataclass(frozen=True)
class WorstCase:
    """The worst point found for one criterion at one condition.

    Attributes
    ----------
    criterion : str
    value : float
        The criterion's measure there (its unit; NaN: undefined).
    slack : float
        Normalised slack (negative: missed).
    u : ndarray, shape (p,)
        Normalised coordinates.
    parameters : ndarray, shape (p,)
        Physical values of every axis (see ``RobustnessResult.axes.units``).
    source : str
        ``"sample"``, ``"corner"``, ``"refined"`` or ``"nominal"`` (nothing uncertain).
    index : int
        Sample or corner index (-1 for refined).
    start_slack : float
        Slack of the worst evaluated point (sample or corner) before refinement.
    evaluations : int
        Loops the refinement evaluated for this criterion (0 if not refined).
    values, slacks : ndarray, shape (n_criteria,)
        Every criterion's value and slack at this point.
    damping : float
        Damping ratio there (by the requirements' damping measure).
    gain_margin : float
        Smallest gain margin there, dB (NaN: unbounded).
    phase_margin : float
        deg (NaN: no gain crossing).
    """

    criterion: str
    value: float
    slack: float
    u: np.ndarray
    parameters: np.ndarray
    source: str
    index: int
    start_slack: float
    evaluations: int = 0
    values: np.ndarray = None
    slacks: np.ndarray = None
    damping: float = float("nan")
    gain_margin: float = float("nan")
    phase_margin: float = float("nan")


@dataclass(frozen=True)
class ConditionRobustness:
    """Robustness at one condition.

    Attributes
    ----------
    name : str
    gain : float
        Nominal gain K, s.
    nominal_values, nominal_slacks : ndarray, shape (n_criteria,)
    nominal_met : bool
        Every requirement met at the nominal point.
    samples : int
    passed : ndarray of int, shape (n_criteria,)
        Samples meeting each requirement.
    passed_all : int
    fraction, lower, upper : ndarray, shape (n_criteria,)
        Pass fraction and its Clopper-Pearson interval.
    fraction_all, lower_all, upper_all : float
    worst : tuple of WorstCase
        One per criterion, in the order of ``RobustnessResult.criteria``.
    sensitivity : ndarray, shape (p, n_criteria + 1)
        Spearman rank correlation of each axis with each criterion's slack; last column:
        with the worst slack. NaN for an axis without width here or a constant slack.
    ranking : tuple of int
        Axis indices by decreasing ``|rho|`` with the worst slack (NaN last).
    corners : int
    corners_passed_all : int
    unconverged_fits : int
        Samples whose equivalent-system fit did not converge.
    ambiguous_modes : int
        Samples whose short-period pick was ambiguous.
    cg_source : str
    """

    name: str
    gain: float
    nominal_values: np.ndarray
    nominal_slacks: np.ndarray
    nominal_met: bool
    samples: int
    passed: np.ndarray
    passed_all: int
    fraction: np.ndarray
    lower: np.ndarray
    upper: np.ndarray
    fraction_all: float
    lower_all: float
    upper_all: float
    worst: tuple
    sensitivity: np.ndarray
    ranking: tuple
    corners: int
    corners_passed_all: int
    unconverged_fits: int
    ambiguous_modes: int
    cg_source: str

    def top_driver(self):
        """Index of the axis most correlated with the worst slack (None if none)."""
        if not self.ranking or not np.isfinite(self.sensitivity[self.ranking[0], -1]):
            return None
        return self.ranking[0]


@dataclass(frozen=True)
class RobustnessResult:
    """Monte Carlo, corners and worst-case search at every condition.

    Attributes
    ----------
    spec : UncertaintySpec
    axes : Axes
    criteria : tuple of Criterion
    damping_measure : str
    gains : ndarray, shape (n_conditions,)
        s.
    conditions : tuple of ConditionRobustness
    joint_passed : int
        Samples meeting every requirement at every condition.
    joint_fraction, joint_lower, joint_upper : float
    samples_u : ndarray, shape (samples, p)
    values, slacks : ndarray, shape (n_criteria, n_conditions, samples)
    damping : ndarray, shape (n_conditions, samples)
        Short-period damping ratio by ``damping_measure``.
    gain_margin : ndarray, shape (n_conditions, samples)
        Smallest of the up and down gain margins, dB (NaN: unbounded).
    phase_margin : ndarray, shape (n_conditions, samples)
        deg.
    corners_u : ndarray, shape (n_corners, p)
    corners_complete : bool
    corner_slacks : ndarray, shape (n_criteria, n_conditions, n_corners)
    evaluations : int
        Loops evaluated in all.
    """

    spec: UncertaintySpec
    axes: Axes
    criteria: tuple
    damping_measure: str
    gains: np.ndarray
    conditions: tuple
    joint_passed: int
    joint_fraction: float
    joint_lower: float
    joint_upper: float
    samples_u: np.ndarray
    values: np.ndarray
    slacks: np.ndarray
    damping: np.ndarray
    gain_margin: np.ndarray
    phase_margin: np.ndarray
    corners_u: np.ndarray
    corners_complete: bool
    corner_slacks: np.ndarray
    evaluations: int


# ---------------------------------------------------------------------------------
# The analysis
# ---------------------------------------------------------------------------------
def _workers(workers):
    if workers is None:
        workers = min(2, os.cpu_count() or 1)
    return max(1, int(workers))


def _monte_carlo(case, axes, gains, u, chunk, pool, progress, stage):
    """Evaluate points `u` (N, p) at every condition: arrays (..., n, N)."""
    n = len(case.conditions)
    total = u.shape[0]
    per = max(1, chunk // max(n, 1))
    starts = list(range(0, total, per))
    cidx = np.arange(n)[:, None]

    def one(s):
        return evaluate_points(case, axes, gains, cidx, u[None, s : s + per, :])

    parts = [None] * len(starts)
    done = 0
    if progress:
        progress(0, total, stage)
    if pool is None:
        for j, s in enumerate(starts):
            parts[j] = one(s)
            done += min(per, total - s)
            if progress:
                progress(done, total, stage)
    else:
        futures = [pool.submit(one, s) for s in starts]
        for j, f in enumerate(futures):  # in order: results never depend on timing
            parts[j] = f.result()
            done += min(per, total - starts[j])
            if progress:
                progress(done, total, stage)
    if not parts:
        return None
    return {k: np.concatenate([p[k] for p in parts], axis=-1) for k in parts[0]}


def _refine(case, axes, gains, spec, targets, pool_u, pool_slack, pool_value, chunk, pool, progress):
    """Compass search for the worst slack of each (condition, target criterion).

    Returns dict (i, c) -> (u, slack, value, start_slack, evaluations), only where a
    search ran.
    """
    active = axes.active
    n = len(case.conditions)
    tracks = []  # (i, c, u0, f0, v0)
    for i in range(n):
        for c in targets:
            s = pool_slack[c, i]
            order = np.argsort(s, kind="stable")
            seen = []
            for j in order:
                if not np.isfinite(s[j]):
                    if s[j] == -np.inf:
                        break  # already the worst possible (undefined and failed)
                    continue
                key = tuple(pool_u[j])
                if key in seen:
                    continue
                seen.append(key)
                tracks.append((i, c, pool_u[j].copy(), float(s[j]), float(pool_value[c, i, j])))
                if len(seen) >= spec.refine_starts:
                    break
    out = {}
    if not tracks or len(active) == 0:
        return out
    t_i = np.array([t[0] for t in tracks])
    t_c = np.array([t[1] for t in tracks])
    u = np.array([t[2] for t in tracks])
    f = np.array([t[3] for t in tracks])
    v = np.array([t[4] for t in tracks])
    f0 = f.copy()
    step = np.full(len(tracks), 0.5)
    live = np.ones(len(tracks), bool)
    evals = np.zeros(len(tracks), int)
    pa = len(active)
    for it in range(spec.refine_iterations):
        idx = np.flatnonzero(live)
        if idx.size == 0:
            break
        cand = np.repeat(u[idx][:, None, :], 2 * pa, axis=1)  # (T, 2pa, p)
        sign = np.concatenate([np.ones(pa), -np.ones(pa)])
        cols = np.concatenate([active, active])
        rows = np.arange(2 * pa)
        moved = np.clip(cand[:, rows, cols] + sign[None, :] * step[idx][:, None], -1.0, 1.0)
        changed = moved != cand[:, rows, cols]
        cand[:, rows, cols] = moved
        tt, jj = np.nonzero(changed)
        if tt.size == 0:
            live[idx] = False
            break
        track = idx[tt]
        pts = cand[tt, jj]
        res = _evaluate_flat(case, axes, gains, t_i[track], pts, chunk, pool)
        np.add.at(evals, track, 1)
        s_all = res["slacks"][t_c[track], np.arange(track.size)]
        v_all = res["values"][t_c[track], np.arange(track.size)]
        order = np.lexsort((s_all, track))
        first = np.unique(track[order], return_index=True)[1]
        best = order[first]
        bt = track[best]
        improve = s_all[best] < f[bt]
        mv = bt[improve]
        u[mv] = pts[best[improve]]
        f[mv] = s_all[best[improve]]
        v[mv] = v_all[best[improve]]
        stay = np.setdiff1d(idx, mv)
        step[stay] *= 0.5
        live[stay[step[stay] < spec.refine_min_step]] = False
        live[f == -np.inf] = False
        if progress:
            progress(it + 1, spec.refine_iterations, "worst-case search")
    if progress:
        progress(spec.refine_iterations, spec.refine_iterations, "worst-case search")
    for k in range(len(tracks)):
        key = (int(t_i[k]), int(t_c[k]))
        prev = out.get(key)
        total_evals = (prev[4] if prev else 0) + int(evals[k])
        if prev is None or f[k] < prev[1]:
            out[key] = (u[k].copy(), float(f[k]), float(v[k]), float(f0[k]) if prev is None else min(prev[3], f0[k]), total_evals)
        else:
            out[key] = (prev[0], prev[1], prev[2], min(prev[3], f0[k]), total_evals)
    return out


def robustness(case, gains, spec: UncertaintySpec | None = None, *, progress=None, workers=None, refine=True) -> RobustnessResult:
    """Monte Carlo, corners and worst-case search of `case` with `gains`.

    Parameters
    ----------
    case : Case
    gains : float or array_like, shape (n_conditions,)
        Nominal pitch-rate gain K per condition, s.
    spec : UncertaintySpec, optional
        Default: :func:`uncertainty_spec` of the case.
    progress : callable, optional
        ``progress(done, total, stage)`` after each chunk (stage: ``"samples"``,
        ``"corners"``, ``"worst-case search"``).
    workers : int, optional
        Threads evaluating chunks (default: up to 2). Results do not depend on it.
    refine : bool
        Run the worst-case search.
    """
    spec = spec or uncertainty_spec(case)
    n = len(case.conditions)
    g = np.asarray(gains, dtype=float)
    g = np.full(n, float(g)) if g.ndim == 0 else g.reshape(n)
    axes = resolve_axes(case, spec, g)
    p = len(axes.names)
    crit = tuple(case.requirements.criteria)
    n_workers = _workers(workers)
    pool = ThreadPoolExecutor(n_workers) if n_workers > 1 else None
    try:
        nominal = evaluate_points(case, axes, g, np.arange(n), None)
        u = draw_samples(axes, spec.samples, spec.seed)
        mc = _monte_carlo(case, axes, g, u, spec.chunk, pool, progress, "samples")
        corners_u, complete = corner_points(axes, spec)
        corners = _monte_carlo(case, axes, g, corners_u, spec.chunk, pool, progress, "corners") if len(corners_u) else None
        evaluations = n * (1 + spec.samples + len(corners_u))
        if corners is not None:
            pool_u = np.concatenate([u, corners_u])
            pool_slack = np.concatenate([mc["slacks"], corners["slacks"]], -1)
            pool_value = np.concatenate([mc["values"], corners["values"]], -1)
        else:
            pool_u, pool_slack, pool_value = u, mc["slacks"], mc["values"]
        targets = [k for k, c in enumerate(crit) if c.name in REFINED_CRITERIA]
        refined = {}
        if refine and p:
            refined = _refine(case, axes, g, spec, targets, pool_u, pool_slack, pool_value, spec.chunk, pool, progress)
            evaluations += sum(r[4] for r in refined.values())
    finally:
        if pool is not None:
            pool.shutdown()

    slacks, values = mc["slacks"], mc["values"]
    met = slacks >= 0
    passed = met.sum(-1)  # (n_crit, n)
    all_met = np.all(met, 0)  # (n, N)
    passed_all = all_met.sum(-1)
    N = spec.samples
    lo, hi = clopper_pearson(passed, N, spec.confidence)
    lo_all, hi_all = clopper_pearson(passed_all, N, spec.confidence)
    joint = int(np.all(all_met, 0).sum())
    j_lo, j_hi = clopper_pearson(joint, N, spec.confidence)
    n_samples = spec.samples
    worst_slack = np.min(slacks, 0)  # (n, N)
    conditions = []
    for i in range(n):
        worst = []
        for c in range(len(crit)):
            j = int(np.argmin(pool_slack[c, i]))
            start = float(pool_slack[c, i, j])
            if p == 0:
                source = "nominal"
            else:
                source = "sample" if j < n_samples else "corner"
            w_u = pool_u[j]
            w_slack, w_value, index, evals = start, float(pool_value[c, i, j]), (j if j < n_samples else j - n_samples), 0
            r = refined.get((i, c))
            if r is not None:
                evals = r[4]
                if r[1] < w_slack:
                    w_u, w_slack, w_value, source, index = r[0], r[1], r[2], "refined", -1
            worst.append(
                WorstCase(
                    criterion=crit[c].name,
                    value=w_value,
                    slack=w_slack,
                    u=np.asarray(w_u, dtype=float).copy(),
                    parameters=axes.values(i, w_u),
                    source=source,
                    index=index,
                    start_slack=start,
                    evaluations=evals,
                )
            )
        conditions.append(worst)
    # every measure at every worst point (one batch): the plots and tables show them together
    wi = np.repeat(np.arange(n), len(crit))
    wu = np.array([w.u for ws in conditions for w in ws]).reshape(n * len(crit), p)
    at = evaluate_points(case, axes, g, wi, wu) if (wi.size and p) else None
    worst_lists = []
    for i in range(n):
        ws = []
        for c, w in enumerate(conditions[i]):
            k = i * len(crit) + c
            if p == 0:  # nothing uncertain: exactly the nominal values
                vals, sl = nominal["values"][:, i], nominal["slacks"][:, i]
                extra = dict(damping=float(nominal["damping"][i]), gain_margin=float(nominal["gain_margin"][i]),
                             phase_margin=float(nominal["phase_margin"][i]))
            else:
                vals, sl = at["values"][:, k], at["slacks"][:, k]
                extra = dict(damping=float(at["damping"][k]), gain_margin=float(at["gain_margin"][k]),
                             phase_margin=float(at["phase_margin"][k]))
            ws.append(dataclasses.replace(w, values=vals.copy(), slacks=sl.copy(), **extra))
        worst_lists.append(tuple(ws))
    conditions = []
    for i in range(n):
        worst = worst_lists[i]
        if p and N > 1:
            ys = np.concatenate([slacks[:, i, :], worst_slack[i][None, :]], 0)
            rho = spearman(u.T, ys)
            rho[axes.half[:, i] == 0, :] = np.nan
        else:
            rho = np.full((p, len(crit) + 1), np.nan)
        key = np.where(np.isfinite(rho[:, -1]), -np.abs(rho[:, -1]), np.inf) if p else np.zeros(0)
        ranking = tuple(int(k) for k in np.argsort(key, kind="stable"))
        n_corners = len(corners_u)
        corners_ok = int(np.all(corners["slacks"][:, i, :] >= 0, 0).sum()) if corners is not None else 0
        conditions.append(
            ConditionRobustness(
                name=case.conditions[i].name,
                gain=float(g[i]),
                nominal_values=nominal["values"][:, i].copy(),
                nominal_slacks=nominal["slacks"][:, i].copy(),
                nominal_met=bool(np.all(nominal["slacks"][:, i] >= 0)),
                samples=N,
                passed=passed[:, i].astype(int),
                passed_all=int(passed_all[i]),
                fraction=passed[:, i] / N,
                lower=lo[:, i],
                upper=hi[:, i],
                fraction_all=float(passed_all[i] / N),
                lower_all=float(lo_all[i]),
                upper_all=float(hi_all[i]),
                worst=tuple(worst),
                sensitivity=rho,
                ranking=ranking,
                corners=n_corners,
                corners_passed_all=corners_ok,
                unconverged_fits=int(mc["unconverged"][i].sum()),
                ambiguous_modes=int(mc["ambiguous"][i].sum()),
                cg_source=axes.cg_source[i],
            )
        )
    return RobustnessResult(
        spec=spec,
        axes=axes,
        criteria=crit,
        damping_measure=case.requirements.damping_measure,
        gains=g,
        conditions=tuple(conditions),
        joint_passed=joint,
        joint_fraction=joint / N,
        joint_lower=float(j_lo),
        joint_upper=float(j_hi),
        samples_u=u,
        values=values,
        slacks=slacks,
        damping=mc["damping"],
        gain_margin=mc["gain_margin"],
        phase_margin=mc["phase_margin"],
        corners_u=corners_u,
        corners_complete=complete,
        corner_slacks=corners["slacks"] if corners is not None else np.zeros((len(crit), n, 0)),
        evaluations=int(evaluations),
    )


def gains_from_design(case, doc) -> np.ndarray:
    """Chosen gains (s) per condition from a ``design.json`` document, matched by name.

    Raises
    ------
    DamperError
        If a condition of the case is missing from the design or has no chosen gain.
    """
    from ..errors import DamperError

    by_name = {c.get("name"): c for c in doc.get("conditions", ())}
    out = []
    for cond in case.conditions:
        entry = by_name.get(cond.name)
        if entry is None:
            raise DamperError(f"design.json has no condition named {cond.name!r} (it has {', '.join(map(str, by_name))})")
        k = entry.get("chosen_gain_s")
        if k is None or not np.isfinite(float(k)):
            raise DamperError(f"design.json: condition {cond.name!r} has no chosen gain")
        out.append(float(k))
    return np.array(out)


__all__ = [
    "Axes",
    "CgShift",
    "ConditionRobustness",
    "RobustnessResult",
    "UncertainParameter",
    "UncertaintySpec",
    "WorstCase",
    "clopper_pearson",
    "corner_points",
    "draw_samples",
    "gains_from_design",
    "resolve_axes",
    "robustness",
    "sampled_loop",
    "spearman",
    "uncertainty_spec",
]

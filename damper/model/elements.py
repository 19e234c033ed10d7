"""Hardware elements of the pitch-rate loop.

Each element is a frozen dataclass of (batched) parameters with two views of
the same linear block:

* ``response(s)``: transfer function at complex frequencies `s` (the exact
  view used in every frequency-domain measure). Parameters broadcast against
  `s` as they are: give the element a trailing axis first
  (:func:`damper.model.batch.expand`) to evaluate a frequency axis per batch member;
* ``factors()``: ``(gain, numerator factors, denominator factors)``, each factor the
  coefficients ``(c0, c1, c2)`` of ``c0 + c1 s + c2 s^2`` (the exact rational view used
  by the margins, :mod:`damper.model.rational`; a pure delay has none);
* ``state_space()``: a batched realisation ``(A, B, C, D)`` with shapes
  ``(..., n, n)``, ``(..., n, 1)``, ``(..., 1, n)``, ``(..., 1, 1)`` (used in
  eigenvalue work; a pure delay becomes a Pade approximant here).

Each class is also the one place its element is described: its case-file ``kind``, its
``parameters`` (:class:`Parameter`: key, unit, schema bounds, docs text), its ``label`` and
``formula`` (docs/case-file.md) and ``describe()`` (the case summary). :data:`ELEMENTS` is
the registry; the case schema (``loop.filters[]``), the loader and the case summary read it.
To add an element, write a class with these views and attributes and add it to
:data:`ELEMENTS` (DEVELOPERS.md; ``tests/test_element_registry.py`` checks it).
"""

from __future__ import annotations

from dataclasses import dataclass
from math import factorial
from typing import ClassVar

import numpy as np


@dataclass(frozen=True)
class Parameter:
    """One parameter of an element, as the case file names it.

    Attributes
    ----------
    name : str
        The case-file key and the element's field name.
    unit : str
        SI unit of the value (``"-"``: dimensionless).
    dimension : str
        The schema's dimension of a quantity with a unit (``"time"``, ``"frequency"``);
        ``"dimensionless"`` for a plain number.
    doc : str
        Plain words (docs/case-file.md adds the element's kind and the unit).
    positive, nonnegative : bool
        Sign the value must have.
    low, high : float or None
        Bounds of a plain number, in `unit`.
    """

    name: str
    unit: str
    dimension: str
    doc: str
    positive: bool = False
    nonnegative: bool = False
    low: float | None = None
    high: float | None = None


_T = Parameter("time_constant", "s", "time", "time constant T", positive=True)


def _e(p):
    """Parameter as a float array (it must already broadcast against `s`)."""
    return np.asarray(p, dtype=float)


def _scalar_block(a, b, c, d):
    a, b, c, d = np.broadcast_arrays(*(np.asarray(x, dtype=float) for x in (a, b, c, d)))
    return a[..., None, None], b[..., None, None], c[..., None, None], d[..., None, None]


@dataclass(frozen=True)
class Lag:
    """First-order lag ``1 / (T s + 1)``.

    Attributes
    ----------
    time_constant : ndarray
        T, s (> 0). A servo of bandwidth b rad/s has T = 1/b.
    """

    time_constant: np.ndarray
    n_states: ClassVar[int] = 1
    kind: ClassVar[str] = "lag"
    label: ClassVar[str] = "first-order lag"
    formula: ClassVar[str] = "1/(T s + 1)"
    parameters: ClassVar[tuple] = (_T,)
    in_filters: ClassVar[bool] = True

    def describe(self) -> str:
        t = float(self.time_constant)
        return f"first-order lag, time constant {t:.4g} s ({1 / t:.4g} rad/s)"

    def response(self, s):
        return 1.0 / (_e(self.time_constant) * s + 1.0)

    def factors(self):
        return 1.0, (), ((1.0, self.time_constant, 0.0),)

    def state_space(self):
        inv = 1.0 / np.asarray(self.time_constant, dtype=float)
        return _scalar_block(-inv, inv, 1.0, 0.0)


@dataclass(frozen=True)
class SecondOrderLag:
    """Second-order lag ``w^2 / (s^2 + 2 zeta w s + w^2)``.

    Attributes
    ----------
    natural_frequency : ndarray
        w, rad/s (> 0).
    damping_ratio : ndarray
        zeta, dimensionless (> 0).
    """

    natural_frequency: np.ndarray
    damping_ratio: np.ndarray
    n_states: ClassVar[int] = 2
    kind: ClassVar[str] = "second_order"
    label: ClassVar[str] = "second-order lag"
    formula: ClassVar[str] = "w^2/(s^2 + 2 zeta w s + w^2)"
    parameters: ClassVar[tuple] = (
        Parameter("natural_frequency", "rad/s", "frequency", "natural frequency w", positive=True),
        Parameter("damping_ratio", "-", "dimensionless", "damping ratio zeta", low=1e-3, high=10.0),
    )
    in_filters: ClassVar[bool] = True

    def describe(self) -> str:
        return f"second-order, {float(self.natural_frequency):.4g} rad/s, damping {float(self.damping_ratio):.3g}"

    def response(self, s):
        w = _e(self.natural_frequency)
        z = _e(self.damping_ratio)
        return w * w / (s * s + 2.0 * z * w * s + w * w)

    def factors(self):
        w = _e(self.natural_frequency)
        return w * w, (), ((w * w, 2.0 * _e(self.damping_ratio) * w, 1.0),)

    def state_space(self):
        w, z = np.broadcast_arrays(
            np.asarray(self.natural_frequency, dtype=float), np.asarray(self.damping_ratio, dtype=float)
        )
        zero = np.zeros_like(w)
        one = np.ones_like(w)
        A = np.stack([np.stack([zero, one], -1), np.stack([-w * w, -2.0 * z * w], -1)], -2)
        B = np.stack([zero, w * w], -1)[..., None]
        C = np.stack([one, zero], -1)[..., None, :]
        D = zero[..., None, None]
        return A, B, C, D


@dataclass(frozen=True)
class Washout:
    """Washout (high-pass) filter ``T s / (T s + 1)``.

    Attributes
    ----------
    time_constant : ndarray
        T, s (> 0).
    """

    time_constant: np.ndarray
    n_states: ClassVar[int] = 1
    kind: ClassVar[str] = "washout"
    label: ClassVar[str] = "washout"
    formula: ClassVar[str] = "T s/(T s + 1)"
    parameters: ClassVar[tuple] = (_T,)
    in_filters: ClassVar[bool] = False  # its own section, loop.washout

    def describe(self) -> str:
        return f"washout, time constant {float(self.time_constant):.4g} s"

    def response(self, s):
        ts = _e(self.time_constant) * s
        return ts / (ts + 1.0)

    def factors(self):
        return 1.0, ((0.0, self.time_constant, 0.0),), ((1.0, self.time_constant, 0.0),)

    def state_space(self):
        inv = 1.0 / np.asarray(self.time_constant, dtype=float)
        return _scalar_block(-inv, inv, -1.0, 1.0)


@dataclass(frozen=True)
class LeadLag:
    """Lead-lag (or lag-lead) filter ``(T1 s + 1) / (T2 s + 1)``.

    Attributes
    ----------
    lead_time_constant : ndarray
        T1, s (>= 0).
    lag_time_constant : ndarray
        T2, s (> 0).
    """

    lead_time_constant: np.ndarray
    lag_time_constant: np.ndarray
    n_states: ClassVar[int] = 1
    kind: ClassVar[str] = "lead_lag"
    label: ClassVar[str] = "lead-lag"
    formula: ClassVar[str] = "(T1 s + 1)/(T2 s + 1)"
    parameters: ClassVar[tuple] = (
        Parameter("lead_time_constant", "s", "time", "numerator time constant T1", nonnegative=True),
        Parameter("lag_time_constant", "s", "time", "denominator time constant T2", positive=True),
    )
    in_filters: ClassVar[bool] = True

    def describe(self) -> str:
        return f"lead-lag ({float(self.lead_time_constant):.4g} s + 1)/({float(self.lag_time_constant):.4g} s + 1)"

    def response(self, s):
        return (_e(self.lead_time_constant) * s + 1.0) / (_e(self.lag_time_constant) * s + 1.0)

    def factors(self):
        return 1.0, ((1.0, self.lead_time_constant, 0.0),), ((1.0, self.lag_time_constant, 0.0),)

    def state_space(self):
        t1 = np.asarray(self.lead_time_constant, dtype=float)
        t2 = np.asarray(self.lag_time_constant, dtype=float)
        ratio = t1 / t2
        return _scalar_block(-1.0 / t2, 1.0 / t2, 1.0 - ratio, ratio)


@dataclass(frozen=True)
class Notch:
    """Second-order notch ``(s^2 + 2 zn w s + w^2) / (s^2 + 2 zd w s + w^2)``.

    Attributes
    ----------
    frequency : ndarray
        Notch centre w, rad/s.
    depth_damping : ndarray
        zn (numerator damping; 0 gives an infinitely deep notch).
    width_damping : ndarray
        zd (denominator damping, > zn).
    """

    frequency: np.ndarray
    depth_damping: np.ndarray
    width_damping: np.ndarray
    n_states: ClassVar[int] = 2
    kind: ClassVar[str] = "notch"
    label: ClassVar[str] = "notch"
    formula: ClassVar[str] = "(s^2 + 2 zn w s + w^2)/(s^2 + 2 zd w s + w^2)"
    parameters: ClassVar[tuple] = (
        Parameter("frequency", "rad/s", "frequency", "centre frequency w", positive=True),
        Parameter("depth_damping", "-", "dimensionless", "numerator damping zn (0 = infinitely deep)", low=0.0, high=10.0),
        Parameter("width_damping", "-", "dimensionless", "denominator damping zd (sets the width; above zn)",
                  low=1e-3, high=10.0),
    )
    in_filters: ClassVar[bool] = True

    def describe(self) -> str:
        return (f"notch at {float(self.frequency):.4g} rad/s, damping "
                f"{float(self.depth_damping):.3g}/{float(self.width_damping):.3g}")

    def response(self, s):
        w = _e(self.frequency)
        return (s * s + 2.0 * _e(self.depth_damping) * w * s + w * w) / (
            s * s + 2.0 * _e(self.width_damping) * w * s + w * w
        )

    def factors(self):
        w = _e(self.frequency)
        num = (w * w, 2.0 * _e(self.depth_damping) * w, 1.0)
        den = (w * w, 2.0 * _e(self.width_damping) * w, 1.0)
        return 1.0, (num,), (den,)

    def state_space(self):
        w, zn, zd = np.broadcast_arrays(
            *(np.asarray(x, dtype=float) for x in (self.frequency, self.depth_damping, self.width_damping))
        )
        zero = np.zeros_like(w)
        one = np.ones_like(w)
        A = np.stack([np.stack([zero, one], -1), np.stack([-w * w, -2.0 * zd * w], -1)], -2)
        B = np.stack([zero, one], -1)[..., None]
        # y = u + (2 (zn - zd) w) x2  (numerator minus denominator, over the denominator)
        C = np.stack([zero, 2.0 * (zn - zd) * w], -1)[..., None, :]
        D = one[..., None, None]
        return A, B, C, D


def pade_coefficients(order: int) -> np.ndarray:
    """Coefficients c_k of the (n, n) Pade approximant of ``exp(-x)``.

    ``exp(-x) ~ sum_k c_k (-x)^k / sum_k c_k x^k`` with
    ``c_k = (2n - k)! n! / ((2n)! k! (n - k)!)`` (standard result).
    """
    n = order
    return np.array(
        [factorial(2 * n - k) * factorial(n) / (factorial(2 * n) * factorial(k) * factorial(n - k)) for k in range(n + 1)]
    )


@dataclass(frozen=True)
class Delay:
    """Pure time delay ``exp(-T s)``: exact in ``response``, Pade in ``state_space``.

    Attributes
    ----------
    time : ndarray
        T, s (> 0): computation delay plus half a sample for the zero-order hold.
    pade_order : int
        Order n of the (n, n) Pade approximant used for eigenvalues (1 to 8).
    """

    time: np.ndarray
    pade_order: int = 2
    _structure: ClassVar[tuple] = ("pade_order",)
    kind: ClassVar[str] = "delay"
    label: ClassVar[str] = "delay"
    formula: ClassVar[str] = "exp(-T s)"
    parameters: ClassVar[tuple] = (
        Parameter("time", "s", "time", "delay T (loop.delay plus half a sample)", nonnegative=True),
    )
    in_filters: ClassVar[bool] = False  # loop.delay and loop.sample_rate

    def describe(self) -> str:
        return f"delay {float(self.time):.4g} s (Pade order {int(self.pade_order)} in eigenvalue work)"

    @property
    def n_states(self) -> int:
        return int(self.pade_order)

    def response(self, s):
        return np.exp(-_e(self.time) * s)

    def state_space(self):
        n = int(self.pade_order)
        t = np.asarray(self.time, dtype=float)
        c = pade_coefficients(n)
        k = np.arange(n + 1)
        # monic denominator a_k = c_k T^k / (c_n T^n); numerator b_k = c_k (-T)^k / (c_n T^n)
        scale = c[n] * t[..., None] ** n
        a = c * t[..., None] ** k / scale
        b = c * (-t[..., None]) ** k / scale
        d = b[..., n]
        r = b[..., :n] - d[..., None] * a[..., :n]
        shape = t.shape
        A = np.zeros(shape + (n, n))
        if n > 1:
            A[..., np.arange(n - 1), np.arange(1, n)] = 1.0
        A[..., n - 1, :] = -a[..., :n]
        B = np.zeros(shape + (n, 1))
        B[..., n - 1, 0] = 1.0
        C = r[..., None, :]
        D = d[..., None, None]
        return A, B, C, D


#: The registry of elements: kind -> class. Each class carries its kind, parameters (with
#: units and schema bounds), label, formula, description and its three models.
ELEMENTS = {cls.kind: cls for cls in (Lag, SecondOrderLag, Washout, LeadLag, Notch, Delay)}
#: The kinds a case may list in ``loop.filters`` (alphabetical: the schema's and the docs' order).
FILTER_KINDS = tuple(sorted(k for k, cls in ELEMENTS.items() if cls.in_filters))


def parameter_names(kind: str) -> tuple:
    """The case-file keys of element `kind`, in the order of its parameters."""
    return tuple(p.name for p in ELEMENTS[kind].parameters)


def build(kind: str, params: dict):
    """The element of `kind` from its SI parameters (``{name: value}``); ValueError on an unknown kind."""
    if kind not in ELEMENTS:
        raise ValueError(kind)
    return ELEMENTS[kind](**{name: params[name] for name in parameter_names(kind)})

"""The Dryden vertical-gust model of MIL-F-8785C (continuous turbulence), batched.

Spectrum (the MIL-F-8785C Dryden form, from memory; docs/turbulence.md). With the gust
intensity ``sigma`` (m/s, rms of the vertical gust velocity ``w_g``), the scale length
``L`` (m) and the true airspeed ``V`` (m/s), the one-sided power spectral density of
``w_g`` over the temporal frequency ``w`` (rad/s, ``w >= 0``) is::

    Phi_w(w) = sigma^2 (L / (pi V)) (1 + 3 (L w / V)^2) / (1 + (L w / V)^2)^2

so that ``integral_0^inf Phi_w dw = sigma^2`` [derived]. It is the spatial spectrum of the
standard, ``Phi_w(Omega) = sigma^2 (L / pi) (1 + 3 (L Omega)^2) / (1 + (L Omega)^2)^2``
over the spatial frequency ``Omega`` (rad/m), seen at ``w = Omega V`` (frozen turbulence).

Spectral factor (shaping filter). Driven by white noise ``xi`` of unit intensity,
``E[xi(t) xi(t + tau)] = delta(tau)`` (two-sided spectral density 1), the filter::

    H(s) = sigma sqrt(T) (1 + sqrt(3) T s) / (1 + T s)^2,    T = L / V (s)

has the output spectrum ``|H(jw)|^2 / pi = Phi_w(w)`` for ``w >= 0`` [derived], hence the
output variance ``sigma^2``. It is realised as two first-order lags in series (states
``z1 = xi / (1 + T s)``, ``z2 = z1 / (1 + T s)``) with the output
``w_g = sigma sqrt(T) (sqrt(3) z1 + (1 - sqrt(3)) z2)``: strictly proper, so the gust has
no white-noise part (its derivative does).

Intensity and scale length from the standard (:class:`TurbulenceSpec`), every value from
memory of MIL-F-8785C (1980), paragraph 3.7 and its figure of turbulence intensity
against altitude and probability of exceedance:

* low altitude, height ``h`` above ground below 1000 ft: ``L = h``, ``sigma = 0.1 W20``
  with ``W20`` the mean wind speed 20 ft above ground;
* medium and high altitude, above 2000 ft: ``L = 1750 ft`` and ``sigma`` read from the
  figure for the stated probability of exceedance (:data:`HIGH_ALTITUDE_INTENSITY_FT_S`);
* between 1000 and 2000 ft: ``sigma`` and ``L`` linear in height between the low-altitude
  values at 1000 ft and the medium/high-altitude values at 2000 ft (common practice).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

#: One foot, m (exact).
FT = 0.3048
#: One knot, m/s (exact: 1852 m per hour).
KT = 1852.0 / 3600.0

#: Height below which the low-altitude rules apply, m (1000 ft; MIL-F-8785C, from memory).
LOW_ALTITUDE_TOP = 1000.0 * FT
#: Height above which the medium/high-altitude rules apply, m (2000 ft; MIL-F-8785C, from memory).
HIGH_ALTITUDE_BOTTOM = 2000.0 * FT
#: Vertical scale length at medium/high altitude, m (1750 ft; MIL-F-8785C Dryden form, from memory).
HIGH_ALTITUDE_SCALE_LENGTH = 1750.0 * FT
#: Low altitude: sigma_w = LOW_ALTITUDE_INTENSITY_RATIO * W20 (MIL-F-8785C, from memory).
LOW_ALTITUDE_INTENSITY_RATIO = 0.1

#: Probabilities of exceedance of the standard's figure (columns of the table below),
#: from memory of MIL-F-8785C.
EXCEEDANCE_PROBABILITIES = (2e-1, 1e-1, 1e-2, 1e-3, 1e-4, 1e-5, 1e-6)
#: Altitudes of the table's rows, ft (from memory of MIL-F-8785C's figure as digitised).
TABLE_ALTITUDES_FT = (500.0, 1750.0, 3750.0, 7500.0, 15000.0, 25000.0, 35000.0,
                      45000.0, 55000.0, 65000.0, 75000.0, 80000.0)
#: Medium/high-altitude rms gust intensity sigma_w, ft/s: one row per altitude of
#: TABLE_ALTITUDES_FT, one column per probability of exceedance of
#: EXCEEDANCE_PROBABILITIES. All values from memory of MIL-F-8785C (figure of turbulence
#: intensity against altitude); they agree with a secondary public digitisation of that
#: figure. Read between rows linearly in altitude (common practice).
HIGH_ALTITUDE_INTENSITY_FT_S = (
    (3.2, 4.2, 6.6, 8.6, 11.8, 15.6, 18.7),
    (2.2, 3.6, 6.9, 9.6, 13.0, 17.6, 21.5),
    (1.5, 3.3, 7.4, 10.6, 16.0, 23.0, 28.4),
    (0.0, 1.6, 6.7, 10.1, 15.1, 23.6, 30.2),
    (0.0, 0.0, 4.6, 8.0, 11.6, 22.1, 30.7),
    (0.0, 0.0, 2.7, 6.6, 9.7, 20.0, 31.0),
    (0.0, 0.0, 0.4, 5.0, 8.1, 16.0, 25.2),
    (0.0, 0.0, 0.0, 4.2, 8.2, 15.1, 23.1),
    (0.0, 0.0, 0.0, 2.7, 7.9, 12.1, 17.5),
    (0.0, 0.0, 0.0, 0.0, 4.9, 7.9, 10.7),
    (0.0, 0.0, 0.0, 0.0, 3.2, 6.2, 8.4),
    (0.0, 0.0, 0.0, 0.0, 2.1, 5.1, 7.2),
)

#: Qualitative severities: (W20 in m/s, probability of exceedance). From memory of
#: MIL-F-8785C: light 15 kt and 1e-2, moderate 30 kt and 1e-3, severe 45 kt and 1e-5.
SEVERITIES = {
    "light": (15.0 * KT, 1e-2),
    "moderate": (30.0 * KT, 1e-3),
    "severe": (45.0 * KT, 1e-5),
}


def _f(x):
    return np.asarray(x, dtype=float)


def high_altitude_intensity(height, exceedance_probability):
    """Medium/high-altitude rms vertical gust intensity, m/s, from the standard's figure.

    Parameters
    ----------
    height : array_like
        Height, m (the figure's altitude), from 500 ft to 80 000 ft (152.4 m to 24 384 m).
    exceedance_probability : float
        One of :data:`EXCEEDANCE_PROBABILITIES` (dimensionless).

    Returns
    -------
    ndarray
        sigma_w, m/s, linear in height between the table's rows.
    """
    column = _probability_column(exceedance_probability)
    h_ft = _f(height) / FT
    if np.any(h_ft < TABLE_ALTITUDES_FT[0] - 1e-9) or np.any(h_ft > TABLE_ALTITUDES_FT[-1] + 1e-9):
        raise ValueError(
            f"height outside the standard's table ({TABLE_ALTITUDES_FT[0]:.0f} to {TABLE_ALTITUDES_FT[-1]:.0f} ft)"
        )
    sigma_ft = np.asarray(HIGH_ALTITUDE_INTENSITY_FT_S)[:, column]
    return np.interp(h_ft, TABLE_ALTITUDES_FT, sigma_ft) * FT


def _probability_column(p) -> int:
    for i, q in enumerate(EXCEEDANCE_PROBABILITIES):
        if abs(float(p) - q) <= 1e-9 * q:
            return i
    listed = ", ".join(f"{q:g}" for q in EXCEEDANCE_PROBABILITIES)
    raise ValueError(f"probability of exceedance {p!r} is not one of the standard's curves ({listed})")


def standard_intensity(height, *, wind_speed_20ft=None, exceedance_probability=None):
    """The standard's vertical gust intensity and scale length at a height above ground.

    Parameters
    ----------
    height : array_like
        Height above ground level, m (> 0; also the altitude read in the medium/high-altitude
        figure).
    wind_speed_20ft : float, optional
        Mean wind speed 20 ft above ground W20, m/s; needed below 2000 ft.
    exceedance_probability : float, optional
        Probability of exceedance of the medium/high-altitude intensity (one of
        :data:`EXCEEDANCE_PROBABILITIES`); needed above 1000 ft.

    Returns
    -------
    gust_rms : ndarray
        sigma_w, m/s.
    scale_length : ndarray
        L_w, m.

    Notes
    -----
    Below 1000 ft ``L = h`` and ``sigma = 0.1 W20``; above 2000 ft ``L = 1750 ft`` and
    ``sigma`` from :func:`high_altitude_intensity`; linear in height in between (all from
    memory of MIL-F-8785C; the blend is common practice).
    """
    h = _f(height)
    if np.any(~(h > 0.0)):
        raise ValueError("height above ground must be positive")
    low = h < LOW_ALTITUDE_TOP
    high = h > HIGH_ALTITUDE_BOTTOM
    needs_low = np.any(~high)
    needs_high = np.any(~low)
    if needs_low and wind_speed_20ft is None:
        raise ValueError("wind_speed_20ft is needed below 2000 ft (610 m) above ground")
    if needs_high and exceedance_probability is None:
        raise ValueError("exceedance_probability is needed above 1000 ft (305 m) above ground")
    sigma = np.zeros_like(h)
    length = np.zeros_like(h)
    if needs_low:
        sigma_low = LOW_ALTITUDE_INTENSITY_RATIO * float(wind_speed_20ft)
        sigma = np.where(low, sigma_low, sigma)
        length = np.where(low, h, length)
    if needs_high:
        h_high = np.maximum(h, HIGH_ALTITUDE_BOTTOM)
        sigma = np.where(high, high_altitude_intensity(h_high, exceedance_probability), sigma)
        length = np.where(high, HIGH_ALTITUDE_SCALE_LENGTH, length)
    blend = ~low & ~high
    if np.any(blend):
        f = (h - LOW_ALTITUDE_TOP) / (HIGH_ALTITUDE_BOTTOM - LOW_ALTITUDE_TOP)
        s_top = high_altitude_intensity(HIGH_ALTITUDE_BOTTOM, exceedance_probability)
        s_bottom = LOW_ALTITUDE_INTENSITY_RATIO * float(wind_speed_20ft)
        sigma = np.where(blend, s_bottom + f * (s_top - s_bottom), sigma)
        length = np.where(blend, LOW_ALTITUDE_TOP + f * (HIGH_ALTITUDE_SCALE_LENGTH - LOW_ALTITUDE_TOP), length)
    return sigma, length


@dataclass(frozen=True)
class TurbulenceSpec:
    """Continuous vertical turbulence: explicit, or by the rules of MIL-F-8785C.

    Give either ``gust_rms`` and ``scale_length`` (used at every condition), or the
    standard's parameters ``wind_speed_20ft`` (below 2000 ft) and/or
    ``exceedance_probability`` (above 1000 ft), from which :meth:`at` finds the intensity
    and scale length at each condition's height above ground
    (:func:`standard_intensity`).

    Attributes
    ----------
    gust_rms : float or None
        rms vertical gust velocity sigma_w, m/s (>= 0).
    scale_length : float or None
        Dryden vertical scale length L_w, m (> 0).
    wind_speed_20ft : float or None
        Mean wind speed 20 ft above ground W20, m/s (>= 0).
    exceedance_probability : float or None
        Probability of exceedance of the medium/high-altitude intensity, one of
        :data:`EXCEEDANCE_PROBABILITIES`.
    """

    gust_rms: float | None = None
    scale_length: float | None = None
    wind_speed_20ft: float | None = None
    exceedance_probability: float | None = None

    def __post_init__(self):
        explicit = (self.gust_rms is not None, self.scale_length is not None)
        standard = self.wind_speed_20ft is not None or self.exceedance_probability is not None
        if any(explicit) and not all(explicit):
            raise ValueError("give both gust_rms and scale_length, or neither")
        if all(explicit) == standard:
            raise ValueError("give either gust_rms and scale_length, or wind_speed_20ft and/or exceedance_probability")
        if all(explicit) and (not self.gust_rms >= 0.0 or not self.scale_length > 0.0):
            raise ValueError("gust_rms must be >= 0 m/s and scale_length > 0 m")
        if self.wind_speed_20ft is not None and not self.wind_speed_20ft >= 0.0:
            raise ValueError("wind_speed_20ft must be >= 0 m/s")
        if self.exceedance_probability is not None:
            _probability_column(self.exceedance_probability)

    @classmethod
    def from_severity(cls, severity: str) -> "TurbulenceSpec":
        """``light``, ``moderate`` or ``severe`` (:data:`SEVERITIES`, from memory of MIL-F-8785C)."""
        if severity not in SEVERITIES:
            raise ValueError(f"severity must be one of {', '.join(SEVERITIES)}, not {severity!r}")
        w20, p = SEVERITIES[severity]
        return cls(wind_speed_20ft=w20, exceedance_probability=p)

    @property
    def explicit(self) -> bool:
        """True when the intensity and scale length are given directly."""
        return self.gust_rms is not None

    def at(self, height=None):
        """Intensity (m/s) and scale length (m) at each height above ground (m).

        Returns ``(gust_rms, scale_length)`` as arrays of the shape of `height` (scalars
        for an explicit spec without a height).
        """
        if self.explicit:
            shape = np.shape(height) if height is not None else ()
            return np.full(shape, float(self.gust_rms)), np.full(shape, float(self.scale_length))
        if height is None:
            raise ValueError("the standard's rules need the height above ground")
        return standard_intensity(
            height, wind_speed_20ft=self.wind_speed_20ft, exceedance_probability=self.exceedance_probability
        )

    def describe(self) -> str:
        """One line for outputs: which form and which values."""
        if self.explicit:
            return f"Dryden vertical gust, explicit: sigma_w {self.gust_rms:.4g} m/s, L_w {self.scale_length:.4g} m"
        parts = []
        if self.wind_speed_20ft is not None:
            parts.append(f"W20 {self.wind_speed_20ft:.4g} m/s")
        if self.exceedance_probability is not None:
            parts.append(f"probability of exceedance {self.exceedance_probability:g}")
        return "Dryden vertical gust, MIL-F-8785C rules (values from memory): " + ", ".join(parts)


def vertical_spectrum(w, gust_rms, scale_length, airspeed):
    """One-sided Dryden vertical-gust spectrum ``Phi_w(w)``, (m/s)^2 per rad/s.

    Parameters
    ----------
    w : array_like
        Temporal frequency, rad/s (>= 0).
    gust_rms : array_like
        sigma_w, m/s.
    scale_length : array_like
        L_w, m.
    airspeed : array_like
        True airspeed V, m/s.

    Notes
    -----
    ``sigma^2 (L/(pi V)) (1 + 3 (L w/V)^2) / (1 + (L w/V)^2)^2``; its integral over
    ``w >= 0`` is ``sigma^2``.
    """
    t = _f(scale_length) / _f(airspeed)
    x2 = (t * _f(w)) ** 2
    return _f(gust_rms) ** 2 * (t / np.pi) * (1.0 + 3.0 * x2) / (1.0 + x2) ** 2


def shaping_response(s, gust_rms, scale_length, airspeed):
    """Spectral factor ``H(s) = sigma sqrt(T) (1 + sqrt(3) T s) / (1 + T s)^2``, ``T = L/V``.

    Gust velocity (m/s) per unit-intensity white noise, at complex `s` (1/s). With
    ``E[xi(t) xi(t+tau)] = delta(tau)``, ``|H(jw)|^2 / pi`` is :func:`vertical_spectrum`.
    """
    t = _f(scale_length) / _f(airspeed)
    return _f(gust_rms) * np.sqrt(t) * (1.0 + np.sqrt(3.0) * t * s) / (1.0 + t * s) ** 2


def shaping_filter(gust_rms, scale_length, airspeed):
    """State space of the spectral factor (two lags in series), batched.

    Parameters
    ----------
    gust_rms, scale_length, airspeed : array_like
        sigma_w (m/s), L_w (m), V (m/s); broadcast together to the batch shape ``S``.

    Returns
    -------
    A : ndarray, shape ``S + (2, 2)``
        1/s; states ``z1 = xi/(1 + T s)``, ``z2 = z1/(1 + T s)`` (in the units of the
        white noise ``xi``).
    B : ndarray, shape ``S + (2, 1)``
        1/s: unit-intensity white noise into ``z1``.
    C : ndarray, shape ``S + (1, 2)``
        Gust velocity w_g (m/s) per state: ``sigma sqrt(T) (sqrt(3), 1 - sqrt(3))``.
    """
    sigma, length, v = np.broadcast_arrays(_f(gust_rms), _f(scale_length), _f(airspeed))
    t = length / v
    a = 1.0 / t
    shape = t.shape
    A = np.zeros(shape + (2, 2))
    A[..., 0, 0] = -a
    A[..., 1, 0] = a
    A[..., 1, 1] = -a
    B = np.zeros(shape + (2, 1))
    B[..., 0, 0] = a
    k = sigma * np.sqrt(t)
    C = np.zeros(shape + (1, 2))
    C[..., 0, 0] = k * np.sqrt(3.0)
    C[..., 0, 1] = k * (1.0 - np.sqrt(3.0))
    return A, B, C

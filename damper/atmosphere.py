"""U.S. Standard Atmosphere 1976 (identical to the ICAO standard atmosphere below 32 km).

Layers from 0 to 84.852 km geopotential altitude. Altitudes are **geopotential**
(what a standard-setting altimeter reads: pressure altitude in the standard
atmosphere) unless :func:`geopotential_from_geometric` is applied first.

Source: U.S. Standard Atmosphere, 1976 (NOAA/NASA/USAF), constants and layer
table.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

G0 = 9.80665  # m/s^2, standard gravity
R_AIR = 287.05287  # J/(kg K), specific gas constant of air (1976: R*/M0)
GAMMA = 1.4  # ratio of specific heats
EARTH_RADIUS = 6_356_766.0  # m, effective earth radius of the 1976 standard
T0 = 288.15  # K
P0 = 101_325.0  # Pa
RHO0 = P0 / (R_AIR * T0)  # kg/m^3, 1.225

#: Geopotential altitude of each layer base (m) and lapse rate (K/m).
_BASES = np.array([0.0, 11_000.0, 20_000.0, 32_000.0, 47_000.0, 51_000.0, 71_000.0, 84_852.0])
_LAPSE = np.array([-0.0065, 0.0, 0.0010, 0.0028, 0.0, -0.0028, -0.0020])
CEILING = float(_BASES[-1])  # m geopotential, top of the model


def _layer_bases():
    temps = [T0]
    press = [P0]
    for i, lapse in enumerate(_LAPSE):
        dh = _BASES[i + 1] - _BASES[i]
        t_base, p_base = temps[-1], press[-1]
        t_top = t_base + lapse * dh
        if lapse == 0.0:
            p_top = p_base * np.exp(-G0 * dh / (R_AIR * t_base))
        else:
            p_top = p_base * (t_top / t_base) ** (-G0 / (R_AIR * lapse))
        temps.append(t_top)
        press.append(p_top)
    return np.array(temps), np.array(press)


_T_BASE, _P_BASE = _layer_bases()


@dataclass(frozen=True)
class AirState:
    """Standard-atmosphere state at one or more altitudes (arrays, SI).

    Attributes
    ----------
    temperature : ndarray
        Static temperature, K.
    pressure : ndarray
        Static pressure, Pa.
    density : ndarray
        Density, kg/m^3.
    speed_of_sound : ndarray
        m/s.
    """

    temperature: np.ndarray
    pressure: np.ndarray
    density: np.ndarray
    speed_of_sound: np.ndarray


def geopotential_from_geometric(z):
    """Geopotential altitude H (m) from geometric altitude Z (m): H = r0 Z / (r0 + Z)."""
    z = np.asarray(z, dtype=float)
    return EARTH_RADIUS * z / (EARTH_RADIUS + z)


def geometric_from_geopotential(h):
    """Geometric altitude Z (m) from geopotential altitude H (m)."""
    h = np.asarray(h, dtype=float)
    return EARTH_RADIUS * h / (EARTH_RADIUS - h)


def standard_atmosphere(h) -> AirState:
    """Standard atmosphere at geopotential altitude `h` (m), batched.

    Parameters
    ----------
    h : array_like
        Geopotential altitude, m, within [-2000, 84852] (the lowest part extends
        the first layer below sea level as the standard allows for low airfields).

    Returns
    -------
    AirState

    Raises
    ------
    ValueError
        If any altitude is outside the model.
    """
    h = np.asarray(h, dtype=float)
    if np.any(~np.isfinite(h)) or np.any(h < -2000.0) or np.any(h > CEILING):
        raise ValueError(
            f"altitude outside the standard atmosphere model (-2000 m to {CEILING:.0f} m geopotential)"
        )
    idx = np.clip(np.searchsorted(_BASES, h, side="right") - 1, 0, len(_LAPSE) - 1)
    lapse = _LAPSE[idx]
    dh = h - _BASES[idx]
    t_base = _T_BASE[idx]
    p_base = _P_BASE[idx]
    temperature = t_base + lapse * dh
    with np.errstate(divide="ignore", invalid="ignore"):
        p_grad = p_base * (temperature / t_base) ** (-G0 / (R_AIR * np.where(lapse == 0, 1.0, lapse)))
    p_iso = p_base * np.exp(-G0 * dh / (R_AIR * t_base))
    pressure = np.where(lapse == 0.0, p_iso, p_grad)
    density = pressure / (R_AIR * temperature)
    speed_of_sound = np.sqrt(GAMMA * R_AIR * temperature)
    return AirState(temperature, pressure, density, speed_of_sound)

"""Sound in air: speed of sound and atmospheric absorption (ISO 9613-1)."""

from __future__ import annotations

import numpy as np

from ..errors import InputError

__all__ = ["speed_of_sound", "air_attenuation", "power_attenuation", "P_REF"]

T0 = 293.15  # reference temperature, K (ISO 9613-1:1993, 3)
T01 = 273.16  # triple-point isotherm temperature, K (ISO 9613-1:1993, Annex B)
P_REF = 101.325  # reference pressure, kPa (ISO 9613-1:1993, 3)


def speed_of_sound(temperature_c: float = 20.0) -> float:
    """Speed of sound in air, c = 331.3·sqrt(1 + θ/273.15) m/s.

    The ideal-gas law for dry air scaled from 331.3 m/s at 0 °C (common practice; humidity
    changes c by well under 1 %).

    Parameters
    ----------
    temperature_c : float
        Air temperature, °C.

    Returns
    -------
    float
        m/s.

    References
    ----------
    Kinsler, L. E. et al. Fundamentals of Acoustics (4th ed., 2000), 5.6 (speed of sound in
    an ideal gas; from memory).

    Examples
    --------
    >>> round(speed_of_sound(20.0), 1)
    343.2
    """
    if temperature_c <= -273.15:
        raise InputError(f"temperature {temperature_c} °C is below absolute zero")
    return 331.3 * float(np.sqrt(1.0 + temperature_c / 273.15))


def air_attenuation(
    frequency, temperature_c: float = 20.0, humidity_pct: float = 50.0, pressure_kpa: float = P_REF
):
    """Pure-tone attenuation coefficient α in dB per metre.

    Parameters
    ----------
    frequency : float or array_like
        Hz.
    temperature_c : float
        Air temperature, °C.
    humidity_pct : float
        Relative humidity, %.
    pressure_kpa : float
        Ambient pressure, kPa.

    Returns
    -------
    float or ndarray
        α in dB/m, the shape of ``frequency``.

    References
    ----------
    ISO 9613-1:1993, Acoustics — Attenuation of sound during propagation outdoors — Part 1:
    Calculation of the absorption of sound by the atmosphere, eqs. (3)–(5) and Annex B
    (saturation vapour pressure).

    Examples
    --------
    At the exact 4 kHz mid-band frequency, 20 °C and 70 % (ISO 9613-2:1996, Table 2, lists
    22.9 dB/km; quoted from memory):

    >>> round(float(air_attenuation(1000 * 10 ** 0.6, 20.0, 70.0)) * 1000, 1)  # dB/km
    22.9
    """
    if not 0.0 <= humidity_pct <= 100.0:
        raise InputError(f"relative humidity {humidity_pct} % is outside 0-100 %")
    if pressure_kpa <= 0:
        raise InputError(f"pressure {pressure_kpa} kPa must be positive")
    f = np.asarray(frequency, dtype=np.float64)
    T = temperature_c + 273.15
    pr = pressure_kpa / P_REF
    c_sat = -6.8346 * (T01 / T) ** 1.261 + 4.6151
    h = humidity_pct * 10.0**c_sat / pr  # molar concentration of water vapour, %
    fr_o = pr * (24.0 + 4.04e4 * h * (0.02 + h) / (0.391 + h))
    fr_n = pr * (T / T0) ** -0.5 * (9.0 + 280.0 * h * np.exp(-4.170 * ((T / T0) ** (-1 / 3) - 1)))
    alpha = (
        8.686
        * f**2
        * (
            1.84e-11 / pr * (T / T0) ** 0.5
            + (T / T0) ** -2.5
            * (
                0.01275 * np.exp(-2239.1 / T) / (fr_o + f**2 / fr_o)
                + 0.1068 * np.exp(-3352.0 / T) / (fr_n + f**2 / fr_n)
            )
        )
    )
    return alpha


def power_attenuation(
    frequency, temperature_c: float = 20.0, humidity_pct: float = 50.0, pressure_kpa: float = P_REF
):
    """Energy attenuation coefficient m (1/m) used as the 4mV term: m = α / (10·log10 e).

    Parameters
    ----------
    frequency : float or array_like
        Hz.
    temperature_c, humidity_pct, pressure_kpa : float
        As in :func:`air_attenuation`.

    Returns
    -------
    float or ndarray
        m in 1/m (energy, natural-log units).

    References
    ----------
    ISO 3382-2:2008, 3 (definition of m); ISO 9613-1:1993 for α.

    Examples
    --------
    >>> a = air_attenuation(1000.0)
    >>> bool(np.isclose(power_attenuation(1000.0), a / 4.342944819))
    True
    """
    return air_attenuation(frequency, temperature_c, humidity_pct, pressure_kpa) / (
        10.0 * np.log10(np.e)
    )

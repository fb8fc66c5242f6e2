"""Properties of the test-section air: moist-air density, viscosity, speed of sound.

Every function takes Python scalars, numpy arrays (broadcasting), pandas Series or xarray DataArrays
and returns the same kind (see tunnelred.common._arraylike). The parameters they share are
described here once: ``temperature`` the air temperature, absolute [K]; ``pressure`` the absolute
(barometric) pressure [Pa]; relative humidity is a fraction 0–1.
"""

from __future__ import annotations

import numpy as np

from tunnelred.common._arraylike import ArrayLike, arraylike

__all__ = [
    "density",
    "density_ideal_dry",
    "viscosity",
    "speed_of_sound",
    "saturation_vapour_pressure",
    "R_DRY_AIR",
]

#: Specific gas constant of dry air [J/(kg K)], the value of ICAO Doc 7488/3 (1993).
R_DRY_AIR = 287.05287

# CIPM-2007 constants, Picard et al., Metrologia 45 (2008) 149-155, eqs. (A1.1)-(A1.4) and the
# table of the appendix.
_R_MOLAR = 8.314472  # molar gas constant [J/(mol K)] (CODATA 2006, as adopted by CIPM-2007)
_M_WATER = 18.01528e-3  # molar mass of water [kg/mol]
_M_DRY_AT_400PPM = 28.96546e-3  # molar mass of dry air with x_CO2 = 0.0004 [kg/mol]
_M_CO2_MINUS_O2 = (
    12.011e-3  # CO2 replaces O2: the molar-mass change per unit mole fraction [kg/mol]
)
_PSV = (1.2378847e-5, -1.9121316e-2, 33.93711047, -6.3431645e3)  # A [K^-2], B [K^-1], C, D [K]
_ENHANCEMENT = (1.00062, 3.14e-8, 5.6e-7)  # alpha, beta [Pa^-1], gamma [K^-2]
_Z = {
    "a0": 1.58123e-6,  # [K Pa^-1]
    "a1": -2.9331e-8,  # [Pa^-1]
    "a2": 1.1043e-10,  # [K^-1 Pa^-1]
    "b0": 5.707e-6,  # [K Pa^-1]
    "b1": -2.051e-8,  # [Pa^-1]
    "c0": 1.9898e-4,  # [K Pa^-1]
    "c1": -2.376e-6,  # [Pa^-1]
    "d": 1.83e-11,  # [K^2 Pa^-2]
    "e": -0.765e-8,  # [K^2 Pa^-2]
}

# Sutherland's law in the form of ICAO Doc 7488/3 (1993): mu = beta_s T^1.5 / (T + S).
_SUTHERLAND_BETA = 1.458e-6  # [kg/(m s K^0.5)]
_SUTHERLAND_S = 110.4  # [K]


@arraylike
def saturation_vapour_pressure(temperature: ArrayLike) -> ArrayLike:
    """Saturation vapour pressure of water over a plane liquid surface, CIPM-2007 form.

    Returns
    -------
    float or array_like
        Saturation vapour pressure psv. [Pa]

    Notes
    -----
    psv = 1 Pa × exp(A T² + B T + C + D/T), with A = 1.2378847e-5 K⁻², B = −1.9121316e-2 K⁻¹,
    C = 33.93711047, D = −6.3431645e3 K. Fitted over 15–27 °C for the CIPM formula; it stays
    within about 0.1 % of the IAPWS values from 0 to 50 °C, the range a wind tunnel meets.

    References
    ----------
    .. [1] A. Picard, R. S. Davis, M. Gläser and K. Fujii, "Revised formula for the density of
       moist air (CIPM-2007)", Metrologia 45 (2008) 149–155, appendix eq. (A1.3).

    Examples
    --------
    >>> round(saturation_vapour_pressure(293.15), 1)
    2339.2
    """
    A, B, C, D = _PSV
    T = temperature
    return np.exp(A * T**2 + B * T + C + D / T)


@arraylike
def density(
    temperature: ArrayLike,
    pressure: ArrayLike,
    relative_humidity: ArrayLike = 0.0,
    *,
    x_co2: ArrayLike = 0.0004,
) -> ArrayLike:
    """Density of moist air by the CIPM-2007 equation.

    Parameters
    ----------
    relative_humidity : float or array_like, optional
        Relative humidity as a fraction. [0–1]
    x_co2 : float or array_like, optional
        Mole fraction of carbon dioxide. [mol/mol]

    Returns
    -------
    float or array_like
        Air density rho. [kg/m³]

    Notes
    -----
    rho = p Ma / (Z R T) · [1 − x_v (1 − Mv/Ma)], where

    - Ma = [28.96546 + 12.011 (x_CO2 − 0.0004)] × 10⁻³ kg/mol, Mv = 18.01528 × 10⁻³ kg/mol,
      R = 8.314472 J/(mol K);
    - x_v = h f(p, t) psv(T) / p, with the enhancement factor f = 1.00062 + 3.14e-8 p + 5.6e-7 t²
      (t in °C) and psv from :func:`saturation_vapour_pressure`;
    - Z = 1 − (p/T)[a0 + a1 t + a2 t² + (b0 + b1 t) x_v + (c0 + c1 t) x_v²] + (p/T)²(d + e x_v²).

    The equation's own relative standard uncertainty is 22 × 10⁻⁶ (Picard et al., table 2) within
    its range of 600–1100 hPa and 15–27 °C; tunnelred uses it from 0 to 40 °C, where the
    extrapolation error stays far below the uncertainty of tunnel thermometers and barometers.

    References
    ----------
    .. [1] A. Picard, R. S. Davis, M. Gläser and K. Fujii, "Revised formula for the density of
       moist air (CIPM-2007)", Metrologia 45 (2008) 149–155.

    Examples
    --------
    >>> round(density(293.15, 101325.0, 0.5), 4)
    1.1993
    """
    T = temperature
    p = pressure
    t = T - 273.15
    alpha, beta, gamma = _ENHANCEMENT
    f = alpha + beta * p + gamma * t**2
    x_v = relative_humidity * f * saturation_vapour_pressure(T) / p
    z = _Z
    Z = (
        1.0
        - p / T * (z["a0"] + z["a1"] * t + z["a2"] * t**2 + (z["b0"] + z["b1"] * t) * x_v)
        - p / T * (z["c0"] + z["c1"] * t) * x_v**2
        + (p / T) ** 2 * (z["d"] + z["e"] * x_v**2)
    )
    Ma = _M_DRY_AT_400PPM + _M_CO2_MINUS_O2 * (x_co2 - 0.0004)
    return p * Ma / (Z * _R_MOLAR * T) * (1.0 - x_v * (1.0 - _M_WATER / Ma))


@arraylike
def density_ideal_dry(temperature: ArrayLike, pressure: ArrayLike) -> ArrayLike:
    """Density of dry air as an ideal gas.

    Returns
    -------
    float or array_like
        rho = p / (R_d T). [kg/m³]

    Notes
    -----
    R_d = 287.05287 J/(kg K), the value of the ICAO standard atmosphere (quoted there as
    287.05287; often rounded to 287.05). Ignores humidity (up to −1 % at 30 °C saturated) and
    compressibility (about −0.04 %); use :func:`density` for measured conditions.

    References
    ----------
    .. [1] ICAO, "Manual of the ICAO Standard Atmosphere", Doc 7488/3, 3rd ed., 1993.

    Examples
    --------
    >>> round(density_ideal_dry(288.15, 101325.0), 4)
    1.225
    """
    return pressure / (R_DRY_AIR * temperature)


@arraylike
def viscosity(temperature: ArrayLike) -> ArrayLike:
    """Dynamic viscosity of air by Sutherland's law, in the ICAO form.

    Returns
    -------
    float or array_like
        Dynamic viscosity mu. [Pa s]

    Notes
    -----
    mu = beta_s T^1.5 / (T + S), beta_s = 1.458e-6 kg/(m s K^0.5), S = 110.4 K. The ICAO
    standard-atmosphere form; it does not apply at very low temperatures (below about 100 K) or
    very high altitudes. Humidity changes mu by under 0.5 % in tunnel conditions and is ignored.

    References
    ----------
    .. [1] ICAO, "Manual of the ICAO Standard Atmosphere", Doc 7488/3, 3rd ed., 1993.
    .. [2] W. Sutherland, "The viscosity of gases and molecular force", Phil. Mag. 36 (1893)
       507–531.

    Examples
    --------
    >>> f"{viscosity(288.15):.4e}"
    '1.7894e-05'
    """
    return _SUTHERLAND_BETA * temperature**1.5 / (temperature + _SUTHERLAND_S)


@arraylike
def speed_of_sound(
    temperature: ArrayLike, *, gamma: ArrayLike = 1.4, gas_constant: ArrayLike = R_DRY_AIR
) -> ArrayLike:
    """Speed of sound in air as an ideal gas.

    Parameters
    ----------
    gamma : float or array_like, optional
        Ratio of specific heats. [-]
    gas_constant : float or array_like, optional
        Specific gas constant. [J/(kg K)]

    Returns
    -------
    float or array_like
        a = sqrt(gamma R T). [m/s]

    Notes
    -----
    Ideal-gas relation with the ICAO values gamma = 1.4 and R = 287.05287 J/(kg K). Humidity
    raises a by up to about 0.3 % at 30 °C saturated; Mach numbers in a low-speed tunnel are not
    sensitive to that.

    References
    ----------
    .. [1] ICAO, "Manual of the ICAO Standard Atmosphere", Doc 7488/3, 3rd ed., 1993.

    Examples
    --------
    >>> round(speed_of_sound(288.15), 3)
    340.294
    """
    return np.sqrt(gamma * gas_constant * temperature)

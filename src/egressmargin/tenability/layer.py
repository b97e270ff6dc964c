"""Smoke layer (interface) height from a vertical temperature profile.

A column of thermocouples ("tree") gives temperature against height; the integral
method reduces it to an equivalent two-zone profile with a hot upper layer and a
cool lower layer, and returns the height of the interface between them.

Units in: sensor heights [m] above the floor, temperatures in kelvin [K] (the caller
converts from degC; the method needs absolute temperatures), ceiling height [m].
Units out: interface height [m] above the floor.
"""

from __future__ import annotations

import numpy as np

__all__ = ["layer_height_integral"]


def _inverse_mean_linear(t_a: np.ndarray, t_b: np.ndarray) -> np.ndarray:
    """Mean of 1/T over an interval on which T varies linearly from t_a to t_b.

    Exact value ln(t_b/t_a)/(t_b - t_a); for nearly equal ends the series
    (1/t_a)(1 - x/2 + x^2/3 - x^3/4), x = (t_b - t_a)/t_a, avoids cancellation.
    """
    with np.errstate(divide="ignore", invalid="ignore"):
        x = (t_b - t_a) / t_a
        exact = np.log1p(x) / (t_a * x)
        series = (1.0 - x / 2.0 + x * x / 3.0 - x * x * x / 4.0) / t_a
    return np.where(np.abs(x) < 1e-4, series, exact)


def layer_height_integral(heights_m, temperature_k, ceiling_m: float) -> np.ndarray:
    """Interface height from a vertical temperature profile, integral method.

    Parameters
    ----------
    heights_m : array_like, shape (P,)
        Sensor heights above the floor [m], strictly ascending, within
        [0, ``ceiling_m``].
    temperature_k : array_like, shape (..., P, N)
        Gas temperature at each sensor and time [K]; the sensor axis is the
        second-to-last, time the last.
    ceiling_m : float
        Ceiling height H above the floor [m].

    Returns
    -------
    numpy.ndarray, shape (..., N)
        Interface height [m], clipped to [0, H]; H where the profile is uniform (no
        smoke layer); NaN where any sensor reading is NaN.

    Notes
    -----
    With :math:`T_l` the lower-layer temperature, taken as the lowest sensor's,

    .. math::

        I_1 = \\int_0^H T\\,dz,\\qquad I_2 = \\int_0^H \\frac{1}{T}\\,dz,\\qquad
        z_{int} = \\frac{T_l\\,(I_1 I_2 - H^2)}{I_1 + I_2 T_l^2 - 2 T_l H}.

    The denominator equals :math:`\\int_0^H (T - T_l)^2/T\\,dz \\ge 0` and vanishes
    only for a uniform profile, which is returned as the ceiling height. For an exact
    two-zone profile (:math:`T_l` below :math:`z_i`, :math:`T_u` above) the formula
    returns :math:`z_i` exactly (substitute :math:`I_1 = T_l z_i + T_u (H - z_i)`,
    :math:`I_2 = z_i/T_l + (H - z_i)/T_u`).

    Profile between sensors: piecewise linear in height; constant from the floor to
    the lowest sensor and from the highest sensor to the ceiling. The integrals are
    exact for that profile (:math:`\\int 1/T\\,dz` over a linear segment is
    :math:`\\Delta z\\,\\ln(T_b/T_a)/(T_b - T_a)`).

    References
    ----------
    He, Y., Fernando, A., and Luo, M., 1998, "Determination of interface height from
    measured parameter profile in enclosure fire experiment", Fire Safety Journal
    31(1), 19-38 (integral ratio methods).
    Janssens, M., and Tran, H. C., 1992, "Data reduction of room tests for zone model
    validation", Journal of Fire Sciences 10(6), 528-555 (from memory; the
    two-integral equation above).

    Examples
    --------
    A 600 K layer above 1.5 m in a 3 m room over 300 K air (two sensors straddling
    the interface closely):

    >>> z = [0.5, 1.5 - 1e-9, 1.5 + 1e-9, 2.5]
    >>> T = [[300.0], [300.0], [600.0], [600.0]]
    >>> round(float(layer_height_integral(z, T, 3.0)[0]), 6)
    1.5
    """
    z = np.asarray(heights_m, dtype=float)
    temp = np.asarray(temperature_k, dtype=float)
    height = float(ceiling_m)
    if z.ndim != 1 or z.size < 1:
        raise ValueError(f"heights_m must be a non-empty 1-D array, got shape {z.shape}")
    if temp.ndim < 2 or temp.shape[-2] != z.size:
        raise ValueError(
            f"temperature_k must have shape (..., {z.size}, N), got {temp.shape}"
        )
    if not height > 0.0:
        raise ValueError(f"ceiling_m must be positive, got {ceiling_m!r}")
    if np.any(np.diff(z) <= 0.0):
        raise ValueError("heights_m must be strictly ascending")
    if z[0] < 0.0 or z[-1] > height:
        raise ValueError(f"sensor heights must lie within [0, {height}] m")

    # Sensor axis last but one; work on (..., P, N).
    t_low = temp[..., 0, :]
    t_high = temp[..., -1, :]
    dz = np.diff(z)[:, None]  # (P-1, 1)
    t_a = temp[..., :-1, :]
    t_b = temp[..., 1:, :]

    i1 = t_low * z[0] + t_high * (height - z[-1]) + np.sum(0.5 * (t_a + t_b) * dz, axis=-2)
    with np.errstate(divide="ignore", invalid="ignore"):
        i2 = (
            z[0] / t_low
            + (height - z[-1]) / t_high
            + np.sum(_inverse_mean_linear(t_a, t_b) * dz, axis=-2)
        )
        numerator = t_low * (i1 * i2 - height * height)
        denominator = i1 + i2 * t_low * t_low - 2.0 * t_low * height
        # Uniform profile: the denominator is zero up to rounding (relative to I1).
        uniform = denominator <= 1e-12 * np.abs(i1)
        z_int = numerator / np.where(uniform, 1.0, denominator)
    z_int = np.where(uniform, height, z_int)
    z_int = np.clip(z_int, 0.0, height)
    nan_any = np.isnan(temp).any(axis=-2)
    return np.where(nan_any, np.nan, z_int)

"""Visibility through smoke and the conversions between smoke measures.

All smoke measures are turned into one internal quantity, the natural-log extinction
coefficient K [1/m] (Bouguer-Lambert law I/I0 = exp(-K L)), and compared with the
limit through Jin's relation between visibility of a sign and extinction, S = C/K.

Units: K [1/m] natural log; base-10 optical density per metre D [1/m]; soot mass
concentration [kg/m^3]; mass-specific extinction coefficient [m^2/kg]; visibility [m].
"""

from __future__ import annotations

import math

import numpy as np

__all__ = [
    "LN10",
    "SIGN_CONSTANT_LIGHT_EMITTING",
    "SIGN_CONSTANT_LIGHT_REFLECTING",
    "SIGN_CONSTANTS",
    "MASS_EXTINCTION_FLAMING_M2_KG",
    "sign_constant",
    "extinction_from_optical_density",
    "extinction_from_soot",
    "extinction_from_visibility",
    "visibility_from_extinction",
    "extinction_limit",
]

#: ln(10): K = ln(10) * D converts base-10 optical density per metre to the
#: natural-log extinction coefficient (definition of the decadic and natural
#: attenuation coefficients; no other source needed).
LN10 = math.log(10.0)

#: Proportionality constant C in S = C/K for light-emitting signs (Jin 1978; Jin,
#: SFPE Handbook chapter "Visibility and Human Behavior in Fire Smoke").
SIGN_CONSTANT_LIGHT_EMITTING = 8.0
#: Proportionality constant C in S = C/K for light-reflecting signs (same sources).
SIGN_CONSTANT_LIGHT_REFLECTING = 3.0

#: Sign constants by name.
SIGN_CONSTANTS: dict[str, float] = {
    "light-emitting": SIGN_CONSTANT_LIGHT_EMITTING,
    "light-reflecting": SIGN_CONSTANT_LIGHT_REFLECTING,
}

#: Mass-specific extinction coefficient of smoke from flaming combustion,
#: 8700 m^2/kg (Mulholland & Croarkin 2000, Fire and Materials 24; from memory:
#: 8.7 m^2/g at 633 nm, expanded uncertainty about 1.1 m^2/g).
MASS_EXTINCTION_FLAMING_M2_KG = 8700.0


def sign_constant(name: str) -> float:
    """Return Jin's sign constant C for a named kind of sign.

    Raises
    ------
    ValueError
        If ``name`` is not a key of :data:`SIGN_CONSTANTS`; the message names the
        valid keys.

    Examples
    --------
    >>> sign_constant("light-reflecting")
    3.0
    """
    try:
        return SIGN_CONSTANTS[name]
    except (KeyError, TypeError):
        valid = ", ".join(repr(k) for k in SIGN_CONSTANTS)
        raise ValueError(f"unknown kind of sign {name!r}; valid kinds: {valid}") from None


def _out(a: np.ndarray):
    return a if a.ndim else float(a)


def _c_over(c: float, x) -> np.ndarray:
    """C / x, with +inf where x <= 0 and no warnings (S = C/K and K = C/S alike)."""
    x = np.asarray(x, dtype=float)
    zero = x <= 0.0
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(zero, np.inf, c / np.where(zero, 1.0, x))


def extinction_from_optical_density(d_per_m):
    """Natural-log extinction coefficient from base-10 optical density per metre.

    Parameters
    ----------
    d_per_m : array_like
        Optical density per unit path length, base 10 [1/m].

    Returns
    -------
    numpy.ndarray or float
        Extinction coefficient K, natural log [1/m].

    Notes
    -----
    With :math:`I/I_0 = 10^{-DL} = e^{-KL}`,

    .. math:: K = \\ln(10)\\, D \\approx 2.303\\, D.

    References
    ----------
    Jin, T., "Visibility and Human Behavior in Fire Smoke", SFPE Handbook of Fire
    Protection Engineering (relation between optical density and extinction
    coefficient).

    Examples
    --------
    >>> round(extinction_from_optical_density(1.0), 4)
    2.3026
    """
    return _out(LN10 * np.asarray(d_per_m, dtype=float))


def extinction_from_soot(soot_kg_m3, mass_extinction_m2_kg: float = MASS_EXTINCTION_FLAMING_M2_KG):
    """Extinction coefficient from soot mass concentration.

    Parameters
    ----------
    soot_kg_m3 : array_like
        Soot (smoke particulate) mass concentration [kg/m^3].
    mass_extinction_m2_kg : float
        Mass-specific extinction coefficient K_m [m^2/kg]; default 8700 m^2/kg for
        flaming combustion (Mulholland & Croarkin 2000, from memory).

    Returns
    -------
    numpy.ndarray or float
        Extinction coefficient K, natural log [1/m].

    Notes
    -----
    .. math:: K = K_m\\, m_s

    References
    ----------
    Mulholland, G. W., and Croarkin, C., 2000, "Specific extinction coefficient of
    flame generated smoke", Fire and Materials 24(5), 227-230 (from memory).

    Examples
    --------
    1 g/m^3 of soot gives K = 8.7 1/m:

    >>> round(extinction_from_soot(1e-3), 6)
    8.7
    """
    return _out(mass_extinction_m2_kg * np.asarray(soot_kg_m3, dtype=float))


def visibility_from_extinction(k_per_m, sign_constant: float):
    """Visibility of a sign through smoke of a given extinction coefficient.

    Parameters
    ----------
    k_per_m : array_like
        Extinction coefficient, natural log [1/m].
    sign_constant : float
        Jin's constant C [-]: 8 for light-emitting, 3 for light-reflecting signs.

    Returns
    -------
    numpy.ndarray or float
        Visibility [m]; infinite where K <= 0 (clear air), without a warning.

    Notes
    -----
    .. math:: S = C / K

    References
    ----------
    Jin, T., 1978, "Visibility through fire smoke", Journal of Fire and Flammability
    9, 135-155; Jin, T., "Visibility and Human Behavior in Fire Smoke", SFPE
    Handbook of Fire Protection Engineering.

    Examples
    --------
    >>> visibility_from_extinction(0.8, 8.0)
    10.0
    """
    return _out(_c_over(sign_constant, k_per_m))   # clear air (K <= 0): infinite visibility


def extinction_from_visibility(visibility_m, sign_constant: float):
    """Extinction coefficient that gives a visibility, inverting S = C/K.

    Parameters
    ----------
    visibility_m : array_like
        Visibility [m]; infinite visibility gives K = 0.
    sign_constant : float
        Jin's constant C [-].

    Returns
    -------
    numpy.ndarray or float
        Extinction coefficient [1/m]; infinite where visibility <= 0.

    Notes
    -----
    .. math:: K = C / S

    References
    ----------
    Jin, T., 1978, Journal of Fire and Flammability 9, 135-155.

    Examples
    --------
    >>> extinction_from_visibility(10.0, 8.0)
    0.8
    """
    return _out(_c_over(sign_constant, visibility_m))   # no visibility: infinite extinction


def extinction_limit(visibility_limit_m: float, sign_constant: float) -> float:
    """Extinction coefficient at which visibility falls to the limit.

    Comparing K with this level is the same as comparing S = C/K with the visibility
    limit, and K (unlike S) is what the histories and the model-uncertainty
    correction work on.

    Parameters
    ----------
    visibility_limit_m : float
        Visibility limit [m], e.g. 10 m.
    sign_constant : float
        Jin's constant C [-].

    Returns
    -------
    float
        K limit [1/m] = C / S_limit.

    References
    ----------
    Jin, T., 1978, Journal of Fire and Flammability 9, 135-155.

    Examples
    --------
    >>> extinction_limit(10.0, 8.0)
    0.8
    """
    if not visibility_limit_m > 0.0:
        raise ValueError(f"visibility limit must be positive, got {visibility_limit_m!r}")
    return float(sign_constant) / float(visibility_limit_m)

"""Fractional Effective Dose (FED) rate for heat, after ISO 13571.

Heat hurts by two routes that add as fractional doses: convected heat (hot gas
around the body, a function of gas temperature) and radiant heat (flux reaching the
skin from the hot layer or flames). Each route has a tolerance time ``t_I`` in minutes;
the FED rate is the sum of the reciprocals.

Units in: gas temperature [degC], radiant flux [kW/m^2]. Units out: tolerance time
[min] and FED rate [1/min]; integrate with
:func:`egressmargin.tenability.crossing.cumulative_trapezoid`.

Missing series: a series that is not supplied (argument None, or NaN values in a
location's row) contributes nothing: its term is zero. NaN never reaches the output.
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "CONVECTIVE_COEFF_MIN",
    "CONVECTIVE_EXPONENT",
    "RADIANT_DOSE",
    "RADIANT_EXPONENT",
    "RADIANT_THRESHOLD_KW_M2",
    "t_iconv_min",
    "t_irad_min",
    "fed_heat_rate",
]

#: Convective heat, fully clothed subject: t_Iconv = 5e7 * T^-3.4 min, T in degC
#: (ISO 13571:2012, convected heat equation).
CONVECTIVE_COEFF_MIN = 5.0e7
CONVECTIVE_EXPONENT = 3.4

#: Radiant heat: t_Irad = r / q^(4/3) min, q in kW/m^2, with r = 1.33 (kW/m^2)^(4/3)*min
#: the radiant exposure dose to severe skin pain (ISO 13571 radiant heat equation;
#: value of r from memory, Purser's pain threshold dose of 1.33 to 1.67).
RADIANT_DOSE = 1.33
RADIANT_EXPONENT = 4.0 / 3.0

#: Radiant flux at or below which radiant heat is tolerated for a long time and the
#: radiant term is taken as zero (ISO 13571: 2.5 kW/m^2).
RADIANT_THRESHOLD_KW_M2 = 2.5


def _series(x):
    """(clean values, missing mask) for an optional series, or None."""
    if x is None:
        return None
    a = np.asarray(x, dtype=float)
    missing = np.isnan(a)
    return np.where(missing, 0.0, a), missing


def t_iconv_min(temperature_degc):
    """Tolerance time for convected heat, fully clothed subject.

    Parameters
    ----------
    temperature_degc : array_like
        Gas temperature [degC].

    Returns
    -------
    numpy.ndarray or float
        Tolerance time [min]; infinite at or below 0 degC; NaN where the input is NaN.

    Notes
    -----
    .. math:: t_{Iconv} = 5\\times10^{7}\\, T^{-3.4}\\quad [\\mathrm{min}],\\ T\\ \\text{in degC}.

    The power law has no meaning at or below 0 degC; the tolerance time there is
    taken as infinite (no convective dose), without a warning.

    References
    ----------
    ISO 13571:2012, Life-threatening components of fire -- Guidelines for the
    estimation of time to compromised tenability in fires, convected heat equation
    for fully clothed subjects; the same expression is in Purser, SFPE Handbook,
    5th ed., 2016.

    Examples
    --------
    >>> round(float(t_iconv_min(100.0)), 2)
    7.92
    """
    t = np.asarray(temperature_degc, dtype=float)
    positive = t > 0.0
    safe = np.where(positive, t, 1.0)
    with np.errstate(over="ignore", under="ignore"):
        tol = CONVECTIVE_COEFF_MIN * np.exp(-CONVECTIVE_EXPONENT * np.log(safe))   # = safe**-3.4, faster
    out = np.where(positive, tol, np.inf)
    out = np.where(np.isnan(t), np.nan, out)
    return out if out.ndim else float(out)


def t_irad_min(flux_kw_m2, radiant_threshold_kw_m2: float = RADIANT_THRESHOLD_KW_M2):
    """Tolerance time for radiant heat.

    Parameters
    ----------
    flux_kw_m2 : array_like
        Radiant heat flux reaching the occupant [kW/m^2].
    radiant_threshold_kw_m2 : float
        Flux at or below which the tolerance time is infinite [kW/m^2]; ISO 13571
        uses 2.5 kW/m^2.

    Returns
    -------
    numpy.ndarray or float
        Tolerance time [min]; infinite at or below the threshold; NaN where the input
        is NaN.

    Notes
    -----
    .. math:: t_{Irad} = \\frac{r}{q^{4/3}}\\quad [\\mathrm{min}],\\qquad
              r = 1.33\\ (\\mathrm{kW/m^2})^{4/3}\\,\\mathrm{min}

    for :math:`q` above the threshold. The form :math:`r/q^{4/3}` is the ISO 13571
    radiant heat equation; the value r = 1.33 (the radiant dose to severe skin pain,
    lower end of Purser's 1.33 to 1.67) is from memory. It is consistent with the
    published pain tolerance of about 30 s at 2.5 kW/m^2 and 4 s at 10 kW/m^2
    (PD 7974-6:2004, Table of radiant heat tolerance; Purser, SFPE Handbook).

    References
    ----------
    ISO 13571:2012, radiant heat equation and 2.5 kW/m^2 threshold.
    Purser, D. A., SFPE Handbook of Fire Protection Engineering, 5th ed., 2016,
    radiant heat tolerance (pain) dose.

    Examples
    --------
    At 10 kW/m^2, 1.33 * 10^(-4/3) min = 3.7 s:

    >>> round(float(t_irad_min(10.0)) * 60.0, 1)
    3.7
    """
    q = np.asarray(flux_kw_m2, dtype=float)
    above = q > radiant_threshold_kw_m2
    safe = np.where(above & (q > 0.0), q, 1.0)
    with np.errstate(over="ignore", under="ignore"):
        tol = RADIANT_DOSE * safe ** (-RADIANT_EXPONENT)
    out = np.where(above, tol, np.inf)
    out = np.where(np.isnan(q), np.nan, out)
    return out if out.ndim else float(out)


def fed_heat_rate(
    temperature_degc=None,
    flux_kw_m2=None,
    radiant_threshold_kw_m2: float = RADIANT_THRESHOLD_KW_M2,
):
    """FED rate for heat: convected plus radiant.

    Parameters
    ----------
    temperature_degc : array_like or None
        Gas temperature [degC], shape (N,) or (L, N); None or NaN = not supplied.
    flux_kw_m2 : array_like or None
        Radiant flux reaching the occupant [kW/m^2], broadcastable with the
        temperature; None or NaN = not supplied.
    radiant_threshold_kw_m2 : float
        Radiant flux at or below which the radiant term is zero [kW/m^2].

    Returns
    -------
    numpy.ndarray
        FED rate [1/min], the broadcast shape of the supplied arrays (0-d when none is
        supplied).

    Notes
    -----
    .. math:: \\dot F_{heat} = \\frac{1}{t_{Iconv}} + \\frac{1}{t_{Irad}}
              \\quad [1/\\mathrm{min}],

    with :math:`1/t_{Iconv} = 0` at or below 0 degC and :math:`1/t_{Irad} = 0` at or
    below the radiant threshold (see :func:`t_iconv_min`, :func:`t_irad_min`).
    FED = 1 is the tenability limit for the median person.

    References
    ----------
    ISO 13571:2012, FED for heat (sum of convected and radiant heat fractions).

    Examples
    --------
    At a constant 100 degC with no radiant series, FED 1 is reached after 7.92 min:

    >>> round(1.0 / float(fed_heat_rate(temperature_degc=100.0)), 2)
    7.92
    """
    shapes = [np.shape(a) for a in (temperature_degc, flux_kw_m2) if a is not None]
    shape = np.broadcast_shapes(*shapes) if shapes else ()
    rate = np.zeros(shape, dtype=float)
    if temperature_degc is not None:
        # 1/t_Iconv = T^3.4 / 5e7 for T > 0 degC, 0 at or below (as t_iconv_min, one pass)
        temp = np.asarray(temperature_degc, dtype=float)
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            conv = np.exp(CONVECTIVE_EXPONENT * np.log(np.maximum(temp, 0.0))) / CONVECTIVE_COEFF_MIN
        rate = rate + np.where(np.isnan(temp), 0.0, conv)
    q = _series(flux_kw_m2)
    if q is not None:
        clean, missing = q
        with np.errstate(divide="ignore"):
            rad = 1.0 / np.asarray(t_irad_min(clean, radiant_threshold_kw_m2))
        rate = rate + np.where(missing, 0.0, rad)
    return np.broadcast_to(rate, shape).copy()

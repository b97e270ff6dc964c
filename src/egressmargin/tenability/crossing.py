"""Dose integration and first-crossing search on sampled time series.

Every criterion reduces to one question: when does a series (a temperature, an
extinction coefficient, an accumulated dose) first reach its limit? The answer is the
first crossing, linearly interpolated between the two bracketing samples; a dose is
integrated with the trapezoidal rule first. Both rules are fixed by the project's
outside contract ("results.json": "A limit 'first reached' is the first crossing,
linearly interpolated between the two bracketing samples; a dose (FED) is integrated
with the trapezoidal rule and its crossing interpolated the same way").

Arrays are 1-D ``(N,)`` or 2-D ``(L, N)`` = (locations, time); functions work along
the last axis. Times are seconds ``t_s``; dose rates are per minute, as the FED
literature states them.

Conventions for values that are not numbers: a NaN sample never counts as reaching a
level. If the sample just before a crossing is NaN, the crossing is placed at the
first sample that reaches the level (no interpolation is possible).
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "DIRECTIONS",
    "cumulative_trapezoid",
    "first_crossing",
    "crossing_times_for_levels",
]

#: Valid ``direction`` arguments: "above" (first time ``values >= level``) and
#: "below" (first time ``values <= level``).
DIRECTIONS = ("above", "below")


def _direction_sign(direction: str) -> float:
    if direction == "above":
        return 1.0
    if direction == "below":
        return -1.0
    raise ValueError(f"direction must be one of {DIRECTIONS}, got {direction!r}")


def _time_axis(t_s, n: int) -> np.ndarray:
    t = np.asarray(t_s, dtype=float)
    if t.ndim != 1:
        raise ValueError(f"t_s must be 1-D, got shape {t.shape}")
    if t.shape[0] != n:
        raise ValueError(
            f"t_s has {t.shape[0]} samples but the series' last axis has {n}"
        )
    return t


def _interpolate(t, i, w, target):
    """Crossing times between samples ``i-1`` and ``i`` of ``w`` (already sign-flipped).

    ``i`` is the first index at which ``w >= target``; ``w`` holds ``-inf`` where the
    original series was NaN.
    """
    i_prev = np.maximum(i - 1, 0)
    w1 = np.take_along_axis(w, i[..., None], axis=-1)[..., 0] if w.ndim > 1 else w[i]
    w0 = (
        np.take_along_axis(w, i_prev[..., None], axis=-1)[..., 0]
        if w.ndim > 1
        else w[i_prev]
    )
    t1 = t[i]
    t0 = t[i_prev]
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        frac = (target - w0) / (w1 - w0)
    # frac is in (0, 1] mathematically (w0 < target <= w1); clip rounding, and fall
    # back to the reaching sample where interpolation is impossible (NaN neighbour).
    frac = np.where(np.isfinite(frac), np.clip(frac, 0.0, 1.0), 1.0)
    # The clip keeps rounding from placing the time outside its bracketing samples.
    tc = np.clip(t0 + frac * (t1 - t0), t0, t1)
    return np.where(i == 0, t[0], tc)


def cumulative_trapezoid(t_s, rate_per_min) -> np.ndarray:
    """Cumulative dose from a dose rate, trapezoidal rule, starting at zero.

    Parameters
    ----------
    t_s : array_like, shape (N,)
        Sample times [s], nondecreasing.
    rate_per_min : array_like, shape (N,) or (..., N)
        Dose rate [1/min], e.g. an FED rate.

    Returns
    -------
    numpy.ndarray, same shape as ``rate_per_min``
        Accumulated dose [-]; the first sample is 0.

    Notes
    -----
    With :math:`\\Delta t_i` in minutes,

    .. math:: D_0 = 0,\\qquad D_i = D_{i-1} + \\tfrac12 (r_{i-1} + r_i)\\,
              \\frac{t_i - t_{i-1}}{60}.

    The trapezoidal rule is the integration rule fixed by the outside contract.

    Examples
    --------
    A constant rate of 0.1/min for 120 s gives a dose of 0.2:

    >>> cumulative_trapezoid([0.0, 60.0, 120.0], [0.1, 0.1, 0.1]).round(12).tolist()
    [0.0, 0.1, 0.2]
    """
    rate = np.asarray(rate_per_min, dtype=float)
    if rate.ndim < 1:
        raise ValueError("rate_per_min must have at least one (time) axis")
    t = _time_axis(t_s, rate.shape[-1])
    out = np.zeros(rate.shape, dtype=float)
    if rate.shape[-1] < 2:
        return out
    dt_min = np.diff(t) / 60.0
    increments = 0.5 * (rate[..., 1:] + rate[..., :-1]) * dt_min
    np.cumsum(increments, axis=-1, out=out[..., 1:])
    return out


def first_crossing(t_s, values, level, direction: str = "above"):
    """Time at which a series first reaches a level, linearly interpolated.

    Parameters
    ----------
    t_s : array_like, shape (N,)
        Sample times [s], nondecreasing.
    values : array_like, shape (N,) or (L, N)
        The series, in any unit (the same as ``level``).
    level : float or array_like, shape (L,)
        The limit; a scalar, or one level per row of a 2-D ``values``.
    direction : {"above", "below"}
        "above": the first time ``values >= level``; "below": the first time
        ``values <= level``.

    Returns
    -------
    float or numpy.ndarray, shape (L,)
        Crossing time [s]; NaN where the level is not reached by the last sample;
        ``t_s[0]`` where the first sample already reaches it.

    Notes
    -----
    With :math:`i` the first index at which the series reaches the level :math:`y^*`,

    .. math:: t^* = t_{i-1} + \\frac{y^* - y_{i-1}}{y_i - y_{i-1}} (t_i - t_{i-1}),

    the first-crossing rule of the outside contract. NaN samples never reach a level.

    Examples
    --------
    A ramp of 1 degC/s from 20 degC reaches 60 degC at 40 s:

    >>> first_crossing([0.0, 30.0, 60.0], [20.0, 50.0, 80.0], 60.0)
    40.0
    """
    sign = _direction_sign(direction)
    v = np.asarray(values, dtype=float)
    if v.ndim not in (1, 2):
        raise ValueError(f"values must be (N,) or (L, N), got shape {v.shape}")
    t = _time_axis(t_s, v.shape[-1])
    lev = np.asarray(level, dtype=float)
    if v.ndim == 1:
        if lev.ndim != 0:
            raise ValueError("a 1-D series takes a scalar level")
    else:
        if lev.ndim not in (0, 1):
            raise ValueError(f"level must be scalar or (L,), got shape {lev.shape}")
        lev = np.broadcast_to(lev, v.shape[:1])
    n = v.shape[-1]
    if n == 0:
        result = np.full(lev.shape, np.nan)
        return float(result) if v.ndim == 1 else result

    w = sign * v
    w = np.where(np.isnan(w), -np.inf, w)
    target = sign * lev
    reached = w >= target[..., None]
    i = np.argmax(reached, axis=-1)
    any_reached = reached.any(axis=-1)
    tc = _interpolate(t, i, w, target)
    result = np.where(any_reached, tc, np.nan)
    return float(result) if v.ndim == 1 else result


def crossing_times_for_levels(t_s, values_1d, levels, direction: str = "above"):
    """First-crossing times of many levels on one series, exactly and without loops.

    Used by the Monte Carlo engine, where each sample draws its own limit or scales
    the series: the running maximum (running minimum for "below") is monotone, so the
    first index reaching each level is found for all levels at once with
    :func:`numpy.searchsorted`; the time is then interpolated between the raw samples
    ``i-1`` and ``i`` exactly as in :func:`first_crossing`.

    Parameters
    ----------
    t_s : array_like, shape (N,)
        Sample times [s], nondecreasing.
    values_1d : array_like, shape (N,)
        The series.
    levels : array_like, shape (S,) (any shape is accepted and kept)
        The levels, in the unit of the series.
    direction : {"above", "below"}
        As in :func:`first_crossing`.

    Returns
    -------
    numpy.ndarray, shape of ``levels``
        Crossing times [s]; NaN where not reached (or where the level is NaN).

    Notes
    -----
    The first index at which the running maximum :math:`M_i = \\max_{j\\le i} y_j`
    reaches :math:`y^*` is the first index at which :math:`y_i` reaches it, since
    :math:`M_{i-1} < y^* \\le M_i` implies :math:`y_i = M_i`. The result is therefore
    identical to :func:`first_crossing` for each level.

    Examples
    --------
    >>> crossing_times_for_levels([0.0, 10.0, 20.0], [0.0, 1.0, 2.0], [0.5, 1.5, 3.0])
    array([ 5., 15., nan])
    """
    sign = _direction_sign(direction)
    v = np.asarray(values_1d, dtype=float)
    if v.ndim != 1:
        raise ValueError(f"values_1d must be 1-D, got shape {v.shape}")
    t = _time_axis(t_s, v.shape[0])
    lev = np.asarray(levels, dtype=float)
    shape = lev.shape
    target = sign * lev.ravel()
    n = v.shape[0]
    if n == 0:
        return np.full(shape, np.nan)

    w = sign * v
    w = np.where(np.isnan(w), -np.inf, w)
    running = np.maximum.accumulate(w)
    # NaN targets sort after every number, so they come back as "not reached".
    i = np.searchsorted(running, target, side="left")
    reached = i < n
    i = np.minimum(i, n - 1)
    tc = _interpolate(t, i, w, target)
    return np.where(reached, tc, np.nan).reshape(shape)

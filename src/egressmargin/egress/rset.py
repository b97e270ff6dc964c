"""Required safe egress time as the sum of its phases, and its percentiles.

RSET = t_detection + t_alarm + t_premovement + t_movement, sample by sample
(ISO/TR 16738:2009, Fire-safety engineering -- Technical information on methods for
evaluating behaviour and movement of people, sec. 5 -- section number from memory;
the phase sum itself is common practice).
"""

from __future__ import annotations

import numpy as np

from egressmargin.stats import percentile_or_none

__all__ = ["PERCENTILES", "compose_rset", "summarise"]

#: Keys of :func:`summarise` and the percentiles they stand for [%].
PERCENTILES: dict[str, float] = {"p05": 5.0, "p50": 50.0, "p95": 95.0}


def compose_rset(detection_s, alarm_s, premovement_s, movement_s):
    """Add the egress phases into the required safe egress time.

    Parameters
    ----------
    detection_s : float or array_like
        Time from ignition to detection [s]; NaN where the fire is never detected.
    alarm_s : float or array_like
        Time from detection to the alarm being given [s].
    premovement_s : float or array_like
        Time from alarm to the start of movement [s].
    movement_s : float or array_like
        Movement time [s].

    Returns
    -------
    total : numpy.ndarray
        RSET [s], the broadcast shape of the inputs (NaN propagates).
    components : dict of str to numpy.ndarray
        ``detection_s``, ``alarm_s``, ``premovement_s``, ``movement_s`` broadcast to
        the same shape.

    Notes
    -----
    RSET = t_det + t_alarm + t_pre + t_move (common practice; ISO/TR 16738:2009).

    Examples
    --------
    >>> total, parts = compose_rset(60.0, 30.0, [90.0, 120.0], 280.0)
    >>> total.tolist()
    [460.0, 490.0]
    """
    parts = np.broadcast_arrays(
        *(np.asarray(x, dtype=float) for x in (detection_s, alarm_s, premovement_s, movement_s))
    )
    names = ("detection_s", "alarm_s", "premovement_s", "movement_s")
    components = {name: np.array(part) for name, part in zip(names, parts)}
    total = parts[0] + parts[1] + parts[2] + parts[3]
    return total, components


def summarise(samples) -> dict[str, float | None]:
    """5th, 50th and 95th percentiles of Monte Carlo samples, NaN-aware.

    Parameters
    ----------
    samples : float or array_like
        Sample values (flattened). NaN (or +inf) marks a sample with no value, such
        as a limit never reached or a fire never detected: it is ordered above every
        number.

    Returns
    -------
    dict
        ``{"p05": ..., "p50": ..., "p95": ...}``, each a float (unrounded), or None
        where that percentile falls on (or interpolates towards) such a sample.

    Notes
    -----
    Linear interpolation between order statistics (numpy's default "linear" method,
    Hyndman and Fan definition 7): for n sorted values x_0..x_n-1 and percentile q,
    h = (n - 1) q / 100 and P = x_floor(h) + (h - floor(h)) (x_ceil(h) - x_floor(h)).
    Without NaN this equals ``numpy.percentile(samples, q)``. The search itself is
    the project's one rule, :func:`egressmargin.stats.percentile_or_none`.

    References
    ----------
    Hyndman, R. J., Fan, Y. (1996). Sample quantiles in statistical packages. The
    American Statistician 50(4), 361-365, definition 7.

    Examples
    --------
    >>> summarise([1.0, 2.0, 3.0, 4.0, 5.0])
    {'p05': 1.2, 'p50': 3.0, 'p95': 4.8}
    >>> summarise([1.0, 2.0, float("nan")])["p95"] is None
    True
    """
    x = np.asarray(samples, dtype=float).ravel()
    return {key: percentile_or_none(x, q) for key, q in PERCENTILES.items()}

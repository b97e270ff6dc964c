"""One clock: every time in a run counts from ignition.

A histories file keeps its own clock: a simulation may start at 0 s, at -10 s or at
1000 s. The study says when ignition is on that clock (``scenarios[].ignition``; default:
the file's first time), and every time the tool reports, and every egress time
(detection, alarm, pre-movement), counts from it. Rows before ignition are left out;
where ignition falls between two rows a row is interpolated at ignition, so doses start
accumulating exactly there.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

__all__ = ["shift_to_ignition"]


def _cut(values: np.ndarray, t: np.ndarray, keep: np.ndarray, t0: float, insert: bool) -> np.ndarray:
    """Rows of ``values`` (time on the last axis) from ignition on, with an interpolated first row."""
    kept = values[..., keep]
    if not insert:
        return kept
    i = int(np.searchsorted(t, t0))          # t[i-1] < t0 < t[i]
    w = (t0 - t[i - 1]) / (t[i] - t[i - 1])
    first = values[..., i - 1] * (1 - w) + values[..., i] * w
    return np.concatenate([first[..., None], kept], axis=-1)


def shift_to_ignition(data, ignition_s: float | None):
    """Return ``data`` with times counted from ignition, and a note for the report.

    Parameters
    ----------
    data : ScenarioData
        One scenario's histories, times on the file's clock [s].
    ignition_s : float or None
        Ignition on the file's clock [s]; None: the file's first time.

    Returns
    -------
    (ScenarioData, str or None)
        The shifted data (first time 0 s) and a sentence saying what was done, or None
        when the file already starts at ignition = 0 s.

    Raises
    ------
    ValueError
        When ignition lies outside the file's times (the caller locates the message).

    Examples
    --------
    >>> import numpy as np
    >>> from types import SimpleNamespace
    >>> from egressmargin.histories import ScenarioData
    >>> d = ScenarioData("a", np.array([1000.0, 1010.0, 1020.0]), ["x"],
    ...                  {"temperature": np.array([[20.0, 30.0, 40.0]])}, {"temperature": np.array([True])})
    >>> s, note = shift_to_ignition(d, 1005.0)
    >>> s.t_s.tolist(), s.series["temperature"].tolist()
    ([0.0, 5.0, 15.0], [[25.0, 30.0, 40.0]])
    """
    t = np.asarray(data.t_s, float)
    t0 = float(t[0]) if ignition_s is None else float(ignition_s)
    if ignition_s is None and t0 == 0.0:
        return data, None
    if not (t[0] <= t0 < t[-1]):
        raise ValueError(f"ignition at {t0:g} s is outside the histories' times ({t[0]:g} s to {t[-1]:g} s)")
    keep = t >= t0
    insert = bool(t0 not in t)
    new_t = _cut(t, t, keep, t0, insert) - t0
    new_t[0] = 0.0
    series = {k: _cut(v, t, keep, t0, insert) for k, v in data.series.items()}
    profiles = {li: (h, _cut(temps, t, keep, t0, insert), c) for li, (h, temps, c) in data.profiles.items()}
    dropped = int(np.count_nonzero(~keep))
    note = (f"times count from ignition at {t0:g} s on the file's clock"
            + (f"; {dropped} row(s) before ignition are not used" if dropped else "")
            + ("; a row is interpolated at ignition" if insert else ""))
    return replace(data, t_s=new_t, series=series, profiles=profiles), note

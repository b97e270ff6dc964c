"""A plausibility screen of the loaded histories: likely unit and mapping slips, as findings.

Every check is a pure function of plain arrays in internal units (see
:data:`egressmargin.units.INTERNAL_UNITS`) that returns a list of :class:`Finding`. A
finding names the scenario, the location, the series (and its column), the values seen and
the likely slip, and carries a short stable ``code`` that a location may acknowledge with
``accept_warnings: [<code>]``. :func:`screen_scenario` runs every check on one scenario;
the pipeline calls it when loading, so ``validate`` and ``run`` say the same.

Each threshold is a named constant with its reason. They are set to stay quiet on
ordinary studies: a finding is a likely slip, not a proof of one.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .histories import O2_AMBIENT      # dry air, 20.9 % (common practice): the one constant
#: An O2 series starting below this fraction [-] (1 %) where ambient air is expected is
#: read as a fraction (0.209) labelled percent: no occupied space starts a fire at 1 % O2
#: (common practice).
O2_START_MIN = 0.01
#: The O2 at ignition may differ from the stated ambient by this much [-] (0.5 percentage
#: points: sensor and model noise; common practice).
O2_START_TOLERANCE = 0.005
#: The temperature at ignition may differ from the stated ambient by this much [K]
#: (common practice: a few kelvin of stratification before ignition).
TEMPERATURE_START_TOLERANCE_K = 5.0
#: CO at ignition above this volume fraction [-] (20 ppm) is not ambient air: background
#: indoor CO is a few ppm (common practice).
CO_START_MAX = 20e-6
#: Extinction coefficient at ignition above this [1/m] is smoke already present: clean air
#: is near zero and 0.05 1/m is a visibility of 160 m with C = 8 (project choice).
EXTINCTION_START_MAX_PER_M = 0.05
#: An extinction coefficient above this at ignition [1/m] that then falls looks like a
#: visibility in metres (project choice: 1 1/m is a visibility of 3 to 8 m, never clean air).
EXTINCTION_AS_VISIBILITY_MIN_PER_M = 1.0
#: "Falls": its smallest later value is below this share of the value at ignition (project choice).
FALLING_SHARE = 0.5
#: A visibility below this at ignition [m] that then rises looks like an extinction
#: coefficient in 1/m (project choice: clean air has a visibility of tens of metres).
VISIBILITY_AS_EXTINCTION_MAX_M = 1.0
#: Tallest plausible smoke-layer height [m] (project choice: few atria exceed 50 m; a
#: layer height above it is most likely given in mm or cm and labelled m).
LAYER_HEIGHT_MAX_M = 50.0
#: A layer height may exceed the location's own ceiling (``temperature_profile.ceiling``)
#: by this share before it is called implausible (round-off of the interface estimate; project choice).
CEILING_TOLERANCE = 0.05
#: The smallest CO/CO2 volume ratio [-] at the CO2 peak that combustion gives. Well-ventilated
#: flaming fires of common fuels give CO yields of at least about 0.001 kg/kg against CO2
#: yields of at most about 3 kg/kg, a molar ratio of about 5e-4 (SFPE Handbook, 5th ed.,
#: tables of CO and CO2 yields; from memory). 1e-4 leaves a factor of five; CO in percent
#: labelled ppm is 1e4 times too small.
CO_CO2_RATIO_MIN = 1e-4
#: The CO2 rise above its first value [-] (0.5 %) needed before the CO/CO2 ratio is judged
#: (below it the ratio is noise; project choice).
CO2_RISE_FOR_RATIO = 0.005
#: Histories given in seconds that end before this [s] are most likely minutes labelled as
#: seconds: no fire simulation used for egress ends within its first minute (common practice).
END_MIN_S = 60.0
#: Histories that end before this share of a rough RSET (the median detection, alarm and
#: pre-movement times, no movement) are most likely minutes labelled as seconds (project
#: choice: a factor of 10, where the slip is a factor of 60).
END_RSET_SHARE = 0.1
#: Two series are "identical" when they agree to this relative tolerance everywhere (project choice).
IDENTICAL_RTOL = 1e-12
#: Smallest time after ignition [s] counted as "at ignition" when a limit is first reached (round-off).
AT_IGNITION_S = 1e-9

#: Every finding's code and what it means (the codes ``accept_warnings`` takes).
CODES: dict[str, str] = {
    "o2-fraction-as-percent": "O2 far below ambient at ignition: a fraction (0.209) labelled percent?",
    "co-percent-as-ppm": "CO/CO2 ratio implausibly small: CO in percent labelled ppm?",
    "layer-height-too-high": "layer height above the tallest plausible ceiling or the location's own ceiling",
    "start-temperature-off-ambient": "temperature at ignition away from the stated ambient",
    "start-o2-off-ambient": "O2 at ignition away from the stated (or dry-air) ambient",
    "start-co-nonzero": "CO present at ignition",
    "start-smoke-nonzero": "smoke present at ignition",
    "limit-at-ignition": "a criterion's limit is already reached at ignition",
    "extinction-looks-like-visibility": "extinction large at ignition and falling: a visibility mapped as extinction?",
    "visibility-looks-like-extinction": "visibility small at ignition and rising: an extinction mapped as visibility?",
    "time-minutes-as-seconds": "histories end implausibly early: minutes labelled as seconds?",
    "column-mapped-twice": "one CSV column mapped at two locations",
    "identical-series": "two locations with identical series",
}


@dataclass(frozen=True)
class Finding:
    """One plausibility finding.

    ``location`` is None for a finding about the whole scenario (its time column); such a
    finding is acknowledged when any location of the scenario lists its code.
    """

    scenario: str
    location: str | None
    series: str
    column: str | None
    code: str
    message: str

    def as_json(self, acknowledged: bool) -> dict:
        return {"scenario": self.scenario, "location": self.location, "series": self.series,
                "column": self.column, "code": self.code, "message": self.message,
                "acknowledged": bool(acknowledged)}


def _pct(x: float) -> str:
    return f"{x * 100:.4g} %"


def _ppm(x: float) -> str:
    return f"{x * 1e6:.4g} ppm"


def o2_checks(sid: str, lid: str, column: str | None, o2, ambient_o2: float | None) -> list[Finding]:
    """O2 [-] of one location: a fraction labelled percent, or a start away from ambient.

    Examples
    --------
    >>> [f.code for f in o2_checks("a", "x", "O2", [0.00209, 0.0020], None)]
    ['o2-fraction-as-percent']
    >>> o2_checks("a", "x", "O2", [0.209, 0.18], None)
    []
    """
    o2 = np.asarray(o2, float)
    amb = O2_AMBIENT if ambient_o2 is None else float(ambient_o2)
    if o2[0] < O2_START_MIN:
        return [Finding(sid, lid, "o2", column, "o2-fraction-as-percent",
                        f"O2 starts at {_pct(o2[0])} (largest value {_pct(o2.max())}) where ambient air "
                        f"({_pct(amb)}) is expected; likely a fraction (e.g. 0.209) labelled percent: give the "
                        "unit mol/mol or '-'")]
    if abs(o2[0] - amb) > O2_START_TOLERANCE:
        stated = "the stated ambient" if ambient_o2 is not None else "dry air (no ambient o2 stated)"
        return [Finding(sid, lid, "o2", column, "start-o2-off-ambient",
                        f"O2 at ignition is {_pct(o2[0])}, {abs(o2[0] - amb) * 100:.2g} percentage points from "
                        f"{stated}, {_pct(amb)} (tolerance {O2_START_TOLERANCE * 100:g}); check the unit, the "
                        "column and the ignition time")]
    return []


def co_checks(sid: str, lid: str, column: str | None, co, co_unit: str | None, co2=None) -> list[Finding]:
    """CO [-] of one location: present at ignition; CO in percent labelled ppm (needs CO2 [-]).

    Examples
    --------
    >>> co2 = [0.0004, 0.02]
    >>> [f.code for f in co_checks("a", "x", "CO", [0.0, 5e-8], "ppm", co2)]   # 0.05 % written in ppm
    ['co-percent-as-ppm']
    >>> co_checks("a", "x", "CO", [0.0, 5e-4], "ppm", co2)
    []
    """
    co = np.asarray(co, float)
    out = []
    if co[0] > CO_START_MAX:
        out.append(Finding(sid, lid, "co", column, "start-co-nonzero",
                           f"CO at ignition is {_ppm(co[0])}, above {_ppm(CO_START_MAX)} (background air); check "
                           "the column, the unit and the ignition time"))
    if co2 is not None and co_unit is not None and _in_ppm_or_ppb(co_unit):
        co2 = np.asarray(co2, float)
        k = int(np.argmax(co2))
        rise = co2[k] - co2[0]
        if rise >= CO2_RISE_FOR_RATIO and co[k] < CO_CO2_RATIO_MIN * co2[k]:
            out.append(Finding(sid, lid, "co", column, "co-percent-as-ppm",
                               f"at the CO2 peak ({_pct(co2[k])}) CO is {_ppm(co[k])}, a CO/CO2 ratio of "
                               f"{co[k] / co2[k]:.2g}, below the {CO_CO2_RATIO_MIN:g} that combustion gives; likely "
                               f"CO in percent labelled {co_unit}: check the unit"))
    return out


def _in_ppm_or_ppb(unit: str) -> bool:
    """True when ``unit`` is ppm or ppb in any spelling the tool reads (:func:`egressmargin.units.same_unit`)."""
    from .units import UnitProblem, same_unit
    try:
        return same_unit(unit, "ppm", "co") or same_unit(unit, "ppb", "co")
    except (UnitProblem, ValueError):      # not a CO unit at all: the reader has refused it already
        return False


def temperature_checks(sid: str, lid: str, column: str | None, temp_c, ambient_c: float | None) -> list[Finding]:
    """Temperature [degC] at ignition against the stated ambient (nothing when none is stated).

    Examples
    --------
    >>> [f.code for f in temperature_checks("a", "x", "T", [35.0, 40.0], 20.0)]
    ['start-temperature-off-ambient']
    >>> temperature_checks("a", "x", "T", [23.0, 40.0], 20.0)
    []
    """
    temp = np.asarray(temp_c, float)
    if ambient_c is None or abs(temp[0] - ambient_c) <= TEMPERATURE_START_TOLERANCE_K:
        return []
    return [Finding(sid, lid, "temperature", column, "start-temperature-off-ambient",
                    f"temperature at ignition is {temp[0]:.4g} degC, {abs(temp[0] - ambient_c):.3g} K from the "
                    f"stated ambient {ambient_c:.4g} degC (tolerance {TEMPERATURE_START_TOLERANCE_K:g} K); the "
                    "criteria count the rise from the stated ambient: check the unit, the column, the ambient "
                    "and the ignition time")]


def smoke_checks(sid: str, lid: str, key: str, column: str | None, values, extinction_per_m=None) -> list[Finding]:
    """A smoke series of kind ``key``: swapped visibility and extinction, smoke at ignition.

    ``values`` in the internal unit of ``key``; ``extinction_per_m`` the same series as an
    extinction coefficient [1/m] (for soot and optical density), default ``values``.

    Examples
    --------
    >>> [f.code for f in smoke_checks("a", "x", "extinction", "K", [30.0, 20.0, 5.0])]
    ['extinction-looks-like-visibility']
    >>> [f.code for f in smoke_checks("a", "x", "visibility", "V", [0.0, 0.4, 0.8])]
    ['visibility-looks-like-extinction']
    >>> smoke_checks("a", "x", "extinction", "K", [0.0, 0.4, 0.8])
    []
    """
    v = np.asarray(values, float)
    if key == "visibility":
        if v[0] < VISIBILITY_AS_EXTINCTION_MAX_M and v[-1] > v[0]:
            return [Finding(sid, lid, key, column, "visibility-looks-like-extinction",
                            f"visibility is {v[0]:.3g} m at ignition and rises to {v.max():.3g} m; a visibility "
                            "falls as smoke comes: likely an extinction coefficient mapped as 'visibility' (map it "
                            "as 'extinction')")]
        return []
    k = np.asarray(v if extinction_per_m is None else extinction_per_m, float)
    if key == "extinction" and k[0] > EXTINCTION_AS_VISIBILITY_MIN_PER_M and k[1:].size \
            and k[1:].min() < FALLING_SHARE * k[0]:
        return [Finding(sid, lid, key, column, "extinction-looks-like-visibility",
                        f"extinction coefficient is {k[0]:.3g} 1/m at ignition and falls to {k.min():.3g} 1/m; smoke "
                        "thickens as a fire grows: likely a visibility in metres mapped as 'extinction' (map it as "
                        "'visibility')")]
    if k[0] > EXTINCTION_START_MAX_PER_M:
        return [Finding(sid, lid, key, column, "start-smoke-nonzero",
                        f"{key.replace('_', ' ')} at ignition is {v[0]:.3g} (an extinction coefficient of "
                        f"{k[0]:.3g} 1/m, above {EXTINCTION_START_MAX_PER_M:g} 1/m): smoke before the fire; check "
                        "the column, the unit and the ignition time")]
    return []


def layer_checks(sid: str, lid: str, column: str | None, layer_m, ceiling_m: float | None = None) -> list[Finding]:
    """Layer height [m] above the tallest plausible ceiling or above the location's own ceiling.

    Examples
    --------
    >>> [f.code for f in layer_checks("a", "x", "Z", [2500.0, 1800.0])]   # mm labelled m
    ['layer-height-too-high']
    >>> layer_checks("a", "x", "Z", [7.5, 2.0], 7.5)
    []
    """
    z = np.asarray(layer_m, float)
    top = float(z.max())
    if top > LAYER_HEIGHT_MAX_M:
        return [Finding(sid, lid, "layer_height", column, "layer-height-too-high",
                        f"layer height reaches {top:.4g} m, above the tallest plausible ceiling ({LAYER_HEIGHT_MAX_M:g}"
                        " m); likely mm or cm labelled m: check the unit")]
    if ceiling_m is not None and top > ceiling_m * (1 + CEILING_TOLERANCE):
        return [Finding(sid, lid, "layer_height", column, "layer-height-too-high",
                        f"layer height reaches {top:.4g} m, above the location's ceiling ({ceiling_m:g} m, "
                        "temperature_profile.ceiling); check the unit and the column")]
    return []


def end_checks(sid: str, t_end_s: float, time_unit: str | None, column: str | None,
               rough_rset_s: float | None, time_in_seconds: bool) -> list[Finding]:
    """Histories that end implausibly early for their time unit.

    ``rough_rset_s`` is a lower estimate of the median RSET [s] (detection, alarm and
    pre-movement medians, no movement), or None.

    Examples
    --------
    >>> [f.code for f in end_checks("a", 15.0, "s", "Time", 120.0, True)]
    ['time-minutes-as-seconds']
    >>> end_checks("a", 900.0, "s", "Time", 120.0, True)
    []
    """
    if not time_in_seconds:
        return []
    short = t_end_s < END_MIN_S
    before_rset = rough_rset_s is not None and rough_rset_s > 0 and t_end_s < END_RSET_SHARE * rough_rset_s
    if not (short or before_rset):
        return []
    why = (f"before {END_MIN_S:g} s" if short else "")
    if before_rset:
        why += (" and " if why else "") + (f"before {END_RSET_SHARE:g} of a rough RSET ({rough_rset_s:.4g} s: median "
                                           "detection, alarm and pre-movement)")
    return [Finding(sid, None, "time", column, "time-minutes-as-seconds",
                    f"the histories end at {t_end_s:.4g} s after ignition (unit '{time_unit}'), {why}; likely "
                    "minutes labelled as seconds: check the time unit")]


def duplicate_checks(sid: str, columns: dict[str, list[tuple[str, str]]], series: dict[str, dict[str, np.ndarray]],
                     ) -> list[Finding]:
    """One column mapped at two locations; two locations whose series are all identical.

    Parameters
    ----------
    columns : dict
        Column name -> [(location, series key), ...] as mapped (time excluded).
    series : dict
        Location -> {series key: values}, locations in the study's order.

    Examples
    --------
    >>> [f.code for f in duplicate_checks("a", {"T1": [("x", "temperature"), ("y", "temperature")]}, {})]
    ['column-mapped-twice']
    """
    out = []
    for col, uses in columns.items():
        locs = list(dict.fromkeys(lid for lid, _ in uses))
        if len(locs) > 1:
            for lid, key in uses[1:]:
                if lid == uses[0][0]:
                    continue
                out.append(Finding(sid, lid, key, col, "column-mapped-twice",
                                   f"column '{col}' is mapped as '{key}' here and as '{uses[0][1]}' at location "
                                   f"'{uses[0][0]}'; two places rarely see the same history: check the column"))
    shared = {(lid, k) for uses in columns.values() if len({u[0] for u in uses}) > 1 for lid, k in uses}
    ids = list(series)
    maybe = _maybe_close(series)
    for i, a in enumerate(ids):
        for b in ids[i + 1:]:
            sa, sb = series[a], series[b]
            if not sa or set(sa) != set(sb) or all((a, k) in shared and (b, k) in shared for k in sa):
                continue
            if not all(maybe(k, a, b) for k in sa):
                continue
            if all(sa[k].shape == sb[k].shape and np.allclose(sa[k], sb[k], rtol=IDENTICAL_RTOL, atol=0.0)
                   for k in sa):
                out.append(Finding(sid, b, ", ".join(sa), None, "identical-series",
                                   f"every series here ({', '.join(sa)}) is identical to location '{a}''s; two "
                                   "places rarely see the same histories: check the columns mapped"))
    return out


#: Samples of each series compared first, for all pairs of locations at once (project choice).
_PROBES = 16


def _maybe_close(series: dict[str, dict[str, np.ndarray]]):
    """``maybe(key, a, b)``: False only where ``allclose(series[a][key], series[b][key])`` must be False.

    The same elementwise test (:func:`numpy.isclose`, same tolerances and argument order)
    on a few samples of every series, for every pair at once: a pair that fails on a sample
    fails on the whole series, so only the others are compared in full (speed only; the
    findings are those of the pairwise comparison).
    """
    probes = {}
    for key in {k for s in series.values() for k in s}:
        by_shape: dict[tuple, list[str]] = {}
        for lid, s in series.items():
            if key in s and np.ndim(s[key]) == 1 and len(s[key]) > 0:
                by_shape.setdefault(np.shape(s[key]), []).append(lid)
        for shape, lids in by_shape.items():
            if len(lids) < 2:
                continue
            idx = np.unique(np.linspace(0, shape[0] - 1, _PROBES).astype(int))
            f = np.stack([np.asarray(series[lid][key], float)[idx] for lid in lids])
            ok = np.isclose(f[:, None, :], f[None, :, :], rtol=IDENTICAL_RTOL, atol=0.0).all(axis=-1)
            pos = {lid: j for j, lid in enumerate(lids)}
            probes[(key, shape)] = (pos, ok)

    def maybe(key, a, b) -> bool:
        sa, sb = series[a].get(key), series[b].get(key)
        if sa is None or sb is None or np.shape(sa) != np.shape(sb):
            return True                      # the full comparison decides
        found = probes.get((key, np.shape(sa)))
        if found is None or a not in found[0] or b not in found[0]:
            return True
        pos, ok = found
        return bool(ok[pos[a], pos[b]])

    return maybe


def limit_checks(sid: str, lid: str, first_reached_s: dict[str, float]) -> list[Finding]:
    """Criteria whose limit is already reached at ignition (first time <= :data:`AT_IGNITION_S`).

    Examples
    --------
    >>> [f.code for f in limit_checks("a", "x", {"temperature": 0.0, "visibility": 40.0})]
    ['limit-at-ignition']
    """
    hit = [cid for cid, t in first_reached_s.items() if t is not None and np.isfinite(t) and t <= AT_IGNITION_S]
    if not hit:
        return []
    return [Finding(sid, lid, ", ".join(hit), None, "limit-at-ignition",
                    f"the limit of {', '.join(hit)} is already reached at ignition (t = 0 s), so the ASET here is "
                    "0 s; check the units, the columns and the ignition time")]


def screen_scenario(sid: str, location_ids: list[str], series: dict[str, np.ndarray], present: dict[str, np.ndarray],
                    columns: dict[tuple[str, str], tuple[str, str]], *, t_end_s: float,
                    time_column: tuple[str, str] | None, time_in_seconds: bool,
                    ambient_c: float | None = None, ambient_o2: float | None = None,
                    ceilings_m: dict[str, float] | None = None, rough_rset_s: float | None = None,
                    first_reached_s: dict[str, dict[str, float]] | None = None,
                    smoke_extinction: dict[str, np.ndarray] | None = None) -> list[Finding]:
    """Every check on one scenario's histories (times from ignition).

    Parameters
    ----------
    series, present : dict
        Per series key, the (L, N) values in internal units and the (L,) bool of locations that have it.
    columns : dict
        (location, series key) -> (column header, unit as read).
    time_column : (header, unit) or None
    ceilings_m : dict
        Location -> its own ceiling height [m] where the study gives one.
    first_reached_s : dict
        Location -> {criterion: first time its limit is reached [s] (NaN or inf when never)},
        for occupied locations only.
    smoke_extinction : dict
        ``optical_density`` or ``soot`` -> the (L, N) extinction coefficient [1/m] it gives
        (rows of other locations unused); a kind left out is not judged.
    """
    out: list[Finding] = []
    ceilings_m = ceilings_m or {}
    smoke_extinction = smoke_extinction or {}
    per_loc: dict[str, dict[str, np.ndarray]] = {}
    uses: dict[str, list[tuple[str, str]]] = {}
    for (lid, key), (col, _) in columns.items():
        uses.setdefault(col, []).append((lid, key))
    for li, lid in enumerate(location_ids):
        def has(k):
            return k in series and bool(present[k][li])

        def col(k):
            return columns.get((lid, k), (None, None))[0]
        per_loc[lid] = {k: series[k][li] for k in series if has(k)}
        if has("temperature"):
            out += temperature_checks(sid, lid, col("temperature"), series["temperature"][li], ambient_c)
        if has("o2"):
            out += o2_checks(sid, lid, col("o2"), series["o2"][li], ambient_o2)
        if has("co"):
            out += co_checks(sid, lid, col("co"), series["co"][li], columns.get((lid, "co"), (None, None))[1],
                             series["co2"][li] if has("co2") else None)
        for k in ("extinction", "visibility", "optical_density", "soot"):
            if not has(k):
                continue
            if k in ("extinction", "visibility"):
                out += smoke_checks(sid, lid, k, col(k), series[k][li])
            elif k in smoke_extinction:       # optical density and soot: judged as the extinction they give
                out += smoke_checks(sid, lid, k, col(k), series[k][li], smoke_extinction[k][li])
        if has("layer_height"):
            out += layer_checks(sid, lid, col("layer_height"), series["layer_height"][li], ceilings_m.get(lid))
        if first_reached_s and lid in first_reached_s:
            out += limit_checks(sid, lid, first_reached_s[lid])
    out += end_checks(sid, t_end_s, time_column[1] if time_column else None, time_column[0] if time_column else None,
                      rough_rset_s, time_in_seconds)
    out += duplicate_checks(sid, uses, per_loc)
    return out

"""Time histories in: CSV reading, units, plausibility checks.

A scenario's CSV is read once; only the columns the study maps are converted. The result
is a :class:`ScenarioData` of plain float arrays in internal units (see
:data:`egressmargin.units.INTERNAL_UNITS`), one (locations, time) array per series key,
with NaN rows where a location has no such series.
"""

from __future__ import annotations

import hashlib
import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .errors import InputError, Problem
from .tenability.irritants import IRRITANT_GASES
from .study import SERIES_KEYS, ScenarioSpec, SeriesRef, did_you_mean
from .units import UnitProblem, check_unit, to_internal

_HEADER_UNIT = re.compile(r"^\s*(.*?)\s*\[\s*([^\]]*?)\s*\]\s*$")

#: Ambient oxygen volume fraction (dry air, 20.9 %; common practice).
O2_AMBIENT = 0.209
#: O2 may exceed ambient by this much before it is called implausible (sensor noise; common practice).
O2_TOLERANCE = 0.002
#: Negative concentrations down to this are treated as round-off and clipped to zero (common practice).
ROUND_OFF = {"co": 1e-6, "co2": 1e-5, "hcn": 1e-6, "extinction": 1e-3, "optical_density": 1e-3,
             "soot": 1e-8, "heat_flux": 1e-2, "velocity": None, "layer_height": 1e-3, "visibility": 1e-3}


@dataclass
class ColumnRead:
    column: str
    series: str
    location: str
    unit_as_read: str


@dataclass
class ScenarioData:
    """One scenario's histories in internal units.

    Attributes
    ----------
    t_s : ndarray (N,)
        Time [s], strictly increasing.
    location_ids : list[str]
    series : dict[str, ndarray (L, N)]
        Per series key, values in internal units; NaN rows where a location lacks the series.
    present : dict[str, ndarray (L,) bool]
    profiles : dict[int, (heights_m (P,), temperature_c (P, N), ceiling_m)]
    """

    scenario_id: str
    t_s: np.ndarray
    location_ids: list[str]
    series: dict[str, np.ndarray]
    present: dict[str, np.ndarray]
    profiles: dict[int, tuple] = field(default_factory=dict)
    path: Path | None = None
    sha256: str = ""
    rows: int = 0
    columns: list[ColumnRead] = field(default_factory=list)

    @property
    def end_s(self) -> float:
        return float(self.t_s[-1])

    def has(self, key: str) -> np.ndarray:
        return self.present.get(key, np.zeros(len(self.location_ids), bool))


def sha256_of(path: Path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for chunk in iter(lambda: fh.read(1 << 20), b""):
            h.update(chunk)
    return h.hexdigest()


def _split_header(name: str) -> tuple[str, str | None]:
    m = _HEADER_UNIT.match(str(name))
    if m:
        return m.group(1), m.group(2)
    return str(name).strip(), None


def read_scenario(spec: ScenarioSpec, path: Path | None = None) -> tuple[ScenarioData, list[Problem]]:
    """Read and check the histories of ``spec`` (or of ``path``, a resolution's CSV with the same map).

    Returns the data and the warnings (likely unit slips); raises InputError with every error.
    """
    import pandas as pd

    path = Path(path or spec.histories)
    problems: list[Problem] = []
    fname = str(path)
    read_opts = {"skipinitialspace": True}
    try:
        head = pd.read_csv(path, nrows=1, dtype=str, keep_default_na=False, **read_opts)
    except FileNotFoundError:
        raise InputError([Problem(fname, "file not found; expected the scenario's CSV histories")]) from None
    except Exception as exc:  # pandas raises many parser types; all are the user's file
        raise InputError([Problem(fname, f"cannot read as CSV ({str(exc).splitlines()[0]}); expected a "
                                  "comma-separated file with one header row")]) from None
    if head.shape[1] == 0:
        raise InputError([Problem(fname, "no columns found; expected a header row naming the columns")])
    digest = _check_field_counts(path, fname)   # reads the bytes once: also the file's hash
    all_headers = list(head.columns)
    headers = {}
    for h in all_headers:
        base, unit = _split_header(h)
        headers.setdefault(base, (h, unit))
        headers.setdefault(str(h).strip(), (h, unit))
    units_row = {}
    first_data = 0
    if spec.units_row:
        if len(head) == 0:
            problems.append(Problem(fname, "units_row is true but the file has no rows; expected a units row"))
        else:
            units_row = {h: str(head[h].iloc[0]).strip() for h in all_headers}
            first_data = 1
    # CSV line of data row i (1-based file lines: header is line 1)
    line0 = 2 + first_data
    wanted = [spec.time.column] if spec.time is not None else []
    for loc in spec.locations:
        wanted += [ref.column for ref in loc.series.values()]
        wanted += loc.profile.columns if loc.profile is not None else []
    needed = sorted({headers[c][0] for c in wanted if c in headers}, key=all_headers.index)
    skip = [1] if first_data else None
    # Fast path: the C parser straight to floats. Any column it cannot parse cleanly is
    # read again as text, so that the message can quote the offending cell.
    try:
        num = pd.read_csv(path, usecols=needed, skiprows=skip, dtype=float, **read_opts) if needed else None
    except Exception:  # a non-numeric cell or a ragged row: fall back to the text path
        num = None
    text_frame = []

    def as_text():
        if not text_frame:
            try:
                text_frame.append(pd.read_csv(path, usecols=needed, skiprows=skip, dtype=str,
                                              keep_default_na=False, **read_opts))
            except Exception as exc:
                raise InputError([Problem(fname, f"cannot read as CSV ({str(exc).splitlines()[0]}); expected "
                                          "a comma-separated file with one header row")]) from None
        return text_frame[0]

    n = len(num) if num is not None else (len(as_text()) if needed else max(len(head) - first_data, 0))

    def column(ref: SeriesRef, quantity: str, what: str):
        if ref.column not in headers:
            problems.append(Problem(f"{fname} column '{ref.column}'", f"not in the file (mapped at {ref.where}); "
                                    f"expected one of {', '.join(map(str, all_headers[:12]))}"
                                    f"{' …' if len(all_headers) > 12 else ''}{did_you_mean(ref.column, headers)}"))
            return None, None
        header, header_unit = headers[ref.column]
        unit = ref.unit or header_unit or (units_row.get(header) or None)
        if not unit and quantity == "time":
            unit = "s"   # contract: the time column is in seconds unless a unit is given
        if not unit:
            problems.append(Problem(f"{fname} column '{header}'", f"no unit for {what} (mapped at {ref.where}); "
                                    f"expected a unit: write the header as '{ref.column} [unit]', give "
                                    "{column: ..., unit: ...} in the study, or set units_row: true"))
            return None, None
        msg = check_unit(unit, quantity)
        if msg:
            problems.append(Problem(f"{fname} column '{header}'", f"{what}: {msg}"))
            return None, None
        values = num[header].to_numpy(dtype=float) if num is not None else None
        if values is None or not np.isfinite(values).all():
            text = as_text()[header].astype(str).str.strip()
            values = pd.to_numeric(text, errors="coerce").to_numpy(dtype=float)
            bad = ~np.isfinite(values)
            if bad.any():
                i = int(np.argmax(bad))
                found = text.iloc[i]
                problems.append(Problem(f"{fname}:{line0 + i} column '{header}' row {i + 1}",
                                        f"found {'a blank' if found == '' else repr(found)}"
                                        f"{f' (and {int(bad.sum()) - 1} more)' if bad.sum() > 1 else ''}; "
                                        "expected a number"))
                return None, None
        return to_internal(values, unit, quantity), (header, unit)

    columns: list[ColumnRead] = []
    t_s = None
    if spec.time is not None:
        t_s, info = column(spec.time, "time", "time")
        if t_s is not None:
            columns.append(ColumnRead(info[0], "time", "", info[1]))
            if n < 2:
                problems.append(Problem(fname, f"{n} data row(s); expected at least two times"))
            d = np.diff(t_s)
            if (d <= 0).any():
                i = int(np.argmax(d <= 0)) + 1
                word = "repeats" if d[i - 1] == 0 else "goes backwards"
                col_text = as_text()[info[0]]
                problems.append(Problem(f"{fname}:{line0 + i} column '{info[0]}' row {i + 1}",
                                        f"time {word} ({col_text.iloc[i - 1]} then {col_text.iloc[i]}); "
                                        "expected strictly increasing times"))
    L = len(spec.locations)
    series = {k: np.full((L, n), np.nan) for k in SERIES_KEYS}
    present = {k: np.zeros(L, bool) for k in SERIES_KEYS}
    profiles = {}
    for li, loc in enumerate(spec.locations):
        for key, ref in loc.series.items():
            values, info = column(ref, key, f"'{key}' at location '{loc.id}'")
            if values is None:
                continue
            columns.append(ColumnRead(info[0], key, loc.id, info[1]))
            values = _plausible(key, values, ref, info, fname, line0, problems)
            if values is not None:
                series[key][li] = values
                present[key][li] = True
        if loc.profile is not None:
            temps = []
            for c in loc.profile.columns:
                ref = SeriesRef("temperature", c, loc.profile.unit, loc.profile.where)
                values, info = column(ref, "temperature", f"temperature profile at '{loc.id}'")
                if values is not None:
                    columns.append(ColumnRead(info[0], "temperature_profile", loc.id, info[1]))
                    temps.append(_plausible("temperature", values, ref, info, fname, line0, problems))
            if len(temps) == len(loc.profile.columns) and all(t is not None for t in temps):
                profiles[li] = (np.asarray(loc.profile.heights_m), np.vstack(temps), loc.profile.ceiling_m)
    if any(not p.warning for p in problems):
        raise InputError(problems)
    return ScenarioData(spec.id, np.asarray(t_s, float), [loc.id for loc in spec.locations],
                        {k: v for k, v in series.items() if present[k].any()},
                        {k: v for k, v in present.items() if v.any()}, profiles, path, digest, n,
                        columns), [p for p in problems if p.warning]


def _check_field_counts(path: Path, fname: str) -> str:
    """Raise InputError for a row with more or fewer fields than the header; return the SHA-256.

    Reading only the mapped columns would otherwise let a ragged row shift values into the
    wrong column silently. Counting separators is cheap; only when a count differs is the
    file parsed in full, so that quoted fields holding commas are not mistaken for errors.
    """
    import pandas as pd

    raw = path.read_bytes()
    lines = raw.splitlines()
    if not lines:
        return hashlib.sha256(raw).hexdigest()
    n_sep = lines[0].count(b",")
    if all(line.count(b",") == n_sep for line in lines[1:] if line.strip()):
        return hashlib.sha256(raw).hexdigest()
    try:
        pd.read_csv(path, dtype=str, keep_default_na=False, skipinitialspace=True)
    except Exception as exc:
        raise InputError([Problem(fname, f"cannot read as CSV ({str(exc).splitlines()[0]}); expected a "
                                  "comma-separated file with one header row")]) from None
    return hashlib.sha256(raw).hexdigest()


def _plausible(key, values, ref, info, fname, line0, problems):
    """Check physical plausibility of one converted column; append problems; return cleaned values."""
    header, unit = info
    if values.size == 0:
        return values

    def at(i):
        return f"{fname}:{line0 + i} column '{header}' row {i + 1}"

    def first(mask):
        return int(np.argmax(mask))

    if key == "temperature":
        bad = values <= -273.15
        if bad.any():
            i = first(bad)
            problems.append(Problem(at(i), f"temperature {values[i]:.2f} degC is at or below absolute zero; "
                                    "expected a gas temperature"))
            return None
        u = unit.strip().lower()
        if u in ("degc", "°c", "c", "celsius", "degree_celsius") and 250 <= values[0] <= 330:
            problems.append(Problem(at(0), f"first value {values[0]:g} {unit} looks like kelvin; check the unit "
                                    "(expected degC near 20 at the start)", warning=True))
        return values
    if key in ("co", "co2", "hcn", "o2", *IRRITANT_GASES):
        bad = (values < -ROUND_OFF.get(key, 1e-6)) if key != "o2" else (values < 0)
        if bad.any():
            i = first(bad)
            problems.append(Problem(at(i), f"negative concentration {values[i]:g} (as a volume fraction); "
                                    "expected a value of zero or more"))
            return None
        over = values > 1.0
        if over.any():
            i = first(over)
            problems.append(Problem(at(i), f"{key.upper()} of {values[i] * 100:g} percent is above 100 percent; "
                                    "expected a volume fraction within [0, 100] percent (check the unit)"))
            return None
        if key == "o2":
            high = values > O2_AMBIENT + O2_TOLERANCE
            if high.any():
                i = first(high)
                problems.append(Problem(at(i), f"O2 of {values[i] * 100:.2f} percent is above ambient "
                                        f"({O2_AMBIENT * 100:.1f} percent); expected oxygen at or below ambient"))
                return None
        if key == "co" and unit.strip().lower() in ("mol/mol", "dimensionless", "") and values.max() > 0.1:
            problems.append(Problem(at(first(values > 0.1)), f"CO above 0.1 mol/mol ({values.max():g}); "
                                    "a likely unit slip (percent or ppm?)", warning=True))
        return np.clip(values, 0.0, None)
    tol = ROUND_OFF.get(key)
    if tol is not None:
        bad = values < -tol
        if bad.any():
            i = first(bad)
            problems.append(Problem(at(i), f"negative {key.replace('_', ' ')} {values[i]:g}; expected a value "
                                    "of zero or more"))
            return None
        return np.clip(values, 0.0, None)
    return values

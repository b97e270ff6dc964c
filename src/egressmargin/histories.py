"""Time histories in: CSV reading, units, plausibility checks.

A scenario's CSV is read once; only the columns the study maps are converted. The result
is a :class:`ScenarioData` of plain float arrays in internal units (see
:data:`egressmargin.units.INTERNAL_UNITS`), one (locations, time) array per series key,
with NaN rows where a location has no such series.
"""

from __future__ import annotations

import csv
import hashlib
import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .errors import InputError, Problem
from .tenability.irritants import IRRITANT_GASES
from .study import SERIES_KEYS, ScenarioSpec, SeriesRef, did_you_mean
from .units import OBSCURATION_KEYS, check_unit, is_unit, obscuration_length, same_unit, to_internal

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
    ignition_s: float = 0.0            # ignition on the file's clock [s]; times here count from it
    clock_note: str | None = None      # what shifting to ignition did, for the report

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


#: Longest column name quoted in a message, and most names listed (a message never
#: dumps a whole header: an export can have thousands of columns).
NAME_CHARS = 40
NAMES_LISTED = 12


def _short(name) -> str:
    text = str(name)
    return text if len(text) <= NAME_CHARS else text[:NAME_CHARS - 1] + "…"


def _listing(names) -> str:
    names = list(names)
    shown = ", ".join(_short(n) for n in names[:NAMES_LISTED])
    return shown + (f" … ({len(names)} columns)" if len(names) > NAMES_LISTED else "")


#: Bytes looked at for the file's line ends (CR only, or a CR inside a line).
LINE_END_PROBE = 1 << 16


def _first_lines(path: Path, n: int, delimiter: str = ",") -> list[bytes]:
    """The first ``n`` lines of the file (without line ends), without reading the rest.

    Raises InputError when the lines end with a carriage return (CR) alone, or when one of
    these lines holds a CR before its end (inside a cell): the csv module and pandas would
    take the CR for a line end, so the message names the line and the cell.
    """
    out = []
    with open(path, "rb") as fh:
        probe = fh.read(LINE_END_PROBE)
        fh.seek(0)
        for line in fh:
            out.append(line.rstrip(b"\r\n"))
            if len(out) == n:
                break
    fname = str(path)
    if b"\n" not in probe and b"\r" in probe.rstrip(b"\r"):      # no LF, and a CR before the end
        raise InputError([Problem(f"{fname}:1", "the lines end with a carriage return (CR) alone, as in files "
                                  "saved on classic Mac OS; expected LF or CR LF line ends: save the file with "
                                  "Unix (LF) or Windows (CR LF) line ends")])
    for i, line in enumerate(out):
        if b"\r" in line:
            cells = line.split(delimiter.encode())
            k = next(j for j, c in enumerate(cells) if b"\r" in c)
            shown = cells[k].decode("utf-8", errors="replace").replace("\r", "<CR>").strip()
            raise InputError([Problem(f"{fname}:{i + 1} column {k + 1}", f"a carriage return (CR) inside the cell "
                                      f"{_short(shown)!r}, which would split the line in two; expected no line "
                                      "break inside a cell: remove it")])
    return out


def _cells(line: bytes, delimiter: str, fname: str, lineno: int) -> list[str]:
    try:
        text = line.decode("utf-8-sig") if lineno == 1 else line.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise InputError([Problem(f"{fname}:{lineno}", f"cannot read line {lineno} as UTF-8 text ({exc.reason}); "
                                  "expected a UTF-8 (or ASCII) CSV file")]) from None
    return [c.strip() for c in next(csv.reader([text], delimiter=delimiter, skipinitialspace=True), [])]


def _is_number(cell: str, decimal: str) -> bool:
    try:
        float(cell.replace(decimal, ".") if decimal != "." else cell)
    except ValueError:
        return False
    return True


def _looks_like_units(cells: list[str], decimal: str) -> bool:
    """A row of unit strings: no cell is a number and most non-blank cells are units pint knows."""
    filled = [c for c in cells if c]
    if not filled or any(_is_number(c, decimal) for c in filled):
        return False
    known = sum(is_unit(c) for c in filled)
    return known * 2 >= len(filled)


def _layout(spec, head: list[bytes], fname: str, wanted: list[str]):
    """Where the names, the units row and the data are; one clear hint when the file's layout is not
    the one declared (a units row above or below the names, another delimiter).

    Returns (names, units, names_line, units_at, data_line0): the column names, the units
    row's cells (empty without one), the 1-based line of the names, the 0-based line of the
    units row (None without one) and the 1-based line of the first data row.
    """
    delimiter = getattr(spec, "delimiter", ",") or ","
    decimal = getattr(spec, "decimal", ".") or "."
    declared = spec.units_row            # False, "above" or "below" (true means below)
    declared = "below" if declared is True else declared
    lines = head
    if not lines or not lines[0].strip():
        raise InputError([Problem(fname, "no columns found; expected a header row naming the columns")])
    rows = [_cells(line, delimiter, fname, i + 1) for i, line in enumerate(lines)]
    first = lines[0].decode("utf-8-sig", errors="replace")
    names_of = {",": "comma", ";": "semicolon", "\t": "tab"}
    for other, name in names_of.items():
        if other != delimiter and first.count(other) > first.count(delimiter):
            hint = " (and decimal: ',' if numbers are written like 1,5)" if other == ";" else ""
            declare = "tab" if other == "\t" else repr(other)
            mine = names_of.get(delimiter, repr(delimiter))
            raise InputError([Problem(f"{fname}:1", f"the header has {first.count(other)} {name}s and "
                                      f"{first.count(delimiter)} {mine}s: the file looks {name}-delimited; expected "
                                      f"{mine}s, or declare delimiter: {declare} on the scenario ({spec.where})"
                                      f"{hint if other != ',' else ''}")])
    names_at = 1 if declared == "above" else 0
    if declared == "above" and len(rows) < 2:
        raise InputError([Problem(fname, "units_row: above, but the file has only one line; expected a units "
                                  "row, then the names row, then data")])
    names = rows[names_at]
    base = {_split_header(h)[0] for h in names} | set(names)
    missing = [c for c in wanted if c not in base]
    if declared != "above" and missing and len(rows) > 1:
        below = {_split_header(h)[0] for h in rows[1]} | set(rows[1])
        if all(c in below for c in missing):
            what = (f"line 1 looks like a units row ({_listing(rows[0])}); declare units_row: above on the "
                    f"scenario ({spec.where})") if _looks_like_units(rows[0], decimal) else \
                (f"line 1 holds {_listing(rows[0])}; expected the names on line 1 (or a units row there with "
                 f"units_row: above on the scenario, {spec.where})")
            raise InputError([Problem(f"{fname}:1", f"the mapped columns ({_listing(missing)}) are named on line "
                                      f"2, and {what}")])
    if declared == "above" and missing:
        over = {_split_header(h)[0] for h in rows[0]} | set(rows[0])
        if all(c in over for c in missing):
            raise InputError([Problem(f"{fname}:1", f"units_row: above, but the mapped columns ({_listing(missing)}) "
                                      f"are named on line 1; expected a units row on line 1 and the names on line 2, "
                                      f"or units_row: below / true / false on the scenario ({spec.where})")])
    units_at = 0 if declared == "above" else (1 if declared == "below" else None)
    mapped = [i for i, h in enumerate(names) if h in wanted or _split_header(h)[0] in wanted]
    if declared == "below" and len(rows) > 1:
        cells = [rows[1][i] for i in mapped if i < len(rows[1])]
        if any(cells) and all(_is_number(c, decimal) for c in cells if c):
            raise InputError([Problem(f"{fname}:2", f"units_row: below, but line 2 holds numbers "
                                      f"({_listing(cells)}); expected a units row under the names, or remove "
                                      f"units_row from the scenario ({spec.where})")])
    if not declared and len(rows) > 1:
        cells = [rows[1][i] for i in mapped if i < len(rows[1])]
        if cells and _looks_like_units(cells, decimal):
            raise InputError([Problem(f"{fname}:2", f"line 2 looks like a units row ({_listing(cells)}); declare "
                                      f"units_row: below (or true) on the scenario ({spec.where}), or remove the "
                                      "row")])
    units = rows[units_at] if units_at is not None and units_at < len(rows) else []
    data_line0 = 2 + (1 if declared else 0)
    return names, units, names_at + 1, units_at, data_line0


def read_scenario(spec: ScenarioSpec, path: Path | None = None) -> tuple[ScenarioData, list[Problem]]:
    """Read and check the histories of ``spec`` (or of ``path``, a resolution's CSV with the same map).

    Returns the data and the warnings (likely unit slips); raises InputError with every error.
    Only the series keys some location maps are allocated (memory in proportion to the
    series used).
    """
    import pandas as pd

    path = Path(path or spec.histories)
    problems: list[Problem] = []
    fname = str(path)
    try:
        head = _first_lines(path, 3, getattr(spec, "delimiter", ",") or ",")
    except FileNotFoundError:
        raise InputError([Problem(fname, "file not found; expected the scenario's CSV histories")]) from None
    except OSError as exc:
        raise InputError([Problem(fname, f"cannot read the file ({exc.strerror}); expected the scenario's CSV "
                                  "histories")]) from None
    delimiter = getattr(spec, "delimiter", ",") or ","
    decimal = getattr(spec, "decimal", ".") or "."
    wanted = [spec.time.column] if spec.time is not None else []
    for loc in spec.locations:
        wanted += [ref.column for ref in loc.series.values()]
        wanted += loc.profile.columns if loc.profile is not None else []
    names, units_cells, names_line, units_at, line0 = _layout(spec, head, fname, wanted)
    digest, filled, blanks = _scan(path, fname, delimiter, skip=names_line - 1)
    line0 = DataLines(line0, blanks)
    split = [_split_header(h) for h in names]

    by_name: dict[str, list[int]] = {}
    for i, (h, (b, u)) in enumerate(zip(names, split)):
        by_name.setdefault(h, []).append(i)
        if u is not None and b != h:
            by_name.setdefault(b, []).append(i)

    def candidates(col: str) -> list[int]:
        """Columns named ``col``, or ``col [unit]``, in file order."""
        return sorted(set(by_name.get(col, ())))

    units_line = (units_at + 1) if units_at is not None else None
    skip = [0] if units_at is None else [0, 1]
    needed = sorted({i for c in wanted for i in candidates(c)})
    # Columns by position (same-name headers stay apart); as many as the names row has.
    read_opts = {"skipinitialspace": True, "sep": delimiter, "decimal": decimal, "header": None,
                 "names": list(range(len(names))), "index_col": False, "skiprows": skip}
    # Fast path: the C parser straight to floats. Any column it cannot parse cleanly is
    # read again as text, so that the message can quote the offending cell.
    try:
        num = pd.read_csv(path, usecols=needed, dtype=float, **read_opts) if needed else None
    except Exception:  # a non-numeric cell or a ragged row: fall back to the text path
        num = None
    text_frame = []

    def as_text():
        if not text_frame:
            try:
                text_frame.append(pd.read_csv(path, usecols=needed, dtype=str, keep_default_na=False, **read_opts))
            except pd.errors.EmptyDataError:   # a header (and units row) with no data rows
                text_frame.append(pd.DataFrame({i: pd.Series([], dtype=str) for i in needed}))
            except Exception as exc:
                raise InputError([Problem(fname, f"cannot read as CSV ({str(exc).splitlines()[0]}); expected "
                                          "a comma-separated file with one header row")]) from None
        return text_frame[0]

    if num is not None:
        n = len(num)
        num_cols = {c: j for j, c in enumerate(num.columns)}
        num = num.to_numpy(dtype=float).T.copy()           # one row per needed column
    elif needed:
        n = len(as_text())
    else:
        n = max(filled - len(skip), 0)
    decimal_hint = []

    def unit_of(ref, quantity, what, i):
        """The series' unit from every place that gives one; None (with a problem) when none or they disagree."""
        header = names[i]
        places = []
        if ref.unit:
            places.append((f"the study ({ref.where})", ref.unit))
        if split[i][1]:
            places.append((f"the header '{_short(header)}'", split[i][1]))
        if i < len(units_cells) and units_cells[i]:
            places.append((f"the units row (line {units_line})", units_cells[i]))
        if not places and quantity == "time":
            places.append(("the default for time", "s"))   # contract: seconds unless a unit is given
        if not places:
            problems.append(Problem(f"{fname} column '{_short(header)}'", f"no unit for {what} (mapped at "
                                    f"{ref.where}); expected a unit: write the header as '{ref.column} [unit]', "
                                    "give {column: ..., unit: ...} in the study, or set units_row: true (a units "
                                    "row under the names; above for one over them)"))
            return None
        for place, unit in places:
            msg = check_unit(unit, quantity)
            if msg:
                problems.append(Problem(f"{fname} column '{_short(header)}'", f"{what}: {msg} (unit from {place})"))
                return None
        (p0, u0) = places[0]
        for place, unit in places[1:]:
            if not same_unit(u0, unit, quantity):
                problems.append(Problem(f"{fname} column '{_short(header)}'", f"{what}: found the unit '{u0}' in "
                                        f"{p0} and '{unit}' in {place}; expected one unit: remove one or make "
                                        "them agree"))
                return None
        return u0

    def column(ref: SeriesRef, quantity: str, what: str):
        found = candidates(ref.column)
        if not found:
            problems.append(Problem(f"{fname} column '{_short(ref.column)}'", f"not in the file (mapped at "
                                    f"{ref.where}); expected one of {_listing(names)}"
                                    f"{did_you_mean(ref.column, [b for b, _ in split])}"))
            return None, None
        if len(found) > 1:
            both = ", ".join(f"column {i + 1} '{_short(names[i])}'" for i in found[:NAMES_LISTED])
            problems.append(Problem(f"{fname}:{names_line} column '{_short(ref.column)}'", f"{len(found)} columns "
                                    f"match {what} (mapped at {ref.where}): {both}; expected exactly one column of "
                                    "that name: rename or remove the others"))
            return None, None
        i = found[0]
        header = names[i]
        unit = unit_of(ref, quantity, what, i)
        if unit is None:
            return None, None
        values = num[num_cols[i]].copy() if num is not None else None
        if values is None or not np.isfinite(values).all():
            text = as_text()[i].astype(str).str.strip()
            cleaned = text.str.replace(decimal, ".", regex=False) if decimal != "." else text
            values = pd.to_numeric(cleaned, errors="coerce").to_numpy(dtype=float)
            bad = ~np.isfinite(values)
            if bad.any():
                j = int(np.argmax(bad))
                found_cell = text.iloc[j]
                if decimal == "." and _DECIMAL_COMMA.match(found_cell):
                    if not decimal_hint:
                        decimal_hint.append(1)
                        problems.append(Problem(f"{fname}:{line0 + j} column '{_short(header)}' row {j + 1}",
                                                f"found {found_cell!r}, a number with a decimal comma; expected a "
                                                f"decimal point, or declare decimal: ',' on the scenario "
                                                f"({spec.where})"))
                    return None, None
                problems.append(Problem(f"{fname}:{line0 + j} column '{_short(header)}' row {j + 1}",
                                        f"found {'a blank' if found_cell == '' else repr(found_cell)}"
                                        f"{f' (and {int(bad.sum()) - 1} more)' if bad.sum() > 1 else ''}; "
                                        "expected a number"))
                return None, None
        if quantity in OBSCURATION_KEYS and obscuration_length(unit) is not None:
            full = values >= 100.0
            if full.any():
                j = int(np.argmax(full))
                problems.append(Problem(f"{fname}:{line0 + j} column '{_short(header)}' row {j + 1}",
                                        f"{what}: obscuration {values[j]:g} {unit}"
                                        f"{f' (and {int(full.sum()) - 1} more)' if full.sum() > 1 else ''} is 100 "
                                        "percent or more, which has no finite extinction coefficient (K = "
                                        "-ln(1 - p/100)/L); expected an obscuration below 100 percent per length "
                                        "(check the unit)"))
                return None, None
        return to_internal(values, unit, quantity), (header, unit, i)

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
                k = int(np.argmax(d <= 0)) + 1
                word = "repeats" if d[k - 1] == 0 else "goes backwards"
                col_text = as_text()[info[2]]
                problems.append(Problem(f"{fname}:{line0 + k} column '{_short(info[0])}' row {k + 1}",
                                        f"time {word} ({col_text.iloc[k - 1]} then {col_text.iloc[k]}); "
                                        "expected strictly increasing times"))
    L = len(spec.locations)
    used = [k for k in SERIES_KEYS if any(k in loc.series for loc in spec.locations)]
    series = {k: np.full((L, n), np.nan) for k in used}
    present = {k: np.zeros(L, bool) for k in used}
    profiles = {}
    for li, loc in enumerate(spec.locations):
        for key, ref in loc.series.items():
            values, info = column(ref, key, f"'{key}' at location '{loc.id}'")
            if values is None:
                continue
            columns.append(ColumnRead(info[0], key, loc.id, info[1]))
            values = _plausible(key, values, ref, info[:2], fname, line0, problems)
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
                    temps.append(_plausible("temperature", values, ref, info[:2], fname, line0, problems))
            if len(temps) == len(loc.profile.columns) and all(t is not None for t in temps):
                profiles[li] = (np.asarray(loc.profile.heights_m), np.vstack(temps), loc.profile.ceiling_m)
    if any(not p.warning for p in problems):
        raise InputError(problems)
    return ScenarioData(spec.id, np.asarray(t_s, float), [loc.id for loc in spec.locations],
                        {k: v for k, v in series.items() if present[k].any()},
                        {k: v for k, v in present.items() if v.any()}, profiles, path, digest, n,
                        columns), [p for p in problems if p.warning]


_DECIMAL_COMMA = re.compile(r"^[-+]?\d+,\d+(?:[eE][-+]?\d+)?$")


#: Bytes read at a time when scanning a CSV (the file is never held whole).
SCAN_CHUNK = 1 << 24


class DataLines(int):
    """The file line of the first data row, such that ``line0 + j`` is the file line of data
    row ``j`` (0-based) with the blank lines that the CSV reader skips counted back in.

    Parameters
    ----------
    line0 : int
        1-based file line of data row 0 when no blank line comes before it.
    blanks : sequence of int
        1-based file lines that are blank (whitespace only) after the names row.

    Examples
    --------
    >>> line0 = DataLines(2, [5, 6])
    >>> [line0 + j for j in range(5)]
    [2, 3, 4, 7, 8]
    """

    def __new__(cls, line0: int, blanks=()):
        obj = super().__new__(cls, line0)
        obj.blanks = sorted(int(b) for b in blanks)
        return obj

    def __add__(self, j):
        line = int(self) + int(j)
        for b in self.blanks:
            if b > line:
                break
            line += 1
        return line

    __radd__ = __add__


def _scan(path: Path, fname: str, delimiter: str = ",", skip: int = 0) -> tuple[str, int, list[int]]:
    """Read the file once, in chunks: its SHA-256, its number of non-blank lines and the
    1-based lines after the names row (line ``skip`` + 1) that are blank (empty or
    whitespace only: the CSV reader skips them, so messages count them back in).

    Raises InputError for a row with more fields than the names row (line ``skip`` + 1):
    reading only the mapped columns would otherwise let a ragged row shift values into the
    wrong column silently. Delimiters are counted per line with numpy; only when a count
    differs from the names row's and the file holds quotes (a quoted field may hold
    delimiters) is the file parsed as CSV. A shorter row leaves blanks, which are
    reported where a mapped column needs a number.
    """
    import pandas as pd

    h = hashlib.sha256()
    sep = ord(delimiter)
    st = {"base": 0, "names": b"", "n_sep": None, "wide": None, "filled": 0, "quoted": False, "odd": False,
          "blank": []}

    def lines_of(buf: bytes) -> None:
        arr = np.frombuffer(buf, np.uint8)
        ends = np.flatnonzero(arr == 10)
        if buf and buf[-1] != 10:
            ends = np.append(ends, len(buf))
        starts = np.concatenate(([0], ends[:-1] + 1)).astype(np.int64)
        seps = np.flatnonzero(arr == sep)
        counts = np.searchsorted(seps, ends) - np.searchsorted(seps, starts)
        length = ends - starts
        cr = np.zeros(len(ends), bool)
        cr[length > 0] = arr[ends[length > 0] - 1] == 13
        filled = (length - cr) > 0
        index = st["base"] + np.arange(len(ends))
        st["quoted"] = st["quoted"] or bool((arr == 34).any())
        if st["n_sep"] is None and st["base"] <= skip < st["base"] + len(ends):
            k = skip - st["base"]
            st["names"], st["n_sep"] = buf[starts[k]:ends[k]], int(counts[k])
        if st["n_sep"] is not None:
            body = filled & (index > skip)
            odd = body & (counts != st["n_sep"])
            st["odd"] = st["odd"] or bool(odd.any())
            wide = np.flatnonzero(body & (counts > st["n_sep"]))
            if st["wide"] is None and wide.size:
                k = int(wide[0])
                st["wide"] = (int(index[k]), buf[starts[k]:ends[k]])
        st["filled"] += int((filled & (index >= skip)).sum())
        # blank lines have no delimiter; only those few are looked at one by one
        for k in np.flatnonzero((counts == 0) & (index > skip) & (length < 256)):
            if not buf[starts[k]:ends[k]].strip():
                st["blank"].append(int(index[k]) + 1)
        st["base"] += len(ends)

    carry = b""
    chunk = min(SCAN_CHUNK, path.stat().st_size + 1)   # read(n) reserves n bytes first
    with open(path, "rb") as fh:
        while True:
            block = fh.read(chunk)
            if not block:
                break
            h.update(block)
            data = carry + block
            cut = data.rfind(b"\n") + 1
            if cut:
                lines_of(data[:cut])
            carry = data[cut:]
    if carry:
        lines_of(carry)
    digest, filled = h.hexdigest(), st["filled"] + skip
    blanks = st["blank"]
    if not st["odd"]:
        return digest, filled, blanks
    if st["quoted"]:
        # quotes may hold delimiters or span lines: let the full parser judge
        try:
            pd.read_csv(path, dtype=str, keep_default_na=False, skipinitialspace=True, sep=delimiter,
                        header=skip)
        except Exception as exc:
            raise InputError([Problem(fname, f"cannot read as CSV ({str(exc).splitlines()[0]}); expected a "
                                      "delimited file with one field per column on every line")]) from None
        return digest, filled, blanks
    if st["wide"] is None:
        return digest, filled, blanks

    def fields(line):
        return len(next(csv.reader([line.decode("utf-8", errors="replace")], delimiter=delimiter), []))

    i, line = st["wide"]
    raise InputError([Problem(f"{fname}:{i + 1}", f"cannot read as CSV: line {i + 1} has {fields(line)} fields and "
                              f"the names row {fields(st['names'])}; expected at most one field per column (a "
                              "delimiter inside a number? check the delimiter and decimal mark)")])


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
        if same_unit(unit, "degC", "temperature") and 250 <= values[0] <= 330:
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

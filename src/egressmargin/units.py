"""The one pint registry, and conversion of user units to the internal unit of each quantity.

pint is used here, at the edge, only. Everything past the loaders is plain numpy floats
in the internal units listed in :data:`INTERNAL_UNITS`.
"""

from __future__ import annotations

import functools
import math
import re

import numpy as np

from .tenability.irritants import IRRITANT_GASES

#: Internal unit of every series key and of the other quantities the study names.
#: Gas concentrations are volume (mole) fractions; `ppm` and `percent` are read as
#: volume fractions too (contract: "For gases, percent and mol/mol are volume fractions").
INTERNAL_UNITS: dict[str, str] = {
    "time": "s",
    "temperature": "degC",
    "co": "dimensionless",
    "co2": "dimensionless",
    "o2": "dimensionless",
    "hcn": "dimensionless",
    "extinction": "1/m",
    "optical_density": "1/m",
    "soot": "kg/m^3",
    "visibility": "m",
    "heat_flux": "kW/m^2",
    "layer_height": "m",
    "velocity": "m/s",
    **{gas: "dimensionless" for gas in IRRITANT_GASES},
    "length": "m",
    "duration": "s",
    "rti": "m^0.5*s^0.5",
    "fraction": "dimensionless",
    "mass_extinction": "m^2/kg",
    "hrr": "kW",                     # heat-release rate of a design fire (report only)
}

#: A short example of what each quantity accepts, for error messages.
EXAMPLES: dict[str, str] = {
    "time": "s or min",
    "temperature": "degC, K or degF",
    "co": "ppm, percent or mol/mol",
    "co2": "ppm, percent or mol/mol",
    "o2": "percent or mol/mol",
    "hcn": "ppm, percent or mol/mol",
    "extinction": "1/m",
    "optical_density": "1/m",
    "soot": "mg/m^3 or kg/m^3",
    "visibility": "m",
    "heat_flux": "kW/m^2",
    "layer_height": "m",
    "velocity": "m/s",
    **{gas: "ppm or mol/mol" for gas in IRRITANT_GASES},
    "length": "m or mm",
    "duration": "s or min",
    "rti": "m^0.5*s^0.5",
    "fraction": "percent or a plain number",
    "mass_extinction": "m^2/kg",
    "hrr": "kW or MW",
}

#: Unit spellings common in CSV exports and hand-written studies, mapped explicitly to
#: the pint spelling they stand for (looked up case-insensitively after trimming). Every
#: other unit string is read by pint as written. Listed in the README ("Units").
#: Note that pint alone would read ``C`` as the coulomb and ``%`` not at all; the
#: volume-percent spellings are volume fractions (contract, "Units").
UNIT_ALIASES: dict[str, str] = {
    # volume (mole) fractions
    "%": "percent", "% vol": "percent", "%vol": "percent", "vol%": "percent", "vol %": "percent",
    "vol-%": "percent", "percent vol": "percent",
    "ppmv": "ppm", "ppm(v)": "ppm", "ppm vol": "ppm", "ppbv": "ppb", "ppb(v)": "ppb",
    "mol/mol": "dimensionless", "mol mol-1": "dimensionless", "-": "dimensionless",
    # temperature
    "c": "degC", "°c": "degC", "degc": "degC", "deg c": "degC", "deg. c": "degC", "celsius": "degC",
    "f": "degF", "°f": "degF", "degf": "degF", "deg f": "degF",
    # heat flux
    "kw/m2": "kW/m^2", "kw/m²": "kW/m^2", "kw m-2": "kW/m^2", "kw.m-2": "kW/m^2", "kw*m-2": "kW/m^2",
    "w/m2": "W/m^2", "w/m²": "W/m^2", "w m-2": "W/m^2", "w.m-2": "W/m^2",
    # extinction and optical density, obscuration
    "m-1": "1/m", "m^-1": "1/m", "/m": "1/m", "1/m": "1/m", "ft-1": "1/ft", "/ft": "1/ft",
    "%/m": "percent/m", "%/ft": "percent/ft",
    # soot mass concentration
    "mg/m3": "mg/m^3", "mg/m³": "mg/m^3", "mg m-3": "mg/m^3", "g/m3": "g/m^3", "g m-3": "g/m^3",
    "kg/m3": "kg/m^3", "kg m-3": "kg/m^3",
    # velocity, time
    "m s-1": "m/s", "m/sec": "m/s", "sec": "s", "secs": "s",
}

#: Series keys that are gas concentrations: read only as volume (mole) fractions (contract,
#: "Units"; the irritants are listed in "Added in turn 2").
GAS_KEYS = ("co", "co2", "o2", "hcn", *IRRITANT_GASES)

#: The units (after :data:`UNIT_ALIASES`) a gas series may be given in. pint would also
#: take any other dimensionless unit (``kg/kg``, ``mg/kg``, ``turn``, ``radian``,
#: ``count``, ``ppm*ppm``); none of them is a volume fraction, so each is refused.
VOLUME_FRACTION_UNITS = ("ppm", "ppb", "percent", "dimensionless")
_VOLUME_FRACTION_TEXT = "ppm, ppmv, ppb, percent, %, vol%, mol/mol or '-'"


@functools.lru_cache(maxsize=1)
def registry():
    """Return the project's single pint UnitRegistry (created on first use)."""
    import pint

    ureg = pint.UnitRegistry(autoconvert_offset_to_baseunit=True)
    ureg.define("parts_per_billion = 1e-9 = ppb")   # pint defines ppm (1e-6) but not ppb
    return ureg


def _clean(unit: str) -> str:
    text = str(unit).strip()
    return UNIT_ALIASES.get(text.lower(), text)


class UnitProblem(ValueError):
    """A unit string that pint does not know or that has the wrong dimension."""


@functools.lru_cache(maxsize=256)
def _factor_offset(unit: str, target: str) -> tuple[float, float]:
    """Return (a, b) so that value_in_target = a * value_in_unit + b."""
    ureg = registry()
    if not str(unit).strip():
        raise UnitProblem("found an empty unit")
    try:
        src = ureg.Unit(_clean(unit)) if _clean(unit) != "dimensionless" else ureg.dimensionless
    except Exception as exc:  # pint raises several types for unparsable strings
        raise UnitProblem(f"unknown unit '{unit}'") from exc
    dst = ureg.Unit(target) if target != "dimensionless" else ureg.dimensionless
    q0 = ureg.Quantity(0.0, src)
    q100 = ureg.Quantity(100.0, src)
    try:
        b = q0.to(dst).magnitude
        a = (q100.to(dst).magnitude - b) / 100.0   # a wide span keeps the slope exact to round-off
    except Exception as exc:
        raise UnitProblem(f"unit '{unit}' is not a unit of this quantity") from exc
    return float(a), float(b)


#: Series keys a percent obscuration per length (``%/m``, ``%/ft``) may be given for: it is
#: converted to an extinction coefficient by Beer-Lambert (:func:`obscuration_to_extinction`).
OBSCURATION_KEYS = ("extinction",)


def obscuration_length(unit: str) -> float | None:
    """The path length [m] of a percent-obscuration-per-length unit (``%/m``: 1.0, ``%/ft``: 0.3048),
    or None when ``unit`` is not one.

    Examples
    --------
    >>> obscuration_length("%/ft"), obscuration_length("percent/m"), obscuration_length("1/m")
    (0.3048, 1.0, None)
    """
    per = _PER_LENGTH.match(_clean(unit))
    if not per:
        return None
    try:
        a, b = _factor_offset(per.group(1).strip(), "m")
    except UnitProblem:
        return None
    return float(f"{a:.12g}") if a > 0 and b == 0 else None   # round-off of 1 ft (0.30479999999999996)


def obscuration_to_extinction(percent, length_m: float) -> np.ndarray:
    """Extinction coefficient [1/m] of a percent obscuration ``percent`` over a path ``length_m`` [m].

    Notes
    -----
    Beer-Lambert: the transmitted fraction over a path L is I/I0 = exp(-K L), and the
    obscuration is p = 100 (1 - I/I0) percent, so

        K = -ln(1 - p/100) / L.

    An obscuration of 100 percent or more has no finite K (the caller refuses it).
    Reference: SFPE Handbook of Fire Protection Engineering, 5th ed., chapter on smoke
    measurement (Beer-Lambert law, percent obscuration); from memory.

    Examples
    --------
    >>> round(float(obscuration_to_extinction(10.0, 1.0)), 6)   # -ln(0.9)
    0.105361
    >>> round(float(obscuration_to_extinction(3.0, 0.3048)), 6)  # -ln(0.97)/0.3048
    0.099933
    """
    p = np.asarray(percent, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return -np.log1p(-p / 100.0) / float(length_m)


def check_unit(unit: str, quantity: str) -> str | None:
    """Return None if ``unit`` converts to the internal unit of ``quantity``, else a message.

    A gas (:data:`GAS_KEYS`) accepts only :data:`VOLUME_FRACTION_UNITS`.

    Examples
    --------
    >>> check_unit("kW/m2", "heat_flux") is None
    True
    >>> check_unit("mg/kg", "co")
    "found 'mg/kg', which is not a volume fraction; expected ppm, ppmv, ppb, percent, %, vol%, mol/mol or '-'"
    """
    if obscuration_length(unit) is not None and quantity in INTERNAL_UNITS \
            and INTERNAL_UNITS[quantity] == "1/m" and quantity not in OBSCURATION_KEYS:
        return (f"found '{unit}', a percent obscuration per length, for '{quantity}'; a percent obscuration is "
                f"converted to an extinction coefficient by Beer-Lambert (K = -ln(1 - p/100)/L): map the "
                f"column as 'extinction' instead")
    try:
        _factor_offset(unit, INTERNAL_UNITS[quantity])
    except UnitProblem as exc:
        example = EXAMPLES.get(quantity, _VOLUME_FRACTION_TEXT)
        return f"{exc}; expected a unit of {quantity.replace('_', ' ')} such as {example}"
    if quantity in GAS_KEYS and _clean(unit) not in VOLUME_FRACTION_UNITS:
        return f"found '{unit}', which is not a volume fraction; expected {_VOLUME_FRACTION_TEXT}"
    return None


def is_unit(text: str) -> bool:
    """True when pint (after :data:`UNIT_ALIASES`) knows ``text`` as a unit of any dimension.

    Examples
    --------
    >>> is_unit("kW/m2"), is_unit("degC"), is_unit("T_hall")
    (True, True, False)
    """
    if not str(text).strip():
        return False
    try:
        registry().Unit(_clean(text)) if _clean(text) != "dimensionless" else None
    except Exception:  # pint raises several types for unparsable strings
        return False
    return True


def same_unit(a: str, b: str, quantity: str) -> bool:
    """True when units ``a`` and ``b`` convert ``quantity`` identically (``ppmv`` and ``ppm``, ``C``
    and ``degC``); both must be valid units of ``quantity``.

    Examples
    --------
    >>> same_unit("C", "degC", "temperature"), same_unit("percent", "ppm", "co")
    (True, False)
    """
    fa, fb = _factor_offset(a, INTERNAL_UNITS[quantity]), _factor_offset(b, INTERNAL_UNITS[quantity])
    return all(math.isclose(x, y, rel_tol=1e-9, abs_tol=1e-12) for x, y in zip(fa, fb))


def to_internal(values, unit: str, quantity: str) -> np.ndarray:
    """Convert ``values`` given in ``unit`` to the internal unit of ``quantity``.

    Parameters
    ----------
    values : array_like
        Numbers in ``unit``.
    unit : str
        Any unit string pint understands, plus the aliases ``%`` and ``mol/mol``.
    quantity : str
        A key of :data:`INTERNAL_UNITS`.

    Examples
    --------
    >>> float(to_internal(1000.0, "ppm", "co"))
    0.001
    >>> round(float(to_internal(68.0, "degF", "temperature")), 6)
    20.0
    >>> round(float(to_internal(10.0, "%/m", "extinction")), 6)   # Beer-Lambert, not 0.1
    0.105361
    """
    length_m = obscuration_length(unit) if quantity in OBSCURATION_KEYS else None
    if length_m is not None:
        return obscuration_to_extinction(values, length_m)
    a, b = _factor_offset(unit, INTERNAL_UNITS[quantity])  # raises UnitProblem with a message for the user
    out = np.asarray(values, dtype=float) * a
    return out + b if b else out


_QTY = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*$")


def parse_quantity(text, quantity: str, default_unit: str | None = None) -> float:
    """Parse a string such as ``"90 s"`` or ``"178 mm"`` into the internal unit of ``quantity``.

    A bare number is accepted only when ``default_unit`` is given (e.g. a FED limit, which
    has no unit). Raises :class:`UnitProblem` with a message for the user otherwise.

    Examples
    --------
    >>> parse_quantity("1.5 min", "duration")
    90.0
    >>> parse_quantity("178 mm", "length")
    0.178
    """
    if isinstance(text, bool):
        raise UnitProblem(f"found {text!r}; expected a number with a unit ({EXAMPLES[quantity]})")
    if isinstance(text, (int, float)):
        if default_unit is None:
            raise UnitProblem(
                f"found the bare number {text!r}; expected a number with a unit, e.g. '{text} "
                f"{EXAMPLES[quantity].split()[0].rstrip(',')}'")
        if not math.isfinite(float(text)):
            raise UnitProblem(f"found {text!r}, which is not a finite number; expected a finite number")
        return float(to_internal(float(text), default_unit, quantity))
    if not isinstance(text, str):
        raise UnitProblem(f"found {type(text).__name__} {text!r}; expected a number with a unit "
                          f"({EXAMPLES[quantity]})")
    m = _QTY.match(text)
    if not m:
        raise UnitProblem(f"found '{text}'; expected a number followed by a unit ({EXAMPLES[quantity]})")
    number, unit = float(m.group(1)), m.group(2)
    if not math.isfinite(number):
        raise UnitProblem(f"found '{text}', which is not a finite number; expected a finite number with a "
                          f"unit ({EXAMPLES[quantity]})")
    if not unit:
        if default_unit is None:
            raise UnitProblem(f"found '{text}' without a unit; expected e.g. '{text} "
                              f"{EXAMPLES[quantity].split()[0].rstrip(',')}'")
        unit = default_unit
    message = check_unit(unit, quantity)
    if message:
        raise UnitProblem(message)
    return float(to_internal(number, unit, quantity))


_PER_LENGTH = re.compile(r"^(?:percent|%)\s*/\s*(\S.*)$", re.IGNORECASE)


def parse_obscuration(text) -> tuple[float, float]:
    """Parse a smoke detector's obscuration threshold, e.g. ``"3 percent/ft"`` or ``"10 %/m"``.

    Returns ``(O, l)``: the obscuration as a fraction in (0, 1) [-] over the path length
    ``l`` [m] it is stated per. A bare ``percent`` is refused: the same number per metre
    and per foot are different thresholds (a 3 %/ft detector is 9.5 %/m).

    Examples
    --------
    >>> parse_obscuration("3 percent/ft")
    (0.03, 0.3048)
    >>> parse_obscuration("10 %/m")
    (0.1, 1.0)
    """
    expected = "expected a percent obscuration per unit length such as '10 percent/m' or '3 percent/ft'"
    if isinstance(text, bool) or not isinstance(text, str):
        raise UnitProblem(f"found {text!r}; {expected}")
    m = _QTY.match(text)
    if not m:
        raise UnitProblem(f"found '{text}'; {expected}")
    number, unit = float(m.group(1)), _clean(m.group(2))
    per = _PER_LENGTH.match(unit)
    if not per:
        if unit.lower() in ("percent", "%", ""):
            raise UnitProblem(f"found '{text}' without the path length it is per; {expected}")
        raise UnitProblem(f"found '{text}'; {expected}")
    try:
        length_m = parse_quantity(f"1 {per.group(1)}", "length")
    except UnitProblem:
        raise UnitProblem(f"found '{text}': '{per.group(1)}' is not a length; {expected}") from None
    length_m = float(f"{length_m:.12g}")   # the conversion's round-off (0.30479999999999996 for 1 ft)
    if not (math.isfinite(number) and 0 < number < 100):
        raise UnitProblem(f"found '{text}'; expected an obscuration above 0 and below 100 percent per length")
    return number / 100.0, length_m


def display_unit(quantity: str) -> str:
    """The unit used to show a quantity to people (report and results)."""
    return {"co": "ppm", "co2": "percent", "o2": "percent", "hcn": "ppm", "soot": "mg/m^3",
            "fraction": "percent", "duration": "s", "length": "m",
            **{gas: "ppm" for gas in IRRITANT_GASES},
            }.get(quantity, INTERNAL_UNITS[quantity])


def from_internal(values, quantity: str, unit: str | None = None) -> np.ndarray:
    """Convert internal values of ``quantity`` to ``unit`` (default :func:`display_unit`)."""
    unit = _clean(unit or display_unit(quantity))
    target = INTERNAL_UNITS[quantity]
    ureg = registry()
    q = ureg.Quantity(np.asarray(values, dtype=float), target if target != "dimensionless" else "")
    return np.asarray(q.to(unit if unit != "dimensionless" else "").magnitude, dtype=float)

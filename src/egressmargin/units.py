"""The one pint registry, and conversion of user units to the internal unit of each quantity.

pint is used here, at the edge, only. Everything past the loaders is plain numpy floats
in the internal units listed in :data:`INTERNAL_UNITS`.
"""

from __future__ import annotations

import functools
import re

import numpy as np

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
    **{gas: "dimensionless" for gas in ("hcl", "hbr", "hf", "so2", "no2", "acrolein", "formaldehyde")},
    "length": "m",
    "duration": "s",
    "rti": "m^0.5*s^0.5",
    "fraction": "dimensionless",
    "mass_extinction": "m^2/kg",
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
    **{gas: "ppm or mol/mol" for gas in ("hcl", "hbr", "hf", "so2", "no2", "acrolein", "formaldehyde")},
    "length": "m or mm",
    "duration": "s or min",
    "rti": "m^0.5*s^0.5",
    "fraction": "percent or a plain number",
    "mass_extinction": "m^2/kg",
}

_ALIASES = {"%": "percent", "%vol": "percent", "vol%": "percent", "ppmv": "ppm", "c": "degC", "°c": "degC",
            "degc": "degC", "deg c": "degC", "°f": "degF", "degf": "degF", "-": "dimensionless",
            "": "dimensionless", "mol/mol": "dimensionless", "ppm": "ppm"}


@functools.lru_cache(maxsize=1)
def registry():
    """Return the project's single pint UnitRegistry (created on first use)."""
    import pint

    ureg = pint.UnitRegistry(autoconvert_offset_to_baseunit=True)
    return ureg


def _clean(unit: str) -> str:
    text = str(unit).strip()
    return _ALIASES.get(text.lower(), text)


class UnitProblem(ValueError):
    """A unit string that pint does not know or that has the wrong dimension."""


@functools.lru_cache(maxsize=256)
def _factor_offset(unit: str, target: str) -> tuple[float, float]:
    """Return (a, b) so that value_in_target = a * value_in_unit + b."""
    ureg = registry()
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


def check_unit(unit: str, quantity: str) -> str | None:
    """Return None if ``unit`` converts to the internal unit of ``quantity``, else a message."""
    try:
        _factor_offset(unit, INTERNAL_UNITS[quantity])
    except UnitProblem as exc:
        return f"{exc}; expected a unit of {quantity.replace('_', ' ')} such as {EXAMPLES[quantity]}"
    return None


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
    """
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
        return float(to_internal(float(text), default_unit, quantity))
    if not isinstance(text, str):
        raise UnitProblem(f"found {type(text).__name__} {text!r}; expected a number with a unit "
                          f"({EXAMPLES[quantity]})")
    m = _QTY.match(text)
    if not m:
        raise UnitProblem(f"found '{text}'; expected a number followed by a unit ({EXAMPLES[quantity]})")
    number, unit = float(m.group(1)), m.group(2)
    if not unit:
        if default_unit is None:
            raise UnitProblem(f"found '{text}' without a unit; expected e.g. '{text} "
                              f"{EXAMPLES[quantity].split()[0].rstrip(',')}'")
        unit = default_unit
    message = check_unit(unit, quantity)
    if message:
        raise UnitProblem(message)
    return float(to_internal(number, unit, quantity))


def display_unit(quantity: str) -> str:
    """The unit used to show a quantity to people (report and results)."""
    return {"co": "ppm", "co2": "percent", "o2": "percent", "hcn": "ppm", "soot": "mg/m^3",
            "fraction": "percent", "duration": "s", "length": "m",
            **{gas: "ppm" for gas in ("hcl", "hbr", "hf", "so2", "no2", "acrolein", "formaldehyde")},
            }.get(quantity, INTERNAL_UNITS[quantity])


def from_internal(values, quantity: str, unit: str | None = None) -> np.ndarray:
    """Convert internal values of ``quantity`` to ``unit`` (default :func:`display_unit`)."""
    unit = _clean(unit or display_unit(quantity))
    target = INTERNAL_UNITS[quantity]
    ureg = registry()
    q = ureg.Quantity(np.asarray(values, dtype=float), target if target != "dimensionless" else "")
    return np.asarray(q.to(unit if unit != "dimensionless" else "").magnitude, dtype=float)

"""Units: the few the advisor understands, and conversion between them.

    >>> convert(8.0, "kn", "m/s")       # doctest: +ELLIPSIS
    4.115...
    >>> convert(50.0, "degF", "degC")
    10.0
    >>> convert(9.0, "degF", "delta_degC")   # a temperature *difference*
    5.0

Each unit belongs to one dimension.  Absolute temperatures (``degC``,
``degF``, ``K``) convert with an offset; temperature differences
(``delta_degC``) convert by scale only, and ``degF``/``K``/``degC`` written
next to a difference are read as differences.  Conversion to or from a unit
of another dimension raises :class:`UnitError`.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


class UnitError(ValueError):
    """Unknown unit, or a conversion between different dimensions."""


@dataclass(frozen=True)
class Unit:
    """A unit: its dimension and the affine map ``si = value * scale + offset``."""

    name: str
    dimension: str
    scale: float
    offset: float = 0.0


_UNITS: dict[str, Unit] = {}


def _add(name: str, dimension: str, scale: float, offset: float = 0.0, aliases: tuple[str, ...] = ()) -> None:
    unit = Unit(name, dimension, scale, offset)
    for key in (name, *aliases):
        _UNITS[key] = unit


# speed → m/s
_add("m/s", "speed", 1.0, aliases=("m s-1", "mps"))
_add("kn", "speed", 1852.0 / 3600.0, aliases=("kt", "kts", "knot", "knots"))
_add("mph", "speed", 0.44704)
_add("km/h", "speed", 1000.0 / 3600.0, aliases=("kmh", "kph"))
# absolute temperature → °C
_add("degC", "temperature", 1.0, 0.0, aliases=("C", "°C", "celsius"))
_add("degF", "temperature", 5.0 / 9.0, -32.0 * 5.0 / 9.0, aliases=("F", "°F", "fahrenheit"))
_add("K", "temperature", 1.0, -273.15, aliases=("kelvin",))
# temperature difference → °C
_add("delta_degC", "temperature_difference", 1.0)
# temperature rate → °C/h
_add("degC/h", "temperature_rate", 1.0, aliases=("C/h", "K/h"))
_add("degF/h", "temperature_rate", 5.0 / 9.0, aliases=("F/h",))
# time → hours
_add("h", "time", 1.0, aliases=("hour", "hours"))
_add("min", "time", 1.0 / 60.0, aliases=("minute", "minutes"))
_add("s", "time", 1.0 / 3600.0, aliases=("second", "seconds"))
_add("d", "time", 24.0, aliases=("day", "days"))
# length → metres
_add("m", "length", 1.0)
_add("km", "length", 1000.0)
_add("mm", "length", 1e-3)
_add("cm", "length", 1e-2)
_add("in", "length", 0.0254, aliases=("inch", "inches"))  # international inch (definition)
_add("um", "length", 1e-6, aliases=("µm", "micron", "microns"))
# angle → degrees
_add("deg", "angle", 1.0, aliases=("°", "degree", "degrees"))
_add("arcmin", "angle", 1.0 / 60.0)
_add("arcsec", "angle", 1.0 / 3600.0)
# others
_add("%", "fraction", 1.0, aliases=("percent", "pct"))
_add("fraction", "fraction", 100.0)
_add("hPa", "pressure", 1.0, aliases=("mbar", "mb"))
_add("Pa", "pressure", 0.01)
_add("inHg", "pressure", 33.8639)
_add("mm/h", "rain_rate", 1.0)
_add("in/h", "rain_rate", 25.4)
_add("W/m2", "irradiance", 1.0, aliases=("W/m^2", "W m-2"))
_add("g/m3", "density", 1.0, aliases=("g/m^3", "g m-3"))
_add("GHz", "frequency", 1.0)
_add("MHz", "frequency", 1e-3)
_add("1", "dimensionless", 1.0, aliases=("",))

_TEMPERATURE_AS_DIFFERENCE = {"degC": 1.0, "K": 1.0, "degF": 5.0 / 9.0}


def known_units() -> list[str]:
    """Every unit spelling accepted, sorted."""
    return sorted(k for k in _UNITS if k)


def lookup(name: str) -> Unit:
    """The :class:`Unit` called ``name``; :class:`UnitError` if unknown."""
    try:
        return _UNITS[name]
    except KeyError:
        raise UnitError(f"unknown unit '{name}'") from None


def dimension(name: str) -> str:
    """The dimension of unit ``name`` (e.g. ``'speed'``)."""
    return lookup(name).dimension


def convert(value, from_unit: str, to_unit: str):
    """Convert ``value`` (number or array) from ``from_unit`` to ``to_unit``.

    A temperature unit converted to ``delta_degC`` is read as a difference.
    """
    src, dst = lookup(from_unit), lookup(to_unit)
    if dst.dimension == "temperature_difference" and src.dimension == "temperature":
        scale = _TEMPERATURE_AS_DIFFERENCE[src.name]
        return np.multiply(value, scale) if isinstance(value, np.ndarray) else value * scale
    if src.dimension != dst.dimension:
        raise UnitError(f"cannot convert {src.name} ({src.dimension}) to {dst.name} ({dst.dimension})")
    if src is dst:
        return value
    si = value * src.scale + src.offset
    return (si - dst.offset) / dst.scale

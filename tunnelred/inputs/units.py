"""Units: the project's one pint registry, and conversion of input values to SI.

campaign.toml values and CSV column headers may carry any unit pint understands; everything
inside tunnelred is SI, with three conventions of the project: angles in degrees, rotation rates
in rad/s and relative humidity as a fraction 0–1.

Each kind of quantity the inputs hold is named by a *dimension* key of :data:`DIMENSIONS`
("length", "pressure", "temperature", "angle", "rotation_rate", …). A value is converted to
the target unit of its dimension, and a unit of another dimension is an :class:`InputError`.

Angles and rotation rates are checked more strictly than pint's dimensional analysis, which
treats the radian as dimensionless: an angle must be given in an angular unit (``deg``, ``rad``,
``arcmin``, ``turn``), not as a bare number, and a rotation rate in an angular unit per time
(``rpm``, ``rps``, ``rad/s``, ``deg/s``). ``Hz`` is refused for a rotation rate because it does
not say whether cycles or radians are meant.
"""

from __future__ import annotations

import functools
import math
import re
from dataclasses import dataclass

import pint

from tunnelred.common.errors import InputError, Problem, brief

__all__ = [
    "ureg",
    "DIMENSIONS",
    "parse_quantity",
    "parse_header",
    "Conversion",
    "conversion",
]

#: The one unit registry of tunnelred.
ureg = pint.UnitRegistry()
ureg.define("@alias revolution = rev")

# dimension key → (target unit for pint, units attribute written on results, what to say)
_SI_DIMENSIONS: dict[str, tuple[str, str, str]] = {
    "length": ("m", "m", "a length (m, mm, in, …)"),
    "time": ("s", "s", "a time (s, ms, min, …)"),
    "pressure": ("Pa", "Pa", "a pressure (Pa, hPa, kPa, psi, mmHg, inH2O, …)"),
    "pressure_gradient": ("Pa/m", "Pa m-1", "a pressure per length (Pa/m, …)"),
    "temperature": ("K", "K", "a temperature (K, degC, degF)"),
    "temperature_difference": ("K", "K", "a temperature difference (K, degC)"),
    "speed": ("m/s", "m s-1", "a speed (m/s, km/h, ft/s, …)"),
    "force": ("N", "N", "a force (N, kN, lbf, …)"),
    "torque": ("N*m", "N m", "a torque (N m, lbf in, …)"),
    "frequency": ("Hz", "Hz", "a frequency (Hz, kHz, …)"),
}
# The project's three conventions (module docstring), each checked more strictly than pint does.
_CONVENTIONS: dict[str, tuple[str, str, str]] = {
    "angle": ("deg", "deg", "an angle (deg, rad, …)"),
    "rotation_rate": ("rad/s", "rad s-1", "a rotation rate (rpm, rps, rad/s, deg/s)"),
    "fraction": ("", "1", "a dimensionless number or fraction ([1], [%])"),
}
DIMENSIONS: dict[str, tuple[str, str, str]] = {**_SI_DIMENSIONS, **_CONVENTIONS}

# pint root units that make a unit angular; checked beside pint's dimensionality (see above).
_ANGLE_ROOT = ureg.radian
_RATE_ROOT = ureg.radian / ureg.second

_NUMBER_UNIT = re.compile(r"^\s*([+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?)\s*(.*?)\s*$")
_HEADER = re.compile(r"^\s*([^\[\]]*?)\s*\[([^\[\]]*)\]\s*$")


@dataclass(frozen=True)
class Conversion:
    """A linear map from input values to the SI target: ``si = scale * value + offset``.

    ``units`` is the units attribute of the converted values (``"Pa"``, ``"K"``, ``"1"``, …).
    """

    scale: float
    offset: float
    units: str

    def __call__(self, values):
        if self.scale == 1.0 and self.offset == 0.0:
            return values
        return values * self.scale + self.offset


def _units_of(text: str) -> pint.Unit:
    """Parse a unit string; ``1`` and ``""`` are dimensionless, ``%`` is percent."""
    text = text.strip()
    if text in ("", "1", "-"):
        return ureg.dimensionless
    return ureg.parse_units(text)


def _is_offset_delta(units: pint.Unit) -> bool:
    """A difference of an offset unit (pint names them ``delta_…``: delta_degC, delta_degF, …).

    Such a unit has the dimension of a temperature, so pint's dimensional check lets it stand
    for an absolute temperature, and 19.8 delta_degC would be read as 19.8 K.
    """
    return any(name.startswith("delta_") for name in units._units)


def _is_angular(units: pint.Unit, root: pint.Unit) -> bool:
    return ureg.get_root_units(units)[1] == root


@functools.lru_cache(maxsize=1024)
def conversion(unit_text: str, dimension: str | None) -> Conversion:
    """The conversion of values in ``unit_text`` to the SI target of ``dimension``.

    Parameters
    ----------
    unit_text : str
        A unit string pint understands (``"hPa"``, ``"degC"``, ``"rpm"``, ``"%"``, ``"1"``).
    dimension : str or None
        A key of :data:`DIMENSIONS`; None accepts any unit and converts to SI (a voltage to V,
        a force to N, a torque to N m, anything else to base SI units).

    Returns
    -------
    Conversion

    Raises
    ------
    ValueError
        With a message for a person, when the unit is unknown or of another dimension.

    Examples
    --------
    >>> c = conversion("degC", "temperature")
    >>> round(c(20.0), 2), c.units
    (293.15, 'K')
    """
    try:
        units = _units_of(unit_text)
    except Exception as exc:  # pint raises several types for unparsable text
        raise ValueError(f"unknown unit {brief(unit_text)}") from exc
    if dimension is None:
        return _conversion_any(units)
    target, attr, _ = DIMENSIONS[dimension]
    target_units = _units_of(target)
    if units.dimensionality != target_units.dimensionality:
        raise ValueError(f"{brief(unit_text)}, a unit of {_describe(units)}")
    if dimension == "angle" and not _is_angular(units, _ANGLE_ROOT):
        raise ValueError(f"{brief(unit_text)}, which is not an angular unit")
    if dimension == "rotation_rate" and not _is_angular(units, _RATE_ROOT):
        raise ValueError(f"{brief(unit_text)}, which does not say cycles or radians per time")
    if dimension == "fraction" and _is_angular(units, _ANGLE_ROOT):
        raise ValueError(f"{brief(unit_text)}, a unit of {_describe(units)}")
    if dimension == "temperature" and _is_offset_delta(units):
        raise ValueError(
            f"{brief(unit_text)}, a temperature difference (an absolute temperature is in K, degC "
            "or degF)"
        )
    zero = ureg.Quantity(0.0, units)
    one = ureg.Quantity(1.0, units)
    if dimension == "temperature_difference":
        # a difference of 1 degC is 1 K: measure from the unit's own zero.
        scale = float((one - zero).to(target_units).magnitude)
        return Conversion(scale, 0.0, attr)
    offset = float(zero.to(target_units).magnitude)
    scale = float(one.to(target_units).magnitude) - offset
    return Conversion(scale, offset, attr)


# Names for the dimensions a wrong unit most often has, for error messages.
_DIMENSION_NAMES = {
    "V": "voltage", "A": "current", "Pa": "pressure", "m": "length", "N": "force",
    "J": "torque or energy", "K": "temperature", "s": "time", "m/s": "speed", "Hz": "frequency",
    "kg": "mass", "W": "power", "Pa/m": "pressure per length",
}  # fmt: skip


def _describe(units: pint.Unit) -> str:
    if units.dimensionless:
        return "angle" if _is_angular(units, _ANGLE_ROOT) else "no dimension"
    for unit, name in _DIMENSION_NAMES.items():
        if units.dimensionality == _units_of(unit).dimensionality:
            return name
    return str(units.dimensionality)


# SI units tried, in order, for a column of free dimension (balance channels).
_FREE_TARGETS = (("V", "V"), ("N", "N"), ("N*m", "N m"), ("A", "A"), ("Pa", "Pa"), ("", "1"))


def _conversion_any(units: pint.Unit) -> Conversion:
    if ureg.Quantity(0.0, units).to_base_units().magnitude != 0.0:
        raise ValueError(f"{units!s}, an offset unit, which a balance channel cannot use")
    for target, attr in _FREE_TARGETS:
        target_units = _units_of(target)
        if units.dimensionality == target_units.dimensionality:
            if _is_angular(units, _ANGLE_ROOT):
                break
            return Conversion(
                float(ureg.Quantity(1.0, units).to(target_units).magnitude), 0.0, attr
            )
    base = ureg.Quantity(1.0, units).to_base_units()
    return Conversion(float(base.magnitude), 0.0, f"{base.units:~C}")


def parse_header(name: str) -> tuple[str, str]:
    """Split a CSV column header ``"T [degC]"`` into its base name and unit text.

    Parameters
    ----------
    name : str
        The header cell.

    Returns
    -------
    base_name, unit : str, str

    Raises
    ------
    ValueError
        When the header has no ``[unit]`` or no name.

    Examples
    --------
    >>> parse_header("dp_pitot [Pa]")
    ('dp_pitot', 'Pa')
    >>> parse_header(" RH [%] ")
    ('RH', '%')
    """
    match = _HEADER.match(name)
    if not match:
        raise ValueError(f"{brief(name)} has no unit in brackets")
    base, unit = match.group(1), match.group(2).strip()
    if not base:
        raise ValueError(f"{brief(name)} has no name before its unit")
    if not unit:
        raise ValueError(f"{brief(name)} has empty brackets")
    return base, unit


def parse_quantity(value, dimension: str, *, file: str, key: str) -> float:
    """Convert a campaign.toml value (an SI number or a ``"number unit"`` string) to SI.

    Parameters
    ----------
    value : int, float or str
        A number, taken as already in the SI target unit of ``dimension`` (degrees for an
        angle, a fraction for ``"fraction"``), or a string such as ``"4.33 in"``,
        ``"1013.2 hPa"``, ``"45 %"``.
    dimension : str
        A key of :data:`DIMENSIONS`.
    file : str
        The file the value comes from, for the error message.
    key : str
        Its dotted key (``"model.diameter"``), for the error message.

    Returns
    -------
    float
        The value in the target unit of ``dimension``.

    Raises
    ------
    InputError
        For a value of the wrong type, an unknown unit, a unit of another dimension, or a
        non-finite number.

    Examples
    --------
    >>> parse_quantity("110 mm", "length", file="campaign.toml", key="model.diameter")
    0.11
    >>> parse_quantity(0.3, "angle", file="campaign.toml", key="tunnel.flow_angle")
    0.3
    """
    expected = DIMENSIONS[dimension][2]

    def fail(found: str, hint: str) -> InputError:
        return InputError(Problem(file, None, key, expected, found, hint))

    if isinstance(value, bool) or not isinstance(value, int | float | str):
        raise fail(f"a {type(value).__name__} ({value!r})", 'Write a number or "number unit".')
    if isinstance(value, int | float):
        try:
            number = float(value)
        except OverflowError:  # an integer of hundreds of digits
            number = math.inf
        if not math.isfinite(number):
            raise fail(brief(value), "Write a finite number.")
        return number
    match = _NUMBER_UNIT.match(value)
    if not match:
        raise fail(brief(value), 'Write a number followed by its unit, e.g. "110 mm".')
    number, unit_text = float(match.group(1)), match.group(2)
    if unit_text:
        try:
            number = float(conversion(unit_text, dimension)(number))
        except ValueError as exc:
            raise fail(str(exc), f"Give {key} in {expected}.") from None
    if not math.isfinite(number):
        raise fail(brief(value), "Write a finite number.")
    return number

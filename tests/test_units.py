"""Unit parsing and conversion to SI, checked against published conversion factors."""

import math

import pytest

from tunnelred.common.errors import InputError
from tunnelred.inputs.units import conversion, parse_header, parse_quantity


def si(text: str, dimension: str) -> float:
    return parse_quantity(text, dimension, file="campaign.toml", key="k")


# NIST SP 811 (2008), Appendix B.8/B.9 factors. Each is printed to 7 significant digits, so the
# tolerance is half a unit in the last printed digit unless noted.
@pytest.mark.parametrize(
    ("text", "dimension", "expected", "rel"),
    [
        ("1 lbf", "force", 4.448222, 1e-6),  # NIST SP 811 B.8: 1 lbf = 4.448222 N
        ("1 psi", "pressure", 6.894757e3, 1e-6),  # NIST SP 811 B.8: 1 psi = 6.894757 kPa
        ("1 mmHg", "pressure", 1.333224e2, 1e-6),  # NIST SP 811 B.8: mmHg (conventional)
        ("1 inHg", "pressure", 3.38638e3, 1e-5),  # NIST SP 811 B.8: inHg (32 °F), 6 digits
        ("1 in", "length", 0.0254, 1e-15),  # NIST SP 811 B.8: 1 in = 0.0254 m exactly
        # NIST SP 811 B.8: inH2O (39.2 °F) = 2.49082e2 Pa. pint's inH2O takes water at
        # 1000 kg/m3 (249.0889 Pa), 2.8e-5 above NIST's 39.2 °F density; rel 5e-5 covers it.
        ("1 inH2O", "pressure", 2.49082e2, 5e-5),
    ],
)
def test_published_factors(text, dimension, expected, rel):
    assert si(text, dimension) == pytest.approx(expected, rel=rel)


def test_celsius_offset_is_exact():
    # SI Brochure, 9th ed. (2019), 2.3.4: t/°C = T/K − 273.15 exactly.
    assert conversion("degC", "temperature")(20.0) == pytest.approx(293.15, abs=1e-12)
    assert conversion("degC", "temperature")(-273.15) == pytest.approx(0.0, abs=1e-12)


def test_fahrenheit():
    # NIST SP 811 (2008) B.9: T/K = (t/°F + 459.67)/1.8
    assert conversion("degF", "temperature")(68.0) == pytest.approx((68.0 + 459.67) / 1.8)


def test_temperature_difference_has_no_offset():
    # a difference of 1 °C equals 1 K (SI Brochure 9th ed., 2.3.4)
    assert si("0.2 degC", "temperature_difference") == pytest.approx(0.2)


def test_rpm_to_rad_per_second():
    # 1 rev = 2π rad, 1 min = 60 s, by definition: 1 rpm = 2π/60 rad/s
    assert conversion("rpm", "rotation_rate")(600.0) == pytest.approx(600 * 2 * math.pi / 60)
    assert conversion("rps", "rotation_rate")(1.0) == pytest.approx(2 * math.pi)
    assert conversion("deg/s", "rotation_rate")(180.0) == pytest.approx(math.pi)


def test_angles_in_degrees():
    # π rad = 180° by definition
    assert conversion("rad", "angle")(math.pi) == pytest.approx(180.0)
    assert si("0.5 turn", "angle") == pytest.approx(180.0)


def test_percent_to_fraction():
    assert conversion("%", "fraction")(45.0) == pytest.approx(0.45)
    assert conversion("1", "fraction")(0.45) == 0.45


@pytest.mark.parametrize(
    ("unit", "dimension"),
    [
        ("V", "pressure"),  # a pressure column declared in volts
        ("Hz", "rotation_rate"),  # does not say cycles or radians
        ("1", "angle"),  # a bare number is not an angle
        ("deg", "fraction"),  # an angle is not a fraction
        ("m/s", "rotation_rate"),
        ("hPascal", "pressure"),  # unknown unit
        ("", "length"),
    ],
)
def test_wrong_units_are_refused(unit, dimension):
    with pytest.raises(ValueError):
        conversion(unit, dimension)


def test_free_dimension_goes_to_si():
    assert conversion("mV", None)(1.0) == pytest.approx(1e-3)
    assert conversion("mV", None).units == "V"
    assert conversion("kN", None).units == "N"
    assert conversion("lbf", None)(1.0) == pytest.approx(4.448222, rel=1e-6)  # NIST SP 811
    with pytest.raises(ValueError):
        conversion("degC", None)


@pytest.mark.parametrize(
    ("header", "expected"),
    [
        ("T [degC]", ("T", "degC")),
        ("  dp_pitot [Pa] ", ("dp_pitot", "Pa")),
        ("N1 [V]", ("N1", "V")),
        ("torque [N m]", ("torque", "N m")),
    ],
)
def test_parse_header(header, expected):
    assert parse_header(header) == expected


@pytest.mark.parametrize("header", ["T", "T []", "[Pa]", "T [Pa] [Pa]", "T [Pa"])
def test_parse_header_refuses(header):
    with pytest.raises(ValueError):
        parse_header(header)


def test_parse_quantity_plain_numbers_are_si():
    assert si(0.11, "length") == 0.11
    assert si(3, "angle") == 3.0


@pytest.mark.parametrize(
    "value", ["3 Pa", "three m", True, [1, 2], float("nan"), "1.2.3 m", "4 furlongs_x"]
)
def test_parse_quantity_errors_name_the_key(value):
    with pytest.raises(InputError) as info:
        parse_quantity(value, "length", file="campaign.toml", key="model.diameter")
    (problem,) = info.value.problems
    assert problem.file == "campaign.toml"
    assert problem.column == "model.diameter"

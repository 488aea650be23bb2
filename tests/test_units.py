"""Unit factors against their published definitions, and sensor calibration."""

import numpy as np
import pytest

from dsp import SigtuneError, calibrate_volts, convert_units
from dsp.units import PSI, STANDARD_GRAVITY, sensitivity_factor, si_unit, unit_info, units_for


@pytest.mark.parametrize("value, src, dst, expected", [
    (1.0, "g", "m/s^2", 9.80665),          # standard gravity, 3rd CGPM (1901); ISO 80000-3
    (1.0, "in/s", "mm/s", 25.4),            # international inch = 25.4 mm exactly (1959); NIST SP 811
    (1.0, "ft", "m", 0.3048),               # international foot = 0.3048 m exactly (1959); NIST SP 811
    (1.0, "mil", "um", 25.4),               # 1 mil = 0.001 in; NIST SP 811
    (1.0, "bar", "Pa", 1e5),                # bar = 10^5 Pa; NIST SP 811 Table 8
    (1.0, "lbf", "N", 4.4482216152605),     # pound-force, NIST SP 811 B.8
    (1.0, "psi", "kPa", 6.894757293168361),  # lbf/in^2, NIST SP 811 B.8 (6.894757 kPa)
    (1.0, "cm/s^2", "m/s^2", 0.01),         # the gal, 1 cm/s^2 (common practice)
    (1000.0, "mg", "g", 1.0),
    (1.0, "m/s", "mm/s", 1000.0),
    (2.0, "mm", "m", 0.002),
])
def test_conversion_factors_match_their_definitions(value, src, dst, expected):
    assert convert_units(value, src, dst) == pytest.approx(expected, rel=1e-15)


def test_inch_conversion_is_exact_in_binary():
    # 1 in/s in mm/s must print as 25.4 exactly, not 25.400000000000002
    assert convert_units(1.0, "in/s", "mm/s") == 25.4


def test_round_trip_conversion_returns_the_input():
    x = np.linspace(-3, 3, 7)
    back = convert_units(convert_units(x, "g", "in/s^2"), "in/s^2", "g")
    np.testing.assert_allclose(back, x, rtol=1e-14)


def test_conversion_does_not_touch_the_input():
    x = np.ones(3)
    convert_units(x, "g", "m/s^2")
    assert np.all(x == 1.0)


def test_aliases_resolve_to_canonical_symbols():
    assert unit_info("m/s²").symbol == "m/s^2"
    assert unit_info("µm").symbol == "um"
    assert unit_info("ips").symbol == "in/s"


def test_psi_constant():
    assert PSI == pytest.approx(6894.757293168361, rel=1e-15)  # NIST SP 811 B.8


def test_cross_quantity_conversion_is_refused_with_the_valid_units():
    with pytest.raises(SigtuneError, match=r"cannot convert g \(acceleration\) to mm/s \(velocity\).*m/s\^2"):
        convert_units(1.0, "g", "mm/s")


def test_unknown_unit_lists_the_known_ones():
    with pytest.raises(SigtuneError, match=r"unknown unit 'furlong'.*m/s\^2"):
        unit_info("furlong")


def test_si_units_and_unit_lists():
    assert si_unit("velocity") == "m/s"
    assert "g" in units_for("acceleration")
    with pytest.raises(SigtuneError, match="unknown quantity"):
        si_unit("temperature")


@pytest.mark.parametrize("sens, unit, volts, expected, expected_unit", [
    (100.0, "mV/g", 0.1, 1.0, "g"),                  # 100 mV/g: 0.1 V is 1 g (definition of sensitivity)
    (10.2, "mV/(m/s^2)", 1.02, 100.0, "m/s^2"),
    (1.0, "V/g", 2.0, 2.0, "g"),
    (22.5, "mV/N", 0.225, 10.0, "N"),
    (50.0, "mV/Pa", 0.5, 10.0, "Pa"),
])
def test_calibration_from_sensitivity(sens, unit, volts, expected, expected_unit):
    values, out_unit = calibrate_volts([volts], sens, unit)
    assert out_unit == expected_unit
    assert values[0] == pytest.approx(expected, rel=1e-12)


def test_calibration_to_another_unit():
    values, unit = calibrate_volts([0.1], 100.0, "mV/g", to_unit="m/s^2")
    assert unit == "m/s^2"
    assert values[0] == pytest.approx(STANDARD_GRAVITY, rel=1e-12)  # 1 g


@pytest.mark.parametrize("sens, unit, message", [
    (0.0, "mV/g", r"sensitivity: must be a finite number > 0.*got 0"),
    (float("nan"), "mV/g", r"sensitivity: must be a finite number > 0"),
    (100.0, "mVg", r"sensitivity_unit: .*like 'mV/g'"),
    (100.0, "N/g", r"numerator must be V or mV"),
])
def test_bad_sensitivity_is_refused(sens, unit, message):
    with pytest.raises(SigtuneError, match=message):
        sensitivity_factor(sens, unit)


def test_conversion_factor_refuses_units_of_another_quantity():
    from dsp.units import conversion_factor

    with pytest.raises(SigtuneError, match=r"cannot convert g \(acceleration\) to Pa \(pressure\)"):
        conversion_factor("g", "Pa")


@pytest.mark.parametrize("sens", [None, "abc", [1], True, 1e-320])
def test_sensitivity_of_the_wrong_type_or_size_is_refused(sens):
    with pytest.raises(SigtuneError, match=r"sensitivity: must be a finite number > 0"):
        sensitivity_factor(sens, "mV/g")


def test_sensitivity_unit_must_be_text():
    with pytest.raises(SigtuneError, match=r"sensitivity_unit: must be text like 'mV/g'; got 5"):
        sensitivity_factor(100.0, 5)

"""Design objects: frozen sections validated from one field table each."""

from __future__ import annotations

import dataclasses
import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from turnkit import design as d
from turnkit.errors import DesignValueError
from turnkit.units import angle_power, format_number, format_quantity, parse_quantity, registry

SECTION_CLASSES = (
    *d.STAGE_KINDS.values(),
    d.SensorDesign,
    d.LatchDesign,
    d.CounterDesign,
    d.ScheduleDesign,
    d.PowerConsumer,
    d.HostSupply,
    d.PowerDesign,
    d.BatteryDesign,
    d.MotionScenario,
    d.Requirements,
    d.ActuatorDesign,
    d.MagnetDesign,
    d.AccuracyDesign,
    d.CountMemoryDesign,
)
NESTED = {"gear_train", "sensor", "latches", "counter", "schedule", "power", "battery", "motion",
          "requirements", "consumers", "host_supply", "magnet", "accuracy", "count_memory"}


# --- the field tables -------------------------------------------------------------

@pytest.mark.parametrize("cls", SECTION_CLASSES, ids=lambda c: c.__name__)
def test_field_table_covers_every_attribute_exactly(cls):
    from_table = [attr for spec in cls.FIELDS for attr in spec.attrs]
    from_dataclass = [f.name for f in dataclasses.fields(cls) if f.name not in NESTED]
    assert sorted(from_table) == sorted(from_dataclass)
    assert len(set(from_table)) == len(from_table)


@pytest.mark.parametrize("cls", SECTION_CLASSES, ids=lambda c: c.__name__)
def test_table_defaults_match_dataclass_defaults(cls):
    defaults = {f.name: f.default for f in dataclasses.fields(cls)}
    for spec in cls.FIELDS:
        first = spec.attrs[0]
        if spec.required:
            continue
        assert defaults[first] == spec.default, (cls.__name__, spec.key)
        for other in spec.attrs[1:]:
            assert defaults[other] is None


@pytest.mark.parametrize("cls", SECTION_CLASSES, ids=lambda c: c.__name__)
def test_every_field_has_a_description_and_valid_default(cls):
    for spec in cls.FIELDS:
        assert spec.description.strip()
        if not spec.required and spec.default is not None:
            spec.check(spec.default, f"{cls.__name__}.{spec.key}", spec.units[0] if spec.units else "")


def test_quantity_attribute_names_carry_their_unit():
    spec = d.Requirements.field_spec("backdrive_speed")
    assert spec.attrs == ("backdrive_speed_mm_per_s", "backdrive_speed_rpm")
    assert d.ScheduleDesign.field_spec("poll_period").attrs == ("poll_period_ms",)
    assert d.MotionScenario.field_spec("acceleration").attrs == (
        "acceleration_deg_per_s2", "acceleration_mm_per_s2")


def test_range_text_shows_open_and_closed_bounds():
    efficiency = d.ExternalStage.field_spec("efficiency")
    assert efficiency.range_text() == "in (0, 1]"
    assert d.CounterDesign.field_spec("bits").range_text() == "in [4, 63]"
    assert d.LeadScrewStage.field_spec("pitch").range_text() == "> 0"
    assert d.SensorDesign.field_spec("offset_x").range_text() == "any finite value"


def test_field_spec_rejects_a_quantity_without_units():
    with pytest.raises(DesignValueError, match="FieldSpec.units"):
        d.FieldSpec("pitch", "quantity", "a pitch")
    with pytest.raises(DesignValueError, match="FieldSpec.units"):
        d.FieldSpec("pitch", "quantity", "a pitch", units=("furlong",))


# --- frozen, validated objects -----------------------------------------------------

def test_sections_are_frozen_slotted_and_hashable():
    design = d.ActuatorDesign(name="valve", gear_train=(d.ExternalStage(12, 48),))
    with pytest.raises(dataclasses.FrozenInstanceError):
        design.name = "other"  # type: ignore[misc]
    assert not hasattr(design.sensor, "__dict__")
    assert hash(design) == hash(dataclasses.replace(design))
    assert {design: 1}[d.ActuatorDesign(name="valve", gear_train=(d.ExternalStage(12, 48),))] == 1


def test_replace_validates_again():
    stage = d.ExternalStage(teeth_driver=12, teeth_driven=48)
    with pytest.raises(DesignValueError) as info:
        dataclasses.replace(stage, efficiency=1.2)
    assert str(info.value) == "ExternalStage.efficiency must be in (0, 1], not 1.2"
    assert info.value.field == "ExternalStage.efficiency"


def test_out_of_range_quantity_message_names_field_value_and_unit():
    with pytest.raises(DesignValueError) as info:
        d.LeadScrewStage(pitch_mm=-1.0)
    assert str(info.value) == "LeadScrewStage.pitch_mm must be > 0, not -1.0 mm (values in mm)"


@pytest.mark.parametrize("value", [math.nan, math.inf])
def test_non_finite_numbers_are_rejected(value):
    with pytest.raises(DesignValueError, match="a finite number"):
        d.SensorDesign(offset_x_mV=value)


@pytest.mark.parametrize(
    ("kwargs", "fragment"),
    [
        ({"teeth_driver": 12.0, "teeth_driven": 40}, "an integer >= 3"),
        ({"teeth_driver": True, "teeth_driven": 40}, "an integer >= 3"),
        ({"teeth_driver": 2, "teeth_driven": 40}, "an integer >= 3, not 2"),
        ({"teeth_driver": 12, "teeth_driven": 40, "backlash_deg": "1"}, "a number"),
    ],
)
def test_wrong_types_are_rejected(kwargs, fragment):
    with pytest.raises(DesignValueError, match=fragment):
        d.ExternalStage(**kwargs)


def test_choice_and_bool_fields_are_checked():
    with pytest.raises(DesignValueError, match="one of 'wrap', 'saturate', 'fault'"):
        d.CounterDesign(overflow="roll")
    with pytest.raises(DesignValueError, match="true or false"):
        d.CounterDesign(signed=1)


def test_internal_ring_needs_more_teeth_than_its_pinion():
    with pytest.raises(DesignValueError, match="InternalStage.teeth_driven must be more than teeth_driver"):
        d.InternalStage(teeth_driver=40, teeth_driven=20)


def test_planetary_members_must_differ_and_ring_exceed_sun():
    with pytest.raises(DesignValueError, match="sun, ring and carrier once each"):
        d.PlanetaryStage(sun_teeth=20, ring_teeth=80, held="sun", input="sun")
    with pytest.raises(DesignValueError, match="more than sun_teeth"):
        d.PlanetaryStage(sun_teeth=80, ring_teeth=20)
    stage = d.PlanetaryStage(sun_teeth=20, ring_teeth=80, held="sun", input="ring", output="carrier")
    assert stage.held == "sun"


@pytest.mark.parametrize(
    "kwargs",
    [
        {},
        {"teeth_driver": 20},
        {"teeth_driver": 20, "teeth_driven": 40, "pitch_diameter_driver_mm": 10.0},
        {"teeth_driver": 20, "pitch_diameter_driven_mm": 10.0},
    ],
)
def test_belt_needs_exactly_one_complete_pair(kwargs):
    with pytest.raises(DesignValueError, match="one pair"):
        d.BeltStage(**kwargs)


def test_belt_accepts_teeth_or_diameters():
    assert d.BeltStage(teeth_driver=20, teeth_driven=40).teeth_driven == 40
    by_diameter = d.BeltStage(pitch_diameter_driver_mm=10.0, pitch_diameter_driven_mm=30.0)
    assert by_diameter.pitch_diameter_driven_mm == 30.0


def test_fast_poll_period_cannot_exceed_poll_period():
    with pytest.raises(DesignValueError, match=r"fast_poll_period_ms must be <= poll_period \(5 ms\)"):
        d.ScheduleDesign(kind="adaptive", poll_period_ms=5.0, fast_poll_period_ms=6.0)


def test_fixed_schedule_ignores_the_fast_period():
    # Regression: a fixed schedule faster than the default fast period was refused.
    assert d.ScheduleDesign(kind="fixed", poll_period_ms=0.5).poll_period_ms == 0.5


def test_poll_period_must_exceed_the_time_awake():
    # 50 + 100 + 20 us awake = 0.17 ms per poll.
    with pytest.raises(DesignValueError, match=r"longer than wake_time \+ settle_time \+ poll_time \(0.17 ms\)"):
        d.ScheduleDesign(poll_period_ms=0.1, fast_poll_period_ms=0.1)
    with pytest.raises(DesignValueError, match="fast_poll_period_ms"):
        d.ScheduleDesign(kind="adaptive", poll_period_ms=10.0, fast_poll_period_ms=0.15)


def test_custom_battery_needs_capacity_and_voltage():
    with pytest.raises(DesignValueError, match="capacity_mAh must be given for a custom cell"):
        d.BatteryDesign()
    with pytest.raises(DesignValueError, match="nominal_voltage_V must be given"):
        d.BatteryDesign(capacity_mAh=3000.0)
    cell = d.BatteryDesign(capacity_mAh=3000.0, nominal_voltage_V=1.5, self_discharge_per_year=0.01)
    assert cell.chemistry is None
    assert d.BatteryDesign(chemistry="li_fes2_aa", capacity_mAh=2500.0).capacity_mAh == 2500.0


def test_battery_chemistry_must_be_an_identifier():
    with pytest.raises(DesignValueError, match="letters, digits and underscores"):
        d.BatteryDesign(chemistry="")
    with pytest.raises(DesignValueError, match="letters, digits and underscores"):
        d.BatteryDesign(chemistry="AA cell")


def test_power_consumer_names_are_unique_and_non_empty():
    mcu = d.PowerConsumer("mcu", 1.0, 500.0, 1000.0, 2000.0)
    with pytest.raises(DesignValueError, match="unique consumer names"):
        d.PowerDesign(consumers=(mcu, mcu))
    with pytest.raises(DesignValueError, match="non-empty name"):
        d.PowerConsumer(" ", 1.0, 500.0, 1000.0, 2000.0)
    with pytest.raises(DesignValueError, match="a tuple of PowerConsumer"):
        d.PowerDesign(consumers=[mcu])


def test_motion_requires_the_fields_of_its_kind():
    with pytest.raises(DesignValueError, match="MotionScenario.amplitude must be given for a 'vibration' motion"):
        d.MotionScenario(name="shake", kind="vibration", frequency_Hz=20.0, duration_s=1.0)


def test_motion_rejects_fields_its_kind_does_not_use():
    with pytest.raises(DesignValueError, match="frequency must be left out of a 'constant' motion"):
        d.MotionScenario(name="spin", kind="constant", speed_rpm=60.0, duration_s=1.0, frequency_Hz=3.0)


def test_motion_keeps_linear_or_rotary_but_not_both():
    linear = d.MotionScenario(name="pull", kind="constant", speed_mm_per_s=50.0, duration_s=2.0)
    assert linear.speed_rpm is None and linear.speed_mm_per_s == 50.0
    with pytest.raises(DesignValueError, match="one unit only"):
        d.MotionScenario(name="pull", kind="constant", speed_mm_per_s=50.0, speed_rpm=3.0, duration_s=2.0)
    with pytest.raises(DesignValueError, match="all as linear"):
        d.MotionScenario(name="move", kind="trapezoid", speed_mm_per_s=5.0, distance_deg=90.0,
                         acceleration_mm_per_s2=10.0)


def test_linear_motion_cannot_be_at_the_motor():
    with pytest.raises(DesignValueError, match="at = 'motor'"):
        d.MotionScenario(name="pull", kind="constant", at="motor", speed_mm_per_s=50.0, duration_s=2.0)


def test_linear_stage_must_end_the_train():
    with pytest.raises(DesignValueError, match=r"gear_train\[0\] must be a rotary stage, not 'lead_screw'"):
        d.ActuatorDesign(name="x", gear_train=(d.LeadScrewStage(pitch_mm=2.0), d.ExternalStage(10, 20)))
    design = d.ActuatorDesign(name="x", gear_train=(d.ExternalStage(10, 20), d.RackStage(1.0, 20)))
    assert design.output_is_linear
    assert not d.ActuatorDesign(name="x").output_is_linear


def test_design_rejects_wrong_section_types_and_duplicate_scenarios():
    with pytest.raises(DesignValueError, match="a SensorDesign"):
        d.ActuatorDesign(name="x", sensor=d.LatchDesign())
    spin = d.MotionScenario(name="spin", kind="constant", speed_rpm=60.0, duration_s=1.0)
    with pytest.raises(DesignValueError, match="unique scenario names"):
        d.ActuatorDesign(name="x", motion=(spin, spin))
    with pytest.raises(DesignValueError, match="a tuple of gear stages"):
        d.ActuatorDesign(name="x", gear_train=[d.ExternalStage(10, 20)])
    with pytest.raises(DesignValueError, match="non-empty name"):
        d.ActuatorDesign(name="")


def test_format_version_is_fixed():
    with pytest.raises(DesignValueError, match="format_version"):
        d.ActuatorDesign(name="x", format_version=2)


def test_unknown_keyword_is_rejected():
    with pytest.raises(TypeError):
        d.SensorDesign(amplitude=3.0)  # type: ignore[call-arg]


# --- quantity parsing at the edge ---------------------------------------------------

@pytest.mark.parametrize(
    ("text", "unit", "expected"),
    [
        ("5 years", "year", 5.0),
        ("15 uA", "uA", 15.0),
        ("15 µA", "uA", 15.0),
        ("0.8 mA", "uA", 800.0),
        ("300 rpm", "rpm", 300.0),
        ("25 ms", "s", 0.025),
        ("2 mm", "m", 0.002),
    ],
)
def test_common_quantities_parse(text, unit, expected):
    assert parse_quantity(text, "x").to(unit).magnitude == pytest.approx(expected, rel=1e-12)


def test_percent_parses_as_a_fraction():
    assert parse_quantity("2 %", "x").to("dimensionless").magnitude == pytest.approx(0.02, rel=1e-15)


def test_rpm_converts_to_radians_per_second():
    # Source: NIST SP 811, App. B.8: 1 r/min = 2*pi/60 rad/s = 0.104 719 755 rad/s.
    assert parse_quantity("1 rpm", "x").to("rad/s").magnitude == pytest.approx(2 * math.pi / 60, rel=1e-12)


def test_celsius_parses_despite_being_an_offset_unit():
    # Source: SI Brochure (9th ed.), 2.3.1: t/degC = T/K - 273.15.
    assert parse_quantity("25 degC", "x").to("K").magnitude == pytest.approx(298.15, rel=1e-12)
    assert parse_quantity("-10 degC", "x").to("degC").magnitude == -10.0


def test_unknown_unit_is_reported():
    with pytest.raises(DesignValueError, match="not defined"):
        parse_quantity("3 furlongz", "x")


def test_angle_power_tells_angles_from_fractions_and_frequencies():
    ureg = registry()
    assert angle_power(ureg.Quantity(1, "deg")) == 1
    assert angle_power(ureg.Quantity(1, "rpm")) == 1
    assert angle_power(ureg.Quantity(1, "Hz")) == 0
    assert angle_power(ureg.Quantity(1, "percent")) == 0


@settings(max_examples=200, deadline=None)
@given(st.floats(allow_nan=False, allow_infinity=False))
def test_formatted_numbers_read_back_exactly(value):
    assert float(format_number(value)) == value
    assert parse_quantity(format_quantity(value, "mm"), "x").to("mm").magnitude == value


def test_formatting_is_short_for_round_numbers():
    assert format_quantity(2.0, "mm") == "2 mm"
    assert format_quantity(0.1, "mm") == "0.1 mm"
    with pytest.raises(ValueError):
        format_number(math.inf)


# --- the sensor's calibration sweep path ---------------------------------------------------

def test_sensor_sweep_is_an_optional_path_kept_as_written():
    assert d.SensorDesign().sweep is None
    sensor = d.SensorDesign(sweep="sweeps/bench sweep.csv")
    assert sensor.sweep == "sweeps/bench sweep.csv"
    spec = d.SensorDesign.field_spec("sweep")
    assert spec.kind == "path" and spec.default is None and not spec.required


@pytest.mark.parametrize("bad", ["", "   ", 3, True])
def test_sensor_sweep_must_be_a_non_empty_path(bad):
    with pytest.raises(DesignValueError, match=r"SensorDesign\.sweep must be a non-empty file path"):
        d.SensorDesign(sweep=bad)


def test_changing_the_sweep_gives_a_different_sensor_that_hashes_apart():
    a = d.SensorDesign(sweep="a.csv")
    b = dataclasses.replace(a, sweep="b.csv")
    assert a != b and hash(a) != hash(b)
    assert dataclasses.replace(b, sweep="a.csv") == a


def test_the_fields_each_section_checks_are_listed_once_and_again_when_its_table_changes(monkeypatch):
    plan = d._stored_fields(d.SensorDesign)
    assert d._stored_fields(d.SensorDesign) is plan
    assert [spec for spec, _, _ in plan] == list(d.SensorDesign.FIELDS)
    amplitude = d.SensorDesign.field_spec("amplitude")
    by_key = {spec.key: stored for spec, _, stored in plan}
    assert ("mV", "amplitude_mV", "SensorDesign.amplitude_mV") in by_key["amplitude"]
    # A changed table is followed: the listed fields are those of the table in place.
    monkeypatch.setattr(d.SensorDesign, "FIELDS", (amplitude,))
    assert [spec for spec, _, _ in d._stored_fields(d.SensorDesign)] == [amplitude]
    monkeypatch.undo()
    with pytest.raises(DesignValueError, match="SensorDesign.amplitude_mV"):
        d.SensorDesign(amplitude_mV=-1.0)

"""Energy in whole designs: driven moves, fault, site temperature, shelf life, pulse sag and brown-out."""

from __future__ import annotations

from dataclasses import replace

import pytest

from turnkit import battery as batt
from turnkit.designfile import loads_design
from turnkit.errors import DesignFileError, DesignValueError
from turnkit.sizing import size

BASE = """
format_version = 1
name = "bench gate"
[[gear_train]]
kind = "external"
teeth_driver = 18
teeth_driven = 54
[[gear_train]]
kind = "lead_screw"
pitch = "2 mm"
length = "150 mm"
[schedule]
poll_period = "20 ms"
wake_time = "50 us"
settle_time = "100 us"
poll_time = "20 us"
[[power.consumers]]
name = "electronics"
asleep = "2 uA"
waking = "1 mA"
polling = "1 mA"
tracking = "3 mA"
[battery]
chemistry = "li_socl2_d"
[requirements]
stroke = "100 mm"
battery_life = "10 years"
"""

MOVES = """
moves_per_day = 4
move_load = "150 N"
motor_speed = "3000 rpm"
motor_current = "120 mA"
"""


def _design(power_extra: str = "", battery_extra: str = "", text: str = BASE):
    text = text.replace("[[power.consumers]]", "[power]\n" + power_extra + "\n[[power.consumers]]") \
        .replace('chemistry = "li_socl2_d"', 'chemistry = "li_socl2_d"\n' + battery_extra)
    return loads_design(text)


def _value(result, key):
    return result.value(key).value


# ---------------------------------------------------------------- driven moves


def test_moves_enter_the_average_current_with_the_motor_shown_in_the_breakdown():
    still = size(_design(), curves=False)
    moving = size(_design(MOVES), curves=False)
    # 100 mm at 2/3 mm a motor turn = 150 turns, 3 s at 3000 rpm; 4 moves at 120 mA = 1.44 C a day
    # = 0.4 mAh a day = 16.67 uA of the average, plus the electronics' tracking 3 mA for 12 s a day.
    assert _value(moving, "time_per_move_s") == pytest.approx(3.0)
    assert _value(moving, "move_charge_per_day_mAh") == pytest.approx(0.4)
    tracking_extra = (3000.0 - 2.0) * 12.0 / 86400.0 - (
        _value(still, "average_current_uA") - 2.0) * 12.0 / 86400.0
    assert _value(moving, "average_current_uA") == pytest.approx(
        _value(still, "average_current_uA") + 0.4 / 24 * 1e3 + tracking_extra, rel=1e-9)
    assert _value(moving, "battery_life_years") < _value(still, "battery_life_years")
    assert "motor 16.7 uA" in _value(moving, "current_by_consumer")
    assert "tracking" in _value(moving, "current_by_state") and "tracking" not in _value(still, "current_by_state")


def test_tracking_current_now_costs_charge_when_the_motor_moves():
    # Multiplying the tracking current by 1000 used to leave the average unchanged.
    d = _design(MOVES)
    heavy = replace(d, power=replace(d.power, consumers=(replace(d.power.consumers[0], tracking_uA=3e6),)))
    assert _value(size(heavy, curves=False), "average_current_uA") > 2 * _value(size(d, curves=False),
                                                                               "average_current_uA")


def test_more_moves_more_load_shorter_life_with_motor_constants():
    lives = []
    # Loads of 1-3 N draw roughly 30-110 mA here: within what a bobbin D cell can deliver.
    for n, load in ((1, 1), (4, 1), (4, 3)):
        extra = (f'moves_per_day = {n}\nmove_load = "{load} N"\nmotor_speed = "3000 rpm"\n'
                 'motor_torque_constant = "0.01 N*m/A"\nmotor_no_load_current = "30 mA"\n')
        lives.append(_value(size(_design(extra), curves=False), "battery_life_years"))
    assert lives[0] > lives[1] > lives[2]


def test_move_energy_goes_through_the_gear_train_efficiency():
    r = size(_design(MOVES), curves=False)
    eta = _value(r, "efficiency")
    # 150 N over 100 mm = 15 J at the output; the motor shaft does 15 J / eta over 150 turns.
    assert _value(r, "motor_torque_Nm") == pytest.approx(15.0 / eta / (2 * 3.141592653589793 * 150.0))


def test_a_motor_current_too_small_for_the_load_is_flagged():
    extra = MOVES.replace('"120 mA"', '"1 mA"')
    r = size(_design(extra), curves=False)
    assert any("carries less energy than the load" in w for w in r.warnings)


@pytest.mark.parametrize("extra, key, words", [
    ('moves_per_day = 4\nmotor_current = "100 mA"\n', "power.motor_speed", "given when moves_per_day"),
    ('moves_per_day = 4\nmotor_speed = "100 rpm"\n', "power.motor_current", "exactly one"),
    ('moves_per_day = 4\nmotor_speed = "100 rpm"\nmotor_current = "100 mA"\nmove_load = "2 N*m"\n',
     "power.move_load", "force in N"),
    ('motor_start_current = "1 A"\n', "power.motor_start", "together"),
])
def test_bad_move_keys_are_refused_naming_the_key(extra, key, words):
    with pytest.raises((DesignFileError, DesignValueError)) as info:
        size(_design(extra), curves=False)
    assert key in str(info.value) and words in str(info.value)


# ---------------------------------------------------------------- fault


def test_fault_at_sleep_current_by_default_and_awake_fault_says_how_fast_the_battery_dies():
    quiet = size(_design(), curves=False)
    assert _value(quiet, "fault_current_uA") == pytest.approx(2.0)
    assert not any("In fault" in w for w in quiet.warnings)
    awake = loads_design(BASE.replace('tracking = "3 mA"', 'tracking = "3 mA"\nfault = "3.9 mA"'))
    r = size(awake, curves=False)
    days = _value(r, "fault_days_to_flat")
    usable_mAh = _value(r, "usable_capacity_mAh")
    # Hand check: usable capacity over 3.9 mA * 24 h, with the site's self-discharge added.
    assert days == pytest.approx(usable_mAh / (3.9 * 24 + 0.01 * 19000 / 365.25), rel=1e-3)
    assert any("In fault" in w and f"{days:.3g} days" in w for w in r.warnings)


# ---------------------------------------------------------------- site temperature and shelf life


def test_life_check_uses_the_shelf_life_when_that_ends_first():
    # Li-FeS2 AA pair at a few uA lasts longer on charge than its 15-year shelf life:
    # a 20-year requirement must fail however large the battery.
    d = _design(text=BASE.replace("li_socl2_d", "li_fes2_aa").replace('"10 years"', '"20 years"'))
    r = size(d, curves=False)
    check = r.check("battery_life")
    assert _value(r, "battery_life_years") > 20
    assert _value(r, "service_life_years") == pytest.approx(15.0)
    assert not check.passed and "shelf life" in check.advice


def test_hot_site_speeds_self_discharge_by_arrhenius_and_cuts_shelf_life():
    cool = size(_design(), curves=False)
    hot = size(_design(battery_extra='temperature = "60 degC"'), curves=False)
    factor = batt.self_discharge_factor(60.0)
    assert _value(hot, "self_discharge_site_per_year_percent") == pytest.approx(1.0 * factor)
    assert _value(hot, "shelf_life_site_years") == pytest.approx(20.0 / factor)
    assert _value(hot, "battery_life_years") < _value(cool, "battery_life_years")
    assert not hot.check("battery_life").passed


def test_site_range_derates_capacity_at_the_coldest_temperature():
    r = size(_design(battery_extra='temperature_min = "-30 degC"\ntemperature_max = "40 degC"'), curves=False)
    tf = batt.cell("li_socl2_d").temperature_factor(-30.0)
    assert _value(r, "usable_capacity_mAh") == pytest.approx(
        19000 * tf * _value(r, "usable_fraction_percent") / 100)
    assert _value(r, "site_temperature_range_degC") == "-30 to 40"


def test_changing_temperature_moves_the_life_and_its_check():
    lives = [_value(size(_design(battery_extra=f'temperature = "{t} degC"'), curves=False), "service_life_years")
             for t in (20, 40, 70)]
    assert lives[0] > lives[1] > lives[2]


def test_site_range_needs_both_ends():
    with pytest.raises(DesignFileError, match="temperature_max"):
        _design(battery_extra='temperature_min = "-30 degC"')


# ---------------------------------------------------------------- pulse sag and brown-out


def test_flat_plateau_cut_off_keeps_most_of_the_capacity():
    r = size(_design("cutoff_voltage = \"3.0 V\"\n"), curves=False)
    assert _value(r, "usable_fraction_percent") > 90


def _coin_with_motor(extra: str = ""):
    coin = BASE.replace('chemistry = "li_socl2_d"', 'chemistry = "li_mno2_2032"').replace('"10 years"', '"1 years"')
    coin = coin.replace('asleep = "2 uA"', 'asleep = "0.5 uA"')
    coin = coin.replace('poll_period = "20 ms"', 'poll_period = "200 ms"')
    moves = ('cutoff_voltage = "2.5 V"\nmoves_per_day = 1\nmove_stroke = "2 mm"\nmotor_speed = "3000 rpm"\n'
             'motor_current = "8 mA"\nmotor_start_current = "40 mA"\nmotor_start_time = "5 ms"\n')
    return _design(moves + extra, text=coin)


def test_brown_out_check_fails_on_a_coin_cell_motor_start_and_the_advice_passes_when_applied():
    r = size(_coin_with_motor(), curves=False)
    check = r.check("brown_out")
    assert not check.passed
    # The advice names a capacitor computed as C >= I*t/dV for the largest pulse.
    text = check.advice.split("at least ", 1)[1].split(" across", 1)[0]
    number, unit = text.split()
    uF = float(number) * {"uF": 1.0, "mF": 1e3, "F": 1e6}[unit]
    fixed = size(_coin_with_motor(f'buffer_capacitance = "{uF * 1.01} uF"\n'), curves=False)
    assert fixed.check("brown_out").passed
    assert _value(fixed, "usable_fraction_percent") > _value(r, "usable_fraction_percent")


def test_cold_raises_internal_resistance_and_the_sag():
    warm = size(_coin_with_motor(), curves=False)
    d = _coin_with_motor()
    cold = size(replace(d, battery=replace(d.battery, temperature_degC=-10.0)), curves=False)
    assert _value(cold, "largest_pulse_sag_V") > _value(warm, "largest_pulse_sag_V")
    assert _value(cold, "usable_fraction_percent") <= _value(warm, "usable_fraction_percent")


def test_custom_cell_without_curves_says_sag_is_not_modelled():
    text = BASE.replace('chemistry = "li_socl2_d"', 'capacity = "2000 mAh"\nnominal_voltage = "3.6 V"')
    r = size(loads_design(text), curves=False)
    assert _value(r, "internal_resistance_ohm") == 0.0
    assert "not modelled" in r.value("internal_resistance_ohm").note


def test_summary_shows_the_source_beside_the_cell_used():
    r = size(_design(), curves=False)
    assert "from memory" in r.value("battery_capacity_mAh").note or "common practice" in \
        r.value("battery_capacity_mAh").note
    assert any("discharge curve" in a[0] and "from memory" in a[1] for a in r.assumptions)


# ---------------------------------------------------------------- primary cell plus buffer capacitor


def test_supercapacitor_buffer_carries_the_motor_and_its_leakage_is_billed():
    plain = size(_coin_with_motor(), curves=False)
    buffered = size(_coin_with_motor('buffer_capacitance = "1000000 uF"\nbuffer_leakage = "2 uA"\n'), curves=False)
    # The leakage is a consumer drawing all the time: exactly 2 uA more on average.
    assert _value(buffered, "average_current_uA") == pytest.approx(_value(plain, "average_current_uA") + 2.0)
    # A 1 F capacitor across a 15-ohm coin cell (tau = 15 s) takes most of the motor's pulses.
    assert _value(buffered, "largest_pulse_sag_V") < _value(plain, "largest_pulse_sag_V")
    assert buffered.check("brown_out").passed


def test_new_keys_round_trip_through_the_design_file():
    from turnkit.designfile import design_schema, dump_design

    d = _coin_with_motor('buffer_capacitance = "470 uF"\nbuffer_leakage = "0.1 uA"\n')
    d = replace(d, battery=replace(d.battery, temperature_min_degC=-5.0, temperature_max_degC=35.0),
                power=replace(d.power, consumers=(replace(d.power.consumers[0], fault_uA=40.0),)))
    assert loads_design(dump_design(d)) == d
    props = design_schema()["properties"]["power"]["properties"]
    assert {"moves_per_day", "move_load", "motor_torque_constant", "buffer_capacitance"} <= set(props)


def test_torque_load_on_a_rotary_output_and_a_wrong_unit_is_named():
    rotary = BASE.replace('[[gear_train]]\nkind = "lead_screw"\npitch = "2 mm"\nlength = "150 mm"\n', "") \
        .replace('stroke = "100 mm"', 'stroke = "720 deg"')
    extra = 'moves_per_day = 2\nmove_load = "0.5 N*m"\nmotor_speed = "1200 rpm"\nmotor_current = "90 mA"\n'
    r = size(_design(extra, text=rotary), curves=False)
    # 0.5 N*m over two output turns is 2 pi J at the output; 6 motor turns at 1200 rpm take 0.3 s.
    assert _value(r, "time_per_move_s") == pytest.approx(0.3)
    with pytest.raises(DesignFileError, match=r"power.move_load: '5 kg' is of dimension \[mass\]"):
        _design(extra.replace('"0.5 N*m"', '"5 kg"'), text=rotary)


@pytest.mark.parametrize("extra, key", [
    ('temperature_min = "-58 degC"\ntemperature_max = "20 degC"', "battery.temperature_min"),
    ('temperature_min = "-10 degC"\ntemperature_max = "95 degC"', "battery.temperature_max"),
    ('temperature = "90 degC"', "battery.temperature"),
])
def test_site_temperature_outside_the_cells_range_names_the_key_written(extra, key):
    text = BASE.replace('chemistry = "li_socl2_d"', 'chemistry = "li_socl2_d"\n' + extra)
    with pytest.raises(DesignValueError) as info:
        size(loads_design(text), curves=False)
    assert info.value.field == key and "operating range" in str(info.value)

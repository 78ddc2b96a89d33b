"""Design files: TOML in, validated design out, and back; errors that say what to fix."""

from __future__ import annotations

import dataclasses
import os
import tempfile
import tomllib

import jsonschema
import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from turnkit import design as d
from turnkit.designfile import (
    design_schema,
    dump_design,
    load_design,
    loads_design,
    save_design,
    trace_path,
)
from turnkit.errors import DesignFileError, DesignValueError

EXAMPLE = """
format_version = 1
name = "Irrigation gate valve"
description = "Spur stage, planetary and a trapezoidal lead screw raising a gate."

[[gear_train]]
kind = "external"
teeth_driver = 12
teeth_driven = 48
backlash = "0.5 deg"

[[gear_train]]
kind = "planetary"
sun_teeth = 20
ring_teeth = 100
planet_teeth = 40

[[gear_train]]
kind = "lead_screw"
pitch = "2 mm"
starts = 2
diameter = "12 mm"
friction_coefficient = 0.12
backlash = "0.05 mm"

[sensor]
amplitude = "80 mV"
gain_mismatch = "2 %"
noise_rms = "50 uV"

[counter]
bits = 24

[schedule]
kind = "adaptive"
poll_period = "20 ms"
fast_poll_period = "2 ms"

[power]
cutoff_voltage = "2.0 V"

[[power.consumers]]
name = "microcontroller"
asleep = "1.2 uA"
waking = "0.8 mA"
polling = "1.5 mA"
tracking = "2 mA"

[power.host_supply]
quiescent_budget = "40 uA"

[battery]
chemistry = "li_fes2_aa"
cells_series = 2
temperature = "-10 degC"

[[motion]]
name = "hand-wheel spin"
kind = "constant"
at = "motor"
speed = "600 rpm"
duration = "20 s"

[[motion]]
name = "gate drop"
kind = "trapezoid"
distance = "20 mm"
speed = "5 mm/s"
acceleration = "50 mm/s^2"

[[motion]]
name = "recorded"
kind = "trace"
trace = "traces/handwheel.csv"

[requirements]
stroke = "250 mm"
output_resolution = "0.05 mm"
backdrive_speed = "4 mm/s"
battery_life = "5 years"
quiescent_budget = "15 uA"
service_temperature = "-10 degC"
"""

BASE = 'format_version = 1\nname = "x"\n'
SCHEMA_VALIDATOR = jsonschema.Draft202012Validator(design_schema())


def _error(text: str) -> DesignFileError:
    with pytest.raises(DesignFileError) as info:
        loads_design(text, source="v.toml")
    return info.value


# --- reading -------------------------------------------------------------------------

def test_example_reads_into_canonical_units():
    design = loads_design(EXAMPLE)
    assert design.name == "Irrigation gate valve"
    screw = design.gear_train[2]
    assert isinstance(screw, d.LeadScrewStage)
    assert (screw.pitch_mm, screw.starts, screw.backlash_mm) == (2.0, 2, 0.05)
    assert design.gear_train[0].backlash_deg == 0.5
    assert design.sensor.gain_mismatch == pytest.approx(0.02, rel=1e-15)
    assert design.sensor.noise_rms_mV == pytest.approx(0.05, rel=1e-12)
    assert design.power.consumers[0].waking_uA == pytest.approx(800.0, rel=1e-12)
    assert design.power.host_supply.quiescent_budget_uA == 40.0
    assert design.battery.temperature_degC == -10.0
    assert design.requirements.battery_life_years == 5.0
    assert design.requirements.stroke_mm == 250.0 and design.requirements.stroke_deg is None


def test_speeds_keep_their_dimension():
    design = loads_design(EXAMPLE)
    spin, drop, _ = design.motion
    assert spin.speed_rpm == 600.0 and spin.speed_mm_per_s is None
    assert drop.speed_mm_per_s == 5.0 and drop.speed_rpm is None
    assert drop.acceleration_mm_per_s2 == 50.0


def test_angular_speed_in_degrees_per_second_becomes_rpm():
    text = BASE + '[[motion]]\nname="a"\nkind="constant"\nspeed="360 deg/s"\nduration="1 s"\n'
    # 360 deg/s is one revolution per second, 60 rpm (definition of the revolution).
    assert loads_design(text).motion[0].speed_rpm == pytest.approx(60.0, rel=1e-12)


def test_omitted_sections_take_defaults():
    design = loads_design(BASE)
    assert design == d.ActuatorDesign(name="x")
    assert design.battery is None and design.gear_train == () and design.motion == ()


def test_trace_path_is_kept_as_written_and_resolved_from_the_file(tmp_path):
    (tmp_path / "traces").mkdir()
    (tmp_path / "traces" / "handwheel.csv").write_text("time_s,angle_deg\n0,0\n")
    path = tmp_path / "valve.toml"
    path.write_text(EXAMPLE)
    design = load_design(path)
    scenario = design.motion[2]
    assert scenario.trace == "traces/handwheel.csv"
    assert trace_path(scenario, path) == tmp_path / "traces" / "handwheel.csv"
    with pytest.raises(DesignValueError):
        trace_path(design.motion[0], path)


def test_missing_trace_file_is_reported_on_load(tmp_path):
    path = tmp_path / "valve.toml"
    path.write_text(EXAMPLE)
    with pytest.raises(DesignFileError) as info:
        load_design(path)
    message = str(info.value)
    assert "motion[2].trace" in message and "traces/handwheel.csv" in message and str(path) in message


def test_missing_design_file_is_reported(tmp_path):
    with pytest.raises(DesignFileError, match="design file not found"):
        load_design(tmp_path / "nope.toml")


# --- every validation path and its message --------------------------------------------------

STAGE = BASE + "[[gear_train]]\n"


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        # unknown keys, with a did-you-mean
        (BASE + "nmae = 2\n", "v.toml: nmae: unknown key 'nmae'; did you mean 'name'?"),
        (BASE + "[sensr]\n", "v.toml: sensr: unknown key 'sensr'; did you mean 'sensor'?"),
        (STAGE + 'kind = "lead_screw"\npich = "2 mm"\n',
         "v.toml: gear_train[0].pich: unknown key 'pich'; did you mean 'pitch'?"),
        (BASE + "[sensor]\nzebra = 1\n", "v.toml: sensor.zebra: unknown key 'zebra'; expected one of amplitude"),
        (BASE + "[power]\nconsumer = []\n",
         "v.toml: power.consumer: unknown key 'consumer'; did you mean 'consumers'?"),
        # wrong dimension says which was expected
        (STAGE + 'kind = "lead_screw"\npitch = "2 s"\n',
         "v.toml: gear_train[0].pitch: '2 s' is a time; expected a length in mm, such as '2 mm'"),
        (STAGE + 'kind = "external"\nteeth_driver = 12\nteeth_driven = 40\nbacklash = "0.1 mm"\n',
         "v.toml: gear_train[0].backlash: '0.1 mm' is a length; expected an angle in deg, such as '1.5 deg'"),
        (BASE + '[sensor]\ngain_mismatch = "2 deg"\n',
         "v.toml: sensor.gain_mismatch: '2 deg' is an angle; expected a fraction (dimensionless)"),
        (BASE + '[[motion]]\nname="a"\nkind="constant"\nspeed="5 Hz"\nduration="1 s"\n',
         "v.toml: motion[0].speed: '5 Hz' is a frequency; expected a rotational speed in rpm or a linear "
         "speed in mm/s"),
        (BASE + '[requirements]\nbattery_life = "5 mm"\n',
         "v.toml: requirements.battery_life: '5 mm' is a length; expected a time in years"),
        (BASE + '[sensor]\namplitude = "2 kg"\n',
         "v.toml: sensor.amplitude: '2 kg' is of dimension [mass]; expected a voltage in mV"),
        (BASE + '[sensor]\namplitude = "2 N"\n',
         "v.toml: sensor.amplitude: '2 N' is a force; expected a voltage in mV"),
        # missing units, unreadable quantities
        (STAGE + 'kind = "lead_screw"\npitch = 2\n',
         "v.toml: gear_train[0].pitch: 2 has no unit; expected a length in mm, written with its unit such as "
         "'2 mm'"),
        (STAGE + 'kind = "lead_screw"\npitch = "2"\n', "'2' has no unit"),
        (STAGE + 'kind = "lead_screw"\npitch = true\n', "True is not a quantity"),
        (BASE + '[sensor]\namplitude = "2 furlongz"\n',
         "v.toml: sensor.amplitude: cannot read '2 furlongz' as a quantity"),
        (BASE + '[sensor]\nharmonic2 = "x %"\n', "v.toml: sensor.harmonic2: cannot read 'x %'"),
        (BASE + "[sensor]\nharmonic2 = true\n", "True is not a fraction"),
        # ranges
        (STAGE + 'kind = "lead_screw"\npitch = "-2 mm"\n',
         "v.toml: gear_train[0].pitch: '-2 mm' is out of range; expected a length in mm > 0 mm"),
        (STAGE + 'kind = "lead_screw"\npitch = "-0.002 m"\n', "'-0.002 m' (= -2 mm) is out of range"),
        (BASE + "[counter]\nbits = 80\n", "v.toml: counter.bits: 80 is out of range; expected an integer in [4, 63]"),
        (BASE + '[sensor]\ngain_mismatch = "60 %"\n', "sensor.gain_mismatch: '60 %' is out of range"),
        (STAGE + 'kind = "external"\nteeth_driver = 12\nteeth_driven = 40\nefficiency = 1.5\n',
         "gear_train[0].efficiency: 1.5 is out of range; expected a fraction"),
        (STAGE + 'kind = "worm"\nwheel_teeth = 30\nfriction_coefficient = -0.1\n',
         "gear_train[0].friction_coefficient: -0.1 is out of range"),
        # types
        (BASE + "[counter]\nbits = 16.5\n", "v.toml: counter.bits: 16.5 is not an integer"),
        (BASE + '[counter]\nsigned = "yes"\n', "v.toml: counter.signed: 'yes' is not true or false"),
        (STAGE + 'kind = "worm"\nwheel_teeth = 30\nfriction_coefficient = "0.1"\n',
         "gear_train[0].friction_coefficient: '0.1' is not a number"),
        (BASE + "description = 3\n", "v.toml: description: 3 is not a string"),
        (BASE + "sensor = 3\n", "v.toml: sensor: must be a table ([sensor]), not 3"),
        (BASE + "gear_train = 3\n", "v.toml: gear_train: must be an array of tables ([[gear_train]]), not 3"),
        (BASE + '[battery]\nchemistry = "lithium aa"\n',
         "v.toml: battery.chemistry: 'lithium aa' is not allowed; expected a non-empty name of letters"),
        (BASE + '[[motion]]\nname="a"\nkind="trace"\ntrace=""\n', "motion[0].trace: '' is not allowed"),
        # choices, with a did-you-mean
        (BASE + '[counter]\noverflow = "wrapp"\n',
         "v.toml: counter.overflow: 'wrapp' is not allowed; expected one of 'wrap', 'saturate', 'fault'; "
         "did you mean 'wrap'?"),
        (STAGE + 'kind = "leadscrew"\n', "gear_train[0].kind: 'leadscrew' is not a stage kind; expected one of "
                                        "external, internal, planetary, worm, belt, lead_screw, rack; did you mean "
                                        "'lead_screw'?"),
        (STAGE + 'pitch = "2 mm"\n', "v.toml: gear_train[0].kind: missing; a stage needs kind = one of external"),
        # missing keys
        (STAGE + 'kind = "lead_screw"\n', "v.toml: gear_train[0].pitch: missing; expected a length in mm"),
        ('name = "x"\n', "v.toml: format_version: missing; add format_version = 1 at the top"),
        ("format_version = 1\n", "v.toml: name: missing; expected a string"),
        ('format_version = 2\nname = "x"\n', "v.toml: format_version: 2 is not a format this turnkit reads"),
        (BASE + '[power]\n[[power.consumers]]\nname="mcu"\nasleep="1 uA"\nwaking="1 mA"\npolling="1 mA"\n',
         "v.toml: power.consumers[0].tracking: missing; expected a current in uA"),
        (BASE + "[power.host_supply]\n", "power.host_supply.quiescent_budget: missing"),
        # checks across fields, mapped back to file keys
        (STAGE + 'kind = "planetary"\nsun_teeth = 12\nring_teeth = 40\nheld = "sun"\n',
         "v.toml: gear_train[0].held: must be a different member from input and output"),
        (STAGE + 'kind = "belt"\nteeth_driver = 12\n', "gear_train[0].teeth_driver: must be given as one pair"),
        (STAGE + 'kind = "internal"\nteeth_driver = 40\nteeth_driven = 20\n',
         "gear_train[0].teeth_driven: must be more than teeth_driver (40), not 20"),
        (BASE + '[schedule]\nkind = "adaptive"\npoll_period = "1 ms"\nfast_poll_period = "2 ms"\n',
         "v.toml: schedule.fast_poll_period: must be <= poll_period (1 ms), not 2 ms"),
        (BASE + '[[motion]]\nname="a"\nkind="constant"\nspeed="5 rpm"\n',
         "v.toml: motion[0].duration: must be given for a 'constant' motion; a 'constant' motion needs "
         "duration, speed"),
        (BASE + '[[motion]]\nname="a"\nkind="constant"\nspeed="5 rpm"\nduration="1 s"\nfrequency="3 Hz"\n',
         "v.toml: motion[0].frequency: must be left out of a 'constant' motion"),
        (BASE + '[[motion]]\nname="a"\nkind="constant"\nat="motor"\nspeed="5 mm/s"\nduration="1 s"\n',
         "motion[0].speed: must be rotary (deg, rpm) when at = 'motor'"),
        (BASE + '[battery]\ncells_series = 2\n', "v.toml: battery.capacity: must be given for a custom cell"),
        (STAGE + 'kind = "rack"\nmodule = "1 mm"\npinion_teeth = 20\n[[gear_train]]\nkind = "external"\n'
                 'teeth_driver = 10\nteeth_driven = 20\n',
         "v.toml: gear_train[0]: must be a rotary stage, not 'rack'; a linear stage (lead_screw, rack) can only "
         "be the last stage"),
        (BASE + '[[motion]]\nname="a"\nkind="trace"\ntrace="a.csv"\n[[motion]]\nname="a"\nkind="trace"\n'
                'trace="b.csv"\n', "v.toml: motion: must be unique scenario names, not 'a'"),
    ],
)
def test_validation_message(text, expected):
    assert expected in str(_error(text))


def test_error_is_a_value_error_carrying_path_and_source():
    error = _error(BASE + "[counter]\nbits = 80\n")
    assert isinstance(error, ValueError)
    assert error.path == "counter.bits" and error.source == "v.toml"


def test_toml_syntax_error_gives_the_line():
    error = _error(BASE + "[sensor]\namplitude = = 2\n")
    assert error.line == 4
    assert str(error).startswith("v.toml:4: TOML syntax error")


# --- writing ---------------------------------------------------------------------------

def test_example_round_trips_through_text():
    design = loads_design(EXAMPLE)
    text = dump_design(design)
    assert loads_design(text) == design
    assert dump_design(loads_design(text)) == text


def test_dump_writes_quantities_with_units():
    data = tomllib.loads(dump_design(loads_design(EXAMPLE)))
    assert data["gear_train"][2]["pitch"] == "2 mm"
    assert data["schedule"]["poll_period"] == "20 ms"
    assert data["power"]["consumers"][0]["waking"] == "800 uA"
    assert data["requirements"]["battery_life"] == "5 years"
    assert data["battery"]["temperature"] == "-10 degC"
    assert data["motion"][1]["acceleration"] == "50 mm/s^2"
    assert data["format_version"] == 1


def test_dump_rejects_other_objects():
    with pytest.raises(TypeError, match="ActuatorDesign"):
        dump_design({"name": "x"})


def test_save_writes_and_refuses_to_overwrite(tmp_path):
    design = loads_design(EXAMPLE)
    path = tmp_path / "valve.toml"
    assert save_design(design, path) == path
    assert loads_design(path.read_text()) == design
    before = path.read_text()
    changed = dataclasses.replace(design, name="Gate valve B")
    with pytest.raises(FileExistsError, match="overwrite=True"):
        save_design(changed, path)
    assert path.read_text() == before
    save_design(changed, path, overwrite=True)
    assert loads_design(path.read_text()).name == "Gate valve B"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["valve.toml", "valve.toml.bak"]
    assert (tmp_path / "valve.toml.bak").read_text() == before


def test_failed_save_leaves_the_old_file_and_no_temporary(tmp_path, monkeypatch):
    path = tmp_path / "valve.toml"
    path.write_text(BASE + "# old contents\n")

    def broken_replace(src, dst):
        raise OSError("disk full")

    monkeypatch.setattr(os, "replace", broken_replace)
    with pytest.raises(OSError, match="disk full"):
        save_design(loads_design('format_version = 1\nname = "y"\n'), path, overwrite=True)
    assert path.read_text() == BASE + "# old contents\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["valve.toml"]


# --- saving over a hand-written file ---------------------------------------------------

COMMENTED = """\
# Gate valve, tuned by hand.
format_version = 1
name = "Irrigation gate valve"   # shown in reports

# --- gears, motor side first ---
[[gear_train]]          # spur pair
kind = "external"
teeth_driver = 12       # pinion
teeth_driven = 48
backlash = "0.5 deg"

# the screw
[[gear_train]]
kind    = "lead_screw"
pitch   = "0.002 m"     # 2 mm, written in metres on purpose
starts  = 2

[schedule]
kind = 'adaptive'
poll_period = "20 ms"   # slow poll while idle
fast_poll_period = "2000 us"

# motions while asleep
[[motion]]
name = "hand-wheel spin"
kind = "constant"
at = "motor"
speed = "600 rpm"
duration = "20 s"

# gate dropping under its own weight
[[motion]]
name = "gate drop"
kind = "trapezoid"
distance = "20 mm"
speed = "5 mm/s"
acceleration = "50 mm/s^2"

# wind on the gate
[[motion]]
name = "wind"
kind = "vibration"
amplitude = "0.2 mm"
frequency = "15 Hz"
duration = "10 s"

# what it must do
[requirements]
stroke = "250 mm"
battery_life = "5 years"
"""


def _commented_file(tmp_path):
    path = tmp_path / "valve.toml"
    path.write_bytes(COMMENTED.encode())
    return path, loads_design(COMMENTED)


def _headers_with_comment_above(text: str) -> list[tuple[str, str]]:
    lines = text.splitlines()
    return [(lines[i - 1], lines[i]) for i in range(1, len(lines)) if lines[i].startswith("[")]


def test_saving_over_a_commented_file_rewrites_only_the_changed_values(tmp_path):
    path, design = _commented_file(tmp_path)
    tuned = dataclasses.replace(
        design,
        schedule=dataclasses.replace(design.schedule, poll_period_ms=5.0),
        gear_train=(dataclasses.replace(design.gear_train[0], teeth_driver=13), design.gear_train[1]),
    )
    save_design(tuned, path, overwrite=True)
    old_lines = COMMENTED.encode().splitlines(keepends=True)
    new_lines = path.read_bytes().splitlines(keepends=True)
    assert len(new_lines) == len(old_lines)
    changed = {i: (a, b) for i, (a, b) in enumerate(zip(old_lines, new_lines)) if a != b}
    assert [pair[1] for pair in changed.values()] == [
        b"teeth_driver = 13       # pinion\n",
        b'poll_period = "5 ms"   # slow poll while idle\n',
    ]
    # Equal quantities written another way are left as the user wrote them.
    assert b'pitch   = "0.002 m"     # 2 mm, written in metres on purpose\n' in new_lines
    assert b'fast_poll_period = "2000 us"\n' in new_lines and b"kind = 'adaptive'\n" in new_lines
    assert load_design(path) == tuned
    assert (tmp_path / "valve.toml.bak").read_bytes() == COMMENTED.encode()


def test_saving_an_unchanged_design_leaves_the_file_and_makes_no_backup(tmp_path):
    path, design = _commented_file(tmp_path)
    save_design(design, path, overwrite=True)
    assert path.read_bytes() == COMMENTED.encode()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["valve.toml"]


def test_backup_keeps_one_level_the_text_before_the_last_save(tmp_path):
    path, design = _commented_file(tmp_path)
    first = dataclasses.replace(design, name="Gate valve B")
    save_design(first, path, overwrite=True)
    after_first = path.read_bytes()
    save_design(dataclasses.replace(first, name="Gate valve C"), path, overwrite=True)
    assert (tmp_path / "valve.toml.bak").read_bytes() == after_first
    assert b'name = "Gate valve C"   # shown in reports\n' in path.read_bytes()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["valve.toml", "valve.toml.bak"]


@pytest.mark.parametrize("removed", [0, 1, 2])
def test_removing_a_motion_scenario_removes_its_table_and_keeps_the_others_comments(tmp_path, removed):
    path, design = _commented_file(tmp_path)
    kept = tuple(m for i, m in enumerate(design.motion) if i != removed)
    save_design(dataclasses.replace(design, motion=kept), path, overwrite=True)
    text = path.read_text()
    assert loads_design(text) == dataclasses.replace(design, motion=kept)
    assert text.count("[[motion]]") == 2
    name = design.motion[removed].name
    assert f'name = "{name}"' not in text
    above = dict((header_comment, header) for header_comment, header in _headers_with_comment_above(text))
    # Comments directly above a remaining scenario's header stay with it; the one above the removed
    # scenario goes with it, except above the first table, which may describe the whole array.
    comments = {"hand-wheel spin": "# motions while asleep", "gate drop": "# gate dropping under its own weight",
                "wind": "# wind on the gate"}
    for scenario in kept:
        assert comments[scenario.name] in text
    if removed:
        assert comments[name] not in text
    assert above.get("# what it must do") == "[requirements]"
    assert "# --- gears, motor side first ---\n[[gear_train]]          # spur pair\n" in text


def test_removing_every_motion_scenario_removes_the_array(tmp_path):
    path, design = _commented_file(tmp_path)
    save_design(dataclasses.replace(design, motion=()), path, overwrite=True)
    text = path.read_text()
    assert "[[motion]]" not in text and "# wind on the gate" not in text
    assert "# what it must do\n[requirements]\n" in text
    assert loads_design(text).motion == ()


def test_removing_a_gear_stage_keeps_the_next_stage_and_its_comment(tmp_path):
    path, design = _commented_file(tmp_path)
    direct = dataclasses.replace(design, gear_train=design.gear_train[1:])
    save_design(direct, path, overwrite=True)
    text = path.read_text()
    assert loads_design(text) == direct
    assert "# pinion" not in text and text.count("[[gear_train]]") == 1
    assert '# the screw\n[[gear_train]]\nkind    = "lead_screw"\npitch   = "0.002 m"' in text


def test_reordered_scenarios_move_with_their_comments(tmp_path):
    path, design = _commented_file(tmp_path)
    spin, drop, wind = design.motion
    reordered = dataclasses.replace(design, motion=(wind, spin, drop))
    save_design(reordered, path, overwrite=True)
    text = path.read_text()
    assert loads_design(text) == reordered
    assert '# wind on the gate\n[[motion]]\nname = "wind"\n' in text
    assert '# gate dropping under its own weight\n[[motion]]\nname = "gate drop"\n' in text


def test_added_and_cleared_entries(tmp_path):
    path, design = _commented_file(tmp_path)
    changed = dataclasses.replace(
        design,
        description="second prototype",
        requirements=dataclasses.replace(design.requirements, stroke_mm=None, stroke_deg=90.0),
        battery=d.BatteryDesign(chemistry="lithium_iron_disulfide_aa", cells_series=2),
        motion=design.motion + (d.MotionScenario(name="shock", kind="coast_down", speed_rpm=30.0,
                                                 duration_s=0.5),),
    )
    save_design(changed, path, overwrite=True)
    text = path.read_text()
    assert loads_design(text) == changed
    # New top-level keys go after their neighbour, not after the comment above the first table.
    assert 'name = "Irrigation gate valve"   # shown in reports\ndescription = "second prototype"\n' in text
    assert '[requirements]\nstroke = "90 deg"\nbattery_life = "5 years"\n' in text
    assert '[[motion]]\nname = "shock"\nkind = "coast_down"\nspeed = "30 rpm"\nduration = "0.5 s"\n' in text
    # Only what differs from the defaults is added: cells_parallel and temperature are not written.
    assert '[battery]\nchemistry = "lithium_iron_disulfide_aa"\ncells_series = 2\n' in text
    assert "cells_parallel" not in text and "temperature" not in text
    assert all(line in text for line in COMMENTED.splitlines() if line.startswith("#"))


def test_saving_keeps_windows_line_endings(tmp_path):
    path = tmp_path / "valve.toml"
    original = COMMENTED.replace("\n", "\r\n").encode()
    path.write_bytes(original)
    design = loads_design(COMMENTED)
    changed = dataclasses.replace(design, schedule=dataclasses.replace(design.schedule, hold_time_s=4.0))
    save_design(changed, path, overwrite=True)
    data = path.read_bytes()
    assert b"\r\n" in data and b"\n" not in data.replace(b"\r\n", b"")
    assert b'fast_poll_period = "2000 us"\r\nhold_time = "4 s"\r\n' in data
    assert loads_design(data.decode()) == changed


@pytest.mark.parametrize(
    ("contents", "reason"),
    [
        ("old contents\n", "TOML syntax error"),
        (BASE + "[sensor]\nzebra = 1\n", "unknown key 'zebra'"),
        ("[tool.other]\nx = 1\n", "unknown key 'tool'"),
    ],
)
def test_an_existing_file_turnkit_cannot_read_is_not_overwritten(tmp_path, contents, reason):
    path = tmp_path / "valve.toml"
    path.write_text(contents)
    with pytest.raises(DesignFileError, match="nothing was written") as info:
        save_design(loads_design(BASE), path, overwrite=True)
    assert reason in str(info.value) and str(path) in str(info.value)
    assert path.read_text() == contents
    assert sorted(p.name for p in tmp_path.iterdir()) == ["valve.toml"]


def test_saving_keeps_the_file_permissions(tmp_path):
    path, design = _commented_file(tmp_path)
    os.chmod(path, 0o640)
    save_design(dataclasses.replace(design, name="Gate valve B"), path, overwrite=True)
    assert path.stat().st_mode & 0o777 == 0o640
    assert (tmp_path / "valve.toml.bak").stat().st_mode & 0o777 == 0o640


def test_written_formats_tomlkit_edits_still_read_back(tmp_path):
    path = tmp_path / "valve.toml"
    original = ('format_version = 1\nname = "x"\nsensor = { amplitude = "80 mV", adc_bits = 10 }  # inline\n'
                'gear_train = [{ kind = "external", teeth_driver = 12, teeth_driven = 40 }, '
                '{ kind = "lead_screw", pitch = "2 mm" }]\npower.cutoff_voltage = "2 V"\n\n'
                '[power.host_supply]\nquiescent_budget = "40 uA"\n')
    path.write_text(original)
    design = loads_design(original)
    changed = dataclasses.replace(
        design,
        sensor=dataclasses.replace(design.sensor, amplitude_mV=70.0),
        gear_train=(design.gear_train[1],),
        power=dataclasses.replace(design.power, cutoff_voltage_V=2.5, host_supply=None),
    )
    save_design(changed, path, overwrite=True)
    text = path.read_text()
    assert loads_design(text) == changed
    assert 'adc_bits = 10' in text and "# inline" in text and "host_supply" not in text
    assert 'power.cutoff_voltage = "2.5 V"\n' in text


# --- round trip over generated designs ------------------------------------------------

def _floats(spec: d.FieldSpec, lo: float = -1e6, hi: float = 1e6):
    low = spec.low if spec.low is not None else lo
    high = spec.high if spec.high is not None else hi
    return st.floats(low, high, exclude_min=spec.low_open, exclude_max=spec.high_open,
                     allow_nan=False, allow_infinity=False)


def _value(spec: d.FieldSpec):
    if spec.kind in ("quantity", "fraction", "number"):
        return _floats(spec)
    if spec.kind == "int":
        return st.integers(int(spec.low), int(spec.high) if spec.high is not None else int(spec.low) + 500)
    if spec.kind == "bool":
        return st.booleans()
    if spec.kind == "choice":
        return st.sampled_from(spec.choices)
    if spec.kind == "identifier":
        return st.from_regex(r"[a-z_][a-z0-9_]{0,20}", fullmatch=True)
    if spec.kind == "path":
        return st.from_regex(r"[a-z]{1,8}(/[a-z_]{1,8})?\.csv", fullmatch=True)
    return st.text(min_size=1, max_size=30).filter(lambda s: s.strip())


@st.composite
def _section(draw, cls, fixed=None, keys=None):
    """Draw a valid section: required fields always, optional ones sometimes."""
    fixed = dict(fixed or {})
    kwargs = {}
    for spec in cls.FIELDS:
        if spec.key in fixed or (keys is not None and spec.key not in keys):
            continue
        if not spec.required and not draw(st.booleans()):
            continue
        attr = draw(st.sampled_from(spec.attrs))
        kwargs[attr] = draw(_value(spec))
    kwargs.update(fixed)
    try:
        return cls(**kwargs)
    except DesignValueError:
        assume(False)


def _stage():
    planetary = st.permutations(["sun", "ring", "carrier"]).flatmap(
        lambda m: _section(d.PlanetaryStage, fixed={"held": m[0], "input": m[1], "output": m[2]}))
    belt = st.one_of(
        _section(d.BeltStage, keys={"teeth_driver", "teeth_driven", "backlash", "efficiency"}),
        _section(d.BeltStage, keys={"pitch_diameter_driver", "pitch_diameter_driven", "backlash", "efficiency"}),
    )
    internal = st.tuples(st.integers(3, 50), st.integers(1, 200)).flatmap(
        lambda t: _section(d.InternalStage, fixed={"teeth_driver": t[0], "teeth_driven": t[0] + t[1]}))
    rotary = st.one_of(_section(d.ExternalStage), internal, planetary, _section(d.WormStage), belt)
    linear = st.one_of(_section(d.LeadScrewStage), _section(d.RackStage))
    return st.tuples(st.lists(rotary, max_size=3), st.one_of(st.none(), linear)).map(
        lambda t: tuple(t[0]) + ((t[1],) if t[1] is not None else ()))


@st.composite
def _motion(draw, index):
    kind = draw(st.sampled_from(tuple(d.MOTION_FIELDS_BY_KIND)))
    required, optional = d.MOTION_FIELDS_BY_KIND[kind]
    linear = draw(st.booleans())
    kwargs = {"name": f"scenario {index}", "kind": kind, "at": "output" if linear else draw(
        st.sampled_from(("motor", "output")))}
    for spec in d.MotionScenario.FIELDS[3:]:
        if spec.key not in required and not (spec.key in optional and draw(st.booleans())):
            continue
        attr = spec.attrs[1 if linear and len(spec.attrs) == 2 else 0]
        kwargs[attr] = draw(_value(spec))
    try:
        return d.MotionScenario(**kwargs)
    except DesignValueError:  # e.g. a trapezoid or bursts at zero speed
        assume(False)


@st.composite
def _schedule(draw):
    period = draw(st.floats(1.0, 1000.0))
    fast = draw(st.floats(0.5, 1.0)) * period
    return draw(_section(d.ScheduleDesign, fixed={"poll_period_ms": period, "fast_poll_period_ms": fast},
                         keys={"kind", "hold_time", "jitter"}))


@st.composite
def designs(draw):
    consumers = draw(st.lists(_section(d.PowerConsumer), max_size=3, unique_by=lambda c: c.name))
    host = draw(st.one_of(st.none(), _section(d.HostSupply)))
    power = draw(_section(d.PowerDesign, fixed={"consumers": tuple(consumers), "host_supply": host}))
    battery = draw(st.one_of(
        st.none(),
        _section(d.BatteryDesign, fixed={"chemistry": draw(_value(d.BatteryDesign.field_spec("chemistry")))}),
        _section(d.BatteryDesign, fixed={"capacity_mAh": draw(st.floats(1.0, 1e5)), "nominal_voltage_V": 3.0}),
    ))
    motion = tuple(draw(_motion(i)) for i in range(draw(st.integers(0, 3))))
    return d.ActuatorDesign(
        name=draw(_value(d.ActuatorDesign.field_spec("name"))),
        description=draw(st.text(max_size=40)),
        gear_train=draw(_stage()),
        sensor=draw(_section(d.SensorDesign)),
        latches=draw(_section(d.LatchDesign)),
        counter=draw(_section(d.CounterDesign)),
        schedule=draw(_schedule()),
        power=power,
        battery=battery,
        motion=motion,
        requirements=draw(_section(d.Requirements)),
    )


ROUND_TRIP = settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow,
                                                                           HealthCheck.filter_too_much])


@ROUND_TRIP
@given(designs())
def test_any_valid_design_round_trips_through_a_file(design):
    text = dump_design(design)
    assert loads_design(text) == design


@ROUND_TRIP
@given(designs())
def test_dumped_files_satisfy_the_schema(design):
    SCHEMA_VALIDATOR.validate(tomllib.loads(dump_design(design)))


def _annotated(text: str) -> str:
    """``text`` with a comment above every table header and after every entry."""
    lines = []
    # Split on newlines only: strings may hold other line-breaking characters.
    for line in text.rstrip("\n").split("\n"):
        if line.startswith("["):
            lines.append(f"# about {line}")
        lines.append(f"{line}  # note" if " = " in line else line)
    return "\n".join(lines) + "\n"


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow,
                                                                 HealthCheck.filter_too_much])
@given(designs(), designs())
def test_saving_over_any_design_file_gives_the_new_design(before, after):
    with tempfile.TemporaryDirectory() as folder:
        path = __import__("pathlib").Path(folder) / "design.toml"
        original = _annotated(dump_design(before))
        path.write_text(original)
        save_design(before, path, overwrite=True)
        assert path.read_text() == original
        save_design(after, path, overwrite=True)
        assert loads_design(path.read_text()) == after
        if before != after:
            assert (path.parent / "design.toml.bak").read_text() == original


# --- JSON Schema ---------------------------------------------------------------------------

def test_schema_is_a_valid_draft_2020_12_schema():
    schema = design_schema()
    assert schema["$schema"] == "https://json-schema.org/draft/2020-12/schema"
    jsonschema.Draft202012Validator.check_schema(schema)


def test_schema_accepts_the_hand_written_example():
    jsonschema.validate(tomllib.loads(EXAMPLE), design_schema(), cls=jsonschema.Draft202012Validator)


def test_schema_lists_every_field_of_every_section():
    schema = design_schema()
    for kind, cls in d.STAGE_KINDS.items():
        properties = schema["$defs"][f"{kind}_stage"]["properties"]
        assert set(properties) == {"kind"} | {spec.key for spec in cls.FIELDS}
    assert set(schema["properties"]["sensor"]["properties"]) == {s.key for s in d.SensorDesign.FIELDS}
    motion_keys = set(schema["properties"]["motion"]["items"]["properties"])
    assert motion_keys == {s.key for s in d.MotionScenario.FIELDS}


@pytest.mark.parametrize(
    "text",
    [
        BASE + "nmae = 2\n",
        BASE + '[[gear_train]]\nkind = "leadscrew"\npitch = "2 mm"\n',
        BASE + '[[gear_train]]\nkind = "lead_screw"\npitch = 2\n',
        BASE + '[[gear_train]]\nkind = "belt"\nteeth_driver = 12\n',
        BASE + '[counter]\nbits = 80\n',
        BASE + '[[motion]]\nname="a"\nkind="constant"\nspeed="5 rpm"\n',
        BASE + '[[motion]]\nname="a"\nkind="constant"\nspeed="5 rpm"\nduration="1 s"\nfrequency="3 Hz"\n',
        BASE + '[battery]\ncells_series = 2\n',
        'format_version = 2\nname = "x"\n',
    ],
)
def test_schema_rejects_what_the_loader_rejects(text):
    with pytest.raises(DesignFileError):
        loads_design(text)
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.validate(tomllib.loads(text), design_schema(), cls=jsonschema.Draft202012Validator)


# --- the format reference stays in step with the code ---------------------------------

DOC = (__import__("pathlib").Path(__file__).resolve().parents[1] / "docs" / "design-file.md").read_text()


def _doc_example() -> str:
    section = DOC.split("## A full example", 1)[1]
    return section.split("```toml\n", 1)[1].split("```", 1)[0]


def test_documented_example_loads_round_trips_and_fits_the_schema():
    text = _doc_example()
    design = loads_design(text, source="docs/design-file.md")
    assert len(design.gear_train) == 3 and len(design.motion) == 5
    assert loads_design(dump_design(design)) == design
    SCHEMA_VALIDATOR.validate(tomllib.loads(text))


def test_documented_reference_lists_every_key():
    classes = (*d.STAGE_KINDS.values(), d.SensorDesign, d.LatchDesign, d.CounterDesign, d.ScheduleDesign,
               d.PowerDesign, d.PowerConsumer, d.HostSupply, d.BatteryDesign, d.MotionScenario, d.Requirements,
               d.ActuatorDesign, d.MagnetDesign, d.AccuracyDesign, d.CountMemoryDesign)
    reference = DOC.split("## Field reference", 1)[1]
    missing = [(cls.__name__, spec.key) for cls in classes for spec in cls.FIELDS
               if f"| `{spec.key}` |" not in reference]
    assert missing == []


# --- the sensor's calibration sweep ---------------------------------------------------------

SWEEP_DESIGN = BASE + '[sensor]\namplitude = "60 mV"\nsweep = "sweeps/bench.csv"\n'


def test_sensor_sweep_path_is_kept_as_written_and_checked_on_load(tmp_path):
    path = tmp_path / "valve.toml"
    path.write_text(SWEEP_DESIGN)
    with pytest.raises(DesignFileError) as info:
        load_design(path)
    message = str(info.value)
    assert info.value.path == "sensor.sweep" and "sweeps/bench.csv" in message and str(path) in message
    (tmp_path / "sweeps").mkdir()
    (tmp_path / "sweeps" / "bench.csv").write_text("x_mV,y_mV\n1,2\n")
    assert load_design(path).sensor.sweep == "sweeps/bench.csv"


def test_sensor_sweep_round_trips_through_dump_and_fits_the_schema():
    design = loads_design(SWEEP_DESIGN)
    text = dump_design(design)
    assert 'sweep = "sweeps/bench.csv"' in text
    assert loads_design(text) == design
    SCHEMA_VALIDATOR.validate(tomllib.loads(text))
    with pytest.raises(jsonschema.ValidationError):
        SCHEMA_VALIDATOR.validate(tomllib.loads(BASE + '[sensor]\nsweep = ""\n'))


def test_saving_adds_and_removes_the_sweep_key_keeping_the_rest_of_the_file(tmp_path):
    path = tmp_path / "valve.toml"
    path.write_text(BASE + '\n[sensor]\namplitude = "60 mV"  # measured on the bench\n')
    (tmp_path / "s.csv").write_text("x_mV,y_mV\n1,2\n")
    design = load_design(path)
    with_sweep = dataclasses.replace(design, sensor=dataclasses.replace(design.sensor, sweep="s.csv"))
    save_design(with_sweep, path, overwrite=True)
    text = path.read_text()
    assert 'sweep = "s.csv"' in text and "# measured on the bench" in text
    assert load_design(path) == with_sweep
    save_design(design, path, overwrite=True)
    assert "sweep" not in path.read_text() and load_design(path) == design


def test_empty_sweep_path_is_refused_naming_the_key():
    assert "sensor.sweep" in str(_error(BASE + '[sensor]\nsweep = ""\n'))

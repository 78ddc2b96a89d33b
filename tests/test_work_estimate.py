"""The work estimate made before simulating agrees with the simulation and bounds it."""

from __future__ import annotations

import dataclasses

import pytest

from turnkit.designfile import loads_design
from turnkit.errors import DesignValueError
from turnkit.sizing import MAX_BURSTS, MAX_SIMULATED_POLLS, estimate_work, size

BASE = """\
format_version = 1
name = "work"

[[gear_train]]
kind = "lead_screw"
pitch = "2 mm"

[schedule]
poll_period = "10 ms"

[[power.consumers]]
name = "all"
asleep = "1 uA"
waking = "1 mA"
polling = "1 mA"
tracking = "1 mA"
"""


def test_a_constant_motion_is_estimated_at_the_polls_the_simulation_makes():
    design = loads_design(BASE + '[[motion]]\nname = "spin"\nkind = "constant"\nat = "motor"\n'
                                 'speed = "100 rpm"\nduration = "50 s"\n')
    estimate = estimate_work(design)["by_scenario"]["spin"]
    polls = size(design, curves=False).scenarios[0].polls
    # 50 s moving at 10 ms: 5000 polls; the simulated timeline adds 0.74 s standing still.
    assert estimate == pytest.approx(5001, rel=1e-9)
    assert polls == pytest.approx(estimate, rel=0.02)


def test_work_above_the_limit_is_refused_before_simulating_naming_the_key():
    period_s = 0.01
    too_long = MAX_SIMULATED_POLLS * period_s * 1.5
    design = loads_design(BASE + f'[[motion]]\nname = "spin"\nkind = "constant"\nat = "motor"\n'
                                 f'speed = "1 rpm"\nduration = "{too_long:g} s"\n')
    with pytest.raises(DesignValueError, match=r"motion\[0\]\.duration must be short enough"):
        size(design, curves=False)


def test_too_many_bursts_are_refused_before_drawing_them():
    design = loads_design(BASE + '[[motion]]\nname = "taps"\nkind = "bursts"\nat = "motor"\n'
                                 'speed = "600 rpm"\ndistance = "1 deg"\nbursts_per_day = 1e6\n'
                                 'duration = "31557600 s"\n')
    assert estimate_work(design)["bursts"] > MAX_BURSTS
    with pytest.raises(DesignValueError, match=r"motion\[0\]\.bursts_per_day"):
        size(design, curves=False)
    fewer = dataclasses.replace(design, motion=(dataclasses.replace(design.motion[0], duration_s=86400.0),))
    assert estimate_work(fewer)["bursts"] < MAX_BURSTS
    assert size(fewer, curves=False).scenarios[0].polls > 0

"""Gear trains: exact ratios, direction, travel, backlash, efficiency and validation."""

from __future__ import annotations

import math
import warnings
from fractions import Fraction

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from turnkit.errors import DesignValueError, TurnkitWarning
from turnkit.gears import (
    BeltStage,
    ExternalPair,
    GearTrain,
    InternalPair,
    LeadScrew,
    PlanetaryStage,
    RackAndPinion,
    WormStage,
    min_pinion_teeth,
    screw_efficiencies,
    stage_from_mapping,
    worm_efficiencies,
)


@pytest.fixture(autouse=True)
def _quiet_undercut():
    # Small pinions in these tests are deliberate; the warning has its own test.
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", TurnkitWarning)
        yield


# ---------------------------------------------------------------------------
# checks against outside references
# ---------------------------------------------------------------------------

def test_compound_train_value_matches_handbook_example():
    # Source: R. G. Budynas, J. K. Nisbett, Shigley's Mechanical Engineering Design, ch. 13,
    # Eq. (13-30) and the worked example of a 30:1 (+-1 %) two-stage train with 16- and 88-tooth
    # gears (edition and equation number from memory): e = 30.25.
    train = GearTrain((ExternalPair(16, 88), ExternalPair(16, 88)))
    assert train.ratio == Fraction(121, 4)
    assert float(train.ratio) == 30.25
    assert (float(train.ratio) - 30) / 30 == pytest.approx(0.008333, abs=1e-6)
    # Two external meshes: the output turns with the motor.
    assert train.direction == 1


def test_smallest_pinion_without_interference_matches_handbook():
    # Source: Shigley, Eq. (13-11) (equation number from memory): k = 1, phi = 20 deg, m = sqrt(30) -> 15.85 -> 16 teeth;
    # mating gear 16*sqrt(30) = 87.64 -> 88.
    n = min_pinion_teeth(math.sqrt(30), 20.0)
    assert n == pytest.approx(15.85, abs=0.005)
    assert math.ceil(n) == 16
    # Source: Shigley, Eq. (13-13) (from memory), rack: 2k / sin^2(phi) = 17.1 -> 18 teeth at 20 deg.
    assert min_pinion_teeth(math.inf, 20.0) == pytest.approx(17.097, abs=1e-3)


def test_exact_reverted_thirty_to_one_train_is_exactly_thirty():
    # Source: Shigley, worked example "exact 30:1, in-line (reverted)" (example number from memory):
    # N2/N3 = 6, N4/N5 = 5, N2 + N3 = N4 + N5; smallest set N2 = 108, N3 = 18, N4 = 105, N5 = 21
    # (centre sums 126, the condition that makes the train in-line).
    train = GearTrain((ExternalPair(18, 108), ExternalPair(21, 105)))
    assert train.ratio == 30


@pytest.mark.parametrize(
    "sun, ring, held, inp, out, speed_in, speed_out",
    [
        # Source: (derived, shown in docs/derivations.md §5) from the Willis form of the Modelica Standard Library,
        # Rotational.Components.IdealPlanetary: Zs 20, Zr 100, ring fixed, sun 60 rpm -> carrier 10 rpm.
        (20, 100, "ring", "sun", "carrier", 60, 10),
        # Source: (derived, shown in docs/derivations.md §5): Z 20/30/80, sun 100 rpm -> carrier 20 rpm.
        (20, 80, "ring", "sun", "carrier", 100, 20),
        # Source: (derived, shown in docs/derivations.md §5): sun fixed, ring in: Zs 40, Zr 80, ring 900 -> carrier 600 rpm.
        (40, 80, "sun", "ring", "carrier", 900, 600),
    ],
)
def test_planetary_speeds_match_worked_examples(sun, ring, held, inp, out, speed_in, speed_out):
    stage = PlanetaryStage(sun, ring, held=held, input_member=inp, output_member=out)
    assert Fraction(speed_in) / stage.reduction * stage.direction == speed_out


@pytest.mark.parametrize("held", ["sun", "ring", "carrier"])
@pytest.mark.parametrize("sun, ring", [(20, 100), (12, 48), (17, 61)])
def test_planetary_obeys_the_open_willis_form(held, sun, ring):
    # Source: Modelica Standard Library, Rotational.Components.IdealPlanetary:
    # (1 + Zr/Zs) * w_carrier = w_sun + (Zr/Zs) * w_ring.
    members = [m for m in ("sun", "ring", "carrier") if m != held]
    stage = PlanetaryStage(sun, ring, held=held, input_member=members[0], output_member=members[1])
    w = {held: Fraction(0), members[0]: Fraction(1)}
    w[members[1]] = stage.direction / stage.reduction
    k = Fraction(ring, sun)
    assert (1 + k) * w["carrier"] == w["sun"] + k * w["ring"]


def test_planet_speed_matches_the_worked_example():
    # Source: (derived, shown in docs/derivations.md §5): Z 20/30/80, ring held, sun 100 rpm ->
    # carrier 20 rpm, planet w_p = w_c - (Zs/Zp)(w_s - w_c) = -33.33 rpm.
    stage = PlanetaryStage(20, 80, planet_teeth=30)
    assert stage.planet_speed(100) == Fraction(-100, 3)
    assert stage.planet_speed(100.0) == pytest.approx(-33.333333, abs=1e-5)


@pytest.mark.parametrize("held", ["sun", "ring", "carrier"])
@pytest.mark.parametrize("sun, planet", [(20, 30), (12, 18), (17, 22)])
def test_planet_speed_obeys_the_ring_mesh_too(held, sun, planet):
    # Source: (derived, shown in docs/derivations.md §5): the planet-ring internal mesh,
    # w_p - w_c = (Zr/Zp)(w_r - w_c), an equation the library does not use.
    ring = sun + 2 * planet
    members = [m for m in ("sun", "ring", "carrier") if m != held]
    stage = PlanetaryStage(sun, ring, held=held, input_member=members[0], output_member=members[1],
                           planet_teeth=planet)
    w = {held: Fraction(0), members[0]: Fraction(1), members[1]: stage.direction / stage.reduction}
    assert stage.planet_speed() - w["carrier"] == Fraction(ring, planet) * (w["ring"] - w["carrier"])


def test_planet_speed_needs_the_planet_teeth():
    with pytest.raises(DesignValueError, match="planet_teeth"):
        PlanetaryStage(20, 80).planet_speed(100)


def test_worm_ratio_is_wheel_teeth_over_starts():
    # Source: textbook kinematics (common practice): 40-tooth wheel, 2-start worm -> 20:1.
    assert WormStage(starts=2, wheel_teeth=40).reduction == 20


def test_differential_worm_wheels_drift_one_turn_after_product_of_teeth():
    # Source: H. T. Brown, 507 Mechanical Movements (1868), no. 264: wheels of 100 and 101 teeth
    # on one worm drift one revolution apart every 100*101 = 10 100 worm turns.
    a = GearTrain((WormStage(1, 100),))
    b = GearTrain((WormStage(1, 101),))
    worm_turns = Fraction(10100)
    assert worm_turns / a.ratio - worm_turns / b.ratio == 1


def test_power_screw_torques_match_handbook_example():
    # Source: Shigley, Example 8-1 (from memory; values recomputed from its Eqs. (8-1), (8-2)):
    # square thread, d = 32 mm, p = 4 mm, double thread (lead 8 mm), d_m = 30 mm, f = 0.08,
    # F = 6.4 kN: thread torque to raise 15.94 N m, to lower -0.466 N m (not self-locking).
    forward, back = screw_efficiencies(lead_mm=8, mean_diameter_mm=30, friction_coefficient=0.08,
                                       thread_half_angle_deg=0)
    load_n, lead_m = 6400.0, 0.008
    torque_raise = load_n * lead_m / (2 * math.pi * forward)
    assert torque_raise == pytest.approx(15.94, abs=0.01)
    # Back-driving: the load turns the screw, torque available = eta_back * F l / (2 pi).
    torque_lower = -back * load_n * lead_m / (2 * math.pi)
    assert torque_lower == pytest.approx(-0.466, abs=0.001)
    assert back > 0


def test_trapezoidal_screw_lead_angle_and_lead():
    # Source: ISO 2904:2020, metric trapezoidal threads, basic dimensions (d2 = d - 0.5 P, seen in a
    # secondary summary; table from memory): Tr 10x2 -> d2 = 9.0 mm; lead angle tan(lambda) = l / (pi d_m)
    # (Shigley, Mechanical Engineering Design, ch. 8 power screws; equation number from memory):
    # atan(2 / (pi * 9)) = 4.0461 deg; Tr 10x4(P2) -> 2 starts, lead 4 mm, 8.0523 deg.
    single = LeadScrew(pitch_mm=2, mean_diameter_mm=9.0)
    double = LeadScrew(pitch_mm=2, starts=2, mean_diameter_mm=9.0)
    assert single.lead_angle_deg == pytest.approx(4.0461, abs=1e-4)
    assert double.lead_mm == 4
    assert double.lead_angle_deg == pytest.approx(8.0523, abs=1e-4)
    # Source: (common practice): a sliding trapezoidal screw with f = 0.15 locks (friction angle
    # ~8.8 deg incl. the 15 deg flank > 4.05 deg lead angle).
    assert single.backdrive_efficiency <= 0
    assert GearTrain((single,)).self_locking_stages == (0,)


def test_rack_travel_is_pi_module_teeth():
    # Source: ISO 54 (d = m z) -> s = pi m z: m 1, z 20 -> 62.832 mm; m 2, z 20 -> 125.664 mm.
    assert RackAndPinion(module_mm=1, pinion_teeth=20).travel_per_input_turn_mm == pytest.approx(62.832, abs=1e-3)
    assert RackAndPinion(module_mm=2, pinion_teeth=20).travel_per_input_turn_mm == pytest.approx(125.664, abs=1e-3)


def test_ball_screw_travel_per_turn_is_the_lead():
    # Source: ISO 3408-1, ball screws, vocabulary and designation (travel per revolution is the
    # nominal lead; clause from memory): lead 5 mm, 200 rev -> 1000 mm.
    train = GearTrain((LeadScrew(pitch_mm=5, ball=True),))
    assert train.travel(200) == 1000
    assert train.can_backdrive


def test_synchronous_belt_ratio_from_teeth():
    # Source: (common practice; pulley standard ISO 5294, from memory): 20 T -> 60 T gives 3:1.
    assert BeltStage(teeth_driver=20, teeth_driven=60).reduction == 3


def test_worm_self_locking_follows_lead_angle_versus_friction_angle():
    # Source: Shigley Eq. (13-46) (from memory) for the worm driving; the pair locks when the wheel-driving
    # efficiency (tan and cot swapped) is <= 0, i.e. tan(lead) <= f / cos(phi_n) (common practice).
    fwd, back = worm_efficiencies(lead_angle_deg=3.0, friction_coefficient=0.08)
    assert back < 0 < fwd < 1
    fwd2, back2 = worm_efficiencies(lead_angle_deg=25.0, friction_coefficient=0.03)
    assert 0 < back2 < fwd2 < 1
    # The switch point: tan(L) = f / cos(phi_n).
    f, phi = 0.05, math.radians(20)
    edge = math.degrees(math.atan(f / math.cos(phi)))
    assert worm_efficiencies(edge, f)[1] == pytest.approx(0.0, abs=1e-12)


# ---------------------------------------------------------------------------
# our own behaviour
# ---------------------------------------------------------------------------

def test_external_pair_reverses_and_internal_pair_keeps_direction():
    assert ExternalPair(20, 60).direction == -1
    assert InternalPair(20, 60).direction == 1
    assert GearTrain((ExternalPair(20, 60), ExternalPair(20, 60), ExternalPair(20, 60))).direction == -1


def test_planetary_with_carrier_held_reverses():
    stage = PlanetaryStage(20, 80, held="carrier", input_member="sun", output_member="ring")
    assert stage.reduction == 4
    assert stage.direction == -1


def test_linear_output_travel_per_motor_turn_is_exact():
    train = GearTrain((ExternalPair(12, 36), ExternalPair(15, 45), LeadScrew(pitch_mm=1.5, starts=2)))
    assert train.ratio == 9
    assert train.output_unit == "mm"
    assert train.travel_per_motor_turn == Fraction(1, 3)
    assert train.motor_turns(Fraction(100)) == 300
    assert train.quarter_turns(Fraction(100)) == 1200


def test_rotary_output_travel_in_degrees():
    train = GearTrain((PlanetaryStage(12, 48), PlanetaryStage(12, 48), PlanetaryStage(12, 48)))
    assert train.ratio == 125
    assert train.output_unit == "deg"
    assert train.travel_per_motor_turn == Fraction(360, 125)
    assert train.output_resolution(0.1) == pytest.approx(0.1 / 125)


def test_decimal_lengths_stay_exact():
    screw = LeadScrew(pitch_mm=0.1, starts=3)
    assert screw.lead_mm == Fraction(3, 10)


def test_backlash_reflects_through_downstream_reductions():
    # 1 deg at the first stage's output is divided by the second stage's 4:1; the second
    # stage's 0.5 deg counts in full; both then become mm through a 2 mm lead.
    train = GearTrain((ExternalPair(20, 60, backlash_deg=1.0), ExternalPair(20, 80, backlash_deg=0.5),
                       LeadScrew(pitch_mm=2, backlash_mm=0.05)))
    expected_deg = 1.0 / 4 + 0.5
    assert train.backlash_at_output() == pytest.approx(expected_deg / 360 * 2 + 0.05)
    assert sum(train.backlash_per_stage()) == pytest.approx(train.backlash_at_output())


def test_train_efficiency_is_product_and_backdrive_zero_when_any_stage_locks():
    train = GearTrain((ExternalPair(20, 60, efficiency=0.98), WormStage(1, 30, lead_angle_deg=3.0,
                                                                        friction_coefficient=0.08)))
    fwd, _ = worm_efficiencies(3.0, 0.08)
    assert train.efficiency == pytest.approx(0.98 * fwd)
    assert not train.can_backdrive
    assert train.backdrive_efficiency == 0.0
    assert train.self_locking_stages == (1,)
    assert any("self-locking" in line for line in train.backdrive_report())


def test_unknown_back_drive_is_assumed_to_back_drive():
    # A counter that must see every back-drive takes the cautious side: unknown means it back-drives.
    for stage in (WormStage(1, 30), LeadScrew(pitch_mm=2)):
        train = GearTrain((stage,))
        assert train.can_backdrive and train.backdrive_efficiency > 0
        assert not stage.backdrive_known
        line = train.backdrive_report()[0]
        assert "unknown" in line and "assumed to back-drive" in line


def test_self_locking_is_judged_at_the_lowest_expected_friction():
    # Source: self-locking when tan(lead) <= f / cos(phi_n) (Shigley, Eq. 13-46 with tan and cot
    # swapped; common practice), judged at LOW_FRICTION_FACTOR = 0.8 of the stated friction.
    from turnkit.gears import LOW_FRICTION_FACTOR

    f, phi = 0.05, math.radians(20)
    edge = math.degrees(math.atan(f / math.cos(phi)))        # locks at f exactly up to this lead angle
    low_edge = math.degrees(math.atan(LOW_FRICTION_FACTOR * f / math.cos(phi)))
    between = WormStage(1, 30, lead_angle_deg=0.5 * (edge + low_edge), friction_coefficient=f)
    assert between.backdrive_efficiency < 0                  # locks at the stated friction ...
    assert GearTrain((between,)).can_backdrive               # ... but not at 80 % of it
    assert "too close to count on" in GearTrain((between,)).backdrive_report()[0]
    well = WormStage(1, 30, lead_angle_deg=0.9 * low_edge, friction_coefficient=f)
    assert GearTrain((well,)).self_locking_stages == (0,)


def test_from_reduction_keeps_the_ratio_exact():
    train = GearTrain.from_reduction(30.25, lead_mm=2)
    assert train.ratio == Fraction(121, 4)
    assert train.travel_per_motor_turn == Fraction(8, 121)


# ---------------------------------------------------------------------------
# validation
# ---------------------------------------------------------------------------

@pytest.mark.parametrize(
    "make, field, fragment",
    [
        (lambda: ExternalPair(0, 40), "teeth_driver", "whole number of teeth >= 1"),
        (lambda: ExternalPair(-3, 40), "teeth_driver", "-3"),
        (lambda: ExternalPair(20.5, 40), "teeth_driver", "20.5"),
        (lambda: ExternalPair(20, 40, efficiency=1.2), "efficiency", "(0, 1]"),
        (lambda: WormStage(starts=0, wheel_teeth=40), "starts", ">= 1"),
        (lambda: LeadScrew(pitch_mm=0), "pitch_mm", "mm"),
        (lambda: PlanetaryStage(48, 12), "ring_teeth", "more teeth than the sun"),
        (lambda: PlanetaryStage(12, 48, held="sun", input_member="sun"), "output_member", "different"),
        (lambda: BeltStage(), "teeth_driver", "both pitch diameters"),
    ],
)
def test_bad_stage_values_name_field_value_and_rule(make, field, fragment):
    with pytest.raises(DesignValueError) as info:
        make()
    assert field in str(info.value)
    assert fragment in str(info.value)
    assert info.value.field.endswith(field)


def test_whole_float_teeth_are_rejected_with_a_hint():
    with pytest.raises(DesignValueError, match="without a decimal point"):
        ExternalPair(20.0, 40)


def test_linear_stage_in_the_middle_names_its_index():
    with pytest.raises(DesignValueError) as info:
        GearTrain((ExternalPair(20, 40), LeadScrew(pitch_mm=2), ExternalPair(20, 40)))
    assert info.value.field == "gear_train[1].kind"
    assert "only be the last" in str(info.value)


def test_spec_errors_name_the_stage_index_and_field():
    with pytest.raises(DesignValueError) as info:
        GearTrain.from_specs([
            {"kind": "external", "teeth_driver": 20, "teeth_driven": 60},
            {"kind": "worm", "starts": 1, "wheel_teeth": 30},
            {"kind": "lead_screw", "pitch_mm": -2},
        ])
    assert info.value.field == "gear_train[2].pitch_mm"
    assert "-2" in str(info.value) and "mm" in str(info.value)


def test_spec_with_unknown_field_or_kind_is_rejected():
    with pytest.raises(DesignValueError, match=r"gear_train\[0\]\.kind"):
        stage_from_mapping({"kind": "sprocket"}, 0)
    with pytest.raises(DesignValueError, match=r"gear_train\[3\]\.teeth"):
        stage_from_mapping({"kind": "external", "teeth": 3}, 3)


def test_stroke_longer_than_the_screw_is_rejected():
    train = GearTrain((ExternalPair(20, 40), LeadScrew(pitch_mm=2, length_mm=200)))
    assert train.motor_turns_for_stroke(200) == 200
    with pytest.raises(DesignValueError) as info:
        train.motor_turns_for_stroke(250)
    assert "length_mm = 200 mm" in str(info.value)
    assert "250" in str(info.value)


def test_small_pinion_warns_but_builds():
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        stage = ExternalPair(10, 80)
    assert stage.reduction == 8
    assert any(issubclass(w.category, TurnkitWarning) and "undercut" in str(w.message) for w in caught)


def test_rack_pinion_below_seventeen_teeth_warns():
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        RackAndPinion(module_mm=1, pinion_teeth=12)
    assert any("undercut" in str(w.message) for w in caught)


def test_reversing_a_linear_train_is_refused():
    with pytest.raises(DesignValueError, match="linear output cannot drive"):
        GearTrain((LeadScrew(pitch_mm=2),)).reversed()


def test_stages_are_immutable():
    stage = ExternalPair(20, 40)
    with pytest.raises(Exception):
        stage.teeth_driver = 30  # type: ignore[misc]


# ---------------------------------------------------------------------------
# invariants
# ---------------------------------------------------------------------------

teeth = st.integers(min_value=8, max_value=200)


@st.composite
def rotary_stages(draw):
    kind = draw(st.sampled_from(["external", "internal", "planetary", "worm", "belt"]))
    if kind == "external":
        return ExternalPair(draw(teeth), draw(teeth))
    if kind == "internal":
        return InternalPair(draw(teeth), draw(teeth))
    if kind == "planetary":
        sun = draw(st.integers(8, 60))
        ring = sun + 2 * draw(st.integers(8, 60))
        members = draw(st.permutations(["sun", "ring", "carrier"]))
        return PlanetaryStage(sun, ring, held=members[0], input_member=members[1], output_member=members[2])
    if kind == "worm":
        return WormStage(starts=draw(st.integers(1, 4)), wheel_teeth=draw(teeth))
    return BeltStage(teeth_driver=draw(teeth), teeth_driven=draw(teeth))


trains = st.lists(rotary_stages(), min_size=1, max_size=4).map(lambda s: GearTrain(tuple(s)))


@settings(max_examples=60, deadline=None)
@given(trains, trains, trains)
def test_composition_is_associative(a, b, c):
    left = a.then(b).then(c)
    right = a.then(b.then(c))
    assert left.ratio == right.ratio == a.ratio * b.ratio * c.ratio
    assert left.direction == right.direction


@settings(max_examples=60, deadline=None)
@given(trains, st.fractions(min_value=-10_000, max_value=10_000), st.integers(1, 12), st.integers(1, 4))
def test_travel_motor_turns_round_trip_is_exact(train, travel, pitch_tenths, starts):
    screw = LeadScrew(pitch_mm=pitch_tenths / 10, starts=starts)
    linear = train.then(GearTrain((screw,)))
    for t in (train, linear):
        assert t.travel(t.motor_turns(travel)) == travel
        assert t.motor_turns(t.travel(travel)) == travel


@settings(max_examples=60, deadline=None)
@given(trains)
def test_reversing_the_train_inverts_the_ratio(train):
    back = train.reversed()
    assert back.ratio == 1 / train.ratio
    assert back.direction == train.direction
    assert back.reversed().ratio == train.ratio


def test_given_forward_efficiency_replaces_the_computed_one_but_not_the_locking_check():
    screw = LeadScrew(pitch_mm=2, mean_diameter_mm=9.0, forward_efficiency=0.35)
    assert screw.efficiency == 0.35
    assert screw.backdrive_efficiency <= 0  # still from lead angle against friction
    with pytest.raises(DesignValueError, match="forward_efficiency"):
        LeadScrew(pitch_mm=2, forward_efficiency=1.5)


def test_travel_and_backlash_worked_out_once_follow_the_stages():
    from dataclasses import replace

    train = GearTrain((ExternalPair(18, 54, backlash_deg=0.5), LeadScrew(pitch_mm=2, backlash_mm=0.05)))
    travel, backlash = train.travel_per_motor_turn, train.backlash_at_output()
    assert train.travel_per_motor_turn == travel == Fraction(2, 3)
    assert train.backlash_at_output() == backlash == pytest.approx(0.5 / 360.0 * 2.0 + 0.05)
    # A train with other stages (a copy made with replace, or built anew) works them out for itself.
    wider = replace(train, stages=(ExternalPair(18, 54, backlash_deg=1.0), train.stages[1]))
    assert wider.backlash_at_output() == pytest.approx(1.0 / 360.0 * 2.0 + 0.05) != backlash
    finer = GearTrain((ExternalPair(18, 72, backlash_deg=0.5), train.stages[1]))
    assert finer.travel_per_motor_turn == Fraction(1, 2) != travel
    assert GearTrain(train.stages).backlash_at_output() == backlash

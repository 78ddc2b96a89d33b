"""Tests of the quarter-turn counter: Gray code, decoding rule, policies, step()."""

import dataclasses
from fractions import Fraction
from types import SimpleNamespace

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from turnkit.counter import (
    AMBIGUOUS,
    GRAY_SEQUENCE,
    TRANSITIONS,
    AmbiguousPolicy,
    CounterEvent,
    CounterMode,
    CounterSettings,
    CounterState,
    EventKind,
    OverflowPolicy,
    apply_count,
    counter_range_output,
    decode_index_changes,
    decode_step,
    gray_to_index,
    index_to_gray,
    quarter_turns_to_output,
    step,
)
from turnkit.errors import DesignValueError

# Independent oracle: the forward Gray cycle written out, and a step table
# built from neighbours in that cycle (no modulo arithmetic).
# Source: F. Gray, "Pulse code communication", US patent 2,632,058 (1953);
# 2-bit reflected code 00 -> 01 -> 11 -> 10 -> 00.
ORACLE_CYCLE = ["00", "01", "11", "10"]


def oracle_step(old_code: int, new_code: int):
    a, b = format(old_code, "02b"), format(new_code, "02b")
    i, j = ORACLE_CYCLE.index(a), ORACLE_CYCLE.index(b)
    if i == j:
        return 0
    if ORACLE_CYCLE[(i + 1) % 4] == b:
        return +1
    if ORACLE_CYCLE[(i - 1) % 4] == b:
        return -1
    return "ambiguous"


def test_state_names_are_the_agreed_strings():
    assert [m.value for m in CounterMode] == [
        "asleep", "waking", "polling", "fast_polling", "tracking", "fault", "power_lost"]


def test_gray_sequence_changes_one_bit_per_quarter_turn():
    # Source: F. Gray, US patent 2,632,058 (1953) — reflected binary code.
    assert GRAY_SEQUENCE == (0b00, 0b01, 0b11, 0b10)
    for i in range(4):
        assert bin(GRAY_SEQUENCE[i] ^ GRAY_SEQUENCE[(i + 1) % 4]).count("1") == 1


def test_gray_to_index_matches_reference_table():
    # Source: (derived, shown in docs/derivations.md §1) from the code of F. Gray, US patent 2,632,058 (1953):
    # 00->0, 01->1, 11->2, 10->3 (b1 = g1, b0 = g1 xor g0).
    assert gray_to_index([0b00, 0b01, 0b11, 0b10]).tolist() == [0, 1, 2, 3]
    assert index_to_gray(np.arange(-4, 8)).tolist() == [0, 1, 3, 2] * 3


def test_decode_matches_reference_vectors():
    # Source: quadrature state table (common practice), derived in docs/derivations.md §1:
    # (0->1)=+1, (1->0)=-1, (0->2)=error, (3->0)=+1.
    assert decode_step(0, 1) == 1
    assert decode_step(1, 0) == -1
    assert decode_step(0, 2) == AMBIGUOUS
    assert decode_step(3, 0) == 1


def test_decode_agrees_with_oracle_for_every_code_pair():
    for old in range(4):
        for new in range(4):
            got = decode_step(gray_to_index(old), gray_to_index(new))
            want = oracle_step(old, new)
            assert (got == AMBIGUOUS) if want == "ambiguous" else got == want


def test_three_quarters_alias_to_one_back_and_four_to_none():
    # Source: (derived, shown in docs/derivations.md §1) aliasing (modulo-4 arithmetic): +3 reads -1, +4 reads 0.
    decoded, amb, silent = decode_index_changes([3, 4, -3, 2, -2, 1, 0, 6])
    assert decoded.tolist() == [-1, 0, 1, AMBIGUOUS, AMBIGUOUS, 1, 0, AMBIGUOUS]
    assert amb.tolist() == [False, False, False, True, True, False, False, True]
    assert silent.tolist() == [True, True, True, False, False, False, False, False]


@settings(max_examples=200, deadline=None)
@given(st.integers(-1000, 1000), st.integers(-12, 12))
def test_vectorised_decode_agrees_with_oracle(start, true_step):
    old_code, new_code = int(index_to_gray(start)), int(index_to_gray(start + true_step))
    decoded, amb, silent = decode_index_changes([true_step])
    want = oracle_step(old_code, new_code)
    if want == "ambiguous":
        assert amb[0] and not silent[0]
    else:
        assert decoded[0] == want
        assert silent[0] == (want != true_step)


def test_counter_range_limits():
    assert (CounterSettings(8, signed=True).min_count, CounterSettings(8, signed=True).max_count) == (-128, 127)
    assert (CounterSettings(8, signed=False).min_count, CounterSettings(8, signed=False).max_count) == (0, 255)


@pytest.mark.parametrize("policy,expected", [("wrap", (-8, True, False)), ("saturate", (7, True, False)),
                                             ("fault", (7, True, True))])
def test_overflow_policies_at_the_top(policy, expected):
    s = CounterSettings(4, signed=True, overflow_policy=policy)
    assert apply_count(7, 1, s) == expected
    assert apply_count(6, 1, s) == (7, False, False)


def test_wrap_is_modular_for_large_steps():
    s = CounterSettings(4, signed=False, overflow_policy=OverflowPolicy.WRAP)
    assert apply_count(15, 18, s)[0] == (15 + 18) % 16
    assert apply_count(0, -1, s) == (15, True, False)


def test_counter_range_through_a_fifty_to_one_train():
    # Source: (derived, shown in docs/derivations.md §1) counter range: k 16, G 50 -> 16 384 sensor turns = 327.68
    # output turns.
    train = SimpleNamespace(travel_per_motor_turn=Fraction(360, 50), output_unit="deg", direction=1)
    s = CounterSettings(16, signed=False)
    assert counter_range_output(s, train) / 360 == pytest.approx(327.68, rel=1e-12)
    assert s.range_quarter_turns / 4 == 16384


def test_quarter_turns_follow_the_train_direction_and_lead():
    screw = SimpleNamespace(travel_per_motor_turn=Fraction(1, 25), output_unit="mm", direction=-1)
    assert quarter_turns_to_output(100, screw) == pytest.approx(-1.0)


@pytest.mark.parametrize("kwargs,field", [({"width_bits": 1}, "width_bits"), ({"width_bits": 64}, "width_bits"),
                                          ({"overflow_policy": "clip"}, "overflow_policy"),
                                          ({"ambiguous_policy": "pray"}, "ambiguous_policy"),
                                          ({"width_bits": 4, "start_count": 8}, "start_count")])
def test_bad_settings_name_the_field(kwargs, field):
    with pytest.raises(DesignValueError, match=field):
        CounterSettings(**kwargs)


def test_settings_reject_unknown_keywords():
    with pytest.raises(TypeError):
        CounterSettings(bits=8)


# ----------------------------------------------------------------- step()
def _read(t, index):
    return CounterEvent(EventKind.LATCH_READ, time_s=t, latch_code=int(index_to_gray(index)))


def _poll(state, s, t, index):
    state = step(state, CounterEvent(EventKind.WAKE_TIMER, t), s)
    state = step(state, CounterEvent(EventKind.SETTLED, t), s)
    return step(state, _read(t, index), s)


def test_one_poll_cycle_goes_asleep_waking_polling_asleep():
    s = CounterSettings(hold_s=1.0)
    st0 = CounterState.homed(s)
    a = step(st0, CounterEvent(EventKind.WAKE_TIMER, 0.1), s)
    b = step(a, CounterEvent(EventKind.SETTLED, 0.1), s)
    c = step(b, _read(0.1, 1), s)
    assert (a.mode, b.mode, c.mode) == (CounterMode.WAKING, CounterMode.POLLING, CounterMode.ASLEEP)
    assert c.count == 1 and c.fast_until_s == pytest.approx(1.1)
    d = step(step(c, CounterEvent(EventKind.WAKE_TIMER, 0.2), s), CounterEvent(EventKind.SETTLED, 0.2), s)
    assert d.mode is CounterMode.FAST_POLLING


def test_ambiguous_read_faults_under_flag_and_hold():
    s = CounterSettings(ambiguous_policy="flag_and_hold")
    out = _poll(CounterState.homed(s), s, 0.1, 2)
    assert out.mode is CounterMode.FAULT and out.count == 0 and out.ambiguous_count == 1
    # In fault, reads change nothing until re-homing.
    assert step(out, _read(0.2, 3), s) == out
    homed = step(out, CounterEvent(EventKind.REHOMED, 0.3, latch_code=0, count=40), s)
    assert homed.mode is CounterMode.ASLEEP and homed.count == 40


def test_guess_policy_adds_two_in_the_last_direction():
    s = CounterSettings(ambiguous_policy="guess_last_direction")
    x = _poll(CounterState.homed(s), s, 0.1, -1)     # one step back
    y = _poll(x, s, 0.2, -3)                          # two more back: ambiguous
    assert (x.count, y.count, y.ambiguous_count, y.mode) == (-1, -3, 1, CounterMode.ASLEEP)


def test_power_loss_clears_count_and_restoring_needs_rehoming():
    s = CounterSettings(start_count=5)
    st0 = CounterState(count=17, quadrant_index=1)
    lost = step(st0, CounterEvent(EventKind.SUPPLY_LOW, 1.0), s)
    back = step(lost, CounterEvent(EventKind.SUPPLY_RESTORED, 2.0, latch_code=3), s)
    assert lost.mode is CounterMode.POWER_LOST
    assert back.mode is CounterMode.FAULT and back.count == 5


def test_tracking_counts_every_edge_and_overflow_fault_stops_it():
    s = CounterSettings(4, signed=True, overflow_policy="fault")
    state = step(CounterState(count=5, quadrant_index=1), CounterEvent(EventKind.DRIVE_START, 0.0, latch_code=1), s)
    assert state.mode is CounterMode.TRACKING
    for i in range(2, 5):
        state = step(state, CounterEvent(EventKind.LATCH_EDGE, 0.0, latch_code=int(index_to_gray(i))), s)
    assert state.mode is CounterMode.FAULT and state.count == 7 and state.overflow_count == 1


def _mode_rows():
    rows = set()
    for tr in TRANSITIONS:
        for src in tr.source:
            rows.add((src, tr.event, tr.target))
    return rows


@settings(max_examples=150, deadline=None)
@given(st.lists(st.tuples(st.sampled_from(list(EventKind)), st.integers(0, 3), st.floats(0, 100)),
                min_size=1, max_size=40),
       st.sampled_from(list(AmbiguousPolicy)), st.sampled_from(list(OverflowPolicy)))
def test_every_mode_change_of_step_is_a_row_of_the_table(events, amb, ovf):
    s = CounterSettings(3, signed=True, ambiguous_policy=amb, overflow_policy=ovf, hold_s=0.5)
    rows = _mode_rows()
    state = CounterState.homed(s)
    for kind, code, t in events:
        new = step(state, CounterEvent(kind, t, latch_code=code), s)
        if new.mode is not state.mode or (kind in (EventKind.LATCH_READ, EventKind.LATCH_EDGE)
                                          and new != state):
            assert (state.mode, kind, new.mode) in rows
        assert s.min_count <= new.count <= s.max_count
        state = new


def test_table_rows_name_only_known_modes_and_events():
    assert len(TRANSITIONS) >= 15
    for tr in TRANSITIONS:
        assert all(isinstance(m, CounterMode) for m in tr.source)
        assert isinstance(tr.event, EventKind) and isinstance(tr.target, CounterMode) and tr.effect


def test_transition_rows_are_plain_strings_for_docs():
    from turnkit.counter import transition_rows

    rows = transition_rows()
    assert len(rows) == len(TRANSITIONS)
    assert rows[0] == {"from": "asleep", "event": "wake_timer", "when": "always", "to": "waking",
                       "effect": "one wake pulse; wake-up and settle time start"}


def test_flag_and_continue_counts_the_ambiguous_read_keeps_the_count_and_keeps_polling():
    s = CounterSettings(16, ambiguous_policy="flag_and_continue", hold_s=1.0)
    state = CounterState(mode=CounterMode.POLLING, count=10, quadrant_index=0, last_direction=1)
    new = step(state, CounterEvent(EventKind.LATCH_READ, 5.0, latch_code=int(index_to_gray(2))), s)
    assert new.mode is CounterMode.ASLEEP and new.count == 10 and new.ambiguous_count == 1
    assert new.quadrant_index == 2 and new.fast_until_s == 6.0
    # The next single step counts from the new quadrant as usual.
    nxt = step(dataclasses.replace(new, mode=CounterMode.POLLING),
               CounterEvent(EventKind.LATCH_READ, 5.1, latch_code=int(index_to_gray(3))), s)
    assert nxt.count == 11

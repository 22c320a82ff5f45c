"""Reference-edge logic (firmware/runtrue_fw/edges.py): every fault becomes a flag."""

from __future__ import annotations

import pytest

from runtrue_fw.edges import F_EXTRA_PULSE, F_FIRST, F_MISSING_PULSE, F_SPEED_JUMP, Q8_MASK, EdgeTracker, wrap_diff_q8

P = 100 * 256 + 37          # a period of 100.14 samples, in 1/256 sample


def _revs(edges: list[int]) -> list[tuple[int, int]]:
    """(period_q8, flags) of each revolution the tracker reports."""
    tr = EdgeTracker()
    out: list[list[int]] = []
    for e in edges:
        if tr.edge(e & Q8_MASK):
            out.append([tr.rev_period_q8, tr.rev_flags])
        elif tr.suspect_previous and out:
            out[-1][1] |= F_EXTRA_PULSE      # as the Meter does with the revolution it holds
    return [(p, f) for p, f in out]


def _steady(n: int, start: int = 5000, period: int = P) -> list[int]:
    return [start + i * period for i in range(n)]


LOCKING = [(P, F_FIRST), (P, F_SPEED_JUMP)]   # after START: two agreeing turns confirm the speed


def test_steady_edges_lock_after_two_agreeing_revolutions() -> None:
    assert _revs(_steady(6)) == LOCKING + [(P, 0)] * 3


def test_glitch_just_after_an_edge_flags_both_revolutions_that_edge_bounds() -> None:
    # a bounce 1.2 samples after edge 4: either edge 4 or the bounce is the real mark
    edges = _steady(7)
    edges.insert(5, edges[4] + 300)
    assert _revs(edges) == LOCKING + [(P, 0), (P, F_EXTRA_PULSE), (P, F_EXTRA_PULSE), (P, 0)]
    tr = EdgeTracker()
    for e in edges:
        tr.edge(e)
    assert tr.rejected == 1


def test_glitch_just_before_the_mark_cannot_pass_as_a_clean_revolution() -> None:
    edges = _steady(7)
    edges.insert(4, edges[4] - P // 20)      # 5 % early: looks like a plausible edge by itself
    flags = [f for _, f in _revs(edges)]
    # the turn after the glitch is 1.05/0.95 of the one before it: a speed jump too
    assert flags == [F_FIRST, F_SPEED_JUMP, 0, F_EXTRA_PULSE, F_EXTRA_PULSE | F_SPEED_JUMP, 0]


def test_second_mark_inside_the_revolution_is_an_extra_pulse_not_a_short_revolution() -> None:
    edges = _steady(7)
    edges.insert(5, edges[4] + int(0.4 * P))
    assert _revs(edges) == LOCKING + [(P, 0), (P, 0), (P, F_EXTRA_PULSE), (P, 0)]


def test_missed_pulse_is_flagged_and_the_running_period_is_kept() -> None:
    edges = _steady(8)
    del edges[4]
    assert _revs(edges) == LOCKING + [(P, 0), (2 * P, F_MISSING_PULSE), (P, 0), (P, 0)]


def test_speed_jump_over_ten_percent_is_flagged_until_the_new_speed_is_confirmed() -> None:
    e = _steady(5, start=0)
    e.append(e[-1] + int(P * 1.05))          # 5 % slower: ordinary coast-down
    for _ in range(3):
        e.append(e[-1] + int(P * 1.05 * 1.15))   # 15 % slower again: a jump, then steady
    flags = [f for _, f in _revs(e)]
    assert flags == [F_FIRST, F_SPEED_JUMP, 0, 0, 0, F_SPEED_JUMP, F_SPEED_JUMP, 0]


def test_a_real_lasting_halving_of_speed_relocks_after_eight_missing_pulses() -> None:
    e = _steady(5)
    for _ in range(12):
        e.append(e[-1] + 2 * P)
    flags = [f for _, f in _revs(e)]
    assert flags == [F_FIRST, F_SPEED_JUMP, 0, 0] + [F_MISSING_PULSE] * 8 + [F_SPEED_JUMP, 0, 0, 0]


def test_a_missed_pulse_during_the_first_turn_does_not_lock_on_double_the_period() -> None:
    e = _steady(7)
    del e[1]
    revs = _revs(e)
    assert revs[0] == (2 * P, F_FIRST)
    assert [f for _, f in revs[1:]] == [F_SPEED_JUMP, F_SPEED_JUMP, 0, 0]


def test_positions_wrap_at_2_to_the_30_without_disturbing_the_period() -> None:
    start = (1 << 30) - 2 * P - 99
    edges = [(start + i * P) & Q8_MASK for i in range(6)]
    assert edges[3] < edges[2]
    assert _revs(edges) == LOCKING + [(P, 0)] * 3
    assert wrap_diff_q8(5, Q8_MASK - 4) == 10
    assert wrap_diff_q8(Q8_MASK - 4, 5) == -10


def test_debounce_applies_before_the_speed_is_known() -> None:
    e = [1000, 1000 + 2 * 256] + [1000 + k * P for k in range(1, 5)]  # a bounce 2 samples after
    assert _revs(e) == [(P, F_FIRST | F_EXTRA_PULSE), (P, F_SPEED_JUMP), (P, 0), (P, 0)]


from hypothesis import given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402


@pytest.mark.slow
@settings(max_examples=300, deadline=None)
@given(st.lists(st.tuples(st.floats(0.98, 1.02), st.sampled_from(["ok", "ok", "ok", "glitch", "miss"]),
                          st.floats(0.02, 0.98)), min_size=3, max_size=60),
       st.integers(0, Q8_MASK))
def test_a_revolution_without_flags_is_always_exactly_one_real_turn(steps, start: int) -> None:
    """Whatever glitches (anywhere in a turn, even just before the mark) and missed pulses the
    sensor produces, an unflagged revolution runs from one real mark to the next real mark.
    The speed drifts by up to 2 % a turn.  Revolutions are checked as the Meter reports them:
    after the edges up to a quarter turn past their end (suspect_previous)."""
    edges = []                               # (position, real mark number or -1 for a glitch)
    pos = start
    period = P
    since_fault = 2
    for k, (ratio, fault, where) in enumerate(steps):
        if fault != "ok" and since_fault < 2:
            # faults are isolated (two good turns after each): a glitch in every turn is a
            # second mark, a mark missing every other turn is half the speed, and a glitch
            # where a mark just went missing is a mark 10 % late; timing alone cannot tell
            fault = "ok"
        since_fault = 0 if fault != "ok" else since_fault + 1
        period = int(period * ratio)
        if fault == "glitch":
            edges.append(((pos + int(period * where)) & Q8_MASK, -1))
        pos += period
        if fault != "miss":
            edges.append((pos & Q8_MASK, k))
    mark = dict(edges)
    tr = EdgeTracker()
    revs = []                                # [start, end, flags]
    for e, _ in edges:
        if tr.edge(e):
            revs.append([tr.rev_start_q8, tr.rev_end_q8, tr.rev_flags])
        elif tr.suspect_previous and revs and revs[-1][1] == tr.last_q8:
            revs[-1][2] |= F_EXTRA_PULSE
    for r0, r1, flags in revs:
        if flags == 0:
            assert mark[r0] >= 0 and mark[r1] == mark[r0] + 1, (r0, r1)

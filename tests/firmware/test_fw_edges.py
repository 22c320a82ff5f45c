"""Reference-edge logic (firmware/runtrue_fw/edges.py): every fault becomes a flag."""

from __future__ import annotations

from runtrue_fw.edges import (F_EXTRA_PULSE, F_FIRST, F_MISSING_PULSE, F_SPEED_JUMP, Q8_MASK,
                              EdgeTracker, wrap_diff_q8)

P = 100 * 256 + 37          # a period of 100.14 samples, in 1/256 sample


def _revs(edges: list[int]) -> list[tuple[int, int]]:
    """(period_q8, flags) of each revolution the tracker reports."""
    tr = EdgeTracker()
    out = []
    for e in edges:
        if tr.edge(e & Q8_MASK):
            out.append((tr.rev_period_q8, tr.rev_flags))
    return out


def _steady(n: int, start: int = 5000, period: int = P) -> list[int]:
    return [start + i * period for i in range(n)]


def test_steady_edges_give_clean_revolutions_after_the_first() -> None:
    revs = _revs(_steady(6))
    assert revs == [(P, F_FIRST)] + [(P, 0)] * 4


def test_glitch_just_after_an_edge_is_rejected_and_flags_that_revolution() -> None:
    edges = _steady(5)
    edges.insert(3, edges[2] + 300)          # 1.2 samples after the real edge
    tr = EdgeTracker()
    revs = _revs(edges)
    assert revs == [(P, F_FIRST), (P, 0), (P, F_EXTRA_PULSE), (P, 0)]
    for e in edges:
        tr.edge(e)
    assert tr.rejected == 1


def test_second_mark_inside_the_revolution_is_an_extra_pulse_not_a_short_revolution() -> None:
    edges = _steady(5)
    edges.insert(3, edges[2] + int(0.4 * P))
    assert _revs(edges) == [(P, F_FIRST), (P, 0), (P, F_EXTRA_PULSE), (P, 0)]


def test_missed_pulse_is_flagged_and_the_running_period_is_kept() -> None:
    edges = _steady(7)
    del edges[3]
    assert _revs(edges) == [(P, F_FIRST), (P, 0), (2 * P, F_MISSING_PULSE), (P, 0), (P, 0)]


def test_speed_jump_over_ten_percent_is_flagged_but_a_small_change_is_not() -> None:
    e = [0, P, 2 * P]
    e.append(e[-1] + int(P * 1.05))          # 5 % slower: ordinary coast-down
    e.append(e[-1] + int(P * 1.05 * 1.15))   # 15 % slower again: a jump
    e.append(e[-1] + int(P * 1.05 * 1.15))
    flags = [f for _, f in _revs(e)]
    assert flags == [F_FIRST, 0, 0, F_SPEED_JUMP, 0]


def test_a_real_halving_of_speed_relocks_after_two_revolutions() -> None:
    e = _steady(4)
    for _ in range(4):
        e.append(e[-1] + 2 * P)
    flags = [f for _, f in _revs(e)]
    assert flags == [F_FIRST, 0, 0, F_MISSING_PULSE, F_MISSING_PULSE, 0, 0]


def test_positions_wrap_at_2_to_the_30_without_disturbing_the_period() -> None:
    start = (1 << 30) - 2 * P - 99
    edges = [(start + i * P) & Q8_MASK for i in range(6)]
    assert edges[3] < edges[2]
    assert _revs(edges) == [(P, F_FIRST)] + [(P, 0)] * 4
    assert wrap_diff_q8(5, Q8_MASK - 4) == 10
    assert wrap_diff_q8(Q8_MASK - 4, 5) == -10


def test_debounce_applies_before_the_speed_is_known() -> None:
    e = [1000, 1000 + 2 * 256, 1000 + P, 1000 + 2 * P]     # a bounce 2 samples after the first
    assert _revs(e) == [(P, F_FIRST | F_EXTRA_PULSE), (P, 0)]

"""Conditions: every number carries its unit, and a condition lies inside its recording.

Expected values are worked by hand from the text (1 min = 60 s; SI, BIPM brochure).
"""

from __future__ import annotations

import math

import pytest

from analysis.conditions import ConditionError, check_conditions, check_inside, parse_condition


@pytest.mark.parametrize("text, start, end", [
    ("a=0s-60s", 0.0, 60.0),
    ("a=0-60s", 0.0, 60.0),        # the end's unit applies to a start without one
    ("a=1min-90s", 60.0, 90.0),
    ("a=0-2min", 0.0, 120.0),
    ("a=2.5s-end", 2.5, math.inf),
    ("a=2min-", 120.0, math.inf),
])
def test_ranges_with_a_unit(text, start, end):
    c = parse_condition(text)
    assert (c.start, c.end) == (start, end)
    assert parse_condition(c.text()) == c  # the text form parses back


@pytest.mark.parametrize("text, fix", [
    ("baseline=0-60", "write baseline=0s-60s (seconds) or baseline=0min-1min (minutes)"),
    ("washout=120-end", "write washout=120s-end (seconds) or washout=120min-end (minutes)"),
    ("washout=120-", "write washout=120s-end"),
    ("drug=60s-120", "write drug=60s-120s"),
])
def test_a_number_without_a_unit_is_refused_with_the_right_form(text, fix):
    with pytest.raises(ConditionError, match="has no unit") as info:
        parse_condition(text)
    assert fix in info.value.one_line()


def test_a_condition_must_lie_inside_the_recording():
    starts, durations = [0.0, 10.0], [10.0, 10.0]  # two sweeps back to back: 0-20 s
    check_inside(parse_condition("a=0-20s"), starts, durations)
    check_inside(parse_condition("a=19.9s-end"), starts, durations)
    check_inside(parse_condition("a=sweeps:1-end"), starts, durations)
    with pytest.raises(ConditionError, match=r"starts at 20 s, when the recording has ended \(20 s\)"):
        check_inside(parse_condition("late=20s-end"), starts, durations)
    with pytest.raises(ConditionError, match=r"ends at 25 s, after the recording ends \(20 s\).*late=5s-end"):
        check_inside(parse_condition("late=5-25s"), starts, durations)
    with pytest.raises(ConditionError, match=r"names sweep 2, but the recording has sweeps 0-1"):
        check_inside(parse_condition("late=sweeps:0-2"), starts, durations)
    # check_conditions applies it when it knows the recording, and names the recording.
    with pytest.raises(ConditionError, match=r"^cell.abf: condition 'late'"):
        check_conditions([parse_condition("late=30s-end")], starts, durations, where="cell.abf")
    assert check_conditions([parse_condition("late=30s-end")]) != ()  # without the recording: no check

"""The snapshot schedule: output times as exact decimal multiples, steps, restart."""

import math

from convsim.run.schedule import SnapshotSchedule


def test_output_times_do_not_drift():
    s = SnapshotSchedule(0.001)
    times = []
    for _ in range(1000):
        times.append(s.next_time)
        s.advance_past(s.next_time)
    assert times[8] == 0.009 and 9 * 0.001 != 0.009          # the float product drifts
    assert times == [round((k + 1) * 0.001, 12) for k in range(1000)]


def test_due_by_time_and_by_steps():
    s = SnapshotSchedule(0.25, steps=7)
    assert not s.due(0.1, 3)
    assert s.due(0.1, 7)
    assert s.due(0.25 * (1 - 1e-13), 3)
    s.advance_past(0.6)
    assert s.next_time == 0.75
    none = SnapshotSchedule()
    assert none.next_time == math.inf and not none.due(1e9, 5)


def test_restart_continues_the_same_times():
    a = SnapshotSchedule(0.003)
    for _ in range(5):
        a.advance_past(a.next_time)
    b = SnapshotSchedule(0.003)
    b.restore(a.restart_state())
    assert b.next_time == a.next_time == 0.018
    old_file = SnapshotSchedule(0.003)                 # an accumulated time from an older file
    old_file.restore(dict(next_snapshot=sum([0.003] * 6)))
    assert old_file.next_time == 0.018

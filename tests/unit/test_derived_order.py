"""The log sums a session up from its entries in the same order as the runner does.

``bringup.store.derived.worst`` (what ``bringup sessions`` shows, from the chain) and
``bringup.runner.results.worst_state`` (what the notebook and the headless run show) must give
the same verdict for every mix of step states, or the listing and the notebook would disagree.
"""

from __future__ import annotations

import itertools

from bringup.runner.results import STATES, worst_state
from bringup.store.derived import SEVERITY, derive, worst


def test_the_two_orders_agree_on_every_mix_of_up_to_three_step_states():
    for size in (1, 2, 3):
        for states in itertools.product(STATES, repeat=size):
            assert worst(states) == worst_state(states), states
    assert worst([]) == worst_state([]) == "not-started"
    assert set(STATES) <= set(SEVERITY)


def test_an_attempt_that_errored_is_never_better_than_one_not_run():
    assert worst(["pass", "error"]) == "error"
    assert worst(["not-run", "error"]) == "not-run"
    assert worst(["fail", "error"]) == "fail"


def test_the_finish_event_decides_a_finished_session_and_later_entries_do_not_reopen_it():
    checklist = {"stages": [{"id": "a", "steps": [{"id": "x"}, {"id": "y"}]}]}
    rows = [
        {"seq": 1, "kind": "attempt", "stage_id": "a", "step_id": "x", "outcome": "pass",
         "payload_json": None, "recorded_utc": "2026-01-01T00:00:01Z"},
        {"seq": 2, "kind": "skip", "stage_id": "a", "step_id": "y", "outcome": None,
         "payload_json": None, "recorded_utc": "2026-01-01T00:00:02Z"},
        {"seq": 3, "kind": "finish", "stage_id": None, "step_id": None, "outcome": None,
         "payload_json": '{"stages":{"a":"skipped"},"verdict":"skipped"}',
         "recorded_utc": "2026-01-01T00:00:03Z"},
        {"seq": 4, "kind": "note", "stage_id": None, "step_id": None, "outcome": None,
         "payload_json": None, "recorded_utc": "2026-01-01T00:00:04Z"},
    ]  # fmt: skip
    done = derive("2026-01-01T00:00:00Z", checklist, rows)
    assert (done.state, done.verdict, done.stage_verdicts) == (
        "finished",
        "skipped",
        {"a": "skipped"},
    )
    assert done.finished_utc == "2026-01-01T00:00:03Z"
    assert done.last_activity_utc == "2026-01-01T00:00:04Z"
    half = derive("2026-01-01T00:00:00Z", checklist, rows[:1])
    assert (half.state, half.verdict, half.stage_verdicts) == (
        "open",
        "in-progress",
        {"a": "in-progress"},
    )
    aborted = derive("2026-01-01T00:00:00Z", checklist, [*rows[:1], {**rows[3], "kind": "abort"}])
    assert aborted.state == "aborted"

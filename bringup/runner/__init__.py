"""Runs a checklist's steps: instruments -> analysis -> verdict -> store. No UI code.

Public API (for the TUI and the headless run):

- ``SessionRunner`` (``session.py``): ``create``/``resume``, ``stages``, ``current_step``,
  ``plan``, ``run_step``, ``skip``, ``waive``, ``note``, ``go_back``, ``stop``, ``abort``,
  ``close``. It owns four collaborators, each importable and testable alone and none importing
  the runner:
  ``SessionState`` (``state.py``, the walk), ``Planner`` (``planning.py``), ``StepExecutor``
  (``executing.py``, the open bench and one attempt at a time) and ``Recorder``
  (``recording.py``, the session's side of the log); ``resuming.py`` reopens a session;
- ``BenchSource`` (``bench_source.py``): a bench file or a simulated bench;
- the records of ``results.py``: ``StepPlan``, ``EnergisePlan``, ``ChannelPlan``, ``StepAnswers``,
  ``Progress``, ``SoakProgress``, ``AttemptResult``, ``MetricResult``, ``WaveformView``,
  ``Crossing``, ``StepStatus``, ``StageStatus``, ``SupplyOff`` and the state names ``STATES``;
- ``stop_signals.py`` (``SignalGuard``: every terminating signal switches the supply off and
  ends the command) and ``recovery.py`` (an output found ON and a step interrupted by an
  unclean stop, logged when the bench is next opened).
"""

from bringup.runner.bench_source import BenchSource
from bringup.runner.results import (
    ACCEPTED,
    STATES,
    AttemptResult,
    ChannelPlan,
    Crossing,
    EnergisePlan,
    MetricResult,
    Progress,
    SoakProgress,
    StageStatus,
    StepAnswers,
    StepPlan,
    StepStatus,
    SupplyOff,
    WaveformView,
)
from bringup.runner.session import RunnerError, SessionRunner

__all__ = [
    "ACCEPTED",
    "STATES",
    "AttemptResult",
    "BenchSource",
    "ChannelPlan",
    "Crossing",
    "EnergisePlan",
    "MetricResult",
    "Progress",
    "RunnerError",
    "SessionRunner",
    "SoakProgress",
    "StageStatus",
    "StepAnswers",
    "StepPlan",
    "StepStatus",
    "SupplyOff",
    "WaveformView",
]

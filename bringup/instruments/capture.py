"""One record from the bench's scope, for ``bringup capture``: arm once, fetch, check.

Only the scope is opened: the supply is never spoken to, so its output stays as it is (ON or
OFF) whatever happens here. The scope's vertical and trigger settings are left as the
operator set them on the instrument; only the record length and span change when asked.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from bringup.errors import InputError
from bringup.instruments.bench import BenchConfig, profile_for_role
from bringup.instruments.scope import Scope
from bringup.instruments.visa import InstrumentSession
from bringup.instruments.waveform import Waveform


@dataclass(frozen=True)
class Captured:
    """A checked record with where it came from."""

    waveform: Waveform
    channel: int
    net: str | None
    identity: str
    profile: str
    resource: str


def capture(
    config: BenchConfig,
    *,
    channel: int | None = None,
    net: str | None = None,
    points: int | None = None,
    span_s: float | None = None,
    profiles_dir: Path | None = None,
) -> Captured:
    """Arm the scope of ``config`` once and fetch ``channel`` (or the channel wired to ``net``),
    checked as every record is (``Scope.check_record``). ``points``/``span_s`` set the record
    (centred on the trigger) when given; otherwise the scope keeps its own."""
    if (channel is None) == (net is None):
        raise InputError("name one of --channel N or --net NAME")
    if net is not None:
        channel = config.channel_for(net)
    assert channel is not None
    if (points is None) != (span_s is None):
        raise InputError("--points and --span go together (a record of N points over S)")
    profile = profile_for_role(config, "scope", profiles_dir)
    entry = config.instruments["scope"]
    session = InstrumentSession("scope", entry.resource, profile)
    session.open()
    try:
        identity = session.identify()
        if profile.has("prepare"):
            session.configure("prepare")
        for line in profile.lines("clear_status"):
            session.write(line)
            session.check_errors(line)
        scope = Scope(session)
        scope._channel(channel)  # a channel the profile has, before anything is sent
        wiring = config.channels.get(channel)
        if wiring is not None:
            scope.set_probe_ratio(channel, wiring.probe_ratio)
        if points is not None and span_s is not None:
            scope.configure_timebase(duration_s=span_s, points=points, start_s=-span_s / 2)
        scope.acquire()
        wf = scope.fetch_waveform(channel)
    finally:
        session.close()
    return Captured(
        wf, channel, wiring.net if wiring else net, identity, profile.name, entry.resource
    )

"""``instruments --check`` on the scope of each simulated dialect with its shipped profile:
every offered operation works (the bandwidth limit's own words, the acquisition's completion
by polling, the paged and header-echoing records), the absent ones are said to be absent."""

from __future__ import annotations

import pytest

from bringup.instruments.bench import load_bench, profile_for_role
from bringup.instruments.check import ABSENT, FAILED, WORKS, check_instrument


@pytest.mark.parametrize("dialect", ["nullpoint", "tenfield", "outpre"])
def test_every_scope_operation_of_the_shipped_profile_works(demo_design, tmp_path, dialect):
    from sim_instruments.bench import start_bench

    running = start_bench(dict(demo_design), dialects={"scope": dialect})
    try:
        path = tmp_path / "bench.toml"
        path.write_text(running.bench_file_text())
        config = load_bench(path)
        profile = profile_for_role(config, "scope", None)
        rows = check_instrument(config, "scope", profile)
    finally:
        running.stop()
    failed = [(r.operation, r.sent, r.reply, r.note) for r in rows if r.status == FAILED]
    assert not failed
    by_op = {r.operation: r for r in rows}
    assert by_op["waveform_data"].status == WORKS
    assert by_op["arm"].status == WORKS and by_op["bandwidth_limit"].status == WORKS
    for op in profile.absent:
        assert by_op[op].status == ABSENT

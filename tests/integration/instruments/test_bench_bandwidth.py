"""The bench file's optional bandwidths (scope and probe), taken out of measured edges."""

from __future__ import annotations

import pytest

from bringup.errors import ConfigError
from bringup.instruments.bench import load_bench

BENCH = """\
[scope]
resource = "TCPIP::127.0.0.1::5025::SOCKET"
profile = "sim-scope"
bandwidth_hz = 350e6

[scope.channels.1]
net = "switch"
probe_ratio = 10
probe_bandwidth_hz = 500e6

[scope.channels.2]
net = "gate"
probe_ratio = 10

[supply]
resource = "TCPIP::127.0.0.1::5026::SOCKET"
profile = "sim-supply"

[thermometer]
resource = "TCPIP::127.0.0.1::5027::SOCKET"
profile = "sim-thermometer"

[simulation]
enabled = true
"""


def test_bandwidths_are_read_and_optional(tmp_path):
    path = tmp_path / "bench.toml"
    path.write_text(BENCH)
    config = load_bench(path)
    assert config.instruments["scope"].bandwidth_hz == 350e6
    assert config.channels[1].probe_bandwidth_hz == 500e6
    assert config.channels[2].probe_bandwidth_hz is None
    assert config.instruments["supply"].bandwidth_hz is None


@pytest.mark.parametrize(
    ("old", "new", "key"),
    [
        ("bandwidth_hz = 350e6", "bandwidth_hz = 0", "scope.bandwidth_hz"),
        ("bandwidth_hz = 350e6", 'bandwidth_hz = "fast"', "scope.bandwidth_hz"),
        ("probe_bandwidth_hz = 500e6", "probe_bandwidth_hz = -1", "probe_bandwidth_hz"),
        ("probe_bandwidth_hz = 500e6", "probe_bandwidth_hz = true", "probe_bandwidth_hz"),
    ],
)
def test_a_bad_bandwidth_is_one_line_naming_the_key(tmp_path, old, new, key):
    path = tmp_path / "bench.toml"
    path.write_text(BENCH.replace(old, new, 1))
    with pytest.raises(ConfigError) as err:
        load_bench(path)
    assert key in str(err.value) and "bandwidth in Hz" in str(err.value)
    assert "\n" not in str(err.value)

"""Hypothesis settings for the analysis tests.

The profile ``bringup-analysis`` is deterministic (``derandomize=True``, no example database):
CI runs the same examples every time, so it never meets a new random counter-example and a
failure reproduces anywhere. It is registered here but not loaded (loading a profile changes
the default for every test folder); each property test names it as the parent of its own
settings::

    @settings(settings.get_profile("bringup-analysis"), max_examples=60)
"""

from hypothesis import HealthCheck, settings

settings.register_profile(
    "bringup-analysis",
    derandomize=True,
    database=None,
    deadline=None,
    suppress_health_check=[HealthCheck.too_slow],
)

"""PyVISA drivers for the bench: scope, supply, thermometer, and the one owner of output ON/OFF.

Public API (import from the modules; this package imports nothing, to keep start-up light):

- ``bench.load_bench(path) -> BenchConfig``; ``bench.open_bench(config, profiles_dir=None)
  -> Bench`` (a context manager: ``.scope``, ``.supply``, ``.thermometer``, ``.identities``,
  ``.profiles``, ``.sessions``, ``.channel_for(net)``, ``.simulation`` on a simulated bench).
- ``safety.energised(bench, volts=..., current_limit_a=..., ovp_v=..., acknowledged=...)``:
  the only way to turn the supply output ON; OFF and confirmed on every way out.
- ``scope.Scope``, ``supply.Supply``, ``thermometer.Thermometer``: small typed drivers whose
  command strings come from a ``profiles.Profile`` (TOML files in ``bringup/profiles``).
- ``waveform.Waveform``: raw codes plus scale (``.volts()``, ``.times()``).
- ``faults.InstrumentFault`` and its subclasses: every instrument failure, one line each.
"""

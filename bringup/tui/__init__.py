"""The bench notebook in the terminal (Textual). No measurement or storage logic lives here.

- ``app.py``: ``BringupApp`` (start screen, session screen, safe state on every way out);
  ``run_app.py`` runs it with signals and crashes covered.
- ``launch.py``: ``Launcher`` lists unfinished sessions and creates or resumes them through
  ``bringup.runner.SessionRunner``; ``link.py``: ``SessionLink``, the one object the screens
  talk to; ``present.py`` formats the runner's records into ``views.py``'s frozen rows.
- ``screens/``: ``start``, ``session`` (+ ``step_actions``), ``summary``, ``prompts``.
- ``widgets/``: ``waveform_plot`` (braille, levels, crossings, on-time window),
  ``checklist_column`` (names wrap), ``status_line`` and ``supply_lamp`` (each with its own ``DEFAULT_CSS``);
  ``states.py``: each state's symbol, word and colour; ``literal.py``: typed or file-supplied
  text made safe to show (no markup, escapes or direction overrides acting).
- Styles: layout in ``bringup.tcss``, reusable widgets and prompts carry their own CSS.
  Instrument I/O only in thread workers (group "bench"), STOP's switch-off in its own
  (group "stop"), log writes of notes, skips, waivers and going back in group "log"; results
  come back as messages (``messages.py``, ``DecisionLogged``). Only Textual's public API.
"""

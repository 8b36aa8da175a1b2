"""A batch of boards of one revision, compared serial by serial and metric by metric.

``collect.collect_batch(reader, board=..., revision=...)`` reads through the public read
methods a session log offers (``sessions()``, ``attempts()``, ``signatures()``: the SQLite log's
``LogReading`` or any reader with the same methods, such as a lab database's) and returns a
``Batch``: one row per serial, one column per judged metric, and per metric the statistics of
``bringup.analysis.batch``. ``report.py`` turns it into JSON and text lines, ``html.py`` into a
self-contained HTML page. No SQL here, no Textual, no instruments.
"""

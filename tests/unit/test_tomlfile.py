"""Finding a key's line in TOML text (tomllib gives none): headers, dotted keys, multi-line strings."""

from __future__ import annotations

import tomllib

from bringup.tomlfile import locate_keys, parse_toml

TEXT = '''schema = 1
[stages.power-rails]
title = "Power rails"
purpose = """
looks like = a key but is text
"""
[stages.power-rails.steps.first-power]
supply = { voltage = "24 V" }
"quoted key" = 2
a.b = 3
'''


def test_lines_of_keys_tables_and_dotted_keys():
    lines = locate_keys(TEXT)
    assert tomllib.loads(TEXT)["stages"]["power-rails"]["purpose"].startswith("looks like")
    assert lines[("schema",)] == 1
    assert lines[("stages", "power-rails")] == 2
    assert lines[("stages", "power-rails", "purpose")] == 4
    assert ("stages", "power-rails", "looks like") not in lines  # inside a multi-line string
    assert lines[("stages", "power-rails", "steps", "first-power", "supply")] == 8
    assert lines[("stages", "power-rails", "steps", "first-power", "quoted key")] == 9
    assert lines[("stages", "power-rails", "steps", "first-power", "a", "b")] == 10


def test_line_of_falls_back_to_the_nearest_parent():
    doc = parse_toml(TEXT, "x.toml")
    # an inline table's inner key resolves to the line of the inline table
    assert doc.line_of("stages", "power-rails", "steps", "first-power", "supply", "voltage") == 8
    assert doc.line_of("stages", "power-rails", "missing") == 2
    err = doc.error(("stages", "power-rails", "title"), "too short")
    assert str(err) == "x.toml:3: stages.power-rails.title: too short"

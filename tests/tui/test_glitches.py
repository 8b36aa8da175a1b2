"""Glitches a first-time user met in the notebook (each check failed on the earlier code).

- After a step passed, the cursor stayed on it while the ➤ marker sat on the next step, so `r`
  retook the passed step: now the cursor follows the work and `r` runs the step under it.
- A retaken step read ``✔ passed×21.2 Rail levels…`` (the attempt count ran into the number).
- The live line read ``acquiring: acquiring``.
- A stage showed ``▶ running`` when nothing ran.

What the operator sees is read back from the app's own screenshot (``screen_lines``).
"""

from __future__ import annotations

from tui_pilot import screen_lines, sync, take_step, wait_for_session, wait_until

from bringup.runner.results import Progress
from bringup.tui.app import BringupApp
from bringup.tui.launch import Launcher
from bringup.tui.messages import StepProgressed
from bringup.tui.present import progress_view
from bringup.tui.screens.prompts import EnergisePrompt

FIRST = "power-rails.first-power"
RAILS = "power-rails.rails-unloaded"


def _line_with(app, text: str) -> str:
    lines = [line for line in screen_lines(app) if text in line]
    assert lines, f"{text!r} is not on the screen:\n" + "\n".join(screen_lines(app))
    return lines[0]


@sync
async def test_the_cursor_follows_the_work_and_the_checklist_reads_plainly(log_path):
    values = {"board": "demo", "checklist": None, "bench_file": None, "scenario": "healthy",
              "serial": "DHS24-0130", "operator": "tester"}  # fmt: skip
    app = BringupApp(Launcher(log_path), open_new=values)
    async with app.run_test(size=(160, 45)) as pilot:
        screen = await wait_for_session(pilot)
        tree = screen.query_one("#checklist")
        assert screen.viewed == FIRST
        await take_step(pilot)

        # the cursor moved on to the next step by itself; the brief shows that step
        await wait_until(pilot, lambda: screen.viewed == RAILS, what="the next step", timeout=5)
        await wait_until(pilot, lambda: tree.highlighted_step == RAILS)
        assert "1.2" in str(screen.query_one("#step-title").render())
        assert "Next: 1.2" in str(screen.query_one("#status").render())
        # nothing runs: no stage or step reads "running"; the first stage has "started"
        assert not [
            line for line in screen_lines(app) if "running" in line and "▶ running  ✔" not in line
        ]
        assert "◐ started" in _line_with(app, "Power rails")

        # r runs the step under the cursor (the rails step, not the passed one)
        await pilot.press("r")
        await wait_until(pilot, lambda: isinstance(app.screen, EnergisePrompt), what="prompt")
        assert "Rail levels and ripple, output unloaded" in str(
            app.screen.query_one("#energise-text").render()
        )
        await pilot.press("n")  # keep it off: not under test here
        await wait_until(pilot, lambda: not isinstance(app.screen, EnergisePrompt))

        # a retake of the first step: its attempt count stands apart from its number
        await pilot.press("k")
        await wait_until(pilot, lambda: screen.viewed == FIRST)
        await take_step(pilot)
        line = " ".join(_line_with(app, "First power").split())
        assert "×21.1" not in line and "✔ passed ×2 1.1 First power" in line, line

        # the live line names a phase once
        screen.post_message(
            StepProgressed(RAILS, progress_view(Progress(RAILS, "acquiring", "acquiring")))
        )
        await wait_until(pilot, lambda: "acquiring" in str(screen.query_one("#live-text").render()))
        assert str(screen.query_one("#live-text").render()).strip() == "acquiring"
        await pilot.press("q")


@sync
async def test_every_way_out_names_the_command_that_carries_on(log_path):
    import shlex

    from bringup.cli import build_parser
    from bringup.tui.screens.summary import SummaryScreen

    # nothing opened: quitting the start screen says how to start (with this log's --db)
    app = BringupApp(Launcher(log_path))
    async with app.run_test(size=(130, 40)) as pilot:
        await pilot.pause()
        await pilot.press("ctrl+q")
    assert (
        app.carry_on()
        == f"bringup: no session was opened; to start one: bringup open --db {log_path}"
    )

    # a session opened and left unfinished: the exact resume command, and the summary's hint
    values = {"board": "demo", "checklist": None, "bench_file": None, "scenario": "healthy",
              "serial": "DHS24-0131", "operator": "tester"}  # fmt: skip
    app = BringupApp(Launcher(log_path), open_new=values)
    async with app.run_test(size=(130, 40)) as pilot:
        screen = await wait_for_session(pilot)
        session_id = screen.link.session_id
        await pilot.press("m")
        await wait_until(pilot, lambda: isinstance(app.screen, SummaryScreen), what="summary")
        hint = str(app.screen.query_one("#summary-hint").render())
        assert f"bringup export {session_id} --format pdf --out record.pdf --db {log_path}" in hint
        await pilot.press("q")
    line = app.carry_on()
    assert (
        line
        == f"bringup: session {session_id} is unfinished; to carry on: bringup resume {session_id} --db {log_path}"
    )
    # the command as printed is one the CLI takes, naming this log and this session
    words = shlex.split(line.split(": ")[-1])[1:]
    args = build_parser().parse_args(words)
    assert args.session == session_id and str(args.db) == log_path


@sync
async def test_metric_names_wrap_instead_of_being_cut(log_path):
    values = {"board": "demo", "checklist": None, "bench_file": None, "scenario": "healthy",
              "serial": "DHS24-0132", "operator": "tester"}  # fmt: skip
    app = BringupApp(Launcher(log_path), open_new=values)
    async with app.run_test(size=(160, 45)) as pilot:
        screen = await wait_for_session(pilot)
        runner = screen.link.runner
        step = "gate-overdrive.vgs-on"
        for s in runner.checklist.steps():  # setting up: the rails are not under test here
            if s.id == step:
                break
            if s.gate:  # a safety gate is run, never skipped
                runner.run_step(s.id)
            else:
                runner.skip(s.id, "rails checked on the previous board")
        screen.refresh_all(select=step)
        await wait_until(pilot, lambda: screen.viewed == step)
        await take_step(pilot)
        if screen.viewed != step:
            await pilot.press("k")
            await wait_until(pilot, lambda: screen.viewed == step)
        long_names = [m.label for m in screen.link.attempts(step)[-1].metrics if len(m.label) > 26]
        assert long_names  # "Bus minus the switch node's high level" and the like
        text = " ".join(" ".join(line.split()) for line in screen_lines(app))
        assert "…" not in text
        for name in long_names:  # every word of each long name is on screen, in its column
            assert all(word in text for word in name.split()), name
        await pilot.press("q")


@sync
async def test_step_names_wrap_in_the_checklist_from_100x30_to_200x60(log_path):
    values = {"board": "demo", "checklist": None, "bench_file": None, "scenario": "healthy",
              "serial": "DHS24-0133", "operator": "tester"}  # fmt: skip
    app = BringupApp(Launcher(log_path), open_new=values)
    for size in ((100, 30), (200, 60)):
        async with app.run_test(size=size) as pilot:
            screen = await wait_for_session(pilot)
            titles = [s.title for st in screen.link.stages() for s in st.steps]
            # the checklist column: each screen line up to the column's right edge (without the
            # scroll bar's block characters)
            column = " ".join(line.split("▎")[0].lstrip("▊") for line in screen_lines(app)[1:])
            column = " ".join(column.translate({ord(c): " " for c in "▁▂▃▄▅▆▇█"}).split())
            # the power-rail steps (on screen at both sizes) are there in full, never cut
            for title in titles[:4]:
                assert title in column, (size, title, column)
            assert "…" not in column
            # a name's further lines start under the name (at 100x30 the column's scroll bar
            # once took two cells after the names were wrapped, and a word fell to the edge)
            rows = [line.split("▎")[0][1:] for line in screen_lines(app)[1:] if "▎" in line]
            rows = rows[rows.index(next(r for r in rows if "CHECKLIST" in r)) + 1 :]
            rows = rows[: next(i for i, r in enumerate(rows) if r.startswith("──"))]
            for row in rows:
                text = row.rstrip("▁▂▃▄▅▆▇█ ")
                assert not text or text[0] in " ➤", (size, row)
                assert text[:2].strip() or not text.strip() or text[:19] == " " * 19, (size, row)
            session_id = screen.link.session_id
            await pilot.press("q")
        app = BringupApp(Launcher(log_path), resume=session_id)


@sync
async def test_rail_ripple_is_a_band_with_its_peak_to_peak_and_distinct_axis_labels(log_path):
    values = {"board": "demo", "checklist": None, "bench_file": None, "scenario": "healthy",
              "serial": "DHS24-0134", "operator": "tester"}  # fmt: skip
    app = BringupApp(Launcher(log_path), open_new=values)
    async with app.run_test(size=(160, 50)) as pilot:
        screen = await wait_for_session(pilot)
        await take_step(pilot)  # first power
        await wait_until(pilot, lambda: screen.viewed == RAILS)
        await take_step(pilot)  # the rails, unloaded: bus, gate-drive and logic levels
        await pilot.press("k")
        await wait_until(pilot, lambda: screen.viewed == RAILS)
        await pilot.press("2")
        plot = screen.query_one("#plot")
        await wait_until(pilot, lambda: plot.point_count > 0)
        lines = screen_lines(app)
        rows = [line.split("▎", 1)[1] for line in lines if "┤" in line and "▎" in line]
        labels = [row.split("┤")[0].strip() for row in rows]
        ticks = [label for label in labels if label]
        assert len(ticks) == 3 and len(set(ticks)) == 3, ticks  # top, middle, bottom differ
        legend = " ".join(lines)
        assert "peak-to-peak" in legend and "max" in legend and "min" in legend
        # a band in the middle: the top and bottom rows of the plot carry no trace
        dots = [any(0x2801 <= ord(ch) <= 0x28FF for ch in row.split("┤", 1)[1]) for row in rows]
        assert not dots[0] and not dots[-1] and any(dots), dots
        # ... and only the middle half of them: half the band's width as margin on each side
        lit = [i for i, d in enumerate(dots) if d]
        quarter = len(dots) / 4
        assert min(lit) >= quarter - 1 and max(lit) <= 3 * quarter, dots
        await pilot.press("q")


@sync
async def test_the_demo_soak_runs_at_a_pace_a_person_can_watch_and_says_so(log_path):
    from bringup.checklist.load import load_checklist
    from bringup.commands.demo import DEMO_TIME_SCALE

    soak = load_checklist().step("thermal.soak").soak
    # the standard soak's minimum and longest durations in wall seconds at the demo's pace:
    # tens of seconds to watch the prediction narrow before t may end it, a minute at most
    assert 20.0 <= soak.min_duration_s / DEMO_TIME_SCALE <= soak.duration_s / DEMO_TIME_SCALE
    assert soak.duration_s / DEMO_TIME_SCALE <= 120.0
    values = {"board": "demo", "checklist": None, "bench_file": None, "scenario": "healthy",
              "serial": "DHS24-0135", "operator": "tester"}  # fmt: skip
    app = BringupApp(Launcher(log_path, sim_time_scale=DEMO_TIME_SCALE), open_new=values)
    async with app.run_test(size=(160, 45)) as pilot:
        screen = await wait_for_session(pilot)
        header = str(screen.query_one("#titlebar").render())
        assert f"clock ×{DEMO_TIME_SCALE:g}" in header, header  # the time scale, on screen
        await pilot.press("q")

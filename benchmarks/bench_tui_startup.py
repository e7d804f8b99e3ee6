"""Benchmark of the terminal app's start (not a test).

    python benchmarks/bench_tui_startup.py [N]            # writes an N-participant cohort (default 500)
    python benchmarks/bench_tui_startup.py --study DIR    # an existing study, opened twice (cold, then cached)

Writes an invented N-participant cohort (default 500; 7 days of 60-s
actigraphy, a diary, one PSG night each; seeded, no real person) into a
temporary folder, then runs the app headless at 80×24 and reports the wall
time from start to the first screen (overview mounted, rows still loading)
and to the fully loaded study (every participant scored in the worker), plus
the time of one overview rebuild (one ``add_rows`` call) of the loaded grid
and of one cursor move with its side-panel update.
"""

from __future__ import annotations

import asyncio
import datetime as dt
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from sleepfuse.synthetic.cohort import ParticipantPlan, simulate_participant  # noqa: E402

TZ = "America/Chicago"
STUDY_TOML = f'[study]\nname = "Invented benchmark cohort"\ntimezone = "{TZ}"\n'


def write_cohort(root: Path, n: int) -> None:
    root.mkdir(parents=True, exist_ok=True)
    (root / "study.toml").write_text(STUDY_TOML, encoding="utf-8")
    first = dt.date(2026, 3, 2)
    for i in range(n):
        pid = f"S{i + 1:04d}"
        plan = ParticipantPlan(pid, first + dt.timedelta(days=i % 5), 7,
                               psg_nights=[first + dt.timedelta(days=i % 5 + 2)], actigraphy_epoch_s=60)
        simulate_participant(root, plan, TZ, seed=1000 + i)


async def measure(root: Path) -> dict[str, float]:
    from sleepfuse.tui.app import create_app
    from sleepfuse.tui.screens.overview import OverviewScreen

    t0 = time.perf_counter()
    app = create_app(root)
    out: dict[str, float] = {}
    async with app.run_test(size=(80, 24)) as pilot:
        while not isinstance(app.screen, OverviewScreen):
            await pilot.pause()
        out["first_screen_s"] = time.perf_counter() - t0
        while not app.screen.row_pids:
            await pilot.pause(0.01)
        out["first_rows_s"] = time.perf_counter() - t0
        while app.workspace is None:
            await pilot.pause(0.05)
        await pilot.pause()
        out["loaded_s"] = time.perf_counter() - t0
        t1 = time.perf_counter()
        app.screen._show_workspace(app.workspace)
        await pilot.pause()
        out["rebuild_grid_s"] = time.perf_counter() - t1
        from textual.widgets import DataTable

        table = app.screen.query_one("#grid", DataTable)
        t1 = time.perf_counter()
        for _ in range(40):  # what one key press costs the app (the Pilot's own overhead left out)
            table.action_cursor_down()
            app.screen._update_side()
        out["cursor_move_ms"] = (time.perf_counter() - t1) / 40 * 1000
        out["participants"] = len(app.workspace.participants)
    return out


def _print(result: dict) -> None:
    for key, value in result.items():
        print(f"{key:>20}: {value:.3f}" if isinstance(value, float) else f"{key:>20}: {value}")


def main() -> None:
    if len(sys.argv) > 2 and sys.argv[1] == "--study":
        root = Path(sys.argv[2])
        for label in ("first open (cache as found)", "second open (cache warm)"):
            print(label)
            _print(asyncio.run(measure(root)))
        return
    n = int(sys.argv[1]) if len(sys.argv) > 1 else 500
    with tempfile.TemporaryDirectory() as tmp:
        root = Path(tmp) / "cohort"
        t = time.perf_counter()
        write_cohort(root, n)
        print(f"wrote {n} invented participants in {time.perf_counter() - t:.1f} s")
        _print(asyncio.run(measure(root)))


if __name__ == "__main__":
    main()

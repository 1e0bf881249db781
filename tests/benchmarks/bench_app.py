"""CPU of the running live screen, the screen frames per second it reached, and touch-to-screen latency.

Two boards through the real link (`sim://`, decoded on the link's reader thread) into the full app at
120x40 with its 20 Hz screen timer: 16 channels at 100 Hz and 64 channels at 1 kHz. Printed per board:
- the UI thread's CPU (the app: draining, detection, measures, drawing) as % of one core, measured with
  the UI thread's own clock (`time.thread_time` on that thread, so the link's reader thread, the
  simulated board and other processes on the machine are not counted),
- the whole process (adding the link thread and the simulated board itself),
- screen frames per second reached, frames handled against the board's frame rate (1.00x = kept up)
  and frames lost (sequence gaps and the link's queue overflow).
Goals (issue 10): at most 8 % of a core for 16 channels at 100 Hz and at most 15 % for 64 at 1 kHz,
with the screen at 20 fps.

Then the latency of touches (`touch_probe.py` says exactly how it is taken): a thread presses keys of
the simulated board at random moments; each touch is timed from the moment the link's reader thread
read the frame that confirmed it to the end of the first screen frame that paints its row with TOUCH.
Median and 95th percentile over all touches (goal: 95th percentile within 60 ms).

Then the same 64 rows drawn two ways in one process, fed the same snapshots at 20 Hz: padtune's
one-widget line-API table, and a plain straightforward table of one widget per cell (a Static per
number and a Textual Sparkline per row). The ratio of their UI CPU per drawn frame is printed (the
widget-per-cell table falls far behind 20 fps, so its CPU per second alone would flatter it).
On a loaded machine the frame rate can fall short of the timer's while the CPU figures stay honest
(the UI thread waits for a core, it does not work more); latency does grow with the load.

The headless driver writes nothing to a terminal, so the cost of the terminal itself is not counted.
`--quick` runs each part for about a second (the test suite does this so the script cannot rot).
"""

from __future__ import annotations

import argparse
import asyncio
import os
import re
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from textual.app import App, ComposeResult  # noqa: E402
from textual.containers import Horizontal, VerticalScroll  # noqa: E402
from textual.widgets import Sparkline, Static  # noqa: E402

import devices  # noqa: E402
from protocol.link import Link  # noqa: E402
from tui.app import PadtuneApp  # noqa: E402
from tui.session_source import SessionSource  # noqa: E402
from tui.widgets.channel_table import ChannelTable  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parent))
from touch_probe import Presser, TouchProbe  # noqa: E402


def board_16ch(folder: Path) -> Path:
    """A 4 x 4 grid at 100 Hz, made from the bundled grid64 description."""
    text = (ROOT / "devices" / "boards" / "grid64.toml").read_text()
    text = re.sub(r'name = "grid64"', 'name = "grid16"', text)
    text = re.sub(r"rate_hz = 1000", "rate_hz = 100", text)
    text = re.sub(r"rows = 8", "rows = 4", text)
    text = re.sub(r"cols = 8", "cols = 4", text)
    path = folder / "grid16.toml"
    path.write_text(text)
    return path


# The run is also cut into windows this long: the quietest one shows the cost without another program's
# burst on the machine (the whole run's figure is the one held against the goal).
WINDOW_S = 2.0


class Meter:
    """UI-thread and process CPU over a stretch of wall time."""

    def __enter__(self) -> Meter:
        self.wall0, self.ui0, self.proc0 = time.monotonic(), time.thread_time(), time.process_time()
        return self

    def __exit__(self, *exc: object) -> None:
        self.wall = time.monotonic() - self.wall0
        self.ui = (time.thread_time() - self.ui0) / self.wall
        self.proc = (time.process_time() - self.proc0) / self.wall


async def wait_for_channels(source: SessionSource, timeout_s: float = 10.0) -> None:
    t0 = time.monotonic()
    while not source.channel_names():
        if time.monotonic() - t0 > timeout_s:
            raise RuntimeError("the simulated board sent no frames")
        await asyncio.sleep(0.05)


async def wait_until_ready(source: SessionSource, timeout_s: float = 10.0) -> None:
    """Every channel past its first-contact phases (its quiet second): touches show from then on."""
    await wait_for_channels(source, timeout_s)
    t0 = time.monotonic()
    while any(source.first_contact(c)[1] != "ready" for c in range(len(source.channel_names()))):
        if time.monotonic() - t0 > timeout_s:
            raise RuntimeError("the simulated board's channels never became ready")
        await asyncio.sleep(0.05)


async def run_latency(url: str, seconds: float) -> dict[str, float]:
    """Presses keys for `seconds` (those on screen) and times each touch with a `TouchProbe`."""
    link = Link(url, 921600)
    link.start()
    source = SessionSource(link, port=url, baud=921600)
    app = PadtuneApp(source, ui_hz=20)
    probe = TouchProbe()
    presser: Presser | None = None
    try:
        async with app.run_test(size=(120, 40)):
            await wait_until_ready(source)
            table = app.query_one(ChannelTable)
            on_screen = source.channel_names()[: max(1, table.size.height - 1)]
            probe.attach(app, source, table, on_screen)
            stats0 = link.stats
            presser = Presser(link.write, on_screen, seconds)
            presser.start()
            while presser.is_alive():
                await asyncio.sleep(0.05)
            await asyncio.sleep(0.5)  # the last touches reach the screen
            stats = link.stats
    finally:
        if presser is not None:
            presser.stop_event.set()
        link.stop()
    lost = stats.lost + stats.overflow - stats0.lost - stats0.overflow
    return {**probe.summary(), "pressed": presser.pressed, "lost": lost}


async def run_app(url: str, rate_hz: float, seconds: float, detail: bool = False) -> dict[str, float]:
    link = Link(url, 921600)
    link.start()
    source = SessionSource(link, port=url, baud=921600)
    app = PadtuneApp(source, ui_hz=20)
    try:
        async with app.run_test(size=(120, 40)):
            await wait_for_channels(source)
            app.detail = detail
            await asyncio.sleep(1.0)  # history rings fill, first noise figures computed
            frames0, drawn0 = link.stats.frames, app.frames_drawn
            windows = max(1, round(seconds / WINDOW_S))
            parts = []
            with Meter() as m:
                for _ in range(windows):
                    with Meter() as part:
                        await asyncio.sleep(seconds / windows)
                    parts.append(part.ui)
            frames, drawn = link.stats.frames - frames0, app.frames_drawn - drawn0
            stats = link.stats
    finally:
        link.stop()
    return {"ui": m.ui, "ui_least": min(parts), "window_s": seconds / windows, "proc": m.proc,
            "fps": drawn / m.wall, "kept": frames / m.wall / rate_hz, "lost": stats.lost + stats.overflow}


class PlainRow(Horizontal):
    """One channel as separate widgets: the straightforward way to build the table."""

    DEFAULT_CSS = "PlainRow { height: 1; } PlainRow Static { width: 8; } PlainRow Sparkline { width: 30; }"

    cells: tuple[Static, ...] = ()
    spark: Sparkline | None = None

    def compose(self) -> ComposeResult:
        for _ in range(6):
            yield Static("")
        yield Sparkline([])

    def on_mount(self) -> None:
        self.cells, self.spark = tuple(self.query(Static)), self.query_one(Sparkline)


class TableApp(App[None]):
    """Draws the same snapshots at 20 Hz with either the line-API table or one widget per cell."""

    def __init__(self, source: SessionSource, plain: bool) -> None:
        super().__init__()
        self.source, self.plain, self.drawn = source, plain, 0

    def compose(self) -> ComposeResult:
        if self.plain:
            with VerticalScroll():
                for _ in range(64):
                    yield PlainRow()
        else:
            yield ChannelTable()

    def on_mount(self) -> None:
        self.set_interval(1 / 20, self.tick)

    def tick(self) -> None:
        self.source.poll()
        views = self.source.channel_views(48)
        with self.batch_update():
            if self.plain:
                for row, v in zip(self.query(PlainRow), views, strict=False):
                    if row.spark is None:
                        continue  # still mounting
                    values = (v.name, v.reading, v.baseline, v.delta, v.noise_pp, v.state)
                    for cell, value in zip(row.cells, values, strict=True):
                        cell.update(str(value))
                    row.spark.data = list(v.spark)
            else:
                self.query_one(ChannelTable).show(views)
        self.drawn += 1


async def run_table(url: str, plain: bool, seconds: float) -> dict[str, float]:
    link = Link(url, 921600)
    link.start()
    source = SessionSource(link, port=url, baud=921600)
    app = TableApp(source, plain)
    try:
        async with app.run_test(size=(120, 70)):
            await wait_for_channels(source)
            await asyncio.sleep(0.5)
            drawn0 = app.drawn
            with Meter() as m:
                await asyncio.sleep(seconds)
            drawn = app.drawn - drawn0
    finally:
        link.stop()
    return {"ui": m.ui, "fps": drawn / m.wall}


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="about a second per part")
    parser.add_argument("--only", choices=("cpu", "latency", "table"), help="run one part")
    args = parser.parse_args()
    parts = {args.only} if args.only else {"cpu", "latency", "table"}
    seconds = 1.0 if args.quick else 6.0
    press_s = 1.0 if args.quick else 12.0
    devices.register_url_handlers()
    with tempfile.TemporaryDirectory() as tmp:
        grid16 = board_16ch(Path(tmp))
        # label, URL, frame rate, UI-thread goal (issue 10), detail panel open
        boards = [("16 ch @ 100 Hz", f"sim://{grid16}?seed=2", 100.0, 0.08, False),
                  ("64 ch @ 1 kHz", "sim://grid64?seed=2", 1000.0, 0.15, False),
                  ("64 ch + detail", "sim://grid64?seed=2", 1000.0, None, True)]
        if "cpu" in parts:
            print(f"live screen, 120x40, screen timer 20 Hz, {seconds:g} s each (+ detail: plot panel open); "
                  f"machine load {os.getloadavg()[0]:.1f} on {os.cpu_count()} cores")
        for label, url, rate, goal, detail in boards if "cpu" in parts else ():
            r = asyncio.run(run_app(url, rate, seconds, detail))
            fps_ok = r["fps"] >= 20 * 0.95
            verdict = "" if goal is None else \
                f" (goal <= {goal * 100:.0f} %, {'within' if r['ui'] <= goal else 'OVER'})"
            print(f"  {label:15} UI thread {r['ui'] * 100:5.1f} % of a core{verdict} (quietest "
                  f"{r['window_s']:g} s: {r['ui_least'] * 100:4.1f} %); whole process incl. "
                  f"link and simulated board {r['proc'] * 100:5.1f} %; screen {r['fps']:4.1f} fps"
                  f"{'' if fps_ok else ' (short)'}; frames handled {r['kept']:.2f}x the board's rate; "
                  f"lost {r['lost']}")
        if "latency" in parts:
            latency(grid16, press_s)
        if "table" in parts:
            table_ratio(seconds)
    return 0


def latency(grid16: Path, press_s: float) -> None:
    """Touch-to-screen latency on both boards, keys pressed by a thread (see touch_probe.py)."""
    print(f"touch to screen, 120x40, screen timer 20 Hz (one frame every 50 ms), keys pressed for "
          f"{press_s:g} s; machine load {os.getloadavg()[0]:.1f}")
    print("  (from the moment the link's reader thread read the frame that confirmed a touch, to the "
          "end of the\n   first screen frame that paints its row with TOUCH; keys on screen pressed "
          "at random moments by\n   a thread writing +KEY/-KEY to the simulated board; the debounce "
          "before that frame is not counted)")
    for label, url in (("16 ch @ 100 Hz", f"sim://{grid16}?seed=2&script=0&random=0"),
                       ("64 ch @ 1 kHz", "sim://grid64?seed=2&script=0&random=0")):
        r = asyncio.run(run_latency(url, press_s))
        if not r["shown"]:
            print(f"  {label:15} no touch reached the screen ({r['touches']} detected)")
            continue
        verdict = "within" if r["p95_ms"] <= 60.0 else "OVER"
        print(f"  {label:15} median {r['median_ms']:5.1f} ms, 95th percentile {r['p95_ms']:5.1f} ms "
              f"(goal <= 60 ms, {verdict}; {r['p95_ms'] / 50.0:.2f}x the screen period), worst "
              f"{r['max_ms']:5.1f} ms; {r['shown']} touches shown of {r['touches']} detected "
              f"({r['pressed']} presses, {r['unseen']} released before a frame showed them); "
              f"frames lost {r['lost']}")


def table_ratio(seconds: float) -> None:
    """The line-API table against a table of one widget per cell, per drawn frame."""
    url = "sim://grid64?seed=2"
    line = asyncio.run(run_table(url, plain=False, seconds=seconds))
    plain = asyncio.run(run_table(url, plain=True, seconds=seconds))
    # Per drawn frame: the widget-per-cell table cannot keep up, so its CPU per second understates it.
    per_frame = {k: r["ui"] / max(r["fps"], 1e-9) * 1000 for k, r in (("line", line), ("plain", plain))}
    print("64 rows at 20 Hz, same snapshots, one process:")
    for key, name, r in (("line", "one line-API widget", line), ("plain", "one widget per cell", plain)):
        print(f"  {name:20}  {r['ui'] * 100:5.1f} % of a core, {r['fps']:4.1f} fps, "
              f"{per_frame[key]:6.1f} ms of UI CPU per screen frame")
    print(f"  the line-API table costs {per_frame['plain'] / per_frame['line']:.1f}x less CPU per frame "
          "than the widget-per-cell table")


if __name__ == "__main__":
    sys.exit(main())

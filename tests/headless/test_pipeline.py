"""The front ends' one pipeline (`tui.pipeline.Pipeline`): drain the link, record, feed the session.

Checked here once for all four front ends (the live screen through `SessionSource`, `monitor`, `record`
and `check`): that each of them steps through it, that nothing else in `tui/` drains a link, the order
of a step, recording failures told once, a slow disk that never holds a step up, and the headless loop's
ends (deadline, condition, stop, Ctrl-C, what came before the link stopped).
"""

from __future__ import annotations

import ast
import os
import pathlib
import subprocess
import sys
from collections.abc import Iterator
from pathlib import Path

import numpy as np
import pytest

from processing.detections import Touch
from processing.profile import profile_for, save_profile
from processing.recording import read_recording
from processing.session import Session
from protocol.errors import UserError
from protocol.events import Event, LinkState, LinkStatus
from tests.headless.disks import DEADLINE_S, SlowDisk, put_dev_full_under, returns_soon
from tests.tui.feeds import SyntheticFeed
from tui import cli
from tui.pipeline import Pipeline, Step
from tui.session_source import SessionSource

ROOT = pathlib.Path(__file__).resolve().parents[2]
needs_dev_full = pytest.mark.skipif(not os.path.exists("/dev/full"), reason="needs Linux /dev/full")


class StoppingFeed(SyntheticFeed):
    """A test feed that can be stopped like a `protocol.link.Link` (and says `closed` when it is)."""

    def __init__(self) -> None:
        super().__init__()
        self.stopped = 0

    def stop(self) -> None:
        self.stopped += 1
        self.queue.append(LinkStatus(self.t_s, LinkState.CLOSED, "test://feed"))


def pipeline(producer: SyntheticFeed | None = None, **kw: object) -> tuple[Pipeline, SyntheticFeed]:
    feed = producer or SyntheticFeed()
    session = Session(profile_for(len(feed.names), feed.names))
    pipe = Pipeline(feed, session, clock=lambda: feed.t_s, source="test://feed", **kw)  # type: ignore[arg-type]
    return pipe, feed


# -- one loop, every front end ------------------------------------------------------------------------
def test_nothing_in_the_front_end_but_the_pipeline_drains_a_link() -> None:
    drains = []
    for path in sorted((ROOT / "tui").rglob("*.py")):
        tree = ast.parse(path.read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            call = isinstance(node, ast.Call) and isinstance(node.func, ast.Attribute)
            if call and node.func.attr == "drain":
                drains.append(f"{path.relative_to(ROOT)}:{node.lineno}")
    assert drains and all(d.startswith("tui/pipeline.py:") for d in drains), drains


@pytest.fixture
def counted_steps(monkeypatch: pytest.MonkeyPatch) -> Iterator[list[Step]]:
    steps: list[Step] = []
    real = Pipeline.step

    def step(self: Pipeline) -> Step:
        out = real(self)
        steps.append(out)
        return out

    monkeypatch.setattr(Pipeline, "step", step)
    yield steps


def test_the_live_screens_source_steps_through_the_pipeline(counted_steps: list[Step]) -> None:
    feed = SyntheticFeed()
    source = SessionSource(feed, port="test://feed", clock=lambda: feed.t_s, profile=profile_for(5))
    feed.advance(0.5)
    feed.set_touch(1, 300)
    feed.advance(0.5)
    tick = source.poll()
    assert len(counted_steps) == 1 and counted_steps[0].events
    assert tick.detections == counted_steps[0].detections
    assert any(isinstance(d, Touch) and d.channel == 1 for d in tick.detections)
    assert tick.frames == 100


@pytest.mark.parametrize("command", ["monitor", "record", "check"])
def test_every_headless_command_steps_through_the_pipeline(command: str, counted_steps: list[Step],
                                                           tmp_path: Path,
                                                           capsys: pytest.CaptureFixture[str]) -> None:
    port = "sim://greenhouse?speed=4&seed=2"
    args = {"monitor": ["monitor", port, "--duration", "0.5", "--json"],
            "record": ["record", port, "--duration", "0.5", "-o", str(tmp_path / "r.csv")],
            "check": ["check", port, "--duration", "0.5", "--json", "--profile", str(tmp_path / "p.toml"),
                      "--no-limits"]}
    save_profile(profile_for(9), tmp_path / "p.toml")  # the greenhouse board has 9 keys
    code = cli.main(args[command])
    out = capsys.readouterr()
    assert code in (0, 1), out.err  # check: a verdict either way
    assert len(counted_steps) >= 5, "the command's loop did not go through Pipeline.step"
    assert sum(len(s.events) for s in counted_steps) > 0


# -- one step ---------------------------------------------------------------------------------------
def test_a_step_records_then_feeds_the_session(tmp_path: Path) -> None:
    pipe, feed = pipeline()
    assert pipe.step().events  # the info line
    rec = pipe.start_recording(tmp_path / "r.csv")  # mid-session: the board's info goes in first
    feed.advance(0.5)
    feed.set_touch(2, 300)
    feed.advance(0.3)
    step = pipe.step()
    assert step.t_s == feed.t_s and [type(e).__name__ for e in step.events] == ["FrameBlock", "FrameBlock"]
    assert [d.channel for d in step.detections if isinstance(d, Touch)] == [2]
    assert pipe.session is not None and pipe.session.engine is not None
    assert pipe.session.engine.frames == 80
    assert pipe.recording_path == rec.path and pipe.close_recording() == rec.path
    back = read_recording(tmp_path / "r.csv")
    assert back.frames == 80 and back.info is not None and back.names == feed.names
    np.testing.assert_array_equal(back.arrays()[2], np.concatenate([e.readings for e in step.events]))


def test_without_a_session_nothing_is_detected(tmp_path: Path) -> None:
    feed = SyntheticFeed()
    pipe = Pipeline(feed, None, clock=lambda: feed.t_s)
    feed.set_touch(0, 500)
    feed.advance(1.0)
    step = pipe.step()
    assert step.events and step.detections == []


def test_a_custom_feed_gets_every_event_with_the_time(tmp_path: Path) -> None:
    seen: list[tuple[int, float]] = []

    def feed_fn(events: list[Event], now: float) -> list:
        seen.append((len(events), now))
        return []

    pipe, feed = pipeline(feed=feed_fn)
    feed.advance(0.2)
    pipe.step()
    first_t_s = feed.t_s
    feed.t_s += 1.0
    pipe.step()  # nothing queued: still called (a status or a held notice is due by the clock)
    assert seen == [(2, first_t_s), (0, feed.t_s)]


@needs_dev_full
def test_a_failed_recording_is_told_once_and_detection_goes_on(tmp_path: Path) -> None:
    pipe, feed = pipeline()
    pipe.step()
    rec = pipe.start_recording(tmp_path / "full.csv")
    feed.advance(0.1)
    pipe.step()
    assert pipe.settle(DEADLINE_S)
    put_dev_full_under(rec)
    feed.advance(0.5)  # the writer's next flush (every 0.25 s) meets the full disk
    told = pipe.step().recording_errors  # told here if the thread was quick, else at the next step
    assert pipe.settle(DEADLINE_S)
    feed.set_touch(0, 300)
    feed.advance(0.3)
    step = pipe.step()
    told += step.recording_errors
    assert len(told) == 1 and "No space left on device" in told[0]
    assert any(isinstance(d, Touch) for d in step.detections)
    assert pipe.recorder is None and pipe.recording_path is None
    assert pipe.recording_error == told[0]
    assert pipe.mark(feed.t_s, "note") is None  # nothing is recorded now
    feed.advance(0.3)
    assert pipe.settle(DEADLINE_S)
    assert pipe.step().recording_errors == []  # told once
    assert pipe.close_recording() is None  # already told: the exit has nothing more to say


@needs_dev_full
def test_a_failure_found_when_a_new_recording_starts_is_still_told(tmp_path: Path) -> None:
    pipe, feed = pipeline()
    rec = pipe.start_recording(tmp_path / "first.csv")
    rec.writer.flush_interval_s = 0.0
    put_dev_full_under(rec)
    pipe.mark(feed.t_s, "note")  # the thread's write fails; no step has looked yet
    assert pipe.settle(DEADLINE_S) and rec.error is not None
    pipe.start_recording(tmp_path / "second.csv")  # allowed: the first one stopped by itself
    errors = pipe.step().recording_errors
    assert len(errors) == 1 and "first.csv" in errors[0] and "No space left on device" in errors[0]
    assert pipe.recording_path == tmp_path / "second.csv"
    pipe.close_recording()


def test_a_slow_disk_never_holds_a_step_up(tmp_path: Path) -> None:
    pipe, feed = pipeline()
    pipe.step()
    rec = pipe.start_recording(tmp_path / "slow.csv")
    rec.writer.flush_interval_s = 0.0
    disk = SlowDisk(rec)
    feed.advance(0.1)
    pipe.step()
    assert disk.entered.wait(DEADLINE_S)  # the writer thread hangs in a write
    found = []
    for i in range(10):
        feed.set_touch(3, 300 if i >= 5 else 0)
        feed.advance(0.1)
        step = returns_soon(pipe.step)
        assert isinstance(step, Step)
        found += step.detections
        assert returns_soon(lambda: pipe.mark(feed.t_s, "note", text="still here")) is not None
    assert any(isinstance(d, Touch) and d.channel == 3 for d in found)  # detection went on
    assert returns_soon(pipe.stop_recording) == rec.path  # stopping does not wait either
    assert not rec.finished
    disk.go.set()
    assert pipe.settle(DEADLINE_S) and rec.finished
    back = read_recording(tmp_path / "slow.csv")
    assert back.frames == 110 and len(back.marks) == 10


@needs_dev_full
def test_a_close_that_cannot_write_the_last_rows_is_told_by_a_later_step(tmp_path: Path) -> None:
    pipe, feed = pipeline()
    pipe.step()
    rec = pipe.start_recording(tmp_path / "late.csv")
    feed.advance(0.1)
    pipe.step()  # buffered: no flush due yet by the feed's clock
    assert pipe.settle(DEADLINE_S)
    put_dev_full_under(rec)
    assert pipe.stop_recording() == rec.path  # returns at once; the close happens on the thread
    assert pipe.settle(DEADLINE_S)
    errors = pipe.step().recording_errors
    assert len(errors) == 1 and "No space left on device" in errors[0]
    assert pipe.step().recording_errors == []


def test_the_exit_waits_a_bounded_time_and_says_when_a_file_could_not_be_finished(tmp_path: Path) -> None:
    pipe, feed = pipeline()
    rec = pipe.start_recording(tmp_path / "stuck.csv")
    rec.writer.flush_interval_s = 0.0
    disk = SlowDisk(rec)
    feed.advance(0.1)
    pipe.step()
    assert disk.entered.wait(DEADLINE_S)
    with pytest.raises(UserError, match="was not finished within"):
        pipe.close_recording(timeout_s=0.01)  # the disk is held: no wait could be long enough
    disk.go.set()
    assert rec.wait(DEADLINE_S) and read_recording(tmp_path / "stuck.csv").frames == 10


def test_one_recording_at_a_time_and_refusals_at_once(tmp_path: Path) -> None:
    pipe, _ = pipeline()
    pipe.start_recording(tmp_path / "a.csv")
    with pytest.raises(UserError, match="already recording to"):
        pipe.start_recording(tmp_path / "b.csv")
    pipe.stop_recording()
    with pytest.raises(UserError, match="already exists"):
        pipe.start_recording(tmp_path / "a.csv")
    pipe.start_recording(tmp_path / "a.csv", overwrite=True)
    assert pipe.close_recording() == tmp_path / "a.csv"
    assert pipe.stop_recording() is None


# -- the headless loop ----------------------------------------------------------------------------------
class TickingClock:
    """A clock that moves on by `step_s` each time it is read (no wall time in these tests)."""

    def __init__(self, step_s: float = 0.01) -> None:
        self.t_s, self.step_s = 0.0, step_s

    def __call__(self) -> float:
        self.t_s += self.step_s
        return self.t_s


class Stop:
    stopped = False


def test_run_ends_at_the_deadline_on_a_condition_or_a_stop() -> None:
    feed = StoppingFeed()
    clock = TickingClock()
    pipe = Pipeline(feed, None, clock=clock)
    steps: list[Step] = []
    pipe.run(until_s=0.2, on_step=steps.append, tick_s=0.0)
    assert 5 <= len(steps) <= 20 and clock.t_s >= 0.2
    steps.clear()
    pipe.run(until_s=None, done=lambda: len(steps) == 3, on_step=steps.append, tick_s=0.0)
    assert len(steps) == 3
    stop = Stop()
    steps.clear()

    def stop_after_two(step: Step) -> None:
        steps.append(step)
        stop.stopped = len(steps) == 2

    pipe.run(until_s=None, stop=stop, on_step=stop_after_two, tick_s=0.0)
    assert len(steps) == 2


def test_ctrl_c_where_no_handler_could_be_set_is_a_stop() -> None:
    feed = StoppingFeed()
    pipe = Pipeline(feed, None, clock=TickingClock())
    stop = Stop()

    def interrupt(step: Step) -> None:
        raise KeyboardInterrupt

    pipe.run(until_s=None, stop=stop, on_step=interrupt, tick_s=0.0)
    assert stop.stopped
    with pytest.raises(KeyboardInterrupt):  # without a stop flag to set, it goes on up
        pipe.run(until_s=None, on_step=interrupt, tick_s=0.0)


def test_the_end_of_a_run_stops_the_link_and_loses_nothing(tmp_path: Path) -> None:
    feed = StoppingFeed()
    clock = TickingClock()
    pipe = Pipeline(feed, None, clock=clock)
    rec = pipe.start_recording(tmp_path / "end.csv", origin_t_s=0.0)
    feed.advance(0.3)  # queued before the stop: must reach the file
    last = pipe.run_to_end(until_s=0.0, stop=None)
    assert feed.stopped >= 1 and rec.finished
    assert any(isinstance(e, LinkStatus) and e.state == LinkState.CLOSED for e in last.events)
    assert read_recording(tmp_path / "end.csv").frames == 30


def test_an_error_in_a_run_still_stops_the_link_and_closes_the_recording(tmp_path: Path) -> None:
    feed = StoppingFeed()
    pipe = Pipeline(feed, None, clock=TickingClock())
    rec = pipe.start_recording(tmp_path / "err.csv")

    def fail(step: Step) -> None:
        raise UserError("something the user must hear")

    with pytest.raises(UserError, match="something the user must hear"):
        pipe.run_to_end(until_s=None, stop=None, on_step=fail)
    assert feed.stopped >= 1 and not rec.accepting
    assert rec.wait(DEADLINE_S)


def test_the_pipeline_and_the_headless_commands_never_load_textual() -> None:
    # Headless over SSH never builds the App (a Textual import there would be a slip): checked in a
    # fresh interpreter, so imports made by other tests do not count.
    code = ("import sys\n"
            "import tui.pipeline, tui.recorder, tui.headless.production, tui.headless.tuning\n"
            "import tui.commands.monitor, tui.commands.record, tui.commands.check, tui.commands.replay\n"
            "import tui.commands.tune, tui.cli\n"
            "tui.cli.build_parser()\n"
            "print(sorted(m for m in sys.modules if m.split('.')[0] == 'textual'))\n")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120, cwd=ROOT)
    assert out.returncode == 0, out.stderr
    assert out.stdout.strip() == "[]"

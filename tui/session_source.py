"""The `LiveSource` the app runs on: a link (anything with `drain()`) feeding a `processing.Session`.

`poll()` runs on the UI thread: one step of the front ends' shared `tui.pipeline.Pipeline` (take what
the link's reader thread queued, hand it to the recording's writer thread, feed the session), then it
counts frames for the fps figure and turns the step into a `Tick`. Recording never waits for the disk
here: writes and the fsync run on the recorder's thread, and a recording that stopped by itself (a
full disk) comes back in `Tick.errors` and `LinkView.recording_error`. The snapshots for drawing come
from the session's engine and measures; the noise figures are refreshed twice a second
(`Measures.qualities()`, all channels in one pass), the rest every frame.
"""

from __future__ import annotations

import math
import time
from collections import deque
from collections.abc import Callable, Sequence
from dataclasses import replace
from pathlib import Path

import numpy as np

from processing.board_settings import BoardValues, Difference, differences
from processing.detections import KeyState
from processing.fixed import FRAC_BITS, tdiv_pow2_np
from processing.history import LongHistory
from processing.measure import ChannelQuality
from processing.profile import Profile, load_profile, save_profile
from processing.session import Session
from processing.settings import ChannelSettings
from protocol.errors import UserError
from protocol.events import (
    BoardInfo,
    FaultKind,
    FrameBlock,
    LinkFault,
    LinkState,
    LinkStats,
    LinkStatus,
    StreamForm,
)
from protocol.linkwatch import SILENT_AFTER_S
from tui.board_sync import BoardSync
from tui.pipeline import Pipeline, Producer
from tui.render.views import ChannelView, GroupView, LinkView, LongView, Series, SliderView, Spectrum
from tui.source import FileJob, Tick

# The engine's states as the screen names them (lower case), looked up once, not per channel and frame.
_STATE_WORDS = {state: state.name.lower() for state in KeyState}
SPARK_SECONDS = 4.0
PLOT_SECONDS = 8.0
QUALITY_EVERY_S = 0.5


class SessionSource:
    def __init__(self, producer: Producer, *, profile: Profile | None = None,
                 profile_path: Path | None = None, port: str = "", baud: int = 115200,
                 simulated: bool | None = None,
                 clock: Callable[[], float] = time.monotonic, session: Session | None = None) -> None:
        self.producer = producer
        self.session = session or Session(profile)
        self.pipeline = Pipeline(producer, self.session, clock=clock, source=port)
        self._path = profile_path
        self._saved: Profile | None = profile
        self._polls = 0
        # `Session.automatic(saved)` for the screen frame (the link strip's unsaved mark and every row's
        # edited mark ask for it): kept while no poll ran and neither profile was replaced (an edit
        # replaces the session's profile), for (polls, profile, saved, result).
        self._automatic_kept: tuple[int, Profile | None, Profile, Profile] | None = None
        self.port, self.baud = port, baud
        self.simulated = port.startswith("sim://") if simulated is None else simulated
        self.clock = clock
        self._frame_times: deque[tuple[float, int]] = deque()
        self._quality: list[ChannelQuality] = []
        self._quality_t_s = -1e9
        self._status_detail = ""
        self._scale = 1  # of the board's plain form, for the link strip
        self._fps, self._fps_t_s = 0.0, -1e9
        # Since when no frame has come: the last frame, or the port's (re)opening (a board that never
        # sends one is flagged too). `_silent_bytes`: the link said `silent` (no bytes at all) when it
        # had read this many bytes; None once bytes or frames flow again.
        self._last_frame_t_s: float = clock()
        self._silent_bytes: int | None = None
        self.exit_problems: list[str] = []
        # Settings travel to a board that says settings=1 (tui/board_sync.py); its values once read.
        self.board_sync = BoardSync(self._send, self.channel_names)
        self._board_read: BoardValues | None = None
        self._profile_given = profile is not None  # else the board's own settings are the start
        self.board_values: BoardValues | None = None
        # The detail panel's long view: the whole session decimated (processing.history), bounded at
        # LongHistory's 1024 buckets (1 MiB for 64 channels); appended in `poll`, O(1) per frame.
        self.long_history: LongHistory | None = None

    # -- data in ----------------------------------------------------------------------------------
    @property
    def rate_hz(self) -> float | None:
        return self.session.rate_hz if self.session.engine else None

    @property
    def known_rate_hz(self) -> float | None:
        """The board's frame rate once stated or measured (None while assumed): what times in ms use."""
        return self.session.known_rate_hz if self.session.engine else None

    def poll(self) -> Tick:
        step = self.pipeline.step()
        self._polls += 1
        tick = Tick(detections=step.detections)
        for ev in step.events:
            if isinstance(ev, FrameBlock):
                tick.blocks.append(ev)
                tick.frames += len(ev)
            else:
                tick.events.append(ev)
                if isinstance(ev, LinkStatus):
                    self._status_detail = ev.detail
                    if ev.state in (LinkState.CONNECTED, LinkState.RECONNECTED):
                        self._last_frame_t_s, self._silent_bytes = self.clock(), None
                elif isinstance(ev, LinkFault) and ev.kind == FaultKind.SILENT:
                    self._silent_bytes = self.producer.stats.bytes_in
                elif isinstance(ev, StreamForm):
                    self._scale = ev.scale
                elif isinstance(ev, BoardInfo) and ev.new_session:
                    self._scale = 1  # a restarted board's form is recognised again
        if self._saved is None and self.session.profile is not None:
            self._saved = self.session.profile  # the defaults the board came up with: nothing to save yet
        self._board_step(step.events, tick)
        if tick.frames:
            self._keep_long(tick.frames)
        tick.errors.extend(f"recording stopped: {reason}" for reason in step.recording_errors)
        now = self.clock()
        if tick.frames:
            self._last_frame_t_s, self._silent_bytes = now, None
        self._frame_times.append((now, tick.frames))
        while self._frame_times and now - self._frame_times[0][0] > 2.0:
            self._frame_times.popleft()
        if now - self._quality_t_s >= QUALITY_EVERY_S and self.session.measures is not None:
            self._quality = self.session.measures.qualities()
            self._quality_t_s = now
        return tick

    def fps(self) -> float:
        """Frames per second over the last two seconds, refreshed once a second (a steady figure)."""
        now = self.clock()
        if now - self._fps_t_s < 1.0:
            return self._fps
        self._fps_t_s = now
        if len(self._frame_times) < 2:
            self._fps = 0.0
        else:
            span = self._frame_times[-1][0] - self._frame_times[0][0]
            frames = sum(n for _, n in list(self._frame_times)[1:])
            self._fps = frames / span if span > 0 else 0.0
        return self._fps

    @property
    def notices(self) -> deque[str]:
        """Things the session wants the user to know (a profile for another width, a board reset)."""
        return self.session.notices

    # -- snapshots --------------------------------------------------------------------------------
    def channel_names(self) -> list[str]:
        return list(self.session.names)

    def _recent(self, what: str, seconds: float) -> np.ndarray:
        """The last `seconds` of one history array (frames x channels), oldest first; copies only that one."""
        m = self.session.measures
        assert m is not None
        h = m.history
        n = min(len(h), max(1, int(seconds * m.rate_hz)))
        start = (h.written - n) % h.capacity
        arr = getattr(h, what)
        if start + n <= h.capacity:
            return arr[start:start + n]
        return np.concatenate((arr[start:], arr[: start + n - h.capacity]))

    def _keep_long(self, frames: int) -> None:
        """Hand the poll's new frames (reading and baseline) to the long history; a board of another
        width starts it again."""
        m, e = self.session.measures, self.session.engine
        if m is None or e is None or len(m.history) == 0:
            return
        h = m.history
        n = min(frames, len(h))
        if self.long_history is None or self.long_history.channels != h.readings.shape[1]:
            self.long_history = LongHistory(h.readings.shape[1])
        start = (h.written - n) % h.capacity
        idx = (start + np.arange(n)) % h.capacity if start + n > h.capacity else slice(start, start + n)
        readings = h.readings[idx]
        pol = np.asarray(getattr(e, "pol", 1))
        baselines = readings - pol * h.deltas[idx]
        self.long_history.append(h.t_s[idx], readings.astype(np.float32), baselines.astype(np.float32))

    def long_view(self, channel: int, window_s: float | None) -> LongView | None:
        """The last `window_s` seconds of `channel` from the long history (None: the whole session)."""
        lh, e = self.long_history, self.session.engine
        if lh is None or len(lh) < 2 or e is None or not 0 <= channel < lh.channels:
            return None
        now = lh.newest_s
        assert now is not None  # two buckets or more
        series = lh.series(channel, None if window_s is None else now - window_s)
        pol = int(e.pol[channel]) if hasattr(e, "pol") else 1
        return LongView(series, now, window_s, lh.span_s, pol, lh.span / self.session.rate_hz)

    def _sparks(self, points: int) -> np.ndarray | None:
        if self.session.measures is None or len(self.session.measures.history) == 0:
            return None
        deltas = self._recent("deltas", SPARK_SECONDS)
        n = len(deltas) - len(deltas) % points if len(deltas) >= points else len(deltas)
        if n < points:
            return deltas.T.astype(np.float64)
        tail = deltas[len(deltas) - n:]
        return tail.reshape(points, n // points, -1).max(axis=1).T.astype(np.float64)

    def quality(self, channel: int) -> ChannelQuality | None:
        """A channel's SNR verdict and what it rests on, as last refreshed (twice a second)."""
        return self._quality[channel] if 0 <= channel < len(self._quality) else None

    def channel_views(self, spark_points: int) -> list[ChannelView]:
        e, p = self.session.engine, self.session.profile
        if e is None or p is None:
            return []
        # Whole columns as lists first, and per-channel work only where a value is per channel: this
        # runs every screen frame for every channel.
        n = e.channels
        readings, deltas = e.readings, e.deltas
        baselines = tdiv_pow2_np(np.asarray(e.baselines_fp, np.int64), FRAC_BITS).tolist()
        states = [_STATE_WORDS.get(st) or st.name.lower() for st in e.states]
        sparks = self._sparks(spark_points)
        spark_rows = [tuple(row) for row in sparks.tolist()] if sparks is not None else [()] * n
        saved = self._automatic()
        saved_settings = saved.settings_for if saved is not None and saved.channels == p.channels else None
        group_of = {m: g.name for g in p.groups for m in g.members}
        s = self.session
        polarity, names = s.polarity, p.names
        quality = self._quality + [None] * (n - len(self._quality))
        out = []
        for c in range(n):
            st = p.settings_for(c)
            q = quality[c]
            noise = q.noise if q else None
            if saved_settings is None:
                edited = False
            else:
                was = saved_settings(c)
                edited = was is not st and was != st
            out.append(ChannelView(
                index=c, name=names[c], reading=int(readings[c]), baseline=baselines[c],
                delta=int(deltas[c]), state=states[c], threshold=st.threshold_counts,
                release=st.release_level_counts,
                noise_pp=noise.pp_counts if noise else None, noise_rms=noise.rms_counts if noise else None,
                snr=_finite(q.snr_pp) if q else None, verdict=q.verdict if q else None,
                spark=spark_rows[c], group=group_of.get(c), edited=edited,
                polarity=polarity[c] if c < len(polarity) else 1, provisional=s.provisional(c),
                phase=s.phase(c),
            ))
        return out

    def group_views(self) -> list[GroupView]:
        p = self.session.profile
        if p is None:
            return []
        names = p.names
        return [GroupView(g.spec.name, tuple(names[m] for m in g.spec.members),
                          None if g.winner is None else names[g.winner]) for g in self.session.groups]

    def slider_views(self) -> list[SliderView]:
        p = self.session.profile
        if p is None:
            return []
        return [SliderView(s.spec.name, tuple(p.names[i] for i in s.spec.pads), s.position,
                           max(1, s.spec.resolution - 1)) for s in self.session.sliders]

    def link_view(self) -> LinkView:
        stats = self.producer.stats
        info = self.session.info
        path = self._path
        return LinkView(
            port=self.port, baud=self.baud, state=str(self.producer.state.value), fps=round(self.fps()),
            frames=stats.frames, lost=stats.lost, garbled=stats.garbled + stats.overlong,
            bad_checksum=stats.bad_checksum, resets=stats.resets, overflow=stats.overflow,
            detail=self._status_detail, board=(info.board if info else None),
            recording=str(self.pipeline.recording_path) if self.pipeline.recording_path else None,
            recording_error=self.pipeline.recording_error,
            profile_name=path.name if path else "(not saved yet)", unsaved=self.unsaved(),
            silent_s=self._silent_s(), silence=self._silence(stats), scale=self._scale,
            twin=self.session.twin.count if self.session.twin.active else None,
        )

    def _silent_s(self) -> int | None:
        """Whole seconds since the last frame (or the opening), once that is 2 s: the link's own rule
        for `silent` (protocol.linkwatch.SILENT_AFTER_S)."""
        gap = self.clock() - self._last_frame_t_s
        return int(gap) if gap >= SILENT_AFTER_S else None

    def _silence(self, stats: LinkStats) -> str:
        """`SILENT` while the link reports no bytes at all, else `NO FRAMES` (bytes, but none read)."""
        if self._silent_bytes is not None and stats.bytes_in > self._silent_bytes:
            self._silent_bytes = None  # bytes again: the board talks, if not in frames
        return "SILENT" if self._silent_bytes is not None else "NO FRAMES"

    def series(self, channel: int) -> Series | None:
        m, e = self.session.measures, self.session.engine
        if m is None or e is None or len(m.history) < 2:
            return None
        t = self._recent("t_s", PLOT_SECONDS)
        reading = self._recent("readings", PLOT_SECONDS)[:, channel]
        delta = self._recent("deltas", PLOT_SECONDS)[:, channel]
        pol = int(e.pol[channel]) if hasattr(e, "pol") else 1
        return Series(t.copy(), reading.astype(np.float64), (reading - pol * delta).astype(np.float64), pol)

    def spectrum(self, channel: int) -> Spectrum | None:
        """The noise spectrum as processing computes it (`Measures.noise_spectrum`: bins, peak, or how
        many untouched frames are collected so far)."""
        m = self.session.measures
        return None if m is None else m.noise_spectrum(channel)

    # -- settings travel --------------------------------------------------------------------------
    def _send(self, data: bytes) -> bool:
        """A command line out through the link's writer thread (`Link.post`) where it has one."""
        post = getattr(self.producer, "post", None)
        sent = post(data) if post is not None else self.producer.write(data)
        return sent is not False

    def _board_step(self, events: list, tick: Tick) -> None:
        sync = self.board_sync.step(events, self.clock())
        tick.board_lines.extend(sync.lines)
        tick.board_refusals.extend(sync.refusals)
        if sync.board is not None:
            self._board_read = sync.board
        read, profile = self._board_read, self.session.profile
        if read is None or profile is None or self.session.engine is None:
            return  # compared once the session has its channels
        self._board_read = None
        self.board_values = read
        if len(read) != profile.channels:
            tick.board_lines.append(f"✗ the board sent settings for {len(read)} channels; the session has "
                                    f"{profile.channels}: nothing taken")
            return
        found = self.board_differences()
        if not found:
            self.board_sync.mark_board_values(read)
            tick.board_lines.append("✓ the board holds the session's settings")
        elif not self._profile_given and not self.unsaved():
            # No profile loaded and no edits of the user's: what the board runs is the starting point,
            # not a guess of ours. (Unsaved edits are never replaced silently: the dialog asks.)
            self.take_board_settings()
            self._saved = self.session.profile
            tick.board_lines.append(f"⇄ took the board's settings ({len(found)} differed from the defaults; "
                                    "no profile loaded)")
        else:
            self.board_sync.mark_board_values(read, [(d.channel, d.key) for d in found])
            tick.board_diff = found

    def board_differences(self) -> list[Difference]:
        """Where the board's settings (as last read) and the session's differ, one line each."""
        profile = self.session.profile
        if profile is None or self.board_values is None:
            return []
        values = self.board_values
        # A channel still learning its polarity has none to compare: the board's stands.
        stated = tuple(p if p is not None else (values[c].polarity if c in values else 1)
                       for c, p in ((c, self.polarity(c)) for c in range(profile.channels)))
        return differences(replace(profile, polarity=stated), values)

    def board_status(self, channel: int) -> tuple[tuple[str, str], ...]:
        """(setting, applied / refused / sending / no answer) of what the board was sent for `channel`."""
        return self.board_sync.channel_status(channel)

    def take_board_settings(self) -> None:
        """The session takes the settings the board holds (nothing is sent: the board has them)."""
        values = self.board_values
        if values is None:
            return
        with self.board_sync.quietly():
            for c, held in sorted(values.items()):
                if c >= len(self.session.names):
                    continue
                if self.session.settings(c) != held.settings:
                    self.session.set_channel_settings(c, held.settings)
                if self.polarity(c) != held.polarity:
                    self.session.set_polarity(c, held.polarity)
        self.board_sync.mark_board_values(values)

    def send_profile_settings(self) -> None:
        """Send the session's settings (the profile's, with its edits) to the board, every channel."""
        n = len(self.session.names)
        self.board_sync.send_all([self.session.settings(c) for c in range(n)],
                                 [self.polarity(c) for c in range(n)])

    # -- settings ---------------------------------------------------------------------------------
    def settings(self, channel: int) -> ChannelSettings:
        return self.session.settings(channel)

    def apply(self, channel: int, settings: ChannelSettings) -> None:
        old = self.session.settings(channel)
        self.session.set_channel_settings(channel, settings)
        self.board_sync.settings_changed(channel, old, settings)

    def polarity(self, channel: int) -> int | None:
        """+1 (counts rise on touch), -1 (fall), or None while the channel learns it."""
        pol = self.session.polarity
        return pol[channel] if 0 <= channel < len(pol) else None

    def set_polarity(self, channel: int, sign: int | None) -> None:
        """Set a channel's direction (None: learn it again from its next touch); ValueError if refused."""
        self.session.set_polarity(channel, sign)
        self.board_sync.polarity_changed(channel, sign)

    def measured(self, channel: int) -> bool:
        """False when the profile marks the channel's settings `measured = false`."""
        return self.session.measured(channel)

    def set_measured(self, channel: int, measured: bool) -> None:
        self.session.set_measured(channel, measured)

    def measured_base(self) -> Profile | None:
        """The profile a key not measured by a guided capture keeps its claim from
        (`processing.tuning.keeps_claim`): the session's, when a profile file backs it (loaded or saved);
        None when the settings came from no file (the board's, defaults, a first guess)."""
        return self.session.profile if self._path is not None else None

    def unmeasured_news(self) -> list[str]:
        """Names of the keys the profile would be saved with marked `measured = false` that the file it
        came from (or the last save) did not mark: what a save asks about first."""
        current, saved = self.session.profile, self._saved
        if current is None:
            return []
        before = saved.unmeasured_channels if saved is not None and self._path is not None else frozenset()
        return [current.names[c] for c in current.unmeasured() if c not in before and c < current.channels]

    def first_contact(self, channel: int) -> tuple[bool, str]:
        """(provisional, phase) of a channel: see `processing.session.ChannelRow`."""
        return self.session.provisional(channel), self.session.phase(channel)

    def group_of(self, channel: int) -> Sequence[int]:
        p = self.session.profile
        for g in p.groups if p else ():
            if channel in g.members:
                return list(g.members)
        return [channel]

    def rebaseline(self, channel: int | None) -> None:
        self.session.rebaseline(channel)

    # -- the simulated board ----------------------------------------------------------------------
    def can_press(self) -> bool:
        return self.simulated

    def press(self, channel: int, pressed: bool) -> bool:
        """Send `+NAME` / `-NAME` to the board; False when the link could not send it now."""
        name = self.channel_names()[channel]
        sent = self.producer.write(f"{'+' if pressed else '-'}{name}\n".encode("ascii", "replace"))
        return sent is not False

    def keep_still(self, still: bool) -> bool:
        """Ask a simulated board to pause (or resume) its scripted touches; False when not sent."""
        if not self.simulated:
            return False
        return self.producer.write(b"script off\n" if still else b"script on\n") is not False

    # -- profile ----------------------------------------------------------------------------------
    def profile_path(self) -> Path | None:
        return self._path

    def unsaved(self) -> bool:
        """Edits the user made since the profile was loaded or saved; what the session did by itself
        (the board's names and polarity, provisional settings, a learned polarity) does not count."""
        current = self.session.profile
        return current is not None and self._saved is not None and current != self._automatic()

    def _automatic(self) -> Profile | None:
        """The saved profile with what the session did by itself applied (`Session.automatic`), worked
        out once per poll and profile: it copies the profile, and a screen frame asks twice."""
        saved, current = self._saved, self.session.profile
        if saved is None:
            return None
        kept = self._automatic_kept
        if kept is not None and kept[0] == self._polls and kept[1] is current and kept[2] is saved:
            return kept[3]
        out = self.session.automatic(saved)
        self._automatic_kept = (self._polls, current, saved, out)
        return out

    def save(self, path: Path | None = None) -> Path:
        job = self.save_job(path)
        job.write()
        job.done()
        return job.path

    def save_job(self, path: Path | None = None) -> FileJob:
        """The profile as it is now, to write to `path` (default: where it came from) off the UI thread."""
        target = path or self._path
        profile = self.session.profile
        if target is None:
            raise UserError("no file name for the profile yet: use save as")
        if profile is None:
            raise UserError("nothing to save yet: the board has not sent any frames")

        def done() -> None:
            self._path, self._saved = target, profile

        return FileJob("profile", target, lambda: save_profile(profile, target), done)

    def load(self, path: Path) -> None:
        profile = load_profile(path)
        self.session.apply_profile(profile)
        self._path, self._saved = path, self.session.profile
        self._profile_given = True
        if self.board_sync.active:
            self.board_sync.read()  # a new profile: compare it with what the board holds

    def export(self, path: Path) -> Path:
        self.export_job(path).write()
        return path

    def export_job(self, path: Path) -> FileJob:
        """The profile as it is now, as a C header (`.h`) or JSON (`.json`), to write off the UI thread."""
        from processing import export

        profile = self.session.profile
        if profile is None:
            raise UserError("nothing to export yet: the board has not sent any frames")
        suffix = path.suffix.lower()
        if suffix not in (".json", ".h", ".hpp"):
            raise UserError(f"{path.name}: end the name in .h for a C header or .json for JSON")
        writer = export.export_json if suffix == ".json" else export.export_c_header
        source = self._source_name()
        return FileJob("firmware export", path, lambda: writer(profile, path, source=source))

    def _source_name(self) -> str:
        return str(self._path) if self._path and not self.unsaved() else ""

    # -- recording --------------------------------------------------------------------------------
    def start_recording(self, path: Path) -> None:
        """Open a recording (UserError at once: a bad name, an existing file, a full disk)."""
        self.pipeline.start_recording(path)

    def stop_recording(self) -> Path | None:
        """Stop the recording and return its path at once: its writer thread finishes the file. A failure
        to write the last rows comes in a later tick's `errors` (and `LinkView.recording_error`); one
        already known raises UserError here."""
        return self.pipeline.stop_recording()

    def mark(self, kind: str = "note", channel: str | None = None, text: str = "",
             t_s: float | None = None) -> bool:
        """Write a mark (`processing.recording.MARK_KINDS`) at `t_s` (default now) into the recording.

        False when nothing is being recorded. A failed write stops the recording and is reported in
        a later tick's `errors`, like a failure while frames are written: callers never see it raise.
        A mark kind that does not exist is a programming error and raises UserError.
        """
        return self.pipeline.mark(self.clock() if t_s is None else t_s, kind, channel, text) is not None

    def close(self) -> None:
        """Stop the recording at exit and wait (a few seconds at most) for its file to be finished. A
        failure is kept in `exit_problems` (the screen is closing: `tui.live.run_live` prints them once
        it is gone)."""
        try:
            self.pipeline.close_recording()
        except UserError as exc:
            self.exit_problems.append(str(exc))


def _finite(value: float | None) -> float | None:
    if value is None:
        return None
    return float(value) if math.isfinite(value) else 999.0

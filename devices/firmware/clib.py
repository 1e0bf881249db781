"""The C firmware library from Python: built with the system C compiler on first use, called through ctypes.

`FirmwareDetector` is one board's library instance (detector, exclusive groups, sliders: the same calls a
board's main loop makes, `pt_detect_frame` then `pt_groups_frame` then `pt_sliders_frame`, frame by
frame) over blocks of readings. It knows nothing of `processing` (devices may not import it): settings
are any objects with the profile's setting attributes, events come back as `RawEvent` tuples, and
front ends map them (`tui/firmware_engine.py`).

Building: `library_path()` compiles `pt_*.c` and the host glue `binding/pt_batch.c` with `$CC` (default
`cc`) into a per-user cache (`$PADTUNE_CACHE_DIR`, else `$XDG_CACHE_HOME/padtune`, else
`~/.cache/padtune`), named by a hash of the sources, the compiler and the flags, so an edited source or
another compiler builds anew and an unchanged one is reused. It compiles to a temporary name in the same
directory and renames it into place, so processes building at once never load a half-written library.
No compiler, or one that fails, raises `FirmwareUnavailable` (a one-line `UserError`).
"""

from __future__ import annotations

import ctypes
import hashlib
import os
import shlex
import shutil
import subprocess
import tempfile
from collections.abc import Sequence
from functools import cache
from pathlib import Path
from typing import Any, NamedTuple

import numpy as np

from protocol.errors import UserError

HERE = Path(__file__).resolve().parent
LIBRARY_SOURCES = ("pt_detect.c", "pt_groups.c")  # the detector's part of the firmware library
GLUE_SOURCE = "binding/pt_batch.c"
HEADERS = ("pt_types.h", "pt_detect.h", "pt_groups.h")
CFLAGS = ("-std=c99", "-O2", "-fPIC", "-shared", "-Wall", "-Wextra", "-Werror", "-pedantic")
INSTALL_HINT = "install one (Debian/Ubuntu: apt-get install gcc) or point CC at it"

# The profile's setting keys, in pt_settings_t's field names (processing.settings.SETTING_KEYS).
SETTING_KEYS = ("threshold_counts", "hysteresis_counts", "touch_debounce_frames",
                "release_debounce_frames", "baseline_slow_shift", "baseline_fast_shift",
                "baseline_period_frames", "stuck_timeout_frames")
INT32_MIN, INT32_MAX = -(1 << 31), (1 << 31) - 1
NONE = 0xFFFF  # PT_NONE

# enum pt_event_kind
TOUCH, RELEASE, STUCK, REBASELINED, GROUP, SLIDER = 1, 2, 3, 4, 5, 6


class FirmwareUnavailable(UserError):
    """The C library cannot be built here (no compiler, or it failed). The message is one line."""


# ------------------------------------------------------------------ the C structs, mirrored
class PtSettings(ctypes.Structure):
    _fields_ = [("threshold_counts", ctypes.c_int32), ("hysteresis_counts", ctypes.c_int32),
                ("stuck_timeout_frames", ctypes.c_int32), ("baseline_period_frames", ctypes.c_uint16),
                ("touch_debounce_frames", ctypes.c_uint8), ("release_debounce_frames", ctypes.c_uint8),
                ("baseline_slow_shift", ctypes.c_uint8), ("baseline_fast_shift", ctypes.c_uint8),
                ("polarity", ctypes.c_int8)]


class PtChan(ctypes.Structure):
    _fields_ = [("base_lo", ctypes.c_uint32), ("acc_lo", ctypes.c_uint32), ("held", ctypes.c_uint32),
                ("delta_mag", ctypes.c_uint32), ("base_hi", ctypes.c_uint8), ("acc_hi", ctypes.c_uint8),
                ("count", ctypes.c_uint8), ("flags", ctypes.c_uint8)]


class PtEvent(ctypes.Structure):
    _fields_ = [("delta_counts", ctypes.c_int64), ("held_frames", ctypes.c_uint32),
                ("value", ctypes.c_uint32), ("source", ctypes.c_uint16), ("kind", ctypes.c_uint8)]


class PtDetector(ctypes.Structure):
    _fields_ = [("settings", ctypes.POINTER(PtSettings)), ("chans", ctypes.POINTER(PtChan)),
                ("frame", ctypes.c_uint32), ("channels", ctypes.c_uint16)]


class PtGroup(ctypes.Structure):
    _fields_ = [("members", ctypes.POINTER(ctypes.c_uint16)), ("count", ctypes.c_uint16),
                ("switch_margin_counts", ctypes.c_int32)]


class PtSlider(ctypes.Structure):
    _fields_ = [("pads", ctypes.POINTER(ctypes.c_uint16)), ("count", ctypes.c_uint16),
                ("resolution", ctypes.c_uint16), ("wheel", ctypes.c_uint8)]


class PtGroupState(ctypes.Structure):
    _fields_ = [("winner", ctypes.c_uint16)]


class PtSliderState(ctypes.Structure):
    _fields_ = [("position", ctypes.c_uint16), ("touched", ctypes.c_uint8)]


class PtBatch(ctypes.Structure):
    _fields_ = [("det", PtDetector), ("groups", ctypes.POINTER(PtGroup)),
                ("group_state", ctypes.POINTER(PtGroupState)), ("sliders", ctypes.POINTER(PtSlider)),
                ("slider_state", ctypes.POINTER(PtSliderState)), ("group_count", ctypes.c_uint16),
                ("slider_count", ctypes.c_uint16)]


MIRRORED = (PtSettings, PtChan, PtEvent, PtDetector, PtGroup, PtSlider, PtGroupState, PtSliderState, PtBatch)
# pt_event_t as numpy sees it: events come back as one array, read in one go.
EVENT_DTYPE = np.dtype({"names": ["delta", "held", "value", "source", "kind"],
                        "formats": ["<i8", "<u4", "<u4", "<u2", "u1"],
                        "offsets": [PtEvent.delta_counts.offset, PtEvent.held_frames.offset,
                                    PtEvent.value.offset, PtEvent.source.offset, PtEvent.kind.offset],
                        "itemsize": ctypes.sizeof(PtEvent)})


# ------------------------------------------------------------------ building and loading
def compiler() -> list[str]:
    """The C compiler command: `$CC` (may carry flags), else `cc`."""
    return shlex.split(os.environ.get("CC") or "cc") or ["cc"]


def cache_dir() -> Path:
    root = os.environ.get("PADTUNE_CACHE_DIR")
    if root:
        return Path(root) / "firmware"
    xdg = os.environ.get("XDG_CACHE_HOME") or str(Path.home() / ".cache")
    return Path(xdg) / "padtune" / "firmware"


def _fingerprint(cc: list[str], flags: Sequence[str]) -> str:
    digest = hashlib.sha256()
    for name in (*LIBRARY_SOURCES, GLUE_SOURCE, *HEADERS):
        digest.update(name.encode() + b"\0" + (HERE / name).read_bytes() + b"\0")
    digest.update("\0".join([*cc, *flags]).encode())
    return digest.hexdigest()[:16]


def library_path(flags: Sequence[str] = CFLAGS) -> Path:
    """The shared library, built now unless the cache holds one built from these very sources."""
    cc = compiler()
    if shutil.which(cc[0]) is None:
        raise FirmwareUnavailable(f"the firmware engine needs a C compiler and '{cc[0]}' was not found: "
                                  f"{INSTALL_HINT}")
    out_dir = cache_dir()
    target = out_dir / f"libpadtune_fw-{_fingerprint(cc, flags)}.so"
    if target.exists():
        return target
    try:
        out_dir.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(prefix=".building-", suffix=".so", dir=out_dir)
        os.close(fd)
    except OSError as exc:
        why = exc.strerror or str(exc)
        raise FirmwareUnavailable(f"cannot write the firmware library's build cache {out_dir}: {why} "
                                  "(set PADTUNE_CACHE_DIR to a writable folder)") from exc
    sources = [str(HERE / s) for s in (*LIBRARY_SOURCES, GLUE_SOURCE)]
    try:
        done = subprocess.run([*cc, *flags, "-o", tmp, *sources], capture_output=True, text=True,
                              check=False, timeout=300)
        if done.returncode != 0:
            first = next((ln for ln in done.stderr.splitlines() if ln.strip()), f"exit {done.returncode}")
            raise FirmwareUnavailable(f"'{cc[0]}' could not build the firmware library: {first.strip()}")
        os.replace(tmp, target)  # atomic: a concurrent build of the same sources replaces it with its twin
    except OSError as exc:
        raise FirmwareUnavailable(f"'{cc[0]}' could not be run to build the firmware library: "
                                  f"{exc.strerror or exc}") from exc
    finally:
        if os.path.exists(tmp):
            os.unlink(tmp)
    return target


@cache
def _load(path: str) -> ctypes.CDLL:
    lib = ctypes.CDLL(path)
    sizes = (ctypes.c_uint32 * len(MIRRORED))()
    lib.pt_batch_sizes(sizes)
    for struct, size in zip(MIRRORED, sizes, strict=True):
        if ctypes.sizeof(struct) != size:
            raise FirmwareUnavailable(f"the firmware library's {struct.__name__} is {size} bytes, the "
                                      f"binding expects {ctypes.sizeof(struct)}: devices/firmware/clib.py "
                                      "is out of date")
    p = ctypes.POINTER
    lib.pt_detect_init.argtypes = [p(PtDetector), p(PtSettings), p(PtChan), ctypes.c_uint16]
    lib.pt_detect_init.restype = None
    lib.pt_detect_rebaseline.argtypes = [p(PtDetector), ctypes.c_uint16]
    lib.pt_detect_rebaseline.restype = None
    lib.pt_detect_settings_changed.argtypes = [p(PtDetector), ctypes.c_uint16]
    lib.pt_detect_settings_changed.restype = None
    lib.pt_detect_baseline_fp.argtypes = [p(PtDetector), ctypes.c_uint16]
    lib.pt_detect_baseline_fp.restype = ctypes.c_int64
    lib.pt_detect_delta.argtypes = [p(PtDetector), ctypes.c_uint16]
    lib.pt_detect_delta.restype = ctypes.c_int64
    lib.pt_detect_state.argtypes = [p(PtDetector), ctypes.c_uint16]
    lib.pt_detect_state.restype = ctypes.c_uint8
    lib.pt_settings_problem.argtypes = [p(PtSettings)]
    lib.pt_settings_problem.restype = ctypes.c_int
    lib.pt_groups_init.argtypes = [p(PtGroupState), ctypes.c_uint16]
    lib.pt_groups_init.restype = None
    lib.pt_sliders_init.argtypes = [p(PtSliderState), ctypes.c_uint16]
    lib.pt_sliders_init.restype = None
    vp = ctypes.c_void_p
    lib.pt_batch_run.argtypes = [p(PtBatch), vp, ctypes.c_uint32, vp, vp, vp, vp, ctypes.c_uint32,
                                 p(ctypes.c_uint32)]
    lib.pt_batch_run.restype = ctypes.c_uint32
    return lib


def load() -> ctypes.CDLL:
    """The built library, loaded once per process (raises FirmwareUnavailable)."""
    return _load(str(library_path()))


def check_available() -> None:
    """Build and load the library now, so a front end can refuse at once (raises FirmwareUnavailable)."""
    load()


# ------------------------------------------------------------------ one board's library instance
class RawEvent(NamedTuple):
    """One event as the library reports it. `row` is the frame's row in the block handed to `run`.
    kind TOUCH/RELEASE/STUCK/REBASELINED: `source` is the channel; GROUP: group index, `value` the
    winning channel or None; SLIDER: slider index, `value` the position or None (untouched);
    REBASELINED: `value` 1 when the key was touched."""

    row: int
    kind: int
    source: int
    delta_counts: int
    held_frames: int
    value: int | None


class Settings(NamedTuple):
    """One channel's settings for code that may not import `processing` (simulated boards): the profile's
    keys with `processing.settings.ChannelSettings`'s defaults (a test keeps the two equal)."""

    threshold_counts: int = 100
    hysteresis_counts: int = 15
    touch_debounce_frames: int = 3
    release_debounce_frames: int = 3
    baseline_slow_shift: int = 6
    baseline_fast_shift: int = 2
    baseline_period_frames: int = 16
    stuck_timeout_frames: int = 0


def settings_struct(s: Any, polarity: int) -> PtSettings:
    """`s` is anything with the profile's setting attributes (`Settings`, processing's ChannelSettings)."""
    out = PtSettings(polarity=int(polarity))
    for key in SETTING_KEYS:
        setattr(out, key, int(getattr(s, key)))
    return out


class FirmwareDetector:
    """The library's detector, groups and sliders for one board, in C memory this object owns.

    `groups`: (members, switch_margin_counts) per group; `sliders`: (pads, wheel, resolution) per slider.
    Settings are checked by the library's own `pt_settings_problem` (ValueError naming the key)."""

    EVENT_CAPACITY = 4096

    def __init__(self, settings: Sequence[Any], polarity: Sequence[int],
                 groups: Sequence[tuple[Sequence[int], int]] = (),
                 sliders: Sequence[tuple[Sequence[int], bool, int]] = ()) -> None:
        channels = len(settings)
        if not 1 <= channels <= 1024 or len(polarity) != channels:
            raise ValueError(f"need 1 to 1024 channels with one polarity each, got {channels} and "
                             f"{len(polarity)}")
        self.lib = load()
        self.channels = channels
        self._settings = (PtSettings * channels)(*(settings_struct(s, p) for s, p in zip(settings, polarity,
                                                                                          strict=True)))
        for c in range(channels):
            self._check(c)
        self._chans = (PtChan * channels)()
        self._keep: list[object] = []  # member and pad arrays the C structs point into
        self._groups = (PtGroup * max(1, len(groups)))(*(self._group(m, margin) for m, margin in groups))
        self._sliders = (PtSlider * max(1, len(sliders)))(*(self._slider(p, w, r) for p, w, r in sliders))
        self._gstate = (PtGroupState * max(1, len(groups)))()
        self._sstate = (PtSliderState * max(1, len(sliders)))()
        self._batch = PtBatch(groups=self._groups, group_state=self._gstate, sliders=self._sliders,
                              slider_state=self._sstate, group_count=len(groups), slider_count=len(sliders))
        self._det = ctypes.pointer(self._batch.det)
        self.lib.pt_detect_init(self._det, self._settings, self._chans, channels)
        self.lib.pt_groups_init(self._gstate, len(groups))
        self.lib.pt_sliders_init(self._sstate, len(sliders))
        cap = max(self.EVENT_CAPACITY, channels + len(groups) + len(sliders))
        self._events = np.zeros(cap, EVENT_DTYPE)
        self._rows = np.zeros(cap, np.uint32)
        self._count = ctypes.c_uint32(0)
        self.frames = 0  # frames processed (the library's own counter wraps at 2^32)
        self.last_deltas = np.zeros((0, channels), np.int64)
        self.last_states = np.zeros((0, channels), np.int8)

    def _group(self, members: Sequence[int], margin: int) -> PtGroup:
        arr = (ctypes.c_uint16 * len(members))(*members)
        self._keep.append(arr)
        return PtGroup(members=arr, count=len(members), switch_margin_counts=int(margin))

    def _slider(self, pads: Sequence[int], wheel: bool, resolution: int) -> PtSlider:
        arr = (ctypes.c_uint16 * len(pads))(*pads)
        self._keep.append(arr)
        return PtSlider(pads=arr, count=len(pads), resolution=int(resolution), wheel=int(bool(wheel)))

    def _check(self, channel: int) -> None:
        problem = self.lib.pt_settings_problem(ctypes.byref(self._settings[channel]))
        if problem:
            key = (*SETTING_KEYS, "polarity")[problem - 1]  # enum pt_setting_key, in this order
            raise ValueError(f"channel {channel}: {key} refused by the firmware library")

    def run(self, readings: np.ndarray) -> list[RawEvent]:
        """Process frames (an (n, channels) integer array, each reading within int32); returns the events
        in the library's order (per frame: channels, groups, sliders). Fills `last_deltas`/`last_states`."""
        r = np.asarray(readings)
        if r.ndim != 2 or r.shape[1] != self.channels:
            raise ValueError(f"readings must be (frames, {self.channels}), not {r.shape}")
        if r.size and (int(r.min()) < INT32_MIN or int(r.max()) > INT32_MAX):
            raise ValueError("a reading does not fit in 32 bits: the firmware library takes int32 readings")
        r32 = np.ascontiguousarray(r, np.int32)
        n = len(r32)
        deltas = np.empty((n, self.channels), np.int64)
        states = np.empty((n, self.channels), np.int8)
        out: list[RawEvent] = []
        done = 0
        row_bytes = self.channels
        while done < n:
            self._count.value = 0
            took = self.lib.pt_batch_run(
                ctypes.byref(self._batch), r32.ctypes.data + done * row_bytes * 4, n - done,
                deltas.ctypes.data + done * row_bytes * 8, states.ctypes.data + done * row_bytes,
                self._events.ctypes.data, self._rows.ctypes.data, len(self._events),
                ctypes.byref(self._count))
            out.extend(self._decode(self._count.value, done))
            done += took
        self.frames += n
        self.last_deltas, self.last_states = deltas, states
        return out

    def _decode(self, count: int, row0: int) -> list[RawEvent]:
        ev = self._events[:count]
        out = []
        for row, kind, source, delta, held, value in zip(
                self._rows[:count].tolist(), ev["kind"].tolist(), ev["source"].tolist(), ev["delta"].tolist(),
                ev["held"].tolist(), ev["value"].tolist(), strict=True):
            if kind in (GROUP, SLIDER):
                value = None if value == NONE else value
            out.append(RawEvent(row0 + row, kind, source, delta, held, value))
        return out

    def rebaseline(self, channel: int | None = None) -> None:
        self.lib.pt_detect_rebaseline(self._det, NONE if channel is None else channel)

    def set_settings(self, channel: int, s: Any) -> None:
        """Change a channel's settings live, as a board applying `set` does (its baseline period restarts)."""
        old = self._settings[channel]
        new = settings_struct(s, old.polarity)
        saved = PtSettings.from_buffer_copy(old)
        self._settings[channel] = new
        try:
            self._check(channel)
        except ValueError:
            self._settings[channel] = saved
            raise
        self.lib.pt_detect_settings_changed(self._det, channel)

    def set_polarity(self, channel: int, polarity: int) -> None:
        """Turn a channel's direction around (or confirm it): it re-baselines on its next frame."""
        if polarity not in (1, -1):
            raise ValueError(f"polarity must be +1 or -1, not {polarity!r}")
        self._settings[channel].polarity = polarity
        self.lib.pt_detect_settings_changed(self._det, channel)
        self.lib.pt_detect_rebaseline(self._det, channel)

    @property
    def polarity(self) -> list[int]:
        return [int(self._settings[c].polarity) for c in range(self.channels)]

    @property
    def baselines_fp(self) -> list[int]:
        return [int(self.lib.pt_detect_baseline_fp(self._det, c)) for c in range(self.channels)]

    @property
    def deltas(self) -> list[int]:
        """Every channel's delta at the last frame processed (0 before the first)."""
        return [int(self.lib.pt_detect_delta(self._det, c)) for c in range(self.channels)]

    @property
    def states(self) -> list[int]:
        """Every channel's state (enum pt_key_state, padtune's KeyState values) after the last frame."""
        return [int(self.lib.pt_detect_state(self._det, c)) for c in range(self.channels)]

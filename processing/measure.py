"""What is measured for the engineer (floats): noise, touch signal, SNR, verdict, spectrum, history.

Definitions (also in ALGORITHM.md, "Measures"):
- noise RMS: population standard deviation (numpy.std, mean removed) of the delta over the last
  `window_s` seconds of frames in which every key was released and clear of touch activity by
  `settle_s` on both sides (since the channel's last re-baseline: a neighbour's touch moves a released
  key by crosstalk, which is not its noise); noise pp: max - min over the same frames.
- touch signal: median delta of the frames in state touched (the last `touched_frames` of them); the
  verdict says what it rests on (`ChannelQuality.basis`: touches, touched frames, noise frames).
- SNR pp = signal / noise pp; SNR RMS = signal / noise RMS. The verdict uses the pp form.
Memory is bounded: every buffer is a fixed-size ring allocated once.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

from processing.detections import KeyState

SNR_DEFINITION = ("SNR = touch signal / noise. Touch signal: median delta while touched. Noise: peak-to-peak "
                  "(pp form) or RMS (standard deviation, RMS form) of the delta over the last {window_s:g} s "
                  "of released frames at least {settle_s:g} s clear of a touch.")
MIN_NOISE_SAMPLES = 8
MIN_SPECTRUM_SAMPLES = 16
MAINS_HZ = (50.0, 60.0)
# Settle guard: released frames this close to touch activity (before the state left released, after it
# came back) are not noise. A finger landing or lifting moves the delta for some tens of ms on either side
# of the threshold crossing (common practice, no source; from memory), and the release debounce adds a few
# frames; 0.1 s covers that with margin at any frame rate while costing a 2 s window only 0.2 s per touch.
SETTLE_S = 0.1


class History:
    """Ring buffer of the last `capacity` frames of every channel (reading, delta, state, host time)."""

    def __init__(self, channels: int, capacity: int) -> None:
        self.channels, self.capacity = channels, max(1, capacity)
        self.t_s = np.zeros(self.capacity, np.float64)
        self.readings = np.zeros((self.capacity, channels), np.int64)
        self.deltas = np.zeros((self.capacity, channels), np.int64)
        self.states = np.zeros((self.capacity, channels), np.int8)
        self.written = 0  # frames ever appended (the write position is written % capacity)

    def __len__(self) -> int:
        return min(self.written, self.capacity)

    def append(self, t_s: np.ndarray, readings: np.ndarray, deltas: np.ndarray, states: np.ndarray) -> None:
        n = len(t_s)
        if n > self.capacity:  # only the newest rows can survive
            t_s, readings, deltas, states = t_s[-self.capacity:], readings[-self.capacity:], \
                deltas[-self.capacity:], states[-self.capacity:]
            self.written += n - self.capacity
            n = self.capacity
        pos = self.written % self.capacity
        first = min(n, self.capacity - pos)
        pairs = ((self.t_s, t_s), (self.readings, readings), (self.deltas, deltas), (self.states, states))
        for dst, src in pairs:
            dst[pos:pos + first] = src[:first]
            if first < n:  # the block runs past the ring's end: the rest goes to its start
                dst[:n - first] = src[first:]
        self.written += n

    def last(self, n: int) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """Copies of the newest `n` frames (fewer if not yet written), oldest first: t_s, readings, deltas,
        states."""
        n = min(n, len(self))
        end = self.written % self.capacity or (self.capacity if self.written else 0)
        if n <= end:  # one contiguous slice (copied: the ring is overwritten as frames arrive)
            sl = slice(end - n, end)
            return tuple(a[sl].copy() for a in (self.t_s, self.readings, self.deltas, self.states))
        idx = (np.arange(self.written - n, self.written)) % self.capacity
        return self.t_s[idx], self.readings[idx], self.deltas[idx], self.states[idx]

    def column(self, channel: int, n: int) -> tuple[np.ndarray, np.ndarray]:
        """Deltas and states of one channel over the newest `n` frames, oldest first (no full-row copy)."""
        n = min(n, len(self))
        idx = (np.arange(self.written - n, self.written)) % self.capacity
        return self.deltas[idx, channel], self.states[idx, channel]


@dataclass(frozen=True, slots=True)
class NoiseStats:
    rms_counts: float
    pp_counts: float
    samples: int


@dataclass(frozen=True, slots=True)
class VerdictBounds:
    """SNR (pp form) bounds of the verdict.

    Common practice, no source: below 5 is not reliable, 5-10 marginal, above 10 robust.
    """

    weak_below: float = 5.0
    solid_above: float = 10.0
    # The live verdict's hysteresis (`held`; ALGORITHM.md, Measures): a shown verdict gives way only to
    # an SNR past the bound by `margin` of it, found at every judgement for `hold_s`.
    margin: float = 0.15
    hold_s: float = 3.0

    def describe(self) -> str:
        """The verdict rule in one line, for help screens and reports."""
        lo, hi = f"{self.weak_below:g}", f"{self.solid_above:g}"
        return (f"verdict from SNR pp: below {lo} weak, {lo}-{hi} marginal, above {hi} solid "
                "(common practice, no source)")

    def verdict(self, snr_pp: float | None) -> str:
        if snr_pp is None:
            return "unmeasured"
        if snr_pp < self.weak_below:
            return "weak"
        return "marginal" if snr_pp <= self.solid_above else "solid"

    def held(self, snr_pp: float | None, shown: str | None) -> str:
        """The verdict with `shown` (the one on screen) held against an SNR near a bound: a move down
        needs the SNR below the bound less `margin` of it, a move up above the bound plus `margin`
        (with the default 15 %: solid stays solid down to 8.5, marginal becomes solid above 11.5)."""
        new = self.verdict(snr_pp)
        if new == shown or shown not in _RANK or new not in _RANK:
            return new
        factor = 1.0 - self.margin if _RANK[new] < _RANK[shown] else 1.0 + self.margin
        return VerdictBounds(self.weak_below * factor, self.solid_above * factor).verdict(snr_pp)


_RANK = {"weak": 0, "marginal": 1, "solid": 2}  # the verdicts `held` holds (not "unmeasured")


@dataclass(frozen=True, slots=True)
class ChannelQuality:
    noise: NoiseStats | None
    signal_counts: float | None
    snr_pp: float | None
    snr_rms: float | None
    verdict: str
    touches: int = 0  # touches the signal rests on (since its last clear)
    touched_frames: int = 0  # touched frames the signal's median is taken of
    held: bool = False  # the verdict is held (hysteresis) although the SNR alone would give another

    def basis(self) -> str:
        """What the verdict rests on: "3 touches (412 frames), noise of 120 frames"."""
        return rests_on(self.touches, self.touched_frames, self.noise.samples if self.noise else 0)


def rests_on(touches: int, touched_frames: int, noise_frames: int) -> str:
    """What an SNR verdict rests on, in words: touches and touched frames, untouched frames."""
    return (f"{touches} touch{'' if touches == 1 else 'es'} ({touched_frames} frames), "
            f"noise of {noise_frames} frames")


@dataclass(frozen=True, slots=True)
class SpectrumPeak:
    freq_hz: float
    amplitude_counts: float  # amplitude of the sine that would give this peak
    samples: int
    mains_hz: float | None  # the mains frequency this peak is an alias of, if any
    harmonic: int | None  # 1 = the mains fundamental, 2 = second harmonic, ...
    alias_hz: float | None
    near_dc: bool = False  # in the lowest bins, where drift and a slow baseline walk land
    prominence: float = math.inf  # the peak bin over the median bin: a tone stands out, white noise does not

    @property
    def distinct(self) -> bool:
        return self.prominence >= TONE_PROMINENCE

    def describe(self) -> str:
        if not self.distinct:
            return (f"no distinct tone: broadband noise (peak at {self.freq_hz:.1f} Hz only "
                    f"{self.prominence:.1f}x the median)")
        if self.near_dc:
            return (f"strongest noise at {self.freq_hz:.1f} Hz: slow drift near DC (mains aliases here "
                    "only when the frame rate divides it, and then cannot be told apart)")
        if self.mains_hz is None:
            return f"strongest noise at {self.freq_hz:.1f} Hz, not a mains alias"
        which = "mains" if self.harmonic == 1 else f"mains harmonic {self.harmonic}"
        tone_hz = self.mains_hz * (self.harmonic or 1)
        return (f"strongest noise at {self.freq_hz:.1f} Hz: alias of {tone_hz:g} Hz "
                f"({which}, {self.mains_hz:g} Hz)")

    def brief(self) -> str:
        """`describe()` in a few words, for narrow screens."""
        if not self.distinct:
            return f"broadband, no tone ({self.freq_hz:.1f} Hz)"
        if self.near_dc:
            return f"slow drift near DC ({self.freq_hz:.1f} Hz)"
        if self.mains_hz is None:
            return f"tone at {self.freq_hz:.1f} Hz, not mains"
        return f"{self.freq_hz:.1f} Hz: alias of {self.mains_hz * (self.harmonic or 1):g} Hz mains"


NEAR_DC_BINS = 2  # FFT bins above DC that count as drift rather than a tone
# A peak this many times the median bin is a tone; white noise of a 2 s window rarely reaches it
# (common practice, no source: the exact factor is a judgement, 4-6 is usual for a glance at a spectrum).
TONE_PROMINENCE = 5.0


def alias_hz(f_hz: float, fs_hz: float) -> float:
    """Where a tone at f_hz shows after sampling at fs_hz: |f - round(f/fs)*fs| (round half up)."""
    return abs(f_hz - math.floor(f_hz / fs_hz + 0.5) * fs_hz)


def explain_peak(freq_hz: float, fs_hz: float, tolerance_hz: float, harmonics: int = 5,
                 mains: tuple[float, ...] = MAINS_HZ) -> tuple[float, int, float] | None:
    """(mains_hz, harmonic, alias_hz) of the first mains harmonic whose alias lies within tolerance."""
    for k in range(1, harmonics + 1):
        for m in mains:
            a = alias_hz(k * m, fs_hz)
            if abs(a - freq_hz) <= tolerance_hz:
                return m, k, a
    return None


def amplitude_spectrum(samples: np.ndarray, fs_hz: float) -> tuple[np.ndarray, np.ndarray]:
    """Frequencies (Hz) and one-sided amplitudes (counts) of a Hann-windowed FFT of `samples`, mean removed.

    Each bin reads as the amplitude of a sine centred on it: |X_k| / sum(w), doubled for every bin but
    DC and (for an even length) Nyquist, whose energy has no mirror image. Dividing by sum(w) takes out
    the window's coherent gain (sum(w) / N, 0.5 for Hann: F. J. Harris, "On the use of windows for
    harmonic analysis with the discrete Fourier transform", Proc. IEEE 66(1), 1978, table 1). The DC bin
    is 0 after the mean is removed. A tone between two bins reads low by up to Hann's scalloping loss
    (1.42 dB, same table).
    """
    x = np.asarray(samples, np.float64)
    n = len(x)
    window = np.hanning(n)
    amp = np.abs(np.fft.rfft((x - x.mean()) * window)) / window.sum()
    amp[1:(n + 1) // 2] *= 2.0  # bins below Nyquist carry their mirror's half too
    amp[0] = 0.0
    return np.fft.rfftfreq(n, 1.0 / fs_hz), amp


def spectrum_peak(samples: np.ndarray, fs_hz: float) -> SpectrumPeak | None:
    """Strongest non-DC peak of `amplitude_spectrum(samples)`, with its mains check."""
    if len(samples) < MIN_SPECTRUM_SAMPLES or fs_hz <= 0:
        return None
    return _peak(*amplitude_spectrum(samples, fs_hz), fs_hz, len(samples))


def _peak(freq_hz: np.ndarray, amp: np.ndarray, fs_hz: float, n: int) -> SpectrumPeak | None:
    """The strongest bin of a spectrum of `n` samples (`amplitude_spectrum`), named if it is a tone."""
    k = int(np.argmax(amp))
    if amp[k] == 0.0:
        return None
    # A Hann window spreads drift (a ramp over the window) into bins 1-2; a peak there is drift,
    # not a tone, even where a mains alias falls near 0 Hz (frame rate 50 or 60 Hz).
    near_dc = k <= NEAR_DC_BINS
    median = float(np.median(amp[1:]))
    prominence = float(amp[k] / median) if median > 0 else math.inf
    # Only a peak that stands out of the noise floor is a tone worth naming a source for.
    tone = not near_dc and prominence >= TONE_PROMINENCE
    freq = float(freq_hz[k])
    match = explain_peak(freq, fs_hz, tolerance_hz=fs_hz / n) if tone else None
    m, h, a = match if match else (None, None, None)
    return SpectrumPeak(freq, float(amp[k]), n, m, h, a, near_dc, prominence)


def _seconds(t_s: float) -> str:
    return f"{t_s:.2f} s" if t_s < 10 else f"{t_s:.0f} s"


@dataclass(frozen=True, slots=True)
class NoiseSpectrum:
    """A channel's noise spectrum for the screen, or how far the frames for one have come.

    `freq_hz` and `amplitude_counts` are the bins above DC (`amplitude_spectrum`), empty while
    `collecting`: fewer than `needed` untouched frames in an unbroken run so far (`samples`), the most
    a spectrum takes being `window_frames`.
    """

    freq_hz: np.ndarray
    amplitude_counts: np.ndarray
    samples: int
    needed: int
    window_frames: int
    rate_hz: float
    peak: SpectrumPeak | None = None
    touched: bool = False  # the key is touched (or just let go, inside the settle guard) right now

    @property
    def collecting(self) -> bool:
        return self.samples < self.needed

    @property
    def resolution_hz(self) -> float | None:
        """Bin spacing: the frame rate over the frames taken (finer as the run grows to a full window)."""
        return self.rate_hz / self.samples if self.samples and self.rate_hz > 0 else None

    def seconds(self, frames: int) -> str:
        """`frames` as time at this spectrum's frame rate ("" when the rate is unknown)."""
        return _seconds(frames / self.rate_hz) if self.rate_hz > 0 else ""

    def collected(self) -> str:
        """How much is collected of what is needed: "9 of 16 untouched frames (0.15 of 0.27 s)"."""
        frames = f"{self.samples} of {self.needed} untouched frames"
        if self.rate_hz <= 0:
            return frames
        return f"{frames} ({self.seconds(self.samples)[:-2]} of {self.seconds(self.needed)})"

    def coverage(self) -> str:
        """What a drawn spectrum rests on: seconds of frames of the full window, and the bin spacing."""
        if self.collecting or self.resolution_hz is None:
            return self.collected()
        return (f"{self.seconds(self.samples)} of {self.seconds(self.window_frames)} untouched, "
                f"{self.resolution_hz:.2g} Hz per bin")

    @property
    def summary(self) -> str:
        """One line: the peak and what it may be, or what the spectrum is waiting for."""
        if self.collecting:
            if self.touched:
                return f"the key is touched: waiting for its release; {self.collected()}"
            return f"collecting {self.collected()}: hands off"
        return self.peak.describe() if self.peak is not None else "no noise peak found"

    @property
    def brief(self) -> str:
        """`summary` in a few words, for narrow screens."""
        if self.collecting:
            return "touched: waiting for release" if self.touched else \
                f"collecting: {self.samples} of {self.needed} frames"
        return self.peak.brief() if self.peak is not None else "no noise peak"


def _one_mask(mask: np.ndarray, counts: np.ndarray, rows: int) -> bool:
    """Whether every column of `mask` selects the same rows, some but not all (the settle guard's mask
    when every key shares the activity: then the rows are picked once, not per channel)."""
    if mask.shape[1] < 2 or not 0 < counts[0] < rows or (counts != counts[0]).any():
        return False
    return bool((mask == mask[:, :1]).all())


class ColumnRing:
    """One fixed-size ring per channel, filled with the frames a mask selects (e.g. released ones)."""

    def __init__(self, capacity: int, channels: int) -> None:
        self.capacity = max(1, capacity)
        # column-major: a channel's values are contiguous, for per-channel slices and column statistics
        self.data = np.zeros((self.capacity, channels), np.int64, order="F")
        self.written = np.zeros(channels, np.int64)
        self._cols = np.arange(channels)

    def push(self, values: np.ndarray, mask: np.ndarray) -> None:
        counts = mask.sum(axis=0)
        if _one_mask(mask, counts, len(values)):  # every channel takes the same rows: pick them once
            values = values[mask[:, 0]]
        whole = counts == len(values)
        if whole.any():  # channels that take every row: one vectorised scatter
            rows = values[-self.capacity:]
            skip = len(values) - len(rows)
            cols = self._cols[whole]
            pos = (self.written[cols][None, :] + skip + np.arange(len(rows))[:, None]) % self.capacity
            self.data[pos, cols[None, :]] = rows[:, cols]
        for c in np.flatnonzero(~whole & (counts > 0)).tolist():
            picked = values[mask[:, c], c]
            rows = picked[-self.capacity:]
            pos = (self.written[c] + len(picked) - len(rows) + np.arange(len(rows))) % self.capacity
            self.data[pos, c] = rows
        self.written += counts

    def filled(self, channel: int) -> np.ndarray:
        """The stored values of a channel in ring order (fine for order-free statistics)."""
        return self.data[:min(int(self.written[channel]), self.capacity), channel]

    def ordered(self, channel: int) -> np.ndarray:
        n = min(int(self.written[channel]), self.capacity)
        idx = (int(self.written[channel]) - n + np.arange(n)) % self.capacity
        return self.data[idx, channel]

    def clear(self, channel: int | None = None) -> None:
        if channel is None:
            self.written[:] = 0
        else:
            self.written[channel] = 0


class SettleGate:
    """Holds released frames back until they are known to lie clear of touch activity.

    A released frame counts as noise only when every frame within `guard_frames` before and after it is
    released too, on every key (`any_key`; a neighbour's touch or a slider swipe moves a released key by
    crosstalk, which is not its noise): a finger landing moves the delta before the state leaves released
    (the approach stays under the threshold for a while), and a lifting finger's tail runs on after it
    comes back. So each frame is decided `guard_frames` frames late, once the frames after it have
    arrived; the newest ones wait. Frames before a channel's `start_frame` (its last re-baseline) never
    count, but touch activity before it still guards the frames after it (a stuck release lets go of a
    finger still landing).
    """

    NEVER = np.iinfo(np.int64).min // 4  # "no touch activity seen yet": far enough back for any guard

    def __init__(self, channels: int, guard_frames: int, last_busy: np.ndarray | None = None,
                 any_key: bool = True) -> None:
        self.guard_frames = g = max(0, guard_frames)
        self.any_key = any_key
        self.tail_deltas = np.zeros((g, channels), np.int64)  # the undecided newest frames
        self.tail_ok = np.zeros((g, channels), bool)  # ... that are released (none before the first block)
        self.last_busy = np.full(channels, self.NEVER, np.int64) if last_busy is None else last_busy.copy()

    def select(self, deltas: np.ndarray, states: np.ndarray, first_frame: int,
               start_frame: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Frames decided by this block (`first_frame` = frame number of its first row): the deltas of
        frames `first_frame - guard .. first_frame + n - guard` and the mask of those that count."""
        g, n = self.guard_frames, len(deltas)
        if n == 0:  # nothing decided; the tail and the last activity stay as they are
            return deltas[:0], np.zeros(deltas.shape, bool)
        frame = first_frame + np.arange(n, dtype=np.int64)[:, None]
        busy = states != KeyState.RELEASED
        shared = self.any_key and busy.shape[1] > 1
        if shared:  # another key's touch moves this one too: not its noise
            busy = np.broadcast_to(busy.any(axis=1, keepdims=True), busy.shape)
        if busy.any():
            # The last busy frame up to each row; with one busy column for all keys, found once for it.
            column = busy[:, :1] if shared else busy
            last_busy = np.maximum.accumulate(np.where(column, frame, self.NEVER), axis=0)
            last_busy = np.maximum(last_busy, self.last_busy[None, :])
        else:  # the usual block, every key released: the last activity stays where it was, on every row
            last_busy = self.last_busy[None, :]
        ext_deltas = np.concatenate((self.tail_deltas, deltas))
        ext_ok = np.concatenate((self.tail_ok, ~busy))
        decided_frame = frame - g  # frame decided at each row: the one `g` rows back
        mask = ext_ok[:n] & (decided_frame >= start_frame[None, :]) & (last_busy < decided_frame - g)
        values = ext_deltas[:n]
        self.tail_deltas, self.tail_ok = ext_deltas[n:].copy(), ext_ok[n:].copy()
        if last_busy.shape[0] == n:
            self.last_busy = last_busy[-1].copy()
        return values, mask


class Measures:
    """Per-channel noise, touch signal, SNR and verdict from bounded rings (allocated once)."""

    def __init__(self, channels: int, rate_hz: float, window_s: float = 2.0, history_frames: int = 4096,
                 touched_frames: int = 2048, bounds: VerdictBounds | None = None,
                 settle_s: float = SETTLE_S, any_key: bool = True) -> None:
        """`any_key`: a frame is noise only while every key is released (issue 12: another key's touch
        moves a released key by crosstalk); False judges each key by its own state alone."""
        if settle_s < 0:
            raise ValueError(f"settle guard must be 0 s or more, not {settle_s:g} s")
        self.channels, self.window_s, self.settle_s = channels, window_s, settle_s
        self.bounds = bounds or VerdictBounds()
        self._rate_hz = rate_hz
        self.history = History(channels, max(history_frames, 2 * self.window_frames))
        self._released = ColumnRing(self.window_frames, channels)
        self._gate = SettleGate(channels, self.guard_frames, any_key=any_key)
        self._scratch: np.ndarray | None = None  # qualities()' work array, the window ring's shape
        self._touched = ColumnRing(touched_frames, channels)
        self._signal_cache: dict[int, tuple[int, float | None]] = {}
        self._touch_count = np.zeros(channels, np.int64)  # touches (entries into touched) since a clear
        # The live verdict's hysteresis (VerdictBounds.held): the verdict shown per channel, and the frame
        # (History.written) from which every judgement has asked for another one (-1: none asked).
        self._shown: list[str | None] = [None] * channels
        self._asked_since = np.full(channels, -1, np.int64)
        self._was_touched = np.zeros(channels, bool)
        # per channel, the history frame number (History.written counts) from which frames count as noise
        self.noise_start_frame = np.zeros(channels, np.int64)

    @property
    def rate_hz(self) -> float:
        return self._rate_hz

    @rate_hz.setter
    def rate_hz(self, value: float) -> None:
        """A new frame rate changes the window length: the noise window starts again."""
        self._rate_hz = value
        if self.window_frames != self._released.capacity:
            self._released = ColumnRing(self.window_frames, self.channels)
        if self.guard_frames != self._gate.guard_frames:  # undecided frames are dropped, activity kept
            self._gate = SettleGate(self.channels, self.guard_frames, self._gate.last_busy,
                                    self._gate.any_key)

    @property
    def window_frames(self) -> int:
        return max(MIN_NOISE_SAMPLES, math.ceil(self.window_s * self._rate_hz))

    @property
    def guard_frames(self) -> int:
        """The settle guard in frames at the current rate (rounded up: never shorter than `settle_s`)."""
        return math.ceil(self.settle_s * self._rate_hz - 1e-9)

    def definition(self) -> str:
        """How SNR and the verdict are defined here, to show beside the numbers."""
        text = SNR_DEFINITION.format(window_s=self.window_s, settle_s=self.settle_s)
        b = self.bounds
        return (f"{text} {b.describe()}; a verdict shown changes only once the SNR is past the bound by "
                f"{100 * b.margin:g} % of it for {b.hold_s:g} s.")

    def ingest(self, t_s: np.ndarray, readings: np.ndarray, deltas: np.ndarray, states: np.ndarray,
               restart: Mapping[int, int] | None = None) -> None:
        """Take a block of frames. `restart` maps a channel to the first row of this block measured against
        a new baseline (a re-baseline moved the zero): its noise window starts again there, and
        `noise_start_frame` records where for code that recomputes noise from `history`."""
        self.history.append(t_s, readings, deltas, states)
        first_frame = self.history.written - len(t_s)
        for c, row in (restart or {}).items():
            self._released.clear(c)
            self.noise_start_frame[c] = first_frame + row
            self._forget_verdict(c)
        self._released.push(*self._gate.select(deltas, states, first_frame, self.noise_start_frame))
        touched = states == KeyState.TOUCHED
        if touched.any():
            self._touched.push(deltas, touched)
            before = np.vstack((self._was_touched[None, :], touched[:-1]))
            self._touch_count += (touched & ~before).sum(axis=0)
        if len(touched):
            self._was_touched = touched[-1].copy()

    def clear_touch_signal(self, channel: int | None = None) -> None:
        self._touched.clear(channel)
        self._forget_verdict(channel)
        if channel is None:
            self._signal_cache.clear()
            self._touch_count[:] = 0
        else:
            self._signal_cache.pop(channel, None)
            self._touch_count[channel] = 0

    def _forget_verdict(self, channel: int | None) -> None:
        """New figures (a re-baseline, a cleared signal): the next verdict is taken as it comes."""
        for c in range(self.channels) if channel is None else (channel,):
            self._shown[c] = None
            self._asked_since[c] = -1

    def _hold(self, channel: int, snr_pp: float | None) -> tuple[str, bool]:
        """The verdict to show (and whether it is held against the SNR's own): `VerdictBounds.held`
        past the margin, and only once every judgement for `hold_s` of frames asked for the change."""
        shown, now = self._shown[channel], self.history.written
        wanted = self.bounds.held(snr_pp, shown)
        if shown is None or wanted == shown or "unmeasured" in (wanted, shown):
            self._shown[channel], self._asked_since[channel] = wanted, -1
            return wanted, wanted != self.bounds.verdict(snr_pp)
        if self._asked_since[channel] < 0:
            self._asked_since[channel] = now
        if now - self._asked_since[channel] >= math.ceil(self.bounds.hold_s * self._rate_hz):
            self._shown[channel], self._asked_since[channel] = wanted, -1
            return wanted, wanted != self.bounds.verdict(snr_pp)
        return shown, True

    def touches(self, channel: int) -> int:
        """Touches (entries into touched) since the touch signal was last cleared."""
        return int(self._touch_count[channel])

    def qualities(self) -> list[ChannelQuality]:
        """`quality` of every channel, the noise of all channels in one pass over the window ring: a
        channel's stored values are the first `count` rows of its column. The arithmetic runs in a scratch
        array kept between calls: fresh megabyte temporaries cost more in page faults than the sums."""
        ring = self._released
        count = np.minimum(ring.written, ring.capacity)
        if self._scratch is None or self._scratch.shape != ring.data.shape:
            self._scratch = np.empty(ring.data.shape, np.float64, order="F")
        work = self._scratch
        np.copyto(work, ring.data)
        # Rows past a channel's count hold stale values; those columns are few and short-lived (after a
        # re-baseline): fill them with their row 0 (stored whenever count > 0) so the extremes are right,
        # take the filler back out of the sum, and zero it before squaring.
        short = np.flatnonzero(count < ring.capacity)
        short_counts = count[short].tolist()
        for c, n in zip(short.tolist(), short_counts, strict=True):
            work[n:, c] = work[0, c]
        hi, lo = work.max(axis=0), work.min(axis=0)
        sums = work.sum(axis=0)
        sums[short] -= (ring.capacity - count[short]) * work[0, short]
        mean = sums / np.maximum(count, 1)  # exact: integer deltas, sums far below 2**53
        np.subtract(work, mean, out=work)
        for c, n in zip(short.tolist(), short_counts, strict=True):
            work[n:, c] = 0.0
        np.multiply(work, work, out=work)
        rms = np.sqrt(work.sum(axis=0) / np.maximum(count, 1))
        pp = (hi - lo).tolist()
        out = []
        for c, n in enumerate(count.tolist()):
            noise = NoiseStats(float(rms[c]), float(pp[c]), n) if n >= MIN_NOISE_SAMPLES else None
            out.append(self._quality(noise, self.touch_signal(c), c))
        return out

    def released_deltas(self, channel: int) -> np.ndarray:
        """Deltas of the noise window (the newest `window_frames` released frames clear of touch activity,
        since the last re-baseline), oldest first."""
        return self._released.ordered(channel)

    def noise(self, channel: int) -> NoiseStats | None:
        values = self._released.filled(channel)
        if len(values) < MIN_NOISE_SAMPLES:
            return None
        centred = values - values.mean()
        rms = float(np.sqrt(np.mean(centred * centred)))  # population standard deviation, mean removed
        return NoiseStats(rms, float(values.max() - values.min()), len(values))

    def touch_signal(self, channel: int) -> float | None:
        written = int(self._touched.written[channel])
        cached = self._signal_cache.get(channel)
        if cached is not None and cached[0] == written:  # no touched frame since: same median
            return cached[1]
        values = self._touched.filled(channel)
        value = float(np.median(values)) if len(values) else None
        self._signal_cache[channel] = (written, value)
        return value

    def quality(self, channel: int) -> ChannelQuality:
        return self._quality(self.noise(channel), self.touch_signal(channel), channel)

    def _quality(self, noise: NoiseStats | None, signal: float | None, channel: int) -> ChannelQuality:
        snr_pp = snr_rms = None
        if noise is not None and signal is not None:
            snr_pp = signal / noise.pp_counts if noise.pp_counts > 0 else math.inf
            snr_rms = signal / noise.rms_counts if noise.rms_counts > 0 else math.inf
        frames = min(int(self._touched.written[channel]), self._touched.capacity)
        verdict, held = self._hold(channel, snr_pp)
        return ChannelQuality(noise, signal, snr_pp, snr_rms, verdict, self.touches(channel), frames, held)

    def _spectrum_run(self, channel: int) -> tuple[np.ndarray, bool]:
        """The newest unbroken run of released frames in the window, less the settle guard after the last
        touch; and whether that guard (or a touch) is still running now."""
        _, _, deltas, states = self.history.last(self.window_frames)
        # this key's own touches break the run (the spectrum looks for a tone, which a neighbour's
        # crosstalk step does not make; the noise window above is the one kept clear of other keys)
        broken = np.flatnonzero(states[:, channel] != KeyState.RELEASED)
        start = int(broken[-1]) + 1 + self.guard_frames if len(broken) else 0
        return deltas[start:, channel].astype(np.float64), bool(len(broken)) and start >= len(states)

    def spectrum_samples(self, channel: int) -> np.ndarray:
        """The deltas a spectrum is taken of: the newest unbroken run of released frames in the window,
        less the settle guard after the last touch (a finger lifting is not noise here either)."""
        return self._spectrum_run(channel)[0]

    def spectrum(self, channel: int) -> SpectrumPeak | None:
        """FFT of `spectrum_samples(channel)` (on demand): the strongest peak and its mains check."""
        return spectrum_peak(self.spectrum_samples(channel), self.rate_hz)

    def noise_spectrum(self, channel: int) -> NoiseSpectrum:
        """The spectrum of `spectrum_samples(channel)` for drawing (bins above DC, its peak), or, with
        fewer than `MIN_SPECTRUM_SAMPLES` of them, how many there are so far."""
        samples, waiting = self._spectrum_run(channel)
        n, rate = len(samples), self.rate_hz
        empty = np.zeros(0)
        if n < MIN_SPECTRUM_SAMPLES or rate <= 0:
            return NoiseSpectrum(empty, empty, n, MIN_SPECTRUM_SAMPLES, self.window_frames, rate, None,
                                 waiting)
        freq, amp = amplitude_spectrum(samples, rate)
        return NoiseSpectrum(freq[1:], amp[1:], n, MIN_SPECTRUM_SAMPLES, self.window_frames, rate,
                             _peak(freq, amp, rate, n), waiting)

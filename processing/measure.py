"""What is measured for the engineer (floats): noise, touch signal, SNR, verdict, spectrum, history.

Definitions (also in ALGORITHM.md, "Measures"):
- noise RMS: population standard deviation (numpy.std, mean removed) of the delta over the last
  `window_s` seconds of frames in which the channel was released (since its last re-baseline); noise pp:
  max - min over the same frames.
- touch signal: median delta of the frames in state touched (the last `touched_frames` of them).
- SNR pp = signal / noise pp; SNR RMS = signal / noise RMS. The verdict uses the pp form.
Memory is bounded: every buffer is a fixed-size ring allocated once.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from processing.detections import KeyState

SNR_DEFINITION = ("SNR = touch signal / noise. Touch signal: median delta while touched. Noise: peak-to-peak "
                  "(pp form) or RMS (standard deviation, RMS form) of the delta over the last {window_s:g} s "
                  "of released frames.")
MIN_NOISE_SAMPLES = 8
MIN_SPECTRUM_SAMPLES = 16
MAINS_HZ = (50.0, 60.0)


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


@dataclass(frozen=True, slots=True)
class ChannelQuality:
    noise: NoiseStats | None
    signal_counts: float | None
    snr_pp: float | None
    snr_rms: float | None
    verdict: str


@dataclass(frozen=True, slots=True)
class SpectrumPeak:
    freq_hz: float
    amplitude_counts: float  # amplitude of the sine that would give this peak
    samples: int
    mains_hz: float | None  # the mains frequency this peak is an alias of, if any
    harmonic: int | None  # 1 = the mains fundamental, 2 = second harmonic, ...
    alias_hz: float | None

    def describe(self) -> str:
        if self.mains_hz is None:
            return f"strongest noise at {self.freq_hz:.1f} Hz, not a mains alias"
        which = "mains" if self.harmonic == 1 else f"mains harmonic {self.harmonic}"
        tone_hz = self.mains_hz * (self.harmonic or 1)
        return (f"strongest noise at {self.freq_hz:.1f} Hz: alias of {tone_hz:g} Hz "
                f"({which}, {self.mains_hz:g} Hz)")


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


def spectrum_peak(samples: np.ndarray, fs_hz: float) -> SpectrumPeak | None:
    """Strongest non-DC peak of a Hann-windowed FFT of `samples` (mean removed), with its mains check."""
    x = np.asarray(samples, np.float64)
    if len(x) < MIN_SPECTRUM_SAMPLES or fs_hz <= 0:
        return None
    window = np.hanning(len(x))
    spec = np.abs(np.fft.rfft((x - x.mean()) * window))
    spec[0] = 0.0
    k = int(np.argmax(spec))
    if spec[k] == 0.0:
        return None
    freq = k * fs_hz / len(x)
    amplitude = 2.0 * spec[k] / window.sum()
    match = explain_peak(freq, fs_hz, tolerance_hz=fs_hz / len(x))
    m, h, a = match if match else (None, None, None)
    return SpectrumPeak(freq, float(amplitude), len(x), m, h, a)


class ColumnRing:
    """One fixed-size ring per channel, filled with the frames a mask selects (e.g. released ones)."""

    def __init__(self, capacity: int, channels: int) -> None:
        self.capacity = max(1, capacity)
        self.data = np.zeros((self.capacity, channels), np.int64)
        self.written = np.zeros(channels, np.int64)
        self._cols = np.arange(channels)

    def push(self, values: np.ndarray, mask: np.ndarray) -> None:
        counts = mask.sum(axis=0)
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


class Measures:
    """Per-channel noise, touch signal, SNR and verdict from bounded rings (allocated once)."""

    def __init__(self, channels: int, rate_hz: float, window_s: float = 2.0, history_frames: int = 4096,
                 touched_frames: int = 2048, bounds: VerdictBounds | None = None) -> None:
        self.channels, self.window_s = channels, window_s
        self.bounds = bounds or VerdictBounds()
        self._rate_hz = rate_hz
        self.history = History(channels, max(history_frames, 2 * self.window_frames))
        self._released = ColumnRing(self.window_frames, channels)
        self._touched = ColumnRing(touched_frames, channels)
        self._signal_cache: dict[int, tuple[int, float | None]] = {}
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

    @property
    def window_frames(self) -> int:
        return max(MIN_NOISE_SAMPLES, math.ceil(self.window_s * self._rate_hz))

    def definition(self) -> str:
        """How SNR and the verdict are defined here, to show beside the numbers."""
        return f"{SNR_DEFINITION.format(window_s=self.window_s)} {self.bounds.describe()}."

    def ingest(self, t_s: np.ndarray, readings: np.ndarray, deltas: np.ndarray, states: np.ndarray) -> None:
        self.history.append(t_s, readings, deltas, states)
        self._released.push(deltas, states == KeyState.RELEASED)
        touched = states == KeyState.TOUCHED
        if touched.any():
            self._touched.push(deltas, touched)

    def restart_noise(self, first_rows: dict[int, int], deltas: np.ndarray, states: np.ndarray) -> None:
        """Start noise windows again (a re-baseline moved the zero): `first_rows` maps a channel to the
        first row of the block just ingested that counts for it. `noise_start_frame` records it for code
        that recomputes noise from `history` (frames before it are not the channel's noise)."""
        if not first_rows:
            return
        cols = np.array(list(first_rows), np.int64)
        begin = np.array(list(first_rows.values()), np.int64)
        for c in cols.tolist():
            self._released.clear(c)
        self.noise_start_frame[cols] = self.history.written - len(states) + begin
        mask = np.zeros(states.shape, bool)
        rows = np.arange(len(states))[:, None]
        mask[:, cols] = (rows >= begin[None, :]) & (states[:, cols] == KeyState.RELEASED)
        self._released.push(deltas, mask)

    def clear_touch_signal(self, channel: int | None = None) -> None:
        self._touched.clear(channel)
        if channel is None:
            self._signal_cache.clear()
        else:
            self._signal_cache.pop(channel, None)

    def qualities(self) -> list[ChannelQuality]:
        """`quality` of every channel; the channels with a full noise window are done in one pass."""
        ring = self._released
        full = ring.written >= ring.capacity
        data = ring.data
        rms = np.sqrt(np.mean((data - data.mean(axis=0)) ** 2, axis=0))
        pp = data.max(axis=0) - data.min(axis=0)
        out = []
        for c in range(self.channels):
            noise = NoiseStats(float(rms[c]), float(pp[c]), ring.capacity) if full[c] else self.noise(c)
            out.append(self._quality(noise, self.touch_signal(c)))
        return out

    def released_deltas(self, channel: int) -> np.ndarray:
        """Deltas of the newest `window_frames` frames in which the channel was released, oldest first."""
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
        return self._quality(self.noise(channel), self.touch_signal(channel))

    def _quality(self, noise: NoiseStats | None, signal: float | None) -> ChannelQuality:
        snr_pp = snr_rms = None
        if noise is not None and signal is not None:
            snr_pp = signal / noise.pp_counts if noise.pp_counts > 0 else math.inf
            snr_rms = signal / noise.rms_counts if noise.rms_counts > 0 else math.inf
        return ChannelQuality(noise, signal, snr_pp, snr_rms, self.bounds.verdict(snr_pp))

    def spectrum(self, channel: int) -> SpectrumPeak | None:
        """FFT of the newest unbroken run of released frames within the window (on demand)."""
        _, _, deltas, states = self.history.last(self.window_frames)
        released = states[:, channel] == KeyState.RELEASED
        broken = np.flatnonzero(~released)
        start = int(broken[-1]) + 1 if len(broken) else 0
        return spectrum_peak(deltas[start:, channel], self.rate_hz)

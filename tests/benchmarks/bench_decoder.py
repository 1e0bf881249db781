"""Decoder throughput: protocol v1 frames with sequence numbers and checksums, 16 and 64 channels, and
every plain form of PROTOCOL.md section 6.

Prints MB/s and frames/s of the fast decoder (`protocol.decoder.Decoder`, fed 64 KiB chunks) as
ratios, measured in this one run, to
- the byte rate of USB full-speed bulk transfers: 19 packets of 64 bytes per 1 ms frame, 1,216,000 B/s
  (USB 2.0 specification, full-speed bulk bandwidth), and
- a plain per-line loop, run in the same process on the same bytes: split()/int() with the CRC check
  for v1 frames, a regex findall() and float() for the plain forms (what one writes first).
It also checks that the fast decoder gives exactly the same events and statistics as the plain
reference decoder (`protocol.decoder_plain`), and the same frames as the plain loop.
Least CPU time of several interleaved repeats. Never a pass/fail on time: the numbers are for reading.
The sequenced-frame figures are the ones to compare between versions (run an older checkout's copy of
this file in the same session): the plain forms go through the per-line rules by design.

    python tests/benchmarks/bench_decoder.py [--quick]
"""

from __future__ import annotations

import argparse
import binascii
import pathlib
import re
import sys
import time

import numpy as np

sys.path.insert(0, str(pathlib.Path(__file__).resolve().parents[2]))

from protocol.decoder import Decoder
from protocol.decoder_plain import PlainDecoder
from protocol.encoder import encode_frames, encode_note
from protocol.events import FrameBlock

USB_FULL_SPEED_BULK_BPS = 19 * 64 * 1000  # 1,216,000 B/s
CHUNK_BYTES = 64 * 1024


def make_stream(frames: int, channels: int, seed: int = 7, states: bool = False) -> bytes:
    """Readings like a real board's: per-channel baselines, a little noise, a few touches; a note every
    2000 frames and one frame missing every 5000, so the run logic is exercised too. With `states`, each
    frame carries the board's key states (PROTOCOL.md section 3: touched where the reading dipped)."""
    rng = np.random.default_rng(seed)
    baseline = rng.integers(900, 32000, size=channels)
    readings = baseline + np.rint(rng.normal(0.0, 5.0, size=(frames, channels))).astype(np.int64)
    touched = rng.random((frames, channels)) < 0.02
    readings[touched] -= rng.integers(60, 400, size=int(touched.sum()))
    out, seq = [], 0
    for start in range(0, frames, 1000):
        block = readings[start : start + 1000]
        field = (touched[start : start + 1000] * 2) if states else None
        out.append(encode_frames(block, seq % 65536, checksum=True, states=field))
        seq += len(block) + (1 if start % 5000 == 4000 else 0)
        if start % 2000 == 1000:
            out.append(encode_note(f"frame {start}: zone check", checksum=True))
    return b"".join(out)


def plain_loop(data: bytes) -> tuple[np.ndarray, np.ndarray, dict[str, int]]:
    """What one writes first: split lines, check the CRC, split() the values, int() each one."""
    crc = binascii.crc_hqx
    rows: list[list[int]] = []
    seqs: list[int] = []
    counts = {"lost": 0, "resets": 0, "bad_checksum": 0, "notes": 0, "width_mismatch": 0}
    last: int | None = None
    width: int | None = None
    for line in data.split(b"\n"):
        if line[-1:] == b"\r":
            line = line[:-1]
        if not line:
            continue
        body, star, given = line.rpartition(b"*")
        if not star or len(given) != 4:
            body = line
        elif crc(body, 0xFFFF) != int(given, 16):
            counts["bad_checksum"] += 1
            continue
        if body[:1] == b"#":
            counts["notes"] += 1
            continue
        tokens = body.replace(b",", b" ").split()
        seq = -1
        if tokens[0][:1] == b"@":
            seq = int(tokens[0][1:])
            tokens = tokens[1:]
            if last is not None and seq != (last + 1) % 65536:
                if seq > last:
                    counts["lost"] += seq - last - 1
                else:
                    counts["resets"] += 1
            last = seq
        values = [int(t) for t in tokens]
        if width is None:
            width = len(values)
        elif len(values) != width:
            counts["width_mismatch"] += 1
            continue
        rows.append(values)
        seqs.append(seq)
    return np.array(rows, dtype=np.int64), np.array(seqs, dtype=np.int64), counts


def plain_loop_states(data: bytes) -> tuple[np.ndarray, np.ndarray, dict[str, int]]:
    """The plain loop for frames with a state field: the line's CRC checked, the field cut off (its
    digits taken as they are), then the loop above."""
    crc = binascii.crc_hqx
    lines = []
    for line in data.split(b"\n"):
        head, semi, rest = line.partition(b";")
        if semi:
            digits, star, given = rest.partition(b"*")
            if star and crc(head + semi + digits, 0xFFFF) != int(given, 16):
                continue
            line = head
        lines.append(line)
    return plain_loop(b"\n".join(lines))


def run_decoder(decoder_cls: type, data: bytes, chunk_bytes: int = CHUNK_BYTES) -> tuple[list, object]:
    dec = decoder_cls()
    events = []
    for k in range(0, len(data), chunk_bytes):
        events += dec.feed(data[k : k + chunk_bytes], 0.0)
    events += dec.flush_hold(0.0)
    return events, dec.stats


# -- plain forms ------------------------------------------------------------------------------------
FORMS = {
    # name: (one line's format from (time_ms, readings as counts), scale, time column, line end)
    "pairs": (lambda t, r: ", ".join(f"zone{i}:{v}" for i, v in enumerate(r)), 1, False, "\n"),
    "brackets": (lambda t, r: "".join(f"T{i}:[{v:5d}] " for i, v in enumerate(r)), 1, False, "\r\n"),
    "padded columns": (lambda t, r: "".join(f"{v:6d}" for v in r), 1, False, "\r\n"),
    "time column": (lambda t, r: f"{t} " + " ".join(map(str, r)), 1, True, "\n"),
    "decimals": (lambda t, r: " ".join(f"{v / 100:.2f}" for v in r), 100, False, "\n"),
    "CR line ends": (lambda t, r: ",".join(map(str, r)), 1, False, "\r"),
}


def make_form_stream(form: str, frames: int, channels: int, seed: int = 7) -> bytes:
    """A board printing `form`: the same kind of readings as make_stream, a text line now and then."""
    fmt, _, _, end = FORMS[form]
    rng = np.random.default_rng(seed)
    baseline = rng.integers(900, 32000, size=channels)
    readings = baseline + np.rint(rng.normal(0.0, 5.0, size=(frames, channels))).astype(np.int64)
    out = []
    for k, row in enumerate(readings.tolist()):
        if k % 2000 == 1000:
            out.append("Calibrating zone 3, keep hands off" + end)
        out.append(fmt(1000 + 10 * k, row) + end)
    return "".join(out).encode()


_PLAIN_NUMBER = re.compile(rb"(?:[A-Za-z_][A-Za-z0-9_]*[:=]\s*\[?\s*)?(-?\d+(?:\.\d+)?)")


def plain_form_loop(data: bytes, scale: int, time_column: bool) -> np.ndarray:
    """What one writes first for such a board: split the lines, skip text, findall() the numbers."""
    rows = []
    for line in re.split(rb"\r\n|\r|\n", data):
        if not line.strip() or (line[:1].isalpha() and b"[" not in line and b":" not in line):
            continue
        values = [round(float(v) * scale) for v in _PLAIN_NUMBER.findall(line)]
        rows.append(values[1:] if time_column else values)
    return np.array(rows, dtype=np.int64)


def bench_forms(frames: int, repeats: int, channels: int = 16) -> None:
    print(f"plain forms, {channels} channels, {frames} frames (the per-line rules; a text line every 2000):")
    for form, (_, scale, timed, _) in FORMS.items():
        data = make_form_stream(form, frames, channels)
        fast_events, fast_stats = run_decoder(Decoder, data)
        plain_events, plain_stats = run_decoder(PlainDecoder, data)
        fr, _, fi, fo = summary(fast_events)
        pr, _, pi, po = summary(plain_events)
        assert fast_stats.as_dict() == plain_stats.as_dict() and fi == pi and fo == po
        assert np.array_equal(fr, pr) and np.array_equal(fr, plain_form_loop(data, scale, timed)), form
        best = best_of(repeats, {"fast": lambda d=data: run_decoder(Decoder, d),
                                 "loop": lambda d=data, s=scale, t=timed: plain_form_loop(d, s, t)})
        mb_s = len(data) / best["fast"] / 1e6
        print(f"  {form:15s} ({len(data) / len(fr):.0f} B/frame): {mb_s:5.1f} MB/s, "
              f"{len(fr) / best['fast']:8.0f} frames/s | {best['loop'] / best['fast']:.2f}x the plain loop, "
              f"{len(data) / best['fast'] / USB_FULL_SPEED_BULK_BPS:.1f}x USB full-speed bulk | same events "
              "as the plain decoder: yes")


def summary(events: list) -> tuple[np.ndarray, np.ndarray, list, list]:
    blocks = [e for e in events if isinstance(e, FrameBlock)]
    readings = np.concatenate([b.readings for b in blocks])
    seqs = np.concatenate([b.seq for b in blocks])
    indices = np.concatenate([b.first_index + np.arange(len(b)) for b in blocks])
    others = [e for e in events if not isinstance(e, FrameBlock)]
    return readings, seqs, indices.tolist(), others


def check_same(data: bytes, loop=None) -> None:
    loop = loop or plain_loop
    fast_events, fast_stats = run_decoder(Decoder, data)
    plain_events, plain_stats = run_decoder(PlainDecoder, data)
    fr, fs, fi, fo = summary(fast_events)
    pr, ps, pi, po = summary(plain_events)
    assert fast_stats.as_dict() == plain_stats.as_dict(), (fast_stats, plain_stats)
    assert np.array_equal(fr, pr) and np.array_equal(fs, ps) and fi == pi and fo == po
    lr, ls, counts = loop(data)
    assert np.array_equal(fr, lr) and np.array_equal(fs, ls)
    fast_states = [e.board_states for e in fast_events if isinstance(e, FrameBlock)]
    plain_states = [e.board_states for e in plain_events if isinstance(e, FrameBlock)]
    assert all(a is None for a in fast_states) == all(b is None for b in plain_states)
    if fast_states and fast_states[0] is not None:
        assert np.array_equal(np.concatenate(fast_states), np.concatenate(plain_states))
    for key, value in counts.items():
        assert getattr(fast_stats, key) == value, key


def best_of(repeats: int, fns: dict) -> dict[str, float]:
    """Least CPU time of each, interleaved: process time leaves out the time other programs had the
    core (the machine may be shared), so the figures are "on one core"."""
    best = dict.fromkeys(fns, float("inf"))
    for _ in range(repeats):
        for name, fn in fns.items():
            t0 = time.process_time()
            fn()
            best[name] = min(best[name], time.process_time() - t0)
    return best


def bench_states(frames: int, repeats: int) -> None:
    """Frames with the optional state field, 16 channels: the same bulk ways take them."""
    data = make_stream(frames, 16, states=True)
    check_same(data, plain_loop_states)
    n_frames = sum(len(e) for e in Decoder().feed(data, 0.0) if isinstance(e, FrameBlock))
    best = best_of(repeats, {"fast": lambda: run_decoder(Decoder, data),
                             "loop": lambda: plain_loop_states(data),
                             "small": lambda: run_decoder(Decoder, data, 4096)})
    print(
        f"with the state field, 16 channels ({len(data) / n_frames:.0f} B/frame): fast "
        f"{len(data) / best['fast'] / 1e6:6.1f} MB/s, {n_frames / best['fast']:9.0f} frames/s, "
        f"{best['loop'] / best['fast']:.2f}x the plain loop; 4 KiB chunks "
        f"{len(data) / best['small'] / 1e6:.1f} MB/s | same events, stats, states as the plain decoder: yes"
    )


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="small sizes, a few seconds")
    args = parser.parse_args()
    frames, repeats = (3000, 2) if args.quick else (20000, 9)
    kib = CHUNK_BYTES // 1024
    print(f"decoder throughput, {frames} frames a run, least CPU time of {repeats}, fed {kib} KiB chunks")
    for channels in (16, 64):
        data = make_stream(frames, channels)
        check_same(data)
        n_frames = Decoder().feed(data, 0.0)
        n_frames = sum(len(e) for e in n_frames if isinstance(e, FrameBlock))
        runs = {
            "fast": lambda d=data: run_decoder(Decoder, d),
            "loop": lambda d=data: plain_loop(d),
            "small": lambda d=data: run_decoder(Decoder, d, 4096),
        }
        best = best_of(repeats, runs)
        mb_s = len(data) / best["fast"] / 1e6
        loop_mb_s = len(data) / best["loop"] / 1e6
        print(
            f"{channels:3d} channels ({len(data) / n_frames:.0f} B/frame): fast {mb_s:6.1f} MB/s, "
            f"{n_frames / best['fast']:9.0f} frames/s | plain loop {loop_mb_s:5.1f} MB/s | "
            f"{best['loop'] / best['fast']:.2f}x the plain loop, "
            f"{len(data) / best['fast'] / USB_FULL_SPEED_BULK_BPS:.1f}x USB full-speed bulk | "
            "same events and stats as the plain decoder: yes"
        )
        small_mb_s = len(data) / best["small"] / 1e6
        print(
            f"    fed 4 KiB chunks instead: {small_mb_s:6.1f} MB/s, "
            f"{best['loop'] / best['small']:.2f}x the plain loop, "
            f"{len(data) / best['small'] / USB_FULL_SPEED_BULK_BPS:.1f}x USB full-speed bulk "
            "(a reader that falls behind gets bigger chunks)"
        )
        crlf = data.replace(b"\n", b"\r\n")
        check_same(crlf)
        best = best_of(repeats, {"crlf": lambda d=crlf: run_decoder(Decoder, d),
                                 "loop": lambda d=crlf: plain_loop(d)})
        print(
            f"    with CRLF line ends: {len(crlf) / best['crlf'] / 1e6:6.1f} MB/s, "
            f"{best['loop'] / best['crlf']:.2f}x the plain loop"
        )
    bench_states(frames, repeats)
    bench_forms(frames // 2, max(2, repeats // 3))
    return 0


if __name__ == "__main__":
    sys.exit(main())

"""A key's SNR verdict with what it rests on (touches and released frames), fitted to a width.

The table's SNR column has room for the figure and a glyph only; the detail panel says the rest:
"solid ✓ SNR 14.2 from 6 touches, 4,800 released frames" on one line where it fits, else on two
("SNR 14.2 ✓ solid" / "from 6 touches, 4,800 released frames") where there are lines to spare, else
the short line "SNR 14.2 ✓ solid: 6 touches, 4,800 frames" (the frames are always released frames,
the ones the noise is taken over). A verdict the hysteresis holds against its SNR says "(held)"
(`VerdictBounds.held`: "SNR 9.2 ✓ solid (held)"). The figures are `processing.measure.ChannelQuality`'s:
touches since the signal was last cleared, and the released frames of its noise window (ALGORITHM.md,
Measures). Plain text, no Textual.
"""

from __future__ import annotations

from processing.measure import ChannelQuality
from tui.render.glyphs import verdict_label
from tui.words import plural


def verdict_lines(q: ChannelQuality | None, width: int, lines: int = 2) -> list[str]:
    """Lines of at most `width` cells, at most `lines` (1 or 2) where a form that short fits: the most
    explicit form that fits (two lines rather than leave out the touches or frames; cut only when even
    the shortest is wider)."""
    if q is None:
        return _first_fit([["SNR -- ? not measured yet"], ["SNR -- ?", "not measured yet"]], width, lines)
    glyph, word = verdict_label(q.verdict).glyph, q.verdict
    snr = f"SNR {q.snr_pp:.1f}" if q.snr_pp is not None else "SNR --"
    frames = q.noise.samples if q.noise is not None else 0
    touches = plural(q.touches, "touch", "touches")
    released = f"{frames:,} released frame{'' if frames == 1 else 's'}"
    held = " (held)" if q.held else ""  # the hysteresis keeps it although the SNR alone says another
    head = f"{snr} {glyph} {word}{held}"
    choices = [[f"{word}{held} {glyph} {snr} from {touches}, {released}"],
               [head, f"from {touches}, {released}"],
               [f"{head}: {touches}, {frames:,} frames"],
               [head, f"{touches}, {frames:,} frames"]]
    return _first_fit(choices, width, lines)


def _first_fit(choices: list[list[str]], width: int, lines: int) -> list[str]:
    """The first choice of at most `lines` lines that fits; else the first that fits at all (what the
    verdict rests on matters more than a line of the panel); else the last, cut to `width`."""
    fits = [c for c in choices if all(len(line) <= width for line in c)]
    fit = next((c for c in fits if len(c) <= lines), fits[0] if fits else choices[-1])
    return [line[:width] for line in fit]

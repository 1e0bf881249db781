"""What the guided capture screen draws, as plain rich renderables: the results table's heads and rows,
the selected key's detail (figures, histogram of untouched and touched deltas, reasons), and the lines of
the key choice. No Textual: `tui/screens/capture.py` lays these out.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np
from rich.console import Group
from rich.padding import Padding
from rich.text import Text

from processing.capture import CaptureOutcome, key_ranges, steps_for
from processing.crosstalk import FLAG_SHARE, Coupling
from tui.fields import FIELDS
from tui.render import Styles
from tui.render.histogram import DeltaHistogram

# Two-line heads (the quantity over its form or unit) in plain words. Eleven columns with full words
# cannot fit 80 cells, so the RMS forms of noise and SNR moved to the selected key's detail lines,
# and the columns are one cell apart (each cell carries its own leading space) instead of two.
# The noise column holds untouched/touched noise pp ("8/12": the second is noise while touched, the
# touch level removed); "xtalk" the largest crosstalk onto the key as a share of its threshold, "!"
# above the flag share (processing.crosstalk). The detail lines spell both out.
COLUMNS: tuple[tuple[str, str], ...] = (
    ("key", ""), ("noise", "pp"), ("touch", "delta"), ("SNR", "pp"), ("verdict", ""),
    ("threshold", "counts"), ("hysteresis", "counts"), ("debounce", "frames"), ("applied", ""),
    ("xtalk", "%"),
)
# Setting keys (as the suggestion's reasons carry them) -> the words the editor shows for them.
_LABELS = {f.key: f.label for f in FIELDS}


def typing_example(names: Sequence[str]) -> str:
    """What typed keys look like on this board: a range of numbers, a range of names, one name."""
    n = len(names)
    numbers = "3-10" if n >= 10 else f"1-{n}"
    if n < 3:
        return numbers
    return f"{numbers}, {names[0]}-{names[min(3, n - 2)]}, {names[-1]}"


def setting_label(key: str) -> str:
    """`threshold_counts` -> `threshold`: a setting key as the user reads it (unknown keys unchanged)."""
    return _LABELS.get(key, key.replace("_", " "))


def cell(value: str) -> Text:
    """A table cell with its own leading space (the columns are one cell apart)."""
    return Text(f" {value}")


def _num(value: float | None, digits: int = 1) -> str:
    return "-" if value is None else ("inf" if not np.isfinite(value) else f"{value:.{digits}f}")


def outcome_row(o: CaptureOutcome, applied: bool) -> tuple[str, ...]:
    f, s = o.figures, o.after
    settings = (str(s.threshold_counts), str(s.hysteresis_counts),
                f"{s.touch_debounce_frames}/{s.release_debounce_frames}") if o.suggested else ("-", "-", "-")
    mark = "yes" if applied else ("-" if o.suggested else "none")
    return (o.name, noise_cell(o), _num(f.signal_counts), _num(f.snr_pp), o.verdict, *settings, mark,
            crosstalk_cell(o))


def noise_cell(o: CaptureOutcome) -> str:
    """Untouched and touched noise pp, "8/12" (whole counts: pp of integer deltas), "8/-" without a touch."""
    still = _num(o.figures.noise_pp_counts, 0)
    return f"{still}/{_num(o.touched_noise.pp_counts if o.touched_noise else None, 0)}"


def crosstalk_cell(o: CaptureOutcome) -> str:
    """The largest crosstalk onto the key as a whole percentage of its threshold, "!" when flagged (its
    slider neighbours are not crosstalk: `crosstalk_line` shows them)."""
    worst = next((c for c in o.crosstalk if c.share is not None and not c.neighbours), None)
    if worst is None:
        return "-"
    share = worst.share or 0.0
    return f"{100 * share:.0f}" + ("!" if worst.flagged() else "")


def _indented(text: str, left: int = 4) -> Padding:
    """A detail line indented by `left` cells, its wrapped lines too."""
    return Padding(Text(text), (0, 0, 0, left))


def outcome_detail(o: CaptureOutcome, styles: Styles | None = None) -> Group:
    """The selected key's figures (untouched and touched noise side by side, SNR and what it rests on),
    its histogram of untouched and touched deltas, its crosstalk and the touched noise's spectrum, then
    its reasons (the histogram first: at 80x24 it is what fits; the rest scrolls)."""
    f, t = o.figures, o.touched_noise
    held = f"{_num(t.pp_counts)}/{_num(t.rms_counts)}" if t is not None else "-"
    lines: list[Any] = [
        Text(f"{o.name}", style="bold"),
        _indented(f"noise pp/RMS untouched {_num(f.noise_pp_counts)}/{_num(f.noise_rms_counts)}, "
                  f"touched {held}; touch delta {_num(f.signal_counts)} counts", 2),
        _indented(f"SNR {_num(f.snr_pp)} pp, {_num(f.snr_rms)} RMS: {o.verdict}, from {o.basis()}", 2)]
    threshold = float(o.after.threshold_counts) if o.suggested else None
    lines.append(Padding(DeltaHistogram(o.untouched, o.touched, threshold=threshold, width=48, styles=styles),
                         (0, 0, 0, 2)))
    lines.append(_indented(crosstalk_line(o), 2))
    lines.append(_indented(touched_noise_line(o), 2))
    if o.suggested:
        for key, reason in o.suggestion.reasons.items():  # type: ignore[union-attr]
            lines.append(_indented(f"{setting_label(key)}: {reason}", 2))
    else:
        lines.append(_indented(f"no suggestion: {o.suggestion.reason}", 2))  # type: ignore[union-attr]
    if o.stray_frames:
        lines.append(_indented(f"{o.stray_frames} frames rose beyond its noise while other keys were held "
                               "(a stray finger or strong crosstalk): left out of its untouched deltas", 2))
    return Group(*lines)


def crosstalk_line(o: CaptureOutcome, most: int = 3) -> str:
    """What touching the other keys did to this one, the largest first, as shares of its threshold; then
    its slider neighbours (pads of its own slider: shown, not crosstalk, never flagged)."""
    if not o.crosstalk:
        return "crosstalk: no other key was held during this capture"
    others = [c for c in o.crosstalk if not c.neighbours]
    neighbours = [c for c in o.crosstalk if c.neighbours]
    parts = [_coupling_part(o, c) for c in others[:most]]
    more = f", {len(others) - most} smaller" if len(others) > most else ""
    text = (f"crosstalk onto {o.name}, counts (% of its threshold {o.after.threshold_counts}): "
            f"{', '.join(parts) or 'none from keys outside its slider'}{more}; flagged above "
            f"{100 * FLAG_SHARE:.0f}% (common practice, no source)")
    if neighbours:
        text += (f"; slider neighbours in {neighbours[0].slider} (not crosstalk, not flagged): "
                 + ", ".join(_coupling_part(o, c) for c in neighbours))
    return text


def _coupling_part(o: CaptureOutcome, c: Coupling) -> str:
    """"zone2 +12.0 (24%)", ", flagged" inside the brackets when flagged."""
    share = f" ({100 * c.share:.0f}%{', flagged' if c.flagged() else ''})" if c.share is not None else ""
    return f"{o.names[c.source]} {c.shift_counts:+.1f}{share}"


def touched_noise_line(o: CaptureOutcome) -> str:
    """How the touched noise was taken and what its spectrum shows."""
    t = o.touched_noise
    if t is None:
        return "touched noise: too few touched frames"
    ms = f", {1000 * t.window_frames / o.rate_hz:.0f} ms" if o.rate_hz > 0 else ""
    hum = f"; {t.hum()}" if t.hum() else "; too few frames for a spectrum"
    return (f"touched noise: {t.samples} frames, the touch level removed by a {t.window_frames}-frame "
            f"running median{ms}{hum}")


def key_choices(names: Sequence[str], selected: int | None,
                sets: Sequence[tuple[str, str, Sequence[int]]]) -> list[tuple[str, str, list[int]]]:
    """(id, label, channels) of the ready-made choices: all keys, the selected one, each group and slider
    (`sets`: (kind, name, channels)); the typed choice comes after these."""
    out = [("all", f"all {len(names)} keys", list(range(len(names))))]
    if selected is not None and 0 <= selected < len(names):
        out.append(("selected", f"the selected key, {names[selected]}", [selected]))
    for kind, name, channels in sets:
        if channels:
            out.append((f"{kind}:{name}", f"{kind} {name}", list(channels)))
    return out


def choice_prompt(label: str, channels: Sequence[int], names: Sequence[str], width: int) -> Text:
    """One line of the key choice: what it is, how many steps, the keys in the words typing takes
    (cut with … where the line ends)."""
    steps = f"{steps_for(len(channels))} steps"
    text = Text(f"{label:<24} {steps:>9}   {key_ranges(channels, names)}", no_wrap=True)
    text.truncate(max(20, width), overflow="ellipsis")
    return text

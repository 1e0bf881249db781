"""The plain renderables: widths never overflow, marks stay visible, states read without colour."""

from __future__ import annotations

import numpy as np
import pytest
from rich.console import Console

from processing.detections import KeyState
from tui.render.bar import RELEASE_MARK, THRESHOLD_MARK, delta_bar
from tui.render.glyphs import state_label, verdict_label
from tui.render.groups import slider_track
from tui.render.link import link_strip
from tui.render.row import channel_line, header_line, row_layout
from tui.render.spark import downsample_max, sparkline
from tui.render.views import ChannelView, LinkView


def view(**kw: object) -> ChannelView:
    base = dict(index=0, name="zone1", reading=1234, baseline=1100, delta=134, state="touched", threshold=100,
                release=85, noise_pp=3.2, noise_rms=1.1, snr=23.4, verdict="solid", spark=tuple(range(60)))
    base.update(kw)
    return ChannelView(**base)  # type: ignore[arg-type]


@pytest.mark.parametrize("width", [60, 79, 80, 100, 119, 120, 160, 240])
def test_rows_and_header_fit_every_width(width: int) -> None:
    layout = row_layout(width, name_width=12)
    for v in (view(), view(delta=-40, state="released", snr=None, verdict="unmeasured", noise_pp=None),
              view(delta=10**7, reading=10**7, name="a-very-long-key-name")):
        assert channel_line(v, layout, True, {}).cell_len <= width
    assert header_line(layout, {}).cell_len <= width


def test_narrow_tables_drop_sparkline_then_baseline() -> None:
    assert row_layout(120).spark > 0 and row_layout(120).baseline
    assert row_layout(60).spark == 0
    assert not row_layout(50).baseline


def test_bar_marks_threshold_and_release_even_when_filled() -> None:
    empty = delta_bar(0, 100, 70, 20, {}).plain
    full = delta_bar(400, 100, 70, 20, {}).plain
    for bar in (empty, full):
        assert bar.count(THRESHOLD_MARK) == 1 and bar.count(RELEASE_MARK) == 1
        assert len(bar) == 20
    assert empty.index(RELEASE_MARK) < empty.index(THRESHOLD_MARK)
    assert full.endswith("▸")  # past the scale: said, not clipped silently
    assert delta_bar(-5, 100, 70, 20, {}).plain.startswith("◂")


def test_bar_fill_is_proportional() -> None:
    # threshold at 60 % of 20 cells = cell 12; half the threshold fills 6 cells
    bar = delta_bar(50, 100, 70, 20, {}).plain
    assert bar[:6] == "██████" and bar[6] == " "


def test_sparkline_keeps_short_peaks() -> None:
    values = [0.0] * 100
    values[37] = 100.0
    assert max(downsample_max(values, 10)) == 100.0
    line = sparkline(values, 100, 10, {}).plain
    assert len(line) == 10 and ("█" in line or "▇" in line)


def test_sparkline_pads_short_history_on_the_left() -> None:
    assert sparkline([1.0, 2.0], 100, 6, {}).plain.startswith("    ")


@pytest.mark.parametrize("state", list(KeyState))
def test_every_engine_state_has_a_glyph_and_a_word(state: KeyState) -> None:
    label = state_label(state)
    assert label.glyph != "?" and label.word
    assert label.word == state_label(state.name.lower()).word


def test_verdicts_read_without_colour() -> None:
    words = {verdict_label(v).word for v in ("solid", "marginal", "weak", "unmeasured")}
    assert len(words) == 4
    assert verdict_label(None).glyph == "?"


def test_row_without_styles_is_plain_and_still_says_everything() -> None:
    console = Console(no_color=True, width=120, file=None, force_terminal=False)
    line = channel_line(view(), row_layout(120), False, {})
    with console.capture() as cap:
        console.print(line)
    out = cap.get()
    assert "\x1b[" not in out
    assert "TOUCH" in out and "●" in out and "solid" not in out  # verdict glyph ✓ with SNR
    assert "✓" in out


def test_link_strip_says_disconnected_and_unsaved() -> None:
    v = LinkView(port="/dev/ttyACM0", baud=115200, state="reconnecting", fps=0.0, lost=3,
                 profile_name="keys.toml", unsaved=True, recording="/tmp/r.csv")
    text = link_strip(v, {}, compact=True).plain
    assert "RECONNECTING" in text and "lost 3" in text and "keys.toml *unsaved" in text
    assert "REC r.csv" in text and text.count("\n") == 1
    assert text.index("*unsaved") < text.index("⏺ REC")  # a long recording name is cut before the mark


def test_link_strip_counters_in_words_and_only_the_nonzero_ones_when_compact() -> None:
    quiet = LinkView(port="sim://greenhouse", baud=115200, state="connected", fps=100.0)
    assert "no link errors" in link_strip(quiet, {}, compact=True).plain
    wide = link_strip(quiet, {}, compact=False).plain
    assert "lost 0 garbled 0 bad checksum 0 resets 0" in wide and " cksum" not in wide
    noisy = LinkView(port="sim://greenhouse", baud=115200, state="connected", fps=100.0, bad_checksum=4,
                     resets=1)
    line2 = link_strip(noisy, {}, compact=True).plain.split("\n")[1]
    assert line2.startswith("bad checksum 4 resets 1 │ profile") and "lost" not in line2
    failed = LinkView(port="p", baud=9600, state="connected", fps=0.0, recording_error=(
        "writing the recording /tmp/x.csv failed (No space left on device); the rows written ..."))
    assert "✗ REC FAILED (disk full)" in link_strip(failed, {}).plain


def test_slider_track_marker_moves() -> None:
    assert slider_track(None, 99, 10) == "─" * 10
    assert slider_track(0, 99, 10).index("◆") == 0
    assert slider_track(99, 99, 10).index("◆") == 9
    assert slider_track(50, 99, 11).index("◆") == 5


def test_spectrum_peak_matches_measures_and_finds_an_injected_tone() -> None:
    # A 12 Hz sine of amplitude 3 counts sampled at 100 Hz: the plot's peak and the summary agree with
    # Measures.spectrum (processing's definition), and the frequency is the tone's (numpy.fft).
    from tests.tui.feeds import SyntheticFeed
    from tui.session_source import SessionSource

    feed = SyntheticFeed(noise_counts=0)
    source = SessionSource(feed)
    source.poll()
    t = np.arange(400) / 100.0
    tone = np.round(3 * np.sin(2 * np.pi * 12.0 * t)).astype(np.int64)
    from protocol.events import FrameBlock

    readings = 1000 + np.repeat(tone[:, None], len(feed.names), axis=1)
    feed.queue.append(FrameBlock(t + 1.0, np.arange(400), readings, 0))
    source.poll()
    spec = source.spectrum(0)
    ref = source.session.measures.spectrum(0)
    assert spec is not None and ref is not None
    assert spec.freq_hz[int(np.argmax(spec.amplitude_counts))] == pytest.approx(ref.freq_hz, abs=0.01)
    assert ref.freq_hz == pytest.approx(12.0, abs=0.5)
    assert f"{ref.freq_hz:.1f} Hz" in spec.summary


def test_help_shows_keys_as_printed_on_the_keyboard() -> None:
    from textual.binding import Binding

    from tui.app import PadtuneApp
    from tui.render.help import key_display, key_label
    from tui.screens.live import LiveScreen
    from tui.widgets.channel_table import ChannelTable

    assert key_display("pagedown") == "PgDn"
    assert key_display("pageup") == "PgUp"
    assert key_display("left,shift+tab") == "← / Shift+Tab"
    assert key_display("enter,e") == "Enter / e"
    assert key_display("escape,q,question_mark,f1") == "Esc / q / ? / F1"
    assert key_display("U,ctrl+y") == "U / Ctrl+Y"
    assert key_display("plus,equals_sign") == "+ / ="
    assert [key_label(k) for k in ("home", "end", "space", "ctrl+p", "right_square_bracket")] == [
        "Home", "End", "Space", "Ctrl+P", "]"]
    # Every key the live screen binds, as Textual names it once bound, gets a label without Textual's
    # underscores or lower-case names.
    for b in Binding.make_bindings([*ChannelTable.BINDINGS, *LiveScreen.BINDINGS, *PadtuneApp.BINDINGS]):
        shown = key_display(b.key)
        assert "_" not in shown and "pagedown" not in shown and "shift+" not in shown, shown


def test_edit_bar_names_every_setting_in_words_and_keeps_the_edited_one_on_screen() -> None:
    from processing.settings import ChannelSettings
    from tui.fields import EDIT_FIELDS
    from tui.render.settings import edit_bar

    s = ChannelSettings(threshold_counts=30, hysteresis_counts=8)
    for width in (80, 120, 200):
        for f in EDIT_FIELDS:
            bar = edit_bar("zone1", s, f.key, {}, width, "1/9").plain
            assert len(bar) <= width, (width, bar)
            assert f"▸{f.short} " in bar  # the field under edit is always shown, in words
            for cryptic in ("t-deb", "r-deb", "thr ", "hyst "):
                assert cryptic not in bar, bar
    wide = edit_bar("zone1", s, "threshold_counts", {}, 200, "").plain
    assert wide.startswith("zone1 ▸threshold 30 counts hysteresis 8 │ debounce touch 3 release 3 │ "
                           "baseline slow 6 fast 2 every 16 │ stuck after never")
    narrow = edit_bar("zone1", s, "baseline_slow_shift", {}, 80, "1/9").plain
    # 1/2**6 of the way a step: the shift read as the fraction it stands for
    assert "baseline ▸slow 6 (1/64 a step toward a touch)" in narrow and narrow.startswith("zone1 1/9 … ")
    last = edit_bar("zone1", s, "stuck_timeout_frames", {}, 80, "").plain
    assert last.endswith("▸stuck after never │ polarity + ") and "…" in last
    # the polarity, the edit bar's last field: its sign and, under edit, what it means
    pol = edit_bar("zone1", s, "polarity", {}, 80, "1/9", polarity=-1).plain
    assert pol.endswith("│ ▸polarity - (counts fall on touch) ") and len(pol) <= 80
    learning = edit_bar("zone1", s, "threshold_counts", {}, 200, "", polarity=None,
                        status="provisional").plain
    assert learning.startswith("zone1 provisional ▸threshold 30")
    assert learning.endswith("polarity ? learning ")


def test_link_strip_cuts_a_long_reason_so_the_first_line_keeps_the_rate_at_80_cells() -> None:
    v = LinkView(port="/dev/pts/1", baud=115200, state="reconnecting", fps=14.0,
                 detail="read failed: device reports readiness to read but returned no data (device "
                 "disconnected or multiple access on port?)")
    first = link_strip(v, {}, compact=True, width=78).plain.split("\n")[0]
    assert len(first) <= 78 and first.endswith("115200 Bd │ 14 fps") and "RECONNECTING (read failed" in first
    assert "…" in first


def test_detail_title_keeps_the_spectrum_finding_whole_at_80_columns() -> None:
    import numpy as np

    from processing.measure import SpectrumPeak
    from tui.widgets.detail_panel import Spectrum, detail_title

    finding = "strongest noise at 17.5 Hz: alias of 100 Hz (mains harmonic 2, 50 Hz)"
    peak = SpectrumPeak(17.5, 1.0, 200, 50.0, 2, 17.5, prominence=10.0)
    spectrum = Spectrum(np.array([17.5]), np.array([1.0]), 200, 16, 200, 117.5, peak)
    assert spectrum.summary == finding
    for width in (78, 118, 200):
        title = detail_title("zone1", spectrum, width)
        assert finding in title and len(title) <= width
    assert "(f: back to the plot)" in detail_title("zone1", spectrum, 200)
    assert detail_title("zone1", None, 78).startswith("zone1: reading ⣿")


def test_edit_bar_uses_the_last_cell_it_has() -> None:
    from processing.settings import ChannelSettings
    from tui.render.settings import edit_bar

    s = ChannelSettings(threshold_counts=100, hysteresis_counts=15, touch_debounce_frames=3,
                        release_debounce_frames=3)
    line = "zone1 1/9 ▸threshold 100 counts hysteresis 15 │ debounce touch 3 release 3 … "
    assert edit_bar("zone1", s, "threshold_counts", {}, len(line), "1/9").plain == line  # exactly fits
    assert "debounce" not in edit_bar("zone1", s, "threshold_counts", {}, len(line) - 1, "1/9").plain

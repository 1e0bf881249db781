"""A channel's settings as lines, the one being edited marked, with release level worked out.

`pending` names the settings that are not in force yet (a key still measuring its noise gets its
threshold, hysteresis and debounce from it): they read `--`, never the defaults they will replace.
"""

from __future__ import annotations

from collections.abc import Collection, Mapping

from rich.text import Text

from processing.settings import ChannelSettings
from tui.fields import (
    FIELDS,
    POLARITY_FIELD,
    POLARITY_KEY,
    TIME_KEYS,
    Field,
    format_ms,
    frames_to_ms,
    polarity_meaning,
    polarity_word,
)
from tui.render import Styles, pick
from tui.words import unit_word, with_unit

NOT_YET = "--"
# What a board that takes settings did with a value it was sent (tui/board_sync.py): a glyph after the
# value on every field, and glyph and word on the field under edit and in the bar's head.
BOARD_MARKS = {"applied": ("✓", "on board", "applied"), "refused": ("✗", "refused", "refused"),
               "sending": ("…", "sending", "dim"), "no answer": ("?", "no answer", "refused"),
               "differs": ("≠", "differs on board", "refused")}


def settings_text(settings: ChannelSettings, selected_key: str | None, styles: Styles,
                  rate_hz: float | None = None, polarity: int | None = 1, status: str = "",
                  pending: Collection[str] = ()) -> Text:
    """The detail panel's settings: every field with its unit and what it means, then the release level
    with the polarity, and `status` ("provisional", ...) when the settings are not tuned yet."""
    text = Text(no_wrap=True, end="")
    for f in FIELDS:
        value = getattr(settings, f.key)
        mark = "▸" if f.key == selected_key else " "
        role = "cursor" if f.key == selected_key else "name"
        text.append(f"{mark} {f.label:<19} ", pick(styles, role))
        if f.key in pending:
            text.append(f"{NOT_YET:>6}", pick(styles, "dim"))
            text.append("\n")
            continue
        if f.key == "stuck_timeout_frames" and value == 0:
            text.append(f"{'never':>6}", pick(styles, role))
        else:
            text.append(f"{value:>6} {unit_word(value, f.unit)}", pick(styles, role))
        if rate_hz and f.unit == "frames" and value:
            text.append(f" {format_ms(frames_to_ms(value, rate_hz))}", pick(styles, "dim"))
        if f.unit == "shift" and 0 <= value < 31:  # what the shift stands for: the fraction a step
            text.append(f" 1/{2 ** value}", pick(styles, "dim"))
        text.append("\n")
    # The release level with the polarity on one line: the panel has no line to spare at 80x24 (the
    # edit bar says more about both).
    chosen = selected_key == POLARITY_KEY
    release = NOT_YET if {"threshold_counts", "hysteresis_counts"} & set(pending) else \
        with_unit(settings.release_level_counts, "counts")
    text.append(f"  release at {release} · ", pick(styles, "dim"))
    text.append(f"{'▸' if chosen else ''}polarity {polarity_word(polarity)}",
                pick(styles, "cursor" if chosen else "dim"))
    if status:
        text.append(f" · {status}", pick(styles, "dim"))
    return text


def edit_bar(name: str, settings: ChannelSettings, selected_key: str, styles: Styles, width: int,
             position: str = "", polarity: int | None = 1, status: str = "",
             pending: Collection[str] = (), board: Mapping[str, str] | None = None,
             rate_hz: float | None = None) -> Text:
    """One line: the selected channel and its settings in their groups, then its polarity, the field
    under edit marked `▸` and named in full with its unit. `status` ("provisional", "measuring noise")
    follows the name when the settings are not tuned yet; `pending` settings read `--`.

    Groups that do not fit in `width` give way, farthest from the one being edited first, and show as
    `…`: the bar never wraps and the field being edited is always on it.

    `board` (a board that takes settings) maps each setting it was sent to `applied`, `refused`,
    `sending` or `no answer`: a glyph follows that value, the field under edit says the word too, and
    the head sums up the channel (`✗ 1 refused`, `✓ on board`).

    A frame count under edit also reads in ms at the board's `rate_hz` (`▸touch 3 frames = 50 ms`).
    """
    board = board or {}
    groups = _field_groups()
    chosen = next(i for i, g in enumerate(groups) if any(f.key == selected_key for f in g))
    pieces = [_group_pieces(g, settings, selected_key, styles, polarity, pending, board, rate_hz)
              for g in groups]
    head = Text(no_wrap=True, end="")
    head.append(f"{name} ", pick(styles, "header"))
    if position:
        head.append(f"{position} ", pick(styles, "dim"))
    if status:
        head.append(f"{status} ", pick(styles, "pending"))
    if board:
        head.append_text(_board_summary(board, styles))
    sep = Text("│ ", style=pick(styles, "dim"))
    shown = _fitting(chosen, [p.cell_len for p in pieces], width - head.cell_len, sep.cell_len)
    text = head
    for i, piece in enumerate(pieces):
        if i not in shown:
            if i == 0 or i - 1 in shown:
                text.append("… ", pick(styles, "dim"))
            continue
        if i and i - 1 in shown:
            text.append_text(sep)
        text.append_text(piece)
    return text


def _fitting(chosen: int, widths: list[int], room: int, sep_cells: int) -> set[int]:
    """The groups that fit in `room`: the chosen one, then its neighbours outward, one side at a time,
    with a separator between shown groups and two cells for each `…` that stands for those left out."""
    lo = hi = chosen
    used = widths[chosen]

    def fits(extra: int, new_lo: int, new_hi: int) -> bool:
        marks = (new_lo > 0) + (new_hi < len(widths) - 1)
        return used + extra + sep_cells * (new_hi - new_lo) + 2 * marks <= room

    grew = True
    while grew:
        grew = False
        if hi + 1 < len(widths) and fits(widths[hi + 1], lo, hi + 1):
            hi += 1
            used += widths[hi]
            grew = True
        if lo > 0 and fits(widths[lo - 1], lo - 1, hi):
            lo -= 1
            used += widths[lo]
            grew = True
    return set(range(lo, hi + 1))


def _field_groups() -> list[list[Field]]:
    """The edit bar's groups: each ungrouped field alone, grouped ones together, in FIELDS order."""
    groups: list[list[Field]] = []
    for f in FIELDS:
        if f.group and groups and groups[-1][0].group == f.group:
            groups[-1].append(f)
        else:
            groups.append([f])
    # threshold and hysteresis read as one pair: the touch level and how far below it a touch ends
    if len(groups) > 1 and not groups[0][0].group and not groups[1][0].group:
        groups[0:2] = [groups[0] + groups[1]]
    return [*groups, [POLARITY_FIELD]]


def _board_summary(board: Mapping[str, str], styles: Styles) -> Text:
    """The channel's settings on the board in a glyph and words: the worst news first."""
    text = Text(no_wrap=True, end="")
    for state in ("refused", "no answer", "differs", "sending"):
        n = sum(1 for s in board.values() if s == state)
        if n:
            glyph, word, role = BOARD_MARKS[state]
            text.append(f"{glyph} {n} {word} ", pick(styles, role))
            return text
    glyph, word, role = BOARD_MARKS["applied"]
    text.append(f"{glyph} {word} ", pick(styles, role))
    return text


def _mark(text: Text, key: str, selected: bool, board: Mapping[str, str], styles: Styles) -> None:
    state = board.get(key)
    if state is None or state not in BOARD_MARKS:
        return
    glyph, word, role = BOARD_MARKS[state]
    text.append(f" {glyph} {word}" if selected else glyph, pick(styles, role))


def _group_pieces(group: list[Field], settings: ChannelSettings, selected_key: str, styles: Styles,
                  polarity: int | None = 1, pending: Collection[str] = (),
                  board: Mapping[str, str] | None = None, rate_hz: float | None = None) -> Text:
    board = board or {}
    text = Text(no_wrap=True, end="")
    if group[0].group:
        text.append(f"{group[0].group} ", pick(styles, "header"))
    for f in group:
        if f.key == POLARITY_KEY:
            shown = polarity_word(polarity)
            if f.key == selected_key:
                text.append(f"▸{f.short} {shown} ({polarity_meaning(polarity)})", pick(styles, "cursor"))
            else:
                text.append(f"{f.short} {shown}" + (" learning" if polarity is None else ""),
                            pick(styles, "pending" if polarity is None else "dim"))
            _mark(text, f.key, f.key == selected_key, board, styles)
            text.append(" ")
            continue
        value = getattr(settings, f.key)
        if f.key in pending:
            chosen = f.key == selected_key
            shown = f"▸{f.short} {NOT_YET} (set from its noise)" if chosen else f"{f.short} {NOT_YET}"
            text.append(shown, pick(styles, "cursor" if chosen else "pending"))
        elif f.key == selected_key:
            text.append(f"▸{f.short} {_meaning(f, value, rate_hz)}", pick(styles, "cursor"))
        else:
            shown = "never" if f.key == "stuck_timeout_frames" and value == 0 else str(value)
            text.append(f"{f.short} {shown}", pick(styles, "dim"))
        _mark(text, f.key, f.key == selected_key, board, styles)
        text.append(" ")
    return text


def _meaning(f: Field, value: int, rate_hz: float | None = None) -> str:
    """The value under edit and what it stands for: with its unit (a frame count in ms too, at the
    board's rate), or for the baseline follow shifts the fraction of the way the baseline moves a step
    (a shift of 6 moves it 1/64 of the way)."""
    if f.key == "stuck_timeout_frames" and value == 0:
        return "never"
    if f.key in TIME_KEYS and rate_hz and rate_hz > 0:
        return f"{with_unit(value, f.unit)} = {format_ms(frames_to_ms(value, rate_hz))}"
    if f.unit == "shift":
        toward = "toward a touch" if f.key == "baseline_slow_shift" else "away from a touch"
        return f"{value} (1/{2 ** value} a step {toward})" if 0 <= value < 31 else str(value)
    return with_unit(value, f.unit)

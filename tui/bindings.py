"""Every key of the live screen, in one list: the app binds them, the help screen and the command
palette are built from them, so the three cannot disagree.

Each binding has an id `section.name` (the section heads its group in the help screen), a short
description for the footer and a `tooltip` with the full sentence for help and the palette.
"""

from __future__ import annotations

from collections.abc import Iterable

from textual.binding import Binding

# Binding id prefix -> the section it is listed under in the help screen.
SECTIONS = {
    "move": "Move", "edit": "Edit the selected channel", "chan": "Channel and display",
    "rec": "Recording", "prof": "Profile", "demo": "Simulated board (demo)", "app": "App",
}

B = Binding
BINDINGS: list[Binding] = [
    B("down,j", "cursor(1)", "Next channel", id="move.down", show=False),
    B("up,k", "cursor(-1)", "Previous channel", id="move.up", show=False),
    B("pagedown", "cursor_page(1)", "Page down", id="move.pagedown", show=False),
    B("pageup", "cursor_page(-1)", "Page up", id="move.pageup", show=False),
    B("home", "cursor_to(0)", "First channel", id="move.first", show=False),
    B("end", "cursor_to(-1)", "Last channel", id="move.last", show=False),
    B("right,tab", "field(1)", "Next setting to edit", id="move.field_next", show=False),
    B("left,shift+tab", "field(-1)", "Previous setting to edit", id="move.field_prev", show=False),
    B("plus,equals_sign", "step(1, False)", "Raise the setting (fine step)", id="edit.up", key_display="+",
      show=False),
    B("minus", "step(-1, False)", "Lower the setting (fine step)", id="edit.down", key_display="-",
      show=False),
    B("right_square_bracket", "step(1, True)", "Raise the setting (coarse step)", id="edit.up_coarse",
      show=False),
    B("left_square_bracket", "step(-1, True)", "Lower the setting (coarse step)", id="edit.down_coarse",
      show=False),
    B("enter,e", "type_value", "Type a value for the setting", id="edit.type", key_display="⏎",
      show=False),
    B("a", "apply_all", "Copy this channel's settings to all channels", id="edit.all", show=False),
    B("g", "apply_group", "Copy this channel's settings to its group", id="edit.group", show=False),
    B("u", "undo", "Undo the last edit", id="edit.undo", show=False),
    B("U,ctrl+y", "redo", "Redo", id="edit.redo", show=False),
    B("b", "rebaseline(False)", "Re-baseline the selected channel", id="chan.rebase", show=False),
    B("B", "rebaseline(True)", "Re-baseline all channels", id="chan.rebase_all", show=False),
    B("d", "toggle_detail", "detail", id="chan.detail", tooltip="Detail panel: plot, settings, events"),
    B("f", "toggle_spectrum", "Noise spectrum in the detail panel", id="chan.spectrum", show=False),
    B("space", "toggle_pause", "pause", id="chan.pause", key_display="Space",
      tooltip="Pause / resume the display (detection keeps running)"),
    B("r", "toggle_recording", "record", id="rec.toggle", tooltip="Start / stop recording to a CSV file"),
    B("m", "mark", "Mark this moment in the recording", id="rec.mark", show=False),
    B("s,ctrl+s", "save", "save", id="prof.save", tooltip="Save the profile"),
    B("S", "save_as", "Save the profile as another file", id="prof.save_as", show=False),
    B("o", "load", "Load another profile", id="prof.load", show=False),
    B("x", "export", "Export for firmware (C header or JSON)", id="prof.export", show=False),
    B("t", "tap", "Tap the selected key on the simulated board", id="demo.tap", show=False),
    B("p", "hold", "Hold / let go of the selected key on the simulated board", id="demo.hold", show=False),
    *[B(str(n % 10), f"hold_number({n - 1})", f"Hold / let go of key {n} on the simulated board",
        id=f"demo.key{n}", show=False) for n in range(1, 11)],
    B("w", "wizard", "Guided capture: measure noise and touches, suggest settings", id="app.wizard",
      show=False),
    B("question_mark,f1", "help", "help", id="app.help", key_display="?",
      tooltip="Help: every key and the safety cautions"),
    B("q,ctrl+q", "quit", "quit", id="app.quit", tooltip="Quit (asks when edits are unsaved)"),
]


# Actions that are off while a dialog or another screen is on top: all but quit (help's own keys
# then show in the footer instead of the live screen's).
_COVERED_OFF = {b.action.split("(")[0] for b in BINDINGS} - {"quit"}
# ... except that a full screen over the live one (the guided capture, which asks to touch each key)
# still lets the simulated board's keys be pressed: in the demo that is the only way to touch them.
_PRESS_THROUGH = {"hold_number", "hold", "tap"}


def help_rows(bindings: Iterable[Binding] = BINDINGS) -> list[tuple[str, str, str]]:
    """(section, keys, description) for every binding; the demo keys 1..0 collapse into one row."""
    rows: list[tuple[str, str, str]] = []
    for b in bindings:
        if b.id and b.id.startswith("demo.key"):
            if b.id == "demo.key1":
                rows.append((SECTIONS["demo"], "1 … 9,0",
                             "Hold / let go of key 1 … 9, or key 10 (0), on the simulated board"))
            continue
        section = SECTIONS.get((b.id or "app").split(".")[0], "App")
        rows.append((section, b.key, b.tooltip or b.description))
        if b.id == "edit.down":  # the same keys on the edit bar's last field
            rows.append((section, "plus,minus", "On the polarity field (the edit bar's last: ← from "
                         "threshold): + when counts rise on touch, - when they fall; Enter, then ?, to learn "
                         "it again from the next touch"))
        if b.id == "chan.rebase_all":  # what the table shows before a key is tuned
            rows.append((section, "≈", "In the table: provisional threshold and hysteresis, from the key's "
                         "own noise (edit it, run the guided capture w, or load a profile). The state "
                         "reads '~ noise' while its quiet second is measured (hands off), '? learn' until "
                         "a first touch shows which way its counts move"))
    rows.append((SECTIONS["app"], "ctrl+p", "Command palette: every action by name"))
    return rows

"""Where headless runs write what happened: JSON Lines for scripts, readable lines for people.

Both writers take the same calls (`hello`, `touch`, `release`, `link`, `note`, `twin_mismatch`, `status`,
`summary`) with
plain values, so the run loop does not care which one it has. `t` is seconds since the run started.
The human writer uses rich: colour on a terminal, plain text when piped, none at all under NO_COLOR.
"""

from __future__ import annotations

import json
import math
import os
import sys
from collections.abc import Mapping, Sequence
from typing import IO, Any, Protocol

from rich import box
from rich.console import Console
from rich.table import Table
from rich.text import Text

from protocol.printable import printable


def _clean(value: Any) -> Any:
    """JSON-safe: numpy scalars to Python, NaN/inf to null, tuples to lists."""
    if isinstance(value, Mapping):
        return {str(k): _clean(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_clean(v) for v in value]
    if hasattr(value, "item") and not isinstance(value, str | bytes):
        value = value.item()
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, float):
        return round(value, 6)
    return value


class Output(Protocol):
    def hello(self, t_s: float, info: Mapping[str, Any]) -> None: ...
    def touch(self, t_s: float, channel: str, index: int, delta_counts: int) -> None: ...
    def release(self, t_s: float, channel: str, index: int, held_s: float, stuck: bool = False) -> None: ...
    def link(self, t_s: float, event: str, count: int = 1, detail: str = "") -> None: ...
    def note(self, t_s: float, text: str) -> None: ...
    def group(self, t_s: float, group: str, channel: str | None, index: int) -> None: ...
    def slider(self, t_s: float, slider: str, position: int | None, touched: bool, index: int) -> None: ...
    def twin_mismatch(self, t_s: float, channel: str, index: int, board_state: str, padtune_state: str,
                      count: int, seq: int | None = None) -> None: ...
    def status(self, t_s: float, channels: Sequence[Mapping[str, Any]]) -> None: ...
    def summary(self, t_s: float, summary: Mapping[str, Any]) -> None: ...
    def close(self) -> None: ...


class JsonLinesOutput:
    """One JSON object per line, each with `type` and `t`; flushed per line so a pipe sees it at once."""

    def __init__(self, stream: IO[str]) -> None:
        self.stream = stream

    def _emit(self, kind: str, t_s: float, **fields: Any) -> None:
        record = {"type": kind, "t": round(float(t_s), 6), **_clean(fields)}
        self.stream.write(json.dumps(record, separators=(",", ":")) + "\n")
        self.stream.flush()

    def hello(self, t_s: float, info: Mapping[str, Any]) -> None:
        self._emit("hello", t_s, **info)

    def touch(self, t_s: float, channel: str, index: int, delta_counts: int) -> None:
        self._emit("touch", t_s, channel=channel, index=index, delta=delta_counts)

    def release(self, t_s: float, channel: str, index: int, held_s: float, stuck: bool = False) -> None:
        self._emit("release", t_s, channel=channel, index=index, held_s=held_s, stuck=stuck)

    def link(self, t_s: float, event: str, count: int = 1, detail: str = "") -> None:
        self._emit("link", t_s, event=event, count=count, detail=detail)

    def note(self, t_s: float, text: str) -> None:
        self._emit("note", t_s, text=text)

    def group(self, t_s: float, group: str, channel: str | None, index: int) -> None:
        self._emit("group", t_s, group=group, channel=channel, index=index)

    def slider(self, t_s: float, slider: str, position: int | None, touched: bool, index: int) -> None:
        self._emit("slider", t_s, slider=slider, position=position, touched=touched, index=index)

    def twin_mismatch(self, t_s: float, channel: str, index: int, board_state: str, padtune_state: str,
                      count: int, seq: int | None = None) -> None:
        # `seq` (the board's own sequence number of the frame) only when the board sent one.
        extra = {} if seq is None else {"seq": seq}
        self._emit("twin_mismatch", t_s, channel=channel, index=index, board_state=board_state,
                   padtune_state=padtune_state, count=count, **extra)

    def status(self, t_s: float, channels: Sequence[Mapping[str, Any]]) -> None:
        self._emit("status", t_s, channels=list(channels))

    def summary(self, t_s: float, summary: Mapping[str, Any]) -> None:
        self._emit("summary", t_s, **summary)

    def close(self) -> None:
        self.stream.flush()


PLAIN_WIDTH = 200


class PipeConsole(Console):
    """rich ends the process with exit code 1 when the reader goes away (`| head`), but padtune's 1
    means a failed check: here a closed pipe raises BrokenPipeError, which the command ends on quietly
    (`tui.headless.ports.quiet_broken_pipe`) with its own exit code."""

    def on_broken_pipe(self) -> None:
        self.quiet = True
        raise BrokenPipeError("the reader of the output went away")


def make_console(stream: IO[str] | None = None, stderr: bool = False) -> Console:
    """A rich console that is plain when piped and colourless under NO_COLOR (rich honours both)."""
    target = stream if stream is not None else (sys.stderr if stderr else sys.stdout)
    console = PipeConsole(file=target, no_color="NO_COLOR" in os.environ or None, highlight=False,
                          markup=False, soft_wrap=True)
    if not console.is_terminal and "COLUMNS" not in os.environ:
        console.width = PLAIN_WIDTH  # a pipe has no width: never cut a table to 80 columns
    return console


def _fmt(value: Any, digits: int = 1) -> str:
    if value is None:
        return "-"
    if isinstance(value, float):
        return f"{value:.{digits}f}"
    return printable(str(value), double_backslash=False)  # names come from boards and files


# Verdicts are words first; colour only helps on a terminal (and goes away under NO_COLOR or a pipe).
VERDICT_STYLES = {"PASS": "bold green", "FAIL": "bold red", "solid": "green", "marginal": "yellow",
                  "weak": "red"}


def channel_table(rows: Sequence[Mapping[str, Any]], columns: Sequence[tuple[str, str]],
                  title: str | None = None, plain: bool = False) -> Table:
    """A rich table of per-channel dicts; `columns` are (key, heading). ASCII borders when plain."""
    table = Table(title=title, box=box.ASCII if plain else box.SIMPLE_HEAD, show_edge=not plain,
                  pad_edge=False)
    for key, heading in columns:
        left = key in ("name", "state", "verdict", "reason")
        table.add_column(heading, justify="left" if left else "right")
    for row in rows:
        table.add_row(*(Text(_fmt(row.get(key)), style=VERDICT_STYLES.get(str(row.get(key)), ""))
                        if key == "verdict" else Text(_fmt(row.get(key))) for key, _ in columns))
    return table


STATUS_COLUMNS = (("name", "key"), ("reading", "reading"), ("baseline", "baseline"), ("delta", "delta"),
                  ("state", "state"), ("noise", "noise rms"), ("snr", "SNR"), ("polarity", "polarity"),
                  ("settings", "settings"))


def _readable_status(row: Mapping[str, Any]) -> dict[str, Any]:
    """A status row for people: an unknown polarity reads "learning" (a bare "-" would read as a
    polarity), the state says when the key cannot report yet, provisional settings say so."""
    out = dict(row)
    phase = row.get("phase", "ready")
    if phase != "ready":
        out["state"] = "measuring noise" if phase == "measuring" else "learning polarity"
    if "polarity" in row:
        out["polarity"] = row["polarity"] or "learning"
    if "provisional" in row:
        out["settings"] = "provisional" if row["provisional"] else "tuned"
    return out


class HumanOutput:
    """Readable lines: `  12.345 s  touch    zone1  delta 412`, tables for status and summary."""

    def __init__(self, console: Console) -> None:
        self.console = console
        self.plain = not console.is_terminal

    def _line(self, t_s: float, word: str, style: str, rest: str) -> None:
        text = Text(f"{t_s:9.3f} s  ")
        text.append(f"{word:<8}", style=style)
        text.append(" " + printable(rest, double_backslash=False))  # names, notes, details: a board's text
        self.console.print(text)

    def hello(self, t_s: float, info: Mapping[str, Any]) -> None:
        names = ", ".join(info.get("names") or [])
        board = info.get("board") or "unnamed board"
        rate = info.get("rate_hz")
        channels = info.get("channels")
        rest = f"{board}: {'?' if channels is None else channels} channels"
        rest += f" at {rate:g} Hz" if rate else ""
        rest += f" ({names})" if names else ""
        form = info.get("form")
        if form and form != "v1":  # a plain form: say how it is read
            rest += f"; read as {form}"
            if info.get("scale", 1) != 1:
                rest += f", readings x{info['scale']} (decimals kept)"
            if info.get("time_column"):
                rest += ", first column is the board's time"
        self._line(t_s, "board", "bold", rest)

    def touch(self, t_s: float, channel: str, index: int, delta_counts: int) -> None:
        self._line(t_s, "touch", "bold green", f"{channel}  delta {delta_counts}  (frame {index})")

    def release(self, t_s: float, channel: str, index: int, held_s: float, stuck: bool = False) -> None:
        word, style = ("stuck", "bold red") if stuck else ("release", "cyan")
        self._line(t_s, word, style, f"{channel}  held {held_s:.2f} s  (frame {index})")

    def link(self, t_s: float, event: str, count: int = 1, detail: str = "") -> None:
        # A silence's count is its seconds, which the detail already says ("for 4 s").
        times = f" x{count}" if count != 1 and event != "silent" else ""
        rest = event + times + (f": {detail}" if detail else "")
        self._line(t_s, "link", "yellow", rest)

    def note(self, t_s: float, text: str) -> None:
        self._line(t_s, "note", "dim", text)

    def group(self, t_s: float, group: str, channel: str | None, index: int) -> None:
        self._line(t_s, "group", "magenta", f"{group}: {channel or 'none'} reported  (frame {index})")

    def slider(self, t_s: float, slider: str, position: int | None, touched: bool, index: int) -> None:
        where = f"at {position}" if touched and position is not None else "released"
        self._line(t_s, "slider", "magenta", f"{slider} {where}  (frame {index})")

    def twin_mismatch(self, t_s: float, channel: str, index: int, board_state: str, padtune_state: str,
                      count: int, seq: int | None = None) -> None:
        frames = f"{count} disagreeing frame{'' if count == 1 else 's'} so far"
        board_seq = "" if seq is None else f", board seq {seq}"
        self._line(t_s, "twin", "bold red", f"{channel}  board {board_state}, padtune {padtune_state}  "
                   f"(frame {index}{board_seq}; {frames})")

    def status(self, t_s: float, channels: Sequence[Mapping[str, Any]]) -> None:
        self.console.print(channel_table([_readable_status(c) for c in channels], STATUS_COLUMNS,
                                         title=f"status at {t_s:.1f} s", plain=self.plain))

    def summary(self, t_s: float, summary: Mapping[str, Any]) -> None:
        counts = ", ".join(f"{k} {summary[k]}" for k in ("frames", "lost", "garbled", "bad_checksum",
                                                          "overlong", "resets") if k in summary)
        # What the consumer was too slow to take is said only when it happened (every line counted).
        counts += "".join(f", {k} {summary[k]}" for k in ("overflow", "dropped") if summary.get(k))
        if summary.get("silent_s") is not None:
            counts += f"; nothing received: silent for {summary['silent_s']:.1f} s"
        self.console.print(Text(f"summary after {t_s:.1f} s: {counts}"))
        if "twin_compared" in summary:  # the board sent its own key states (PROTOCOL.md section 3)
            self.console.print(Text(f"twin check: {summary['twin_mismatches']} of {summary['twin_compared']} "
                                    "frames with the board's states disagreed with padtune"))
        columns = [("name", "key"), ("touches", "touches"), ("noise_rms", "noise rms"),
                   ("noise_pp", "noise pp"), ("snr", "SNR")]
        if any("false_touches" in c for c in summary.get("channels", [])):
            columns.append(("false_touches", "false"))
        self.console.print(channel_table(summary.get("channels", []), columns, plain=self.plain))

    def close(self) -> None:
        self.console.file.flush()


def make_output(as_json: bool, stream: IO[str] | None = None) -> Output:
    target = stream if stream is not None else sys.stdout
    if as_json:
        return JsonLinesOutput(target)
    return HumanOutput(make_console(target))

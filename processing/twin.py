"""The twin check: the board's own key states (the frames' state field) against padtune's (pure).

A board that runs the same detector as padtune (the C library in `devices/firmware/`) may send, with
each frame, what it decided after that frame (PROTOCOL.md section 3, `FrameBlock.board_states`).
padtune runs its own engine on the same readings; `TwinCheck.compare` puts the two side by side frame
by frame and says when they disagree, without flooding:

- the first disagreement is reported at once (key, frame index, the board's state and padtune's);
- after that every disagreeing frame is counted (`count`: disagreeing frames so far, a frame counts
  once however many keys disagree in it), and reported again only when the count reaches a power of
  two (2, 4, 8, ...), naming the first key that disagrees in that frame;
- once the two have agreed for a second of frames (board-rate seconds: `rate_hz` compared frames in a
  row), the next disagreement is a new first one and is reported at once again.

Only frames that carry states are compared, and only keys that padtune detects on (its first contact
done: `mask`); frames without states neither agree nor disagree. `rearm()` makes the next
disagreement a first one (the board restarted, a new session, padtune's settings or baselines changed
under the board); `reset()` also forgets the count (another board, another channel count). The
session (`processing.session`) owns one and calls it after every engine run.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from processing.detections import KeyState


@dataclass(frozen=True, slots=True)
class TwinMismatch:
    """One report: at frame `index` (host time `t_s`), key `channel` was `board_state` on the board
    and `padtune_state` in padtune; `count` disagreeing frames so far; `first` is true for a first
    disagreement (the very first, or the first after a second of agreement), false for a count report."""

    channel: int
    index: int
    t_s: float
    board_state: KeyState
    padtune_state: KeyState
    count: int
    first: bool
    seq: int | None = None  # the board's own sequence number of that frame (None: sent without one)

    def describe(self, name: str) -> str:
        """One line for a person (the log, stderr)."""
        at = f"frame {self.index}" + (f" (board seq {self.seq})" if self.seq is not None else "")
        what = (f"{name} at {at}: board {self.board_state.name.lower()}, "
                f"padtune {self.padtune_state.name.lower()}")
        if self.first:  # the count is worth saying only when this is not the very first
            return f"twin disagrees: {what}" + (f" ({self.count} frames so far)" if self.count > 1 else "")
        return f"twin: {self.count} frames disagree; latest {what}"


class TwinCheck:
    """Counts and reports disagreements between the board's states and padtune's (see the module)."""

    def __init__(self) -> None:
        self.count = 0  # disagreeing frames so far
        self.compared = 0  # frames compared (that carried states)
        self.last: TwinMismatch | None = None  # the latest report
        self._last_bad: int | None = None  # `compared` position of the last disagreeing frame (None: armed)

    @property
    def active(self) -> bool:
        """True once any frame with the board's states has been compared."""
        return self.compared > 0

    def rearm(self) -> None:
        """The next disagreement is reported at once, as a first one (the count goes on)."""
        self._last_bad = None

    def reset(self) -> None:
        """Start afresh: no count, nothing compared (another board, or another channel count)."""
        self.count = self.compared = 0
        self.last = None
        self._last_bad = None

    def compare(self, board: np.ndarray, padtune: np.ndarray, first_index: int, t_s: np.ndarray,
                rate_hz: float, mask: np.ndarray | None = None,
                seq: np.ndarray | None = None) -> list[TwinMismatch]:
        """Compare one block: `board` and `padtune` are (frames, channels) key states (KeyState values),
        padtune's after each frame; `first_index` the block's first frame index, `t_s` the frames' host
        times, `rate_hz` the board's frame rate (a second of agreement re-arms), `mask` the channels
        compared (None: all), `seq` the board's sequence numbers (-1: none; they go into the reports, a
        firmware engineer looks a frame up by the board's own count). Returns the reports, oldest first."""
        n = board.shape[0]
        if n == 0:
            return []
        differ = board != padtune
        if mask is not None:
            differ &= mask[None, :]
        rows = np.flatnonzero(differ.any(axis=1))
        start = self.compared
        self.compared += n
        if not len(rows):
            return []
        pos = start + rows  # positions among compared frames
        counts = self.count + np.arange(1, len(rows) + 1)
        self.count += len(rows)
        previous = np.empty_like(pos)
        previous[1:] = pos[:-1]
        previous[0] = -1 if self._last_bad is None else self._last_bad
        agreed = pos - previous - 1  # frames in a row that agreed before this one
        need = max(1, math.ceil(rate_hz))
        first = agreed >= need
        if self._last_bad is None:
            first[0] = True
        self._last_bad = int(pos[-1])
        power = (counts & (counts - 1)) == 0
        out = []
        for k in np.flatnonzero(first | power).tolist():
            row = int(rows[k])
            ch = int(np.argmax(differ[row]))
            board_seq = int(seq[row]) if seq is not None and seq[row] >= 0 else None
            out.append(TwinMismatch(ch, first_index + row, float(t_s[row]), KeyState(int(board[row, ch])),
                                    KeyState(int(padtune[row, ch])), int(counts[k]), bool(first[k]),
                                    board_seq))
        if out:
            self.last = out[-1]
        return out

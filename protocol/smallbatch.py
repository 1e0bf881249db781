"""The decoder's way for small batches: a strict regex per line, then one conversion per run.

A handful of lines (what a live link usually reads at once) costs less this way than the fixed
price of `protocol.fastscan`'s vectorised passes. Frames are taken here when they are plain
decimal values (at most ten digits) with the v1 separators, `@seq` or not, with a state field or not,
checksummed or not. Every other
line, or a run with a value out of range, goes through `LineRules.line`, so the results are the
per-line rules' exactly (tests/protocol proves it with hypothesis, as for the scan).
"""

from __future__ import annotations

import binascii
import re

import numpy as np

from protocol.rules import INT32_MAX, INT32_MIN, SEQ_MODULUS, LineRules

# A run of spaces and tabs holding at most one comma; possessive, so a long run cannot backtrack.
_SEP = rb"(?>[ \t]*+,[ \t]*+|[ \t]++)"
_VALUE = rb"-?[0-9]{1,10}"
_FRAME = re.compile(
    rb"(?:@([0-9]{1,5})" + _SEP + rb")?(" + _VALUE + rb"(?:" + _SEP + _VALUE + rb")*" + _SEP + rb"?)"
    rb"(?:;([0-3]++))?(?:\*([0-9A-Fa-f]{4}))?"
)
_TO_SPACE = bytes.maketrans(b",\t", b"  ")


def _width(values: bytes) -> int:
    """How many values: the encoder's single spaces are counted, anything else is split."""
    if b"," in values or b"\t" in values or b"  " in values or values.endswith(b" "):
        return len(values.translate(_TO_SPACE).split())
    return values.count(b" ") + 1


class _Run:
    """Consecutive frames of one shape waiting to be converted together."""

    def __init__(self) -> None:
        self.lines: list[bytes] = []
        self.values: list[bytes] = []
        self.seqs: list[int] = []
        self.states: list[bytes] = []  # the state fields, when the run's frames carry them
        self.stated = False
        self.sequenced = False
        self.checked = False

    def flush(self, rules: LineRules, width: int) -> None:
        if not self.lines:
            return
        numbers = np.fromstring(b" ".join(self.values).translate(_TO_SPACE), dtype=np.int64, sep=" ")
        if len(numbers) != len(self.lines) * width or numbers.min() < INT32_MIN or numbers.max() > INT32_MAX:
            for line in self.lines:  # out of range (or a surprise): the per-line rules decide
                rules.line(line)
        else:
            n = len(self.lines)
            seq = np.array(self.seqs, dtype=np.int64) if self.sequenced else np.full(n, -1, dtype=np.int64)
            states = None
            if self.states:
                states = (np.frombuffer(b"".join(self.states), dtype=np.uint8) - 0x30).astype(np.int8)
                states = states.reshape(n, width)
            rules.accept_run(seq, numbers.reshape(n, width), self.checked, states)
        self.__init__()


def decode_lines(lines: list[bytes], rules: LineRules) -> None:
    """Apply the protocol to `lines` (LF removed) in order, taking the common frames in runs."""
    run = _Run()
    match = _FRAME.fullmatch
    crc = binascii.crc_hqx
    limit = rules.max_line_bytes
    # What the rules let through in bulk changes only when a line goes through them: read it again then.
    take_seq, take_plain = rules.holding == 0, rules.bulk_plain
    for line in lines:
        m = match(line)
        ok = m is not None and len(line) <= limit
        if ok:
            seq_text, values, states, given = m.groups()
            if given is None:
                ok = not (rules.strict or run.checked)
            else:
                ok = crc(line[: m.start(4) - 1], 0xFFFF) == int(given, 16)
            sequenced = seq_text is not None
            width = _width(values)
            ok = ok and width == rules.channels and (states is None or len(states) == width)
            if ok and sequenced:
                seq = int(seq_text)
                ok = seq < SEQ_MODULUS
            # Plain frames only once their form is v1 columns; nothing while a form's lines are held.
            ok = ok and (take_seq if sequenced else take_plain)
        if not ok:
            run.flush(rules, rules.channels or 0)
            rules.line(line)
            take_seq, take_plain = rules.holding == 0, rules.bulk_plain
            continue
        if run.lines and (sequenced != run.sequenced or (states is None) == run.stated):
            run.flush(rules, rules.channels)
        run.lines.append(line)
        run.values.append(values)
        run.sequenced = sequenced
        if sequenced:
            run.seqs.append(seq)
        if states is not None:
            run.states.append(states)
            run.stated = True
        run.checked = run.checked or given is not None
    run.flush(rules, rules.channels or 0)

"""A board's own settings (PROTOCOL.md section 7) against a profile: read, compare, write back.

Pure: from the `>val` replies a board gave (`protocol.commands.Reply`) to per-channel settings and
polarities (`BoardValues`), a profile built from them (`padtune pull`), the differences between a
profile and a board, one line each (`padtune push`, the live screen's dialog), and the `set` lines
that give a board a profile's settings.
"""

from __future__ import annotations

from collections import Counter
from collections.abc import Sequence
from dataclasses import dataclass

from processing.profile import Profile, profile_for
from processing.settings import SETTING_KEYS, ChannelSettings
from protocol.commands import POLARITY_KEY, Reply, polarity_text, set_line
from protocol.events import BoardInfo


@dataclass(frozen=True, slots=True)
class BoardChannel:
    """One channel as the board holds it."""

    settings: ChannelSettings
    polarity: int  # +1 or -1


BoardValues = dict[int, BoardChannel]


def board_values(replies: Sequence[Reply]) -> BoardValues:
    """The `>val` replies of a `get` as settings per channel (ValueError when a value breaks the rules:
    a board that holds settings a profile cannot is reported, not taken)."""
    out: BoardValues = {}
    for reply in replies:
        if reply.kind != "val" or reply.values is None or reply.channel is None:
            continue
        settings = ChannelSettings(**{k: reply.values[k] for k in SETTING_KEYS})
        problems = settings.problems()
        if problems:
            key, message = problems[0]
            held = reply.values[key]
            message = message.removesuffix(f", not {held}")  # the sentence names the value already
            raise ValueError(f"channel {reply.channel}: the board holds {key}={held}, which a profile "
                             f"cannot: {message}")
        out[reply.channel] = BoardChannel(settings, 1 if reply.values[POLARITY_KEY] > 0 else -1)
    return out


def profile_from_board_values(info: BoardInfo | None, values: BoardValues) -> Profile:
    """A profile holding what the board holds: its names, board name and rate from the info line,
    the most common settings as the defaults and the others as per-channel overrides, the polarity per
    channel as the board says it detects."""
    channels = max(values) + 1 if values else 0
    if info is not None and info.channels:
        channels = info.channels
    missing = [c for c in range(channels) if c not in values]
    if missing:
        raise ValueError(f"the board sent no values for channel {missing[0]}")
    names = tuple(info.names) if info is not None else ()
    base = profile_for(channels, names, (info.board or "") if info else "",
                       tuple(values[c].polarity for c in range(channels)), info.rate_hz if info else None)
    common = Counter(values[c].settings for c in range(channels)).most_common(1)[0][0]
    overrides = {c: values[c].settings for c in range(channels) if values[c].settings != common}
    return Profile(base.names, common, overrides, board=base.board, polarity=base.polarity,
                   rate_hz=base.rate_hz)


@dataclass(frozen=True, slots=True)
class Difference:
    channel: int
    name: str
    key: str
    profile: str
    board: str

    def line(self) -> str:
        return f"{self.name}: {self.key} is {self.board} on the board, {self.profile} in the profile"


def differences(profile: Profile, values: BoardValues) -> list[Difference]:
    """Every setting where the board and the profile disagree, channel by channel in key order. The
    polarity counts only where the profile states one."""
    out: list[Difference] = []
    for c in range(profile.channels):
        name = profile.names[c]
        got = values.get(c)
        if got is None:
            out.append(Difference(c, name, "channel", "present", "missing"))
            continue
        want = profile.settings_for(c)
        for key in SETTING_KEYS:
            a, b = getattr(want, key), getattr(got.settings, key)
            if a != b:
                out.append(Difference(c, name, key, str(a), str(b)))
        if profile.polarity and profile.polarity[c] != got.polarity:
            out.append(Difference(c, name, POLARITY_KEY, polarity_text(profile.polarity[c]),
                                  polarity_text(got.polarity)))
    return out


def settings_pairs(settings: ChannelSettings, polarity: int | None = None,
                   keys: Sequence[str] = SETTING_KEYS) -> dict[str, int]:
    """The wire's key=value pairs for `keys` of `settings` (and the polarity, when given)."""
    pairs = {k: int(getattr(settings, k)) for k in keys}
    if polarity is not None:
        pairs[POLARITY_KEY] = 1 if polarity > 0 else -1
    return pairs


def push_lines(profile: Profile) -> list[bytes]:
    """`set` lines giving a board every setting of the profile, one per channel (with its polarity
    when the profile states one)."""
    polarity = profile.polarity or (None,) * profile.channels
    return [set_line(c, settings_pairs(profile.settings_for(c), polarity[c]))
            for c in range(profile.channels)]

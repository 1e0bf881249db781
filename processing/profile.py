"""The tuned profile: model, TOML load with full validation, atomic save. Keys: README "Profile file".

Loading checks everything before building anything, so a bad file is refused whole with every problem
listed as `file:key: what is wrong` (with a did-you-mean for misspelt keys); nothing is half-applied.
The file itself (not a regular file, larger than MAX_PROFILE_BYTES, not UTF-8 text, nested thousands deep,
numbers of thousands of digits) is checked by `protocol.tomlfile` first. Validation takes time linear in
the file: a flood of unknown keys or tables gets did-you-mean hints for the first few and a count, and
every key quoted from the file passes through `printable` (control characters escaped).
"""

from __future__ import annotations

import difflib
import os
from collections import Counter
from collections.abc import Iterable, Mapping
from dataclasses import asdict, dataclass, field, replace
from pathlib import Path
from typing import Any

import tomli_w

from processing.atomic import atomic_write_bytes
from processing.groups import GroupSpec
from processing.names import NAME_HINT, NAME_RE, channel_names, name_problem
from processing.settings import (
    LIMIT_KEYS,
    MAX_COUNTS,
    SETTING_KEYS,
    ChannelSettings,
    Limits,
    is_positive_number,
)
from processing.slider import SliderSpec
from protocol.errors import UserError
from protocol.printable import printable
from protocol.tomlfile import MIB, read_toml, shown_path

FORMAT_VERSION = 1
MAX_CHANNELS = 1024
# Far above any real profile: the largest padtune writes (1024 channels, each with every setting and limit
# of its own and a group per pair) is 563 KiB (tests/processing/test_profile_hostile.py measures it). Larger
# files are refused unread; a file at the cap parses in about 1.5 s at worst (tomllib, tiny tables).
MAX_PROFILE_BYTES = 2 * MIB
MAX_BOARD_CHARS = 200  # the board id: one line of printable text
SHOWN_PROBLEMS = 8  # a message lists this many problems, then says how many more
HINTED = 3  # unknown names that get a did-you-mean search; the rest are counted (each search is O(names))
LINE_CHARS = 300  # one problem's line is cut to this (a 4 MiB string value must not become the message)
TOP_KEYS = ("format_version", "board", "channels", "names", "polarity", "rate_hz", "defaults", "channel",
            "group", "slider", "limits")
Problems = list[tuple[str, str]]
GROUP_KEYS = ("name", "members", "switch_margin_counts")
CHANNEL_EXTRA_KEYS = ("measured", "limits")  # [channel.NAME] keys beside the settings
SLIDER_KEYS = ("name", "pads", "wheel", "resolution")


class ProfileError(UserError):
    """A profile that cannot be loaded or saved. `problems` holds every `file:key: message` line; the
    message is one line: the first SHOWN_PROBLEMS of them joined by ` | `, then how many more."""

    def __init__(self, problems: list[str]) -> None:
        self.problems = problems
        shown = [_cut(p) for p in problems[:SHOWN_PROBLEMS]]
        more = len(problems) - len(shown)
        if more:
            shown.append(f"and {more} more problem{'' if more == 1 else 's'}")
        super().__init__(" | ".join(shown))


def _cut(line: str) -> str:
    return line if len(line) <= LINE_CHARS else line[: LINE_CHARS - 3] + "..."


def _key(text: str) -> str:
    """A key or name quoted from the file, as a message shows it (escaped, cut)."""
    return printable(text, 60)


def _shown(value: Any) -> str:
    """A value quoted from the file: `'text'`, `3`, `[1, 2]`; a huge number by its digit count."""
    if isinstance(value, int) and not isinstance(value, bool) and abs(value) >= 10**18:
        return f"a number of {len(str(abs(value)))} digits"
    if isinstance(value, str):
        return f"'{printable(value, 60)}'"
    text = repr(value) if not isinstance(value, list | dict) or len(value) <= 8 else \
        f"a {'list' if isinstance(value, list) else 'table'} of {len(value)} items"
    return printable(text, 60)


@dataclass(frozen=True)
class Profile:
    """Everything a tuned board needs. `overrides` holds full settings for channels that differ;
    `channel_limits` full limits for channels whose limits differ from `limits` (`[channel.NAME.limits]`);
    `unmeasured_channels` the keys written from defaults, not measured (`measured = false`)."""

    names: tuple[str, ...]
    defaults: ChannelSettings = field(default_factory=ChannelSettings)
    overrides: Mapping[int, ChannelSettings] = field(default_factory=dict)
    groups: tuple[GroupSpec, ...] = ()
    sliders: tuple[SliderSpec, ...] = ()
    limits: Limits = field(default_factory=Limits)
    board: str = ""
    polarity: tuple[int, ...] = ()  # empty: take it from the board (+1 if the board does not say)
    rate_hz: float | None = None  # the board's frame rate when the profile was saved (informational)
    format_version: int = FORMAT_VERSION
    channel_limits: Mapping[int, Limits] = field(default_factory=dict)
    unmeasured_channels: frozenset[int] = frozenset()

    @property
    def channels(self) -> int:
        return len(self.names)

    def settings_for(self, channel: int) -> ChannelSettings:
        return self.overrides.get(channel, self.defaults)

    def all_settings(self) -> list[ChannelSettings]:
        return [self.settings_for(c) for c in range(self.channels)]

    def with_settings(self, channel: int, s: ChannelSettings) -> Profile:
        overrides = dict(self.overrides)
        if s == self.defaults:
            overrides.pop(channel, None)
        else:
            overrides[channel] = s
        return replace(self, overrides=overrides)

    def limits_for(self, channel: int) -> Limits:
        """The limits `check` judges `channel` by: its own `[channel.NAME.limits]` over `[limits]`."""
        return self.channel_limits.get(channel, self.limits)

    def with_limits(self, channel: int, limits: Limits) -> Profile:
        """This profile with `channel`'s own limits (dropped when they equal the profile's `[limits]`)."""
        own = dict(self.channel_limits)
        if limits == self.limits:
            own.pop(channel, None)
        else:
            own[channel] = limits
        return replace(self, channel_limits=own)

    def unmeasured(self) -> tuple[int, ...]:
        """Channels whose settings were written from defaults, not measured (`measured = false`), in order."""
        return tuple(sorted(self.unmeasured_channels))

    def with_measured(self, channel: int, measured: bool) -> Profile:
        marks = set(self.unmeasured_channels)
        if measured:
            marks.discard(channel)
        else:
            marks.add(channel)
        return replace(self, unmeasured_channels=frozenset(marks))

    def has_limits(self, channel: int, keys: tuple[str, ...]) -> bool:
        """True when `channel` has at least one of `keys` set (its own limits or the profile's)."""
        limits = self.limits_for(channel)
        return any(getattr(limits, k) is not None for k in keys)


def default_names(channels: int) -> tuple[str, ...]:
    return tuple(f"ch{c}" for c in range(channels))


def profile_for(channels: int, names: tuple[str, ...] = (), board: str = "", polarity: tuple[int, ...] = (),
                rate_hz: float | None = None) -> Profile:
    """A default profile for a board. Names are taken per channel (`processing.names.channel_names`): an
    invalid or repeated one falls back to chN for that channel alone."""
    pol = polarity if len(polarity) == channels else ()
    return Profile(names=channel_names(names, channels)[0], board=board, polarity=pol, rate_hz=rate_hz)


def profile_from_board(info: Any) -> Profile:
    """Defaults for the board an info line describes (`protocol.events.BoardInfo`)."""
    channels = info.channels or len(info.names)
    pol = tuple(info.polarity) * channels if len(info.polarity) == 1 else tuple(info.polarity)
    return profile_for(channels, tuple(info.names), info.board or "", pol, info.rate_hz)


# ---------------------------------------------------------------- validation

def _hint(name: str, candidates: Iterable[str]) -> str | None:
    """The closest candidate to a misspelt `name`, or None (long names are not searched: no name is long)."""
    if len(name) > 64:
        return None
    close = difflib.get_close_matches(name, list(candidates), n=1)
    return close[0] if close else None


def _unknown(where: str, table: Mapping[str, Any], allowed: tuple[str, ...], out: Problems) -> None:
    """The first `HINTED` unknown keys each with a did-you-mean hint if one is close; the keys the table
    knows are said once: after the last key without a hint, or with the count when there are more."""
    unknown = [key for key in table if key not in allowed]
    known = f"known keys here: {', '.join(allowed)}"
    many = len(unknown) > HINTED
    lines = []
    for key in unknown[:HINTED]:
        close = _hint(key, allowed)
        hint = f"; did you mean '{close}'?" if close else ""
        lines.append([f"{where}{_key(key)}", f"unknown key{hint}"])
    plain = [line for line in lines if not line[1].endswith("?")]
    if plain and not many:
        plain[-1][1] += f"; {known}"
    out.extend((w, m) for w, m in lines)
    if many:
        out.append((where.rstrip(".") or "(top level)", f"{len(unknown)} unknown keys in all "
                    f"(the first {HINTED} above); {known}"))


BOARD_FILE_TABLES = ("method", "overlay", "finger", "pad_defaults")  # what a board file has and a profile not


def _board_file(raw: Mapping[str, Any]) -> bool:
    """True for a simulated board's file (devices/boards/*.toml): `[board]` a table and board-only tables."""
    return isinstance(raw.get("board"), dict) and sum(t in raw for t in BOARD_FILE_TABLES) >= 2


def _is_int(v: Any) -> bool:
    return isinstance(v, int) and not isinstance(v, bool)


def _settings(where: str, table: Any, base: ChannelSettings, out: Problems,
              known: tuple[str, ...] = SETTING_KEYS) -> ChannelSettings | None:
    if not isinstance(table, dict):
        out.append((where.rstrip("."), "must be a table of settings"))
        return None
    _unknown(where, table, known, out)
    values = {k: v for k, v in table.items() if k in SETTING_KEYS}
    bad = [k for k, v in values.items() if not _is_int(v)]
    for k in bad:
        out.append((f"{where}{k}", f"must be a whole number, not {_shown(values[k])}"))
    huge = [k for k, v in values.items() if k not in bad and abs(v) >= 2**63]
    for k in huge:
        out.append((f"{where}{k}", f"{_shown(values[k])} is far out of range"))
    bad += huge
    if bad:
        return None
    s = replace(base, **values)
    for key, message in s.problems():
        out.append((f"{where}{key}", message))
    return s


def _names(raw: dict[str, Any], out: Problems) -> tuple[str, ...] | None:
    channels, names = raw.get("channels"), raw.get("names")
    if channels is None:
        out.append(("channels", "missing; add the channel count (channels = N)"))
        return None
    if not _is_int(channels) or not 1 <= channels <= MAX_CHANNELS:
        out.append(("channels", f"must be a channel count from 1 to {MAX_CHANNELS}, not {_shown(channels)}"))
        return None
    if names is None:
        return default_names(channels)
    if not isinstance(names, list) or not all(isinstance(n, str) for n in names):
        out.append(("names", "must be a list of channel names (strings)"))
        return None
    if len(names) != channels:
        out.append(("names", f"lists {len(names)} names but channels = {channels}"))
        return None
    for n in names:
        why = name_problem(n)
        if why is not None:
            out.append(("names", f"'{_key(n)}' is not a valid name ({why}; {NAME_HINT})"))
    dupes = sorted(n for n, count in Counter(names).items() if count > 1)
    if dupes:
        out.append(("names", f"duplicate names: {', '.join(_key(n) for n in dupes[:HINTED * 2])}"
                    + (f" and {len(dupes) - HINTED * 2} more" if len(dupes) > HINTED * 2 else "")))
    return tuple(names)


def _channel_refs(where: str, refs: Any, index: Mapping[str, int], out: Problems) -> tuple[int, ...] | None:
    """Channel indices for a list of names, or None (with the problems recorded) when any is wrong."""
    if not isinstance(refs, list) or not refs:
        out.append((where, "must be a non-empty list of channel names"))
        return None
    found: list[int] = []
    wrong = 0
    for ref in refs:
        if isinstance(ref, str) and ref in index:
            found.append(index[ref])
            continue
        wrong += 1
        if wrong > HINTED:
            continue
        if not isinstance(ref, str):
            out.append((where, f"{_shown(ref)} is not a channel name (names are strings in quotes)"))
        else:
            close = _hint(ref, index)
            hint = f"; did you mean '{close}'?" if close else ""
            out.append((where, f"unknown channel {_shown(ref)}{hint}"))
    if wrong > HINTED:
        out.append((where, f"{wrong} entries in all are not channel names of this profile"))
    if len(set(found)) != len(found):
        out.append((where, "lists a channel twice"))
    return tuple(found) if len(found) == len(refs) else None


def _unique_names(table: str, names: list[str], out: Problems) -> None:
    first: dict[str, int] = {}
    for i, name in enumerate(names):
        if name in first:
            out.append((f"{table}[{i}].name",
                        f"'{_key(name)}' is already the name of {table}[{first[name]}]"))
        else:
            first[name] = i


def _name_problem(where: str, name: Any, out: Problems) -> None:
    if name is None:
        out.append((f"{where}name", f"missing; give it a name ({NAME_HINT})"))
    elif not isinstance(name, str) or not NAME_RE.match(name):
        out.append((f"{where}name", f"must be a name ({NAME_HINT}), not {_shown(name)}"))


def _groups(raw: Any, names: Mapping[str, int], out: Problems) -> tuple[GroupSpec, ...]:
    groups: list[GroupSpec] = []
    for i, g in enumerate(raw if isinstance(raw, list) else []):
        where = f"group[{i}]."
        if not isinstance(g, dict):
            out.append((where.rstrip("."), "must be a table"))
            continue
        _unknown(where, g, GROUP_KEYS, out)
        name, margin = g.get("name"), g.get("switch_margin_counts", 0)
        _name_problem(where, name, out)
        if not _is_int(margin) or not 0 <= margin <= MAX_COUNTS:
            out.append((f"{where}switch_margin_counts",
                        f"must be a whole number from 0 to {MAX_COUNTS}, not {_shown(margin)}"))
        members = _channel_refs(f"{where}members", g.get("members"), names, out)
        if members is not None and len(members) == 1:
            out.append((f"{where}members", "an exclusive group needs at least two members"))
        groups.append(GroupSpec(str(name), members or (), margin if _is_int(margin) else 0))
    if raw is not None and not isinstance(raw, list):
        out.append(("group", "must be an array of tables ([[group]])"))
    _unique_names("group", [g.name for g in groups], out)
    return tuple(groups)


def _sliders(raw: Any, names: Mapping[str, int], out: Problems) -> tuple[SliderSpec, ...]:
    sliders: list[SliderSpec] = []
    for i, sl in enumerate(raw if isinstance(raw, list) else []):
        where = f"slider[{i}]."
        if not isinstance(sl, dict):
            out.append((where.rstrip("."), "must be a table"))
            continue
        _unknown(where, sl, SLIDER_KEYS, out)
        name, wheel, res = sl.get("name"), sl.get("wheel", False), sl.get("resolution", 100)
        _name_problem(where, name, out)
        if not isinstance(wheel, bool):
            out.append((f"{where}wheel", f"must be true or false, not {_shown(wheel)}"))
        if not _is_int(res) or not 2 <= res <= 65535:
            out.append((f"{where}resolution", f"must be a whole number from 2 to 65535, not {_shown(res)}"))
        pads = _channel_refs(f"{where}pads", sl.get("pads"), names, out)
        need = 3 if wheel is True else 2
        if pads is not None and len(pads) < need:
            kind = "wheel" if wheel is True else "slider"
            out.append((f"{where}pads", f"a {kind} needs at least {need} pads"))
        sliders.append(SliderSpec(str(name), pads or (), wheel is True, res if _is_int(res) else 100))
    if raw is not None and not isinstance(raw, list):
        out.append(("slider", "must be an array of tables ([[slider]])"))
    _unique_names("slider", [s.name for s in sliders], out)
    return tuple(sliders)


def _limits(raw: Any, out: Problems, where: str = "limits", base: Limits | None = None) -> Limits:
    """`[limits]`, or a channel's `[channel.NAME.limits]` (`where`) over the profile's (`base`)."""
    base = base or Limits()
    if raw is None:
        return base
    if not isinstance(raw, dict):
        out.append((where, "must be a table"))
        return base
    _unknown(f"{where}.", raw, LIMIT_KEYS, out)
    values = {k: v for k, v in raw.items() if k in LIMIT_KEYS}
    huge = [k for k, v in values.items() if _is_int(v) and abs(v) >= 2**63]
    for k in huge:
        out.append((f"{where}.{k}", f"{_shown(values.pop(k))} is far out of range"))
    limits = replace(base, **values)
    out.extend((f"{where}.{k}", m) for k, m in limits.problems())
    return limits


def _head(raw: dict[str, Any], out: Problems) -> None:
    version = raw.get("format_version")
    if version is None:
        out.append(("format_version", f"missing; add format_version = {FORMAT_VERSION}"))
    elif not _is_int(version):
        out.append(("format_version", f"must be the whole number {FORMAT_VERSION}, not {_shown(version)}"))
    elif version > FORMAT_VERSION:
        out.append(("format_version", f"{_shown(version)} is newer than this padtune reads "
                    f"({FORMAT_VERSION}); update padtune"))
    elif version < 1:
        out.append(("format_version", f"must be {FORMAT_VERSION}, not {_shown(version)}"))
    board = raw.get("board", "")
    if not isinstance(board, str):
        out.append(("board", "must be a string"))
    elif len(board) > MAX_BOARD_CHARS or not board.isprintable():
        out.append(("board", f"must be one line of at most {MAX_BOARD_CHARS} printable characters, not "
                    f"{_shown(board)}"))
    rate = raw.get("rate_hz")
    if rate is not None and (not is_positive_number(rate) or (_is_int(rate) and rate.bit_length() > 1000)):
        # the second test: an integer too large for a float (float() raises OverflowError on it)
        out.append(("rate_hz", f"must be a positive number, not {_shown(rate)}"))


def _unknown_channels(unknown: list[str], index: Mapping[str, int], out: Problems) -> None:
    """`[channel.X]` tables whose X is no channel: a hint each for a few, then one line with the count (a
    did-you-mean search per table against every name made 20,000 such tables take minutes)."""
    if len(unknown) <= HINTED:
        for key in unknown:
            close = _hint(key, index)
            hint = f"; did you mean '{close}'?" if close else ""
            out.append((f"channel.{_key(key)}", f"no channel named '{_key(key)}'{hint}"))
        return
    first = ", ".join(f"'{_key(key)}'" for key in unknown[:HINTED])
    out.append(("channel", f"{len(unknown)} [channel.NAME] tables name no channel of this profile "
                f"({first} and {len(unknown) - HINTED} more); `names` lists the channels"))


def profile_from_dict(raw: dict[str, Any]) -> tuple[Profile | None, list[tuple[str, str]]]:
    """Validate a parsed TOML document; returns the profile only when there is no problem at all."""
    out: Problems = []
    if _board_file(raw):
        return None, [("", "this is a board file (`padtune sim FILE` runs it as a simulated "
                       "board), not a profile; a profile comes from `padtune tune` or a save on the live "
                       "screen")]
    _unknown("", raw, TOP_KEYS, out)
    _head(raw, out)
    names = _names(raw, out)
    defaults = _settings("defaults.", raw.get("defaults", {}), ChannelSettings(), out)
    limits = _limits(raw.get("limits"), out)
    if names is None or defaults is None:
        return None, out
    polarity = raw.get("polarity", [])
    if not isinstance(polarity, list) or any(not _is_int(p) or p not in (1, -1) for p in polarity) or \
            len(polarity) not in (0, len(names)):
        out.append(("polarity", f"must be a list of {len(names)} values, each 1 or -1 (or left out)"))
    overrides: dict[int, ChannelSettings] = {}
    own_limits: dict[int, Limits] = {}
    unmeasured: set[int] = set()
    table = raw.get("channel", {})
    if not isinstance(table, dict):
        out.append(("channel", "must be a table of per-channel tables ([channel.NAME])"))
        table = {}
    index = {name: c for c, name in enumerate(names)}
    _unknown_channels([key for key in table if key not in index], index, out)
    for key, sub in table.items():
        c = index.get(key)
        if c is None:
            continue
        if isinstance(sub, dict):
            measured = sub.get("measured", True)
            if not isinstance(measured, bool):
                out.append((f"channel.{key}.measured", f"must be true or false, not {_shown(measured)}"))
            elif not measured:
                unmeasured.add(c)
            if "limits" in sub:
                lim = _limits(sub["limits"], out, f"channel.{key}.limits", limits)
                if lim != limits:
                    own_limits[c] = lim
            sub = {k: v for k, v in sub.items() if k not in CHANNEL_EXTRA_KEYS}
        s = _settings(f"channel.{key}.", sub, defaults, out, SETTING_KEYS + CHANNEL_EXTRA_KEYS)
        if s is not None and s != defaults:
            overrides[c] = s
    groups = _groups(raw.get("group"), index, out)
    sliders = _sliders(raw.get("slider"), index, out)
    if out:
        return None, out
    rate = raw.get("rate_hz")
    return Profile(names, defaults, overrides, groups, sliders, limits, raw.get("board", ""),
                   tuple(polarity), float(rate) if rate is not None else None, raw["format_version"],
                   own_limits, frozenset(unmeasured)), out


def load_profile(path: str | os.PathLike[str]) -> Profile:
    """Read and validate a profile; raise ProfileError listing every problem (`file:key: message`).

    Never blocks or reads without bound: a FIFO, a device or a folder is refused by what it is before it
    is opened, a file above MAX_PROFILE_BYTES by its size (`protocol.tomlfile.read_toml`)."""
    p = Path(path)
    try:
        raw = read_toml(p, "profile", MAX_PROFILE_BYTES)
    except UserError as exc:
        raise ProfileError([str(exc)]) from None
    profile, problems = profile_from_dict(raw)
    if profile is None:
        # A problem of the whole file (key "") is said after the file's name alone.
        raise ProfileError([f"{shown_path(p)}:{key}: {message}" if key else f"{shown_path(p)}: {message}"
                            for key, message in problems])
    return profile


# ---------------------------------------------------------------- saving

def _settings_table(s: ChannelSettings, base: ChannelSettings | None) -> dict[str, int]:
    return {k: v for k, v in asdict(s).items() if base is None or getattr(base, k) != v}


def profile_to_dict(profile: Profile) -> dict[str, Any]:
    """The TOML document for a profile (plain Python types only: tomli-w rejects numpy ints and None)."""
    # A board id is free text from the board's info line: written printable and cut, so the file loads
    # again (backslashes kept as they are, so saving twice never changes it twice).
    board = printable(profile.board, MAX_BOARD_CHARS, double_backslash=False)
    doc: dict[str, Any] = {"format_version": FORMAT_VERSION, "board": board,
                           "channels": profile.channels, "names": list(profile.names)}
    if profile.polarity:
        doc["polarity"] = [int(p) for p in profile.polarity]
    if profile.rate_hz is not None:
        doc["rate_hz"] = float(profile.rate_hz)
    doc["defaults"] = _settings_table(profile.defaults, None)
    channel: dict[str, dict[str, Any]] = {}
    for c, name in enumerate(profile.names):
        table: dict[str, Any] = _settings_table(profile.settings_for(c), profile.defaults)
        if c in profile.unmeasured_channels:
            table["measured"] = False
        own = _limits_table(profile.limits_for(c), profile.limits, f"channel.{name}.limits")
        if own:
            table["limits"] = own
        if table:
            channel[name] = table
    if channel:
        doc["channel"] = channel
    if profile.groups:
        doc["group"] = [{"name": g.name, "members": [profile.names[m] for m in g.members],
                         "switch_margin_counts": int(g.switch_margin_counts)} for g in profile.groups]
    if profile.sliders:
        doc["slider"] = [{"name": s.name, "pads": [profile.names[p] for p in s.pads], "wheel": bool(s.wheel),
                          "resolution": int(s.resolution)} for s in profile.sliders]
    limits = {k: v for k, v in asdict(profile.limits).items() if v is not None}
    if limits:
        doc["limits"] = limits
    return doc


def _limits_table(own: Limits, base: Limits, where: str) -> dict[str, Any]:
    """The keys of a channel's limits that differ from `[limits]`. TOML has no "unset": a channel cannot
    leave out a limit `[limits]` sets, so that is refused rather than saved as something else."""
    table: dict[str, Any] = {}
    for key, value in asdict(own).items():
        if value == getattr(base, key):
            continue
        if value is None:
            raise ProfileError([f"{where}.{key}: [limits] sets it and a channel cannot unset it; "
                                "give this channel its own value (not saved)"])
        table[key] = value
    return table


def save_profile(profile: Profile, path: str | os.PathLike[str]) -> None:
    """Validate, then replace `path` atomically, keeping the previous file as `<path>.bak`."""
    doc = profile_to_dict(profile)
    _, problems = profile_from_dict(doc)
    if problems:
        raise ProfileError([f"{path}:{key}: {message} (not saved)" for key, message in problems])
    try:
        atomic_write_bytes(path, tomli_w.dumps(doc).encode("utf-8"))
    except OSError as exc:
        reason = exc.strerror or str(exc)
        raise ProfileError([f"{path}: cannot save: {reason}; the previous file is unchanged"]) from None

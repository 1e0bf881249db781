"""What differs between two profiles: the pure core of `padtune diff`.

It compares the profiles' saved documents (`processing.profile.profile_to_dict`, what `save_profile`
writes), normalised so that two files that drive the board the same way compare equal however they are
written: each channel gets its effective settings (the built-in defaults, then `[defaults]`, then its
`[channel.NAME]` table) and its effective limits (`[limits]`, then its `[channel.NAME.limits]`), its
polarity and its position; groups and sliders are compared by name with their defaults filled in.
The merge is generic (tables merge key by key, anything else replaces), so keys added to the format
later (per-channel limits, `measured = false` on an unmeasured key) are compared without changes here.

Channels are matched by name, so profiles of different channel counts compare on the names they share
and the others are listed as present in one only.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import asdict, dataclass, field
from typing import Any

from processing.settings import ChannelSettings

# Keys of the document that `normalise` files away in their own sections; any other top-level key
# (board, rate_hz, or one a later format adds) is compared as it stands under "profile".
_SECTIONED = ("format_version", "channels", "names", "polarity", "defaults", "channel", "limits", "group",
              "slider")
GROUP_DEFAULTS: dict[str, Any] = {"switch_margin_counts": 0}
SLIDER_DEFAULTS: dict[str, Any] = {"wheel": False, "resolution": 100}
ABSENT = None  # a key one document has and the other does not: shown as null / "-"


def merged(base: Mapping[str, Any], over: Mapping[str, Any]) -> dict[str, Any]:
    """`over` laid on `base`: tables merge key by key, any other value replaces."""
    out = dict(base)
    for key, value in over.items():
        if isinstance(value, Mapping) and isinstance(out.get(key), Mapping):
            out[key] = merged(out[key], value)
        else:
            out[key] = value
    return out


def _flat(table: Mapping[str, Any], prefix: str = "") -> dict[str, Any]:
    """`{"limits": {"min_snr_pp": 5}}` -> `{"limits.min_snr_pp": 5}`; lists stay whole values."""
    out: dict[str, Any] = {}
    for key, value in table.items():
        if isinstance(value, Mapping):
            out.update(_flat(value, f"{prefix}{key}."))
        else:
            out[f"{prefix}{key}"] = value
    return out


def normalise(doc: Mapping[str, Any]) -> dict[str, dict[str, dict[str, Any]]]:
    """A saved document as sections (`profile`, `channel`, `group`, `slider`) of named items, each a
    flat mapping of key -> effective value."""
    names = list(doc.get("names", []))
    base = merged(asdict(ChannelSettings()), doc.get("defaults", {}))
    limits = doc.get("limits", {})
    if limits:
        base = merged(base, {"limits": limits})
    polarity = list(doc.get("polarity", []))
    per_channel = doc.get("channel", {})
    channels = {}
    for index, name in enumerate(names):
        item = merged(base, per_channel.get(name, {}))
        item["index"] = index
        item["polarity"] = polarity[index] if len(polarity) == len(names) else "from the board"
        channels[name] = _flat(item)
    groups = {g["name"]: _flat(merged(GROUP_DEFAULTS, {k: v for k, v in g.items() if k != "name"}))
              for g in doc.get("group", [])}
    sliders = {s["name"]: _flat(merged(SLIDER_DEFAULTS, {k: v for k, v in s.items() if k != "name"}))
               for s in doc.get("slider", [])}
    head = _flat({k: v for k, v in doc.items() if k not in _SECTIONED})
    return {"profile": {"": head}, "channel": channels, "group": groups, "slider": sliders}


@dataclass(frozen=True)
class Difference:
    """One key of one item that differs: `a` and `b` are its values (None where a document lacks it)."""

    section: str  # "profile", "channel", "group" or "slider"
    item: str  # the channel's, group's or slider's name ("" for the profile's own keys)
    key: str  # dotted for nested tables: "limits.min_snr_pp"
    a: Any
    b: Any


@dataclass(frozen=True)
class Unmatched:
    """An item present in one profile only: `side` is "a" or "b"."""

    section: str
    item: str
    side: str


@dataclass
class ProfileDiff:
    differences: list[Difference] = field(default_factory=list)
    unmatched: list[Unmatched] = field(default_factory=list)

    @property
    def equal(self) -> bool:
        return not self.differences and not self.unmatched


def diff_documents(doc_a: Mapping[str, Any], doc_b: Mapping[str, Any]) -> ProfileDiff:
    """Every key that differs between two saved documents, item by item in A's order (then B's)."""
    na, nb = normalise(doc_a), normalise(doc_b)
    out = ProfileDiff()
    for section in ("profile", "channel", "group", "slider"):
        items_a, items_b = na[section], nb[section]
        for item in [*items_a, *(i for i in items_b if i not in items_a)]:
            if item not in items_b:
                out.unmatched.append(Unmatched(section, item, "a"))
                continue
            if item not in items_a:
                out.unmatched.append(Unmatched(section, item, "b"))
                continue
            a, b = items_a[item], items_b[item]
            for key in [*a, *(k for k in b if k not in a)]:
                va, vb = a.get(key, ABSENT), b.get(key, ABSENT)
                if va != vb or (type(va) is not type(vb) and not _same_number(va, vb)):
                    out.differences.append(Difference(section, item, key, va, vb))
    return out


def _same_number(a: Any, b: Any) -> bool:
    """5 and 5.0 are the same limit (TOML keeps the spelling; the value is what counts)."""
    numeric = (int, float)
    return isinstance(a, numeric) and isinstance(b, numeric) and not isinstance(a, bool) \
        and not isinstance(b, bool) and a == b


def diff_dict(diff: ProfileDiff) -> dict[str, Any]:
    """The JSON form: `equal`, `differences` (section, item, key, a, b) and `unmatched` (section, item,
    only_in)."""
    return {"equal": diff.equal,
            "differences": [{"section": d.section, "item": d.item, "key": d.key, "a": d.a, "b": d.b}
                            for d in diff.differences],
            "unmatched": [{"section": u.section, "item": u.item, "only_in": u.side} for u in diff.unmatched]}

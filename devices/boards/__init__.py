"""Board description files (`*.toml` beside this module): finding, loading and validating them.

`load_board("greenhouse")` or `load_board("path/to/my.toml")` returns a `devices.spec.BoardSpec`.
Every mistake in a file becomes one `UserError` line: `file: table.key: what is wrong (what to do)`, with
what it quotes from the file escaped (`printable`) and cut. The file itself (a FIFO, a device, more than
MAX_BOARD_BYTES, not UTF-8, nested thousands deep) is refused by `protocol.tomlfile` before any key is read.
The keys are documented in `devices/README.md`.
"""

from __future__ import annotations

import difflib
import math
import pathlib
import re
from typing import Any

from devices import physics
from devices.materials import get_material
from devices.methods import method_from_table
from devices.spec import (
    MAX_RANDOM_PER_MIN,
    MIN_RANDOM_HOLD_S,
    BoardSpec,
    FingerSpec,
    NoiseSpec,
    OverlaySpec,
    PadSpec,
    RandomTouchSpec,
    ScriptTouch,
    SliderSpec,
)
from protocol.errors import UserError
from protocol.printable import printable
from protocol.tomlfile import MIB, read_toml, shown_path

BOARDS_DIR = pathlib.Path(__file__).parent
MAX_LINE_BYTES = 1024  # protocol v1's line limit (protocol/PROTOCOL.md)
_NAME_RE = re.compile(r"^[A-Za-z][A-Za-z0-9_.-]{0,31}$")
_FW_RE = re.compile(r"^[A-Za-z0-9_.+-]{1,32}$")  # goes into the info line: no spaces, commas or '='
MAX_DESCRIPTION_CHARS = 200  # the boot comment line carries it
MAX_BOARD_BYTES = 1 * MIB  # far above any real board file (the bundled ones are under 4 KiB); refused unread
MAX_PADS = 256
MESSAGE_CHARS = 400  # a message quoting a 4 MiB value is cut to this
_TOP = {"board", "method", "overlay", "finger", "pad_defaults", "pad", "pad_grid", "slider", "noise",
        "script"}


def list_boards() -> list[str]:
    return sorted(p.stem for p in BOARDS_DIR.glob("*.toml"))


def board_path(name_or_path: str) -> pathlib.Path:
    candidate = pathlib.Path(name_or_path)
    if candidate.suffix == ".toml" or "/" in name_or_path:
        if not candidate.exists():
            raise UserError(f"board file {shown_path(name_or_path)} not found; give a .toml path or one of: "
                            f"{', '.join(list_boards())}")
        return candidate  # a folder, a FIFO or a device is refused by what it is when it is read
    path = BOARDS_DIR / f"{name_or_path}.toml"
    if not path.is_file():
        close = difflib.get_close_matches(name_or_path, list_boards(), n=1)
        hint = f" (did you mean {close[0]}?)" if close else ""
        raise UserError(f"unknown board '{printable(name_or_path, 60)}'{hint}; known boards: "
                        f"{', '.join(list_boards())} (or give a path to a .toml file)")
    return path


def load_board(name_or_path: str) -> BoardSpec:
    path = board_path(name_or_path)
    data = read_toml(path, "board", MAX_BOARD_BYTES)
    try:
        return _Parser(path.name).board(data, source=str(path))
    except UserError as exc:
        # Keys and values quoted from the file: control characters escaped, a huge value cut.
        raise UserError(printable(str(exc), MESSAGE_CHARS, double_backslash=False)) from None


class _Parser:
    """Reads one file's tables; `self.file` prefixes every message."""

    def __init__(self, file: str) -> None:
        self.file = file

    def fail(self, where: str, what: str) -> UserError:
        return UserError(f"{self.file}: {where}: {what}")

    def table(self, data: dict[str, Any], key: str, allowed: set[str], required: bool = True) -> dict:
        value = data.get(key)
        if value is None:
            if required:
                raise self.fail(key, "missing table; see devices/README.md for the keys")
            return {}
        if not isinstance(value, dict):
            raise self.fail(key, "must be a table")
        self.check_keys(value, key, allowed)
        return value

    def check_keys(self, table: dict, where: str, allowed: set[str]) -> None:
        for k in table:
            if k not in allowed:
                close = difflib.get_close_matches(k, sorted(allowed), n=1) if len(k) <= 64 else []
                hint = f" (did you mean {close[0]}?)" if close else ""
                raise self.fail(f"{where}.{k}", f"unknown key{hint}; known: {', '.join(sorted(allowed))}")

    def tables(self, value: object, where: str, example: str) -> list[dict]:
        """A TOML array of tables (`[[slider]]`, `[[script.touch]]`): anything else is one clear line."""
        if value is None:
            return []
        if not isinstance(value, list) or not all(isinstance(t, dict) for t in value):
            raise self.fail(where, f"must be a list of tables, written {example}")
        return value

    def num(self, table: dict, where: str, key: str, default: float | None = None, *, low: float = 0.0,
            high: float = math.inf, inclusive_low: bool = True) -> float:
        if key not in table:
            if default is None:
                raise self.fail(f"{where}.{key}", "missing (a number is needed)")
            return default
        value = table[key]
        # Compared, not math.isfinite: an integer of hundreds of digits overflows a float (OverflowError).
        if isinstance(value, bool) or not isinstance(value, int | float) or not -1e300 < value < 1e300:
            raise self.fail(f"{where}.{key}", f"must be a number, got {value!r}")
        if value < low or (not inclusive_low and value == low) or value > high:
            bounds = f"{'>=' if inclusive_low else '>'} {low:g}"
            bounds += f" and <= {high:g}" if high < math.inf else ""
            raise self.fail(f"{where}.{key}", f"must be {bounds}, got {value!r}")
        return float(value)

    def text(self, table: dict, where: str, key: str, default: str | None = None) -> str:
        value = table.get(key, default)
        if not isinstance(value, str) or not value:
            raise self.fail(f"{where}.{key}", "must be a non-empty string")
        return value

    def whole(self, table: dict, where: str, key: str, low: int, high: int) -> int:
        value = self.num(table, where, key, low=low, high=high)
        if value != int(value):
            raise self.fail(f"{where}.{key}", f"must be a whole number, got {value:g}")
        return int(value)

    def one_line(self, table: dict, where: str, key: str, default: str) -> str:
        value = self.text(table, where, key, default)
        if not value.isprintable() or len(value) > MAX_DESCRIPTION_CHARS:  # no newline, ESC or other control
            raise self.fail(f"{where}.{key}", f"must be one line of at most {MAX_DESCRIPTION_CHARS} "
                            "printable characters")
        return value

    def fw(self, table: dict) -> str:
        value = self.text(table, "board", "fw", "sim-1")
        if not _FW_RE.match(value):
            raise self.fail("board.fw", f"{value!r} is not a plain version (letters, digits, _ . + -; "
                            "at most 32 characters; no spaces)")
        return value

    def name(self, table: dict, where: str, key: str = "name") -> str:
        value = self.text(table, where, key)
        if not _NAME_RE.match(value):
            raise self.fail(f"{where}.{key}", f"{value!r} is not a plain name (letter first, then letters, "
                            "digits, _ . -; at most 32 characters; no commas or spaces)")
        return value

    def board(self, data: dict[str, Any], source: str) -> BoardSpec:
        self.check_keys(data, "(top level)", _TOP)
        b = self.table(data, "board", {"name", "description", "fw", "rate_hz"})
        method_table = dict(self.table(data, "method", {"kind"} | _all_method_keys()))
        kind = self.text(method_table, "method", "kind")
        method_table.pop("kind")
        method = method_from_table(kind, method_table, where=f"{self.file}: method")
        pads = self.pads(data)
        names = dict.fromkeys(p.name for p in pads)  # ordered, and a name is found in O(1)
        if frame_line_bytes(len(pads), method.max_count) > MAX_LINE_BYTES:
            raise self.fail("pad", f"{len(pads)} pads make frame lines longer than the protocol's "
                            f"{MAX_LINE_BYTES} bytes with this method's readings; use fewer pads")
        sliders = self.sliders(data, names)
        return BoardSpec(
            name=self.name(b, "board"),
            description=self.one_line(b, "board", "description", "a simulated board"), fw=self.fw(b),
            rate_hz=self.num(b, "board", "rate_hz", low=1.0, high=5000.0),
            method=method, overlay=self.overlay(data), finger=self.finger(data), pads=tuple(pads),
            sliders=tuple(sliders), noise=self.noise(data),
            script=tuple(self.script(data, names, sliders)),
            loop_s=self.num(data.get("script", {}), "script", "loop_s", 0.0),
            random=self.random(data, names), source=source,
        )

    def overlay(self, data: dict) -> OverlaySpec:
        t = self.table(data, "overlay", {"material", "thickness_mm", "air_gap_mm"})
        try:
            material = get_material(self.text(t, "overlay", "material"))
        except UserError as exc:
            raise self.fail("overlay.material", str(exc)) from None
        return OverlaySpec(material, self.num(t, "overlay", "thickness_mm", low=0.0, high=50.0,
                                              inclusive_low=False) * 1e-3,
                           self.num(t, "overlay", "air_gap_mm", 0.0, high=20.0) * 1e-3)

    def finger(self, data: dict) -> FingerSpec:
        t = self.table(data, "finger", {"contact_diameter_mm", "body_pf"}, required=False)
        return FingerSpec(self.num(t, "finger", "contact_diameter_mm", 10.0, low=1.0, high=40.0) * 1e-3,
                          self.num(t, "finger", "body_pf", 200.0, low=1.0, high=2000.0) * 1e-12)

    def pad(self, t: dict, where: str, defaults: dict) -> tuple[float, float]:
        """Area and parasitic of one pad; keys missing from the pad come from [pad_defaults]."""
        merged = {**defaults, **t}
        shape = merged.get("shape", "rect")
        if shape not in ("rect", "circle", "ring"):
            raise self.fail(f"{where}.shape", f"{shape!r} is not a shape; use rect, circle or ring")
        if shape == "rect":
            area = physics.pad_area_m2("rect", self.num(merged, where, "width_mm", low=0.5, high=200) * 1e-3,
                                       self.num(merged, where, "height_mm", low=0.5, high=200) * 1e-3)
        else:
            outer = self.num(merged, where, "diameter_mm", low=0.5, high=200) * 1e-3
            inner = self.num(merged, where, "inner_diameter_mm", 0.0, high=outer * 1e3) * 1e-3
            if shape == "ring" and inner >= outer:
                raise self.fail(f"{where}.inner_diameter_mm", "must be smaller than diameter_mm")
            area = physics.pad_area_m2(shape, diameter_m=outer, inner_diameter_m=inner)
        if "parasitic_pf" in merged:
            parasitic = self.num(merged, where, "parasitic_pf", low=0.1, high=1000) * 1e-12
        else:
            parasitic = physics.pad_parasitic_f(area)
        return area, parasitic

    def pads(self, data: dict) -> list[PadSpec]:
        pad_keys = {"name", "shape", "width_mm", "height_mm", "diameter_mm", "inner_diameter_mm",
                    "parasitic_pf", "x_mm", "y_mm"}
        defaults = self.table(data, "pad_defaults", pad_keys - {"name", "x_mm", "y_mm"}, required=False)
        if ("pad" in data) == ("pad_grid" in data):
            raise self.fail("pad", "give either [[pad]] entries or one [pad_grid] table")
        out: list[PadSpec] = []
        if "pad_grid" in data:
            g = self.table(data, "pad_grid", {"rows", "cols", "pitch_mm", "prefix"})
            rows = self.whole(g, "pad_grid", "rows", 1, 64)
            cols = self.whole(g, "pad_grid", "cols", 1, 64)
            pitch = self.num(g, "pad_grid", "pitch_mm", low=1, high=100)
            prefix = self.text(g, "pad_grid", "prefix", "k")
            wide = max(rows, cols) > 10
            last = f"{prefix}{rows - 1}_{cols - 1}" if wide else f"{prefix}{rows - 1}{cols - 1}"
            if not _NAME_RE.match(last):  # the longest name it makes (the names are made below)
                raise self.fail("pad_grid.prefix", f"{prefix!r} does not make plain pad names (letter first, "
                                "then letters, digits, _ . -; names at most 32 characters)")
            area, parasitic = self.pad({}, "pad_defaults", defaults)
            for r in range(rows):
                for c in range(cols):
                    out.append(PadSpec(f"{prefix}{r}{c}" if max(rows, cols) <= 10 else f"{prefix}{r}_{c}",
                                       area, parasitic, c * pitch, r * pitch))
        else:
            entries = data["pad"]
            if not isinstance(entries, list) or not entries:
                raise self.fail("pad", "must be a list of [[pad]] tables")
            if len(entries) > MAX_PADS:
                raise self.fail("pad", f"{len(entries)} pads; a simulated board has at most {MAX_PADS}")
            for i, t in enumerate(entries):
                where = f"pad[{i}]"
                if not isinstance(t, dict):
                    raise self.fail(where, "must be a table")
                self.check_keys(t, where, pad_keys)
                area, parasitic = self.pad(t, where, defaults)
                out.append(PadSpec(self.name(t, where), area, parasitic,
                                   self.num(t, where, "x_mm", 0.0, low=-1000), self.num(t, where, "y_mm", 0.0,
                                                                                      low=-1000)))
        seen: set[str] = set()
        for p in out:
            if p.name in seen:
                raise self.fail("pad", f"the name {p.name!r} is used twice; pad names must be unique")
            seen.add(p.name)
        if len(out) > MAX_PADS:
            raise self.fail("pad", f"{len(out)} pads; a simulated board has at most {MAX_PADS}")
        return out

    def sliders(self, data: dict, names: dict[str, None]) -> list[SliderSpec]:
        out = []
        for i, t in enumerate(self.tables(data.get("slider"), "slider", "[[slider]]")):
            where = f"slider[{i}]"
            self.check_keys(t, where, {"name", "pads"})
            pads = t.get("pads")
            if not isinstance(pads, list) or len(pads) < 2:
                raise self.fail(f"{where}.pads", "must list two or more pad names, in order along it")
            for p in pads:
                self.known_pad(p, f"{where}.pads", names)
            if len(set(pads)) != len(pads):
                raise self.fail(f"{where}.pads", "names a pad twice; each pad lies once along a slider")
            name = self.name(t, where)
            if name in {s.name for s in out}:
                raise self.fail(f"{where}.name", f"the slider name {name!r} is used twice")
            out.append(SliderSpec(name, tuple(pads)))
        return out

    def known_pad(self, pad: object, where: str, names: dict[str, None]) -> str:
        if not isinstance(pad, str) or pad not in names:
            close = difflib.get_close_matches(pad, names, n=1) if isinstance(pad, str) and len(pad) <= 64 \
                else []
            hint = f" (did you mean {close[0]}?)" if close else ""
            raise self.fail(where, f"no pad named {pad!r}{hint}")
        return pad

    def noise(self, data: dict) -> NoiseSpec:
        keys = set(NoiseSpec.__dataclass_fields__)
        t = self.table(data, "noise", keys, required=False)
        values = {k: self.num(t, "noise", k, getattr(NoiseSpec(), k)) for k in keys}
        if values["mains_hz"] not in (50.0, 60.0):
            raise self.fail("noise.mains_hz", f"must be 50 or 60, got {values['mains_hz']:g}")
        if values["temp_period_s"] <= 0:
            raise self.fail("noise.temp_period_s", "must be > 0")
        if values["crosstalk"] > 1:
            raise self.fail("noise.crosstalk", f"is the fraction of a touched pad's signal a neighbour sees: "
                            f"0 to 1, got {values['crosstalk']:g}")
        return NoiseSpec(**values)

    def script(self, data: dict, names: dict[str, None], sliders: list[SliderSpec]) -> list[ScriptTouch]:
        s = self.table(data, "script", {"loop_s", "touch", "random"}, required=False)
        by_slider = {sl.name: sl for sl in sliders}
        out = []
        for i, t in enumerate(self.tables(s.get("touch"), "script.touch", "[[script.touch]]")):
            where = f"script.touch[{i}]"
            self.check_keys(t, where, {"pad", "slider", "water", "at_s", "hold_s", "strength", "from", "to",
                                       "wet_area_mm2", "who", "body_pf"})
            targets = [k for k in ("pad", "slider", "water") if k in t]
            if len(targets) != 1:
                raise self.fail(where, "needs exactly one of pad = NAME, slider = NAME or water = [NAMES]")
            at_s = self.num(t, where, "at_s")
            hold_s = self.num(t, where, "hold_s", low=0.0, inclusive_low=False)
            strength = self.num(t, where, "strength", 1.0, low=0.0, high=3.0)
            body = self.who(t, where)
            if "pad" in t:
                out.append(ScriptTouch("finger", (self.known_pad(t["pad"], f"{where}.pad", names),), at_s,
                                       hold_s, strength, body_f=body))
            elif "slider" in t:
                if not isinstance(t["slider"], str) or t["slider"] not in by_slider:
                    raise self.fail(f"{where}.slider", f"no slider named {t['slider']!r}")
                sl = by_slider[t["slider"]]
                out.append(ScriptTouch("swipe", sl.pads, at_s, hold_s, strength, sl.name,
                                       self.num(t, where, "from", 0.0, high=1.0),
                                       self.num(t, where, "to", 1.0, high=1.0), body_f=body))
            else:
                wet = t["water"]
                if not isinstance(wet, list) or not wet:
                    raise self.fail(f"{where}.water", "must list the pad names the film covers")
                pads = tuple(self.known_pad(p, f"{where}.water", names) for p in wet)
                area = self.num(t, where, "wet_area_mm2", 150.0, low=0.0, inclusive_low=False) * 1e-6
                out.append(ScriptTouch("water", pads, at_s, hold_s, strength, wet_area_m2=area))
        loop_s = self.num(s, "script", "loop_s", 0.0)
        if loop_s and any(t.at_s + t.hold_s > loop_s for t in out):
            raise self.fail("script.loop_s", f"{loop_s:g} s is shorter than the script; make it longer "
                            "than the last touch's at_s + hold_s")
        return out

    def who(self, t: dict, where: str) -> float | None:
        """Who touches: `who = "standing" | "isolated"` or `body_pf = N`; None means the board's finger."""
        if "who" in t and "body_pf" in t:
            raise self.fail(where, "give either who or body_pf, not both")
        if "body_pf" in t:
            return self.num(t, where, "body_pf", low=1.0, high=2000.0) * 1e-12
        if "who" in t:
            people = {"standing": physics.BODY_STANDING_F, "isolated": physics.BODY_ISOLATED_F}
            if not isinstance(t["who"], str) or t["who"] not in people:
                raise self.fail(f"{where}.who", f"{t['who']!r} is not known; use standing or isolated "
                                "(or body_pf = N)")
            return people[t["who"]]
        return None

    def random(self, data: dict, names: dict[str, None]) -> RandomTouchSpec:
        s = data.get("script", {})
        keys = set(RandomTouchSpec.__dataclass_fields__)
        t = self.table(s, "random", keys, required=False) if isinstance(s, dict) else {}
        defaults = RandomTouchSpec()
        pads = t.get("pads", [])
        if not isinstance(pads, list):
            raise self.fail("script.random.pads", "must be a list of pad names")
        values = {k: self.num(t, "script.random", k, getattr(defaults, k)) for k in keys - {"pads"}}
        if values["per_min"] > MAX_RANDOM_PER_MIN:
            raise self.fail("script.random.per_min", f"must be <= {MAX_RANDOM_PER_MIN:g}, got "
                            f"{values['per_min']:g}")
        if values["hold_min_s"] < MIN_RANDOM_HOLD_S:
            raise self.fail("script.random.hold_min_s", f"must be >= {MIN_RANDOM_HOLD_S:g} s, got "
                            f"{values['hold_min_s']:g}")
        if values["hold_min_s"] > values["hold_max_s"] or values["strength_min"] > values["strength_max"]:
            raise self.fail("script.random", "each _min must not exceed its _max")
        return RandomTouchSpec(pads=tuple(self.known_pad(p, "script.random.pads", names) for p in pads),
                               **values)


def frame_line_bytes(channels: int, max_count: int) -> int:
    """Longest frame line for this width: `@65535 `, readings and spaces, `*HHHH`."""
    return 7 + channels * (len(str(max_count)) + 1) + 5


def _all_method_keys() -> set[str]:
    from devices.methods import FILE_KEYS

    return {k for keys in FILE_KEYS.values() for k in keys}

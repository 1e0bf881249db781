"""Overlay and substrate materials: relative permittivity ranges, each row with its source.

The model uses `nominal`; the estimator reports the spread from `low` to `high`. Permittivity of
plastics and glass depends on frequency, temperature, moisture and grade; the ranges below are for
the frequencies touch boards work at (tens of kHz to a few MHz) at room temperature.

Honesty note: every value here is quoted from memory of the named handbook kind of source, not
copied from a page in front of the author. Treat them as typical, check your own material's datasheet.
"""

from __future__ import annotations

import difflib
from dataclasses import dataclass

from protocol.errors import UserError


@dataclass(frozen=True, slots=True)
class Material:
    key: str
    label: str
    er_nominal: float
    er_low: float
    er_high: float
    source: str
    from_memory: bool = True

    @property
    def er_spread(self) -> tuple[float, float]:
        return (self.er_low, self.er_high)


_ROWS: tuple[Material, ...] = (
    Material("air", "air (dry, 1 atm)", 1.0006, 1.0005, 1.0006,
             "CRC Handbook of Chemistry and Physics, permittivity of gases (from memory)"),
    Material("acrylic", "acrylic (PMMA)", 3.0, 2.6, 3.6,
             "polymer handbook dielectric tables, 1 kHz..1 MHz (from memory)"),
    Material("polycarbonate", "polycarbonate", 3.0, 2.9, 3.2,
             "polymer handbook dielectric tables, 1 kHz..1 MHz (from memory)"),
    Material("abs", "ABS", 2.9, 2.4, 3.8,
             "plastics engineering data tables, grade dependent (from memory)"),
    Material("pet", "PET (polyester film)", 3.2, 3.0, 3.4,
             "polymer handbook dielectric tables, 1 kHz..1 MHz (from memory)"),
    Material("soda-lime-glass", "soda-lime glass (window)", 7.2, 6.0, 8.0,
             "CRC Handbook of Chemistry and Physics, permittivity of glasses (from memory)"),
    Material("borosilicate-glass", "borosilicate glass", 4.6, 4.3, 5.0,
             "CRC Handbook of Chemistry and Physics, permittivity of glasses (from memory)"),
    Material("fr4", "FR-4 laminate", 4.5, 4.0, 4.9,
             "printed-circuit laminate data, 1 MHz, resin-content dependent (from memory)"),
    Material("dry-wood", "dry wood", 2.0, 1.4, 2.9,
             "wood handbook dielectric data, oven-dry to air-dry, grain dependent (from memory)"),
    Material("silicone", "silicone rubber", 3.2, 2.9, 4.0,
             "elastomer data tables, filler dependent (from memory)"),
)

MATERIALS: dict[str, Material] = {m.key: m for m in _ROWS}

# Spellings people type; they map to the canonical keys above.
_ALIASES = {
    "pmma": "acrylic", "pc": "polycarbonate", "glass": "soda-lime-glass", "soda-lime": "soda-lime-glass",
    "borosilicate": "borosilicate-glass", "fr-4": "fr4", "wood": "dry-wood", "polyester": "pet",
}


def get_material(name: str) -> Material:
    """Look a material up by key or common alias; a one-line UserError with a suggestion otherwise."""
    key = name.strip().lower().replace("_", "-").replace(" ", "-")
    key = _ALIASES.get(key, key)
    if key in MATERIALS:
        return MATERIALS[key]
    known = sorted(MATERIALS)
    close = difflib.get_close_matches(key, known + sorted(_ALIASES), n=1)
    hint = f" (did you mean {_ALIASES.get(close[0], close[0])}?)" if close else ""
    raise UserError(f"unknown overlay material {name!r}{hint}; known: {', '.join(known)}")

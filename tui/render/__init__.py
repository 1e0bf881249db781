"""Plain rich renderables for padtune's screens, shared by the Textual app and the headless output.

Nothing here imports Textual. Each helper takes a `styles` mapping from a role name ("touched",
"threshold", ...) to a rich `Style`; an empty mapping gives plain text, which is what NO_COLOR and
piped output get. The app fills the mapping from its `.tcss` component classes.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping

from rich.style import Style
from rich.text import Span, Text

Styles = Mapping[str, Style]
# A run of single-cell characters in one style: what the line renderers build, cheaply, before any
# Text exists (the channel table turns pieces straight into segments at every screen frame).
Piece = tuple[str, Style]

NULL = Style.null()


def pick(styles: Styles, role: str) -> Style:
    """The style for a role, or no style at all when the caller did not give one."""
    return styles.get(role, NULL)


def to_text(pieces: Iterable[Piece]) -> Text:
    """One line of Text from pieces, one span per styled piece (spans never overlap)."""
    parts: list[str] = []
    spans: list[Span] = []
    pos = 0
    for chunk, style in pieces:
        end = pos + len(chunk)
        if style and chunk:
            spans.append(Span(pos, end, style))
        parts.append(chunk)
        pos = end
    return Text("".join(parts), spans=spans, no_wrap=True, end="")

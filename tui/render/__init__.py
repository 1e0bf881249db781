"""Plain rich renderables for padtune's screens, shared by the Textual app and the headless output.

Nothing here imports Textual. Each helper takes a `styles` mapping from a role name ("touched",
"threshold", ...) to a rich `Style`; an empty mapping gives plain text, which is what NO_COLOR and
piped output get. The app fills the mapping from its `.tcss` component classes.
"""

from __future__ import annotations

from collections.abc import Mapping

from rich.style import Style

Styles = Mapping[str, Style]

NULL = Style.null()


def pick(styles: Styles, role: str) -> Style:
    """The style for a role, or no style at all when the caller did not give one."""
    return styles.get(role, NULL)

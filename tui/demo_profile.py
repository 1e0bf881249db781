"""The starting profile for `padtune demo`: the simulated board's keys, a first guess at settings,
its sliders, and (on the greenhouse panel) the four zone keys as one exclusive group.

It is built in code, not shipped as a file, so saving always asks for a file name of the user's own.
The threshold is a deliberately rough first guess (about half a typical touch on the demo board) that
leaves something to tune; the guided capture (`w`) suggests better values.
"""

from __future__ import annotations

from processing.groups import GroupSpec
from processing.profile import Profile
from processing.settings import ChannelSettings
from processing.slider import SliderSpec

DEMO_SETTINGS = ChannelSettings(threshold_counts=30, hysteresis_counts=8, touch_debounce_frames=2,
                                release_debounce_frames=2)


def demo_profile(board: str) -> Profile:
    from devices.boards import load_board

    spec = load_board(board)
    names = spec.names
    sliders = tuple(SliderSpec(s.name, tuple(names.index(p) for p in s.pads)) for s in spec.sliders)
    zones = tuple(i for i, n in enumerate(names) if n.startswith("zone"))
    groups = (GroupSpec("zones", zones),) if len(zones) > 1 else ()
    return Profile(names=names, defaults=DEMO_SETTINGS, groups=groups, sliders=sliders, board=spec.name,
                   rate_hz=spec.rate_hz)

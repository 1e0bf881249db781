"""The pure core of `padtune diff`: normalised documents, differences by channel name, unmatched items."""

from __future__ import annotations

from processing.groups import GroupSpec
from processing.profile import Profile, profile_for, profile_to_dict
from processing.profile_diff import diff_documents, normalise
from processing.settings import ChannelSettings, Limits
from processing.slider import SliderSpec


def _doc(**kw):
    return profile_to_dict(Profile(names=("k1", "k2", "k3"), **kw))


def test_equal_documents_written_differently_compare_equal():
    # A hand-written file that leaves the defaults out and spells a limit 5 (not 5.0) is the same profile.
    full = _doc(limits=Limits(min_snr_pp=5.0))
    short = {"format_version": 1, "board": "", "channels": 3, "names": ["k1", "k2", "k3"],
             "limits": {"min_snr_pp": 5}, "channel": {"k2": {"threshold_counts": 100}}}
    assert diff_documents(full, short).equal


def test_one_setting_a_limit_and_a_group_each_show_once():
    a = _doc(limits=Limits(min_snr_pp=5.0), groups=(GroupSpec("g", (0, 1)),))
    b = _doc(overrides={1: ChannelSettings(threshold_counts=140)}, limits=Limits(min_snr_pp=6.0),
             groups=(GroupSpec("g", (0, 2)),))
    found = {(d.section, d.item, d.key): (d.a, d.b) for d in diff_documents(a, b).differences}
    assert found == {("channel", "k2", "threshold_counts"): (100, 140),
                     ("channel", "k1", "limits.min_snr_pp"): (5.0, 6.0),
                     ("channel", "k2", "limits.min_snr_pp"): (5.0, 6.0),
                     ("channel", "k3", "limits.min_snr_pp"): (5.0, 6.0),
                     ("group", "g", "members"): (["k1", "k2"], ["k1", "k3"])}


def test_keys_the_format_gains_later_are_compared_without_code_changes():
    # Per-channel limits and the mark of an unmeasured key (issue 12, i12-trust) as a saved document has them.
    a = _doc(limits=Limits(baseline_min_counts=900, baseline_max_counts=2000))
    b = dict(a, channel={"k3": {"measured": False, "limits": {"baseline_min_counts": 1100}}})
    found = {(d.item, d.key): (d.a, d.b) for d in diff_documents(a, b).differences}
    assert found == {("k3", "measured"): (None, False), ("k3", "limits.baseline_min_counts"): (900, 1100)}
    assert normalise(b)["channel"]["k3"]["limits.baseline_max_counts"] == 2000  # the rest is inherited


def test_channels_are_matched_by_name_and_the_unmatched_named():
    a = profile_to_dict(profile_for(3, ("k1", "k2", "k3")))
    b = profile_to_dict(profile_for(2, ("k2", "k9")))
    diff = diff_documents(a, b)
    assert [(u.item, u.side) for u in diff.unmatched] == [("k1", "a"), ("k3", "a"), ("k9", "b")]
    assert {(d.item, d.key): (d.a, d.b) for d in diff.differences} == {("k2", "index"): (1, 0)}


def test_polarity_board_and_sliders():
    a = _doc(polarity=(1, 1, -1), sliders=(SliderSpec("s", (0, 1, 2)),))
    b = _doc(board="pump-house", sliders=(SliderSpec("s", (0, 1, 2), wheel=True),))
    found = {(d.section, d.item, d.key): (d.a, d.b) for d in diff_documents(a, b).differences}
    assert found[("profile", "", "board")] == ("", "pump-house")
    assert found[("channel", "k3", "polarity")] == (-1, "from the board")
    assert found[("slider", "s", "wheel")] == (False, True)
    assert len(found) == 5  # board, three polarities, the wheel

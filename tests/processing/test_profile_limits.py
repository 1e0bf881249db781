"""Per-channel limits (`[channel.NAME.limits]` over `[limits]`), the unmeasured mark (`measured = false`)."""

from __future__ import annotations

from pathlib import Path

import pytest

from processing.profile import Profile, ProfileError, load_profile, profile_for, save_profile
from processing.settings import Limits

DOC = """format_version = 1
channels = 3
names = ["a", "b", "c"]
[channel.a]
measured = false
[channel.b.limits]
baseline_min_counts = 900
baseline_max_counts = 1400
[limits]
baseline_min_counts = 500
baseline_max_counts = 2000
max_noise_pp_counts = 20.0
"""


def _write(tmp_path: Path, text: str) -> Path:
    path = tmp_path / "p.toml"
    path.write_text(text)
    return path


def test_channel_limits_override_only_their_keys_and_marks_load(tmp_path: Path) -> None:
    p = load_profile(_write(tmp_path, DOC))
    assert p.unmeasured() == (0,)
    own = Limits(max_noise_pp_counts=20.0, baseline_min_counts=900, baseline_max_counts=1400)
    assert p.limits_for(1) == own
    assert p.limits_for(0) == p.limits_for(2) == p.limits


def test_round_trip_keeps_own_limits_and_marks(tmp_path: Path) -> None:
    p = load_profile(_write(tmp_path, DOC))
    out = tmp_path / "out.toml"
    save_profile(p, out)
    assert load_profile(out) == p
    text = out.read_text()
    assert "measured = false" in text and "[channel.b.limits]" in text and "[channel.c" not in text


@pytest.mark.parametrize(("extra", "key", "words"), [
    ('[channel.c]\nmeasured = "no"\n', "channel.c.measured", "true or false"),
    ("[channel.c.limits]\nbaseline_max_counts = 100\n", "channel.c.limits.baseline_max_counts",
     "above baseline_min_counts (500)"),
    ("[channel.c.limits]\nbasline_min_counts = 1\n", "channel.c.limits.basline_min_counts", "did you mean"),
    ("[channel.c]\nlimits = 3\n", "channel.c.limits", "must be a table"),
])
def test_bad_channel_tables_are_refused_by_key(tmp_path: Path, extra: str, key: str, words: str) -> None:
    with pytest.raises(ProfileError) as err:
        load_profile(_write(tmp_path, DOC + extra))
    line = next(x for x in err.value.problems if f":{key}:" in x)
    assert words in line


def test_with_limits_drops_what_equals_the_default_and_marks_toggle() -> None:
    p = profile_for(2)
    own = Limits(baseline_min_counts=10, baseline_max_counts=20)
    q = p.with_limits(1, own)
    assert q.limits_for(1) == own and q.limits_for(0) == p.limits
    assert q.with_limits(1, p.limits).channel_limits == {}
    assert p.with_measured(1, False).unmeasured() == (1,)
    assert p.with_measured(1, False).with_measured(1, True).unmeasured() == ()


def test_a_channel_cannot_unset_a_limit_the_profile_sets(tmp_path: Path) -> None:
    p = Profile(("a", "b"), limits=Limits(min_snr_pp=5.0)).with_limits(0, Limits())
    with pytest.raises(ProfileError, match=r"channel\.a\.limits\.min_snr_pp"):
        save_profile(p, tmp_path / "x.toml")
    assert not (tmp_path / "x.toml").exists()

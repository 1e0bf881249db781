"""A few hostile cases of the suite's own, for testing the hostile-input runner (`part_hostile`).

Not a corpus (its name does not start with `hostile_`, so `make reliability` does not gather it): the
corpora are `hostile_profiles.py`, `hostile_recordings.py` and `hostile_targets.py`.
"""

from __future__ import annotations

from pathlib import Path

from tests.reliability.cases import HostileCase


def _missing_profile(folder: Path) -> list[str]:
    return ["export", "nothing-here.toml", "--c-header", "out.h"]


def _folder_as_recording(folder: Path) -> list[str]:
    (folder / "rec.csv").mkdir()
    return ["replay", "rec.csv"]


def _existing_recording(folder: Path) -> list[str]:
    (folder / "keep.csv").write_text("precious\n")
    return ["record", "sim://greenhouse", "-o", "keep.csv", "--duration", "0.2"]


def _unknown_port_scheme(folder: Path) -> list[str]:
    return ["monitor", "nosuch://board", "--duration", "0.2"]


# These cases test the runner, not padtune's speed: a bound a busy machine cannot miss.
BOUND_S = 20.0


def cases() -> list[HostileCase]:
    return [
        HostileCase("missing profile", _missing_profile, must_not_exist=("out.h",),
                    says=("nothing-here.toml",), time_bound_s=BOUND_S),
        HostileCase("folder as recording", _folder_as_recording, time_bound_s=BOUND_S),
        HostileCase("record over an existing file", _existing_recording, unchanged=("keep.csv",),
                    time_bound_s=BOUND_S),
        HostileCase("unknown port scheme", _unknown_port_scheme, time_bound_s=BOUND_S),
    ]


def failing_cases() -> list[HostileCase]:
    """Cases the judge must fail: a wrong exit code, a file said to stay unchanged that changes."""
    def touch(folder: Path) -> list[str]:
        return ["replay", "nothing.csv"]

    return [HostileCase("wrong exit expected", touch, expect_exit=0, time_bound_s=BOUND_S),
            HostileCase("says what it does not", touch, says=("words padtune never prints",),
                        time_bound_s=BOUND_S)]

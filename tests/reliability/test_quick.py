"""The reliability suite's quick version inside `make test`: every part of `make reliability` with a few
trials (tests/reliability/run.py and part_*.py), the hostile-input runner on cases of its own, and the
product defects the full run found, pinned as regression tests.

Bounds on time (reconnect time, board time lost to a kill, a case's duration) are printed but not
asserted here: speed is measured by `make reliability` and `make bench`, never by timed assertions.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from protocol.crc import crc16_ccitt_false
from protocol.decoder import Decoder
from protocol.decoder_plain import PlainDecoder
from tests.reliability import (
    part_flood,
    part_fuzz,
    part_hostile,
    part_record_kill,
    part_replug,
    part_save_kill,
    part_soak,
    run,
    runner_cases,
)
from tests.reliability.figures import Figure, table


def assert_within(figures: list[Figure], skip: tuple[str, ...] = ()) -> None:
    out = [f for f in figures if not f.ok and not f.timed and not f.name.startswith(skip)]
    assert figures and not out, "\n" + table(figures)


def test_decoder_fuzz_quick():
    assert_within(part_fuzz.run(quick=True))


def test_fuzz_counts_a_decoder_that_loses_lines(monkeypatch):
    """The fuzz can fail: a fast decoder that forgets every 1000th garbled line is caught twice over."""
    real = part_fuzz.Decoder.feed
    dropped = [0]

    def leaky(self, data, t_s):
        events = real(self, data, t_s)
        if self.stats.garbled > 1000 and not dropped[0]:
            self.stats.garbled -= 1
            dropped[0] = 1
        return events

    monkeypatch.setattr(part_fuzz.Decoder, "feed", leaky)
    figures = {f.name: f for f in part_fuzz.run(quick=True)}
    assert not figures["fuzz: lines unaccounted in fast stats"].ok
    assert not figures["fuzz: chunks where fast != plain (events or stats)"].ok


@pytest.mark.e2e
def test_kill_during_profile_save_quick():
    assert_within(part_save_kill.run(quick=True))




def test_no_kill_point_leaves_a_temporary_after_the_next_save(tmp_path):
    assert part_save_kill.staged_kill_points(tmp_path) == {step: [] for step in (
        "after the temporary is written", "after the backup's hard link",
        "after the backup's rename, before the final rename")}


def test_fast_decoder_refuses_a_mixed_case_wrong_checksum():
    # Found by `make reliability`'s fuzz. The body's CRC is C8D8 (CRC-16/CCITT-FALSE, protocol.crc, checked
    # against binascii in tests/protocol/test_crc.py); C8f8 is wrong in any case.
    body = b"@1089 1375 1438 1378 1372 1669 1180 1177 1180 1179;020000000"
    assert b"%04X" % crc16_ccitt_false(body) == b"C8D8"
    before = b"@1088 1375 1438 1378 1372 1669 1180 1177 1180 1179;020000000"
    data = before + b"*%04X\n" % crc16_ccitt_false(before) + body + b"*C8f8\n"
    data = data * 200  # over the bulk scan's 10 KB, as a live link's reads are
    plain, fast = PlainDecoder(), Decoder()
    plain.feed(data, 0.0)
    fast.feed(data, 0.0)
    assert plain.stats.bad_checksum == 200
    assert fast.stats.as_dict() == plain.stats.as_dict()


@pytest.mark.e2e
def test_kill_during_recording_quick():
    assert_within(part_record_kill.run(quick=True))


@pytest.mark.e2e
def test_unplug_and_replug_quick():
    assert_within(part_replug.run(quick=True))


@pytest.mark.e2e
def test_garbage_flood_and_silent_board_quick():
    assert_within(part_flood.run(quick=True))


def test_soak_quick():
    assert_within(part_soak.run(quick=True))


@pytest.mark.e2e
def test_hostile_corpora_present_quick():
    figures = part_hostile.run(quick=True)
    assert_within(figures)


@pytest.mark.e2e
def test_hostile_runner_counts_kinds_passes_and_missing_corpora():
    own, bad = runner_cases.cases(), runner_cases.failing_cases()
    figures = {f.name: f for f in part_hostile.figures_for({"own": own, "bad": bad},
                                                           {"own": 4, "profiles": 50})}
    assert figures["hostile own: kinds"].value == 4 and figures["hostile own: kinds"].ok
    assert figures["hostile own: passed"].value == 4 and figures["hostile own: passed"].ok
    assert figures["hostile bad: passed"].value == 0 and not figures["hostile bad: passed"].ok
    assert "wrong exit expected" in figures["hostile bad: passed"].note
    assert not figures["hostile profiles: corpus"].ok  # expected, not there: out of bounds
    assert any(name.startswith("hostile own: slowest") for name in figures)


def test_hostile_runner_too_few_kinds_and_a_corpus_that_will_not_load():
    one = runner_cases.cases()[:1]
    figures = part_hostile.figures_for({"recordings": one, "profiles": "cannot load hostile_profiles.py: x"},
                                       {"recordings": 40, "profiles": 50}, sample=0)
    by_name = {f.name: f for f in figures}
    assert not by_name["hostile recordings: kinds"].ok and by_name["hostile recordings: kinds"].value == 1
    assert not by_name["hostile profiles: corpus"].ok


def test_gather_finds_only_hostile_modules():
    found = part_hostile.gather(Path(part_hostile.__file__).parent)
    assert "runner_cases" not in found and all(not name.startswith("hostile_") for name in found)


def test_runner_prints_one_table_and_fails_on_a_figure_out_of_bounds(monkeypatch, capsys):
    good = [Figure("a: fine", 1, "", "= 1", True)]
    bad = [Figure("b: broken", 2, "", "= 0", False, note="what went wrong")]
    # main() sets NO_COLOR for the subprocesses it starts: never for the rest of this test session (the
    # TUI snapshots after this test would be drawn without colour).
    monkeypatch.setenv("NO_COLOR", "1")
    monkeypatch.setattr(run, "PARTS", ("one", "two"))
    monkeypatch.setattr(run, "run_part", lambda name, quick: ((good if name == "one" else bad), 0.0))
    assert run.main([]) == 1
    out = capsys.readouterr().out
    assert "a: fine" in out and "b: broken" in out and "OUT" in out and "what went wrong" in out
    monkeypatch.setattr(run, "run_part", lambda name, quick: (good, 0.0))
    assert run.main([]) == 0


def test_a_part_that_raises_is_a_figure_out_of_bounds(monkeypatch):
    monkeypatch.setattr(part_soak, "run", lambda quick: 1 / 0)
    figures, _ = run.run_part("soak", quick=True)
    assert len(figures) == 1 and not figures[0].ok and "ZeroDivisionError" in figures[0].note

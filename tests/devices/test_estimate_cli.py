"""`padtune estimate` in process: options, board pads, overrides and one-line mistakes."""

import json

import pytest

from tui.cli import main


def run(capsys, *args):
    code = main(["estimate", *args])
    out, err = capsys.readouterr()
    return code, out, err


def test_board_pad_with_override(capsys):
    code, out, _ = run(capsys, "--board", "greenhouse", "--pad", "stop", "--json")
    base = json.loads(out)
    assert code == 0 and base["inputs"]["pad_area_mm2"] == pytest.approx(201.06, abs=0.01)
    code, out, _ = run(capsys, "--board", "greenhouse", "--pad", "stop", "--thickness-mm", "6", "--json")
    thicker = json.loads(out)
    assert thicker["finger_pf"]["nominal"] < base["finger_pf"]["nominal"]
    code, out, _ = run(capsys, "--board", "greenhouse", "--set", "timer_mhz=128", "--json")
    assert json.loads(out)["counts_per_pf"] == pytest.approx(2 * json.loads(
        run(capsys, "--board", "greenhouse", "--json")[1])["counts_per_pf"], rel=1e-6)


def test_isolated_person_gives_a_smaller_signal(capsys):
    # Human-body model (common practice, no source): less body capacitance, less finger signal in series.
    standing = json.loads(run(capsys, "--board", "greenhouse", "--json")[1])
    isolated = json.loads(run(capsys, "--board", "greenhouse", "--isolated", "--json")[1])
    assert isolated["inputs"]["body_pf"] == 50
    assert isolated["finger_pf"]["nominal"] < standing["finger_pf"]["nominal"]


def test_from_scratch_defaults_and_pad_override(capsys):
    code, out, _ = run(capsys, "--material", "acrylic", "--thickness-mm", "2", "--json")
    e = json.loads(out)
    assert code == 0 and e["inputs"]["method"] == "charge_time"
    assert e["inputs"]["pad_area_mm2"] == pytest.approx(144)
    board = json.loads(run(capsys, "--board", "greenhouse", "--json")[1])
    bigger = json.loads(run(capsys, "--board", "greenhouse", "--pad-mm", "20", "--json")[1])
    assert bigger["inputs"]["pad_area_mm2"] == pytest.approx(400) and bigger["inputs"]["parasitic_pf"] != 14
    assert board["inputs"]["parasitic_pf"] == 14
    other = json.loads(run(capsys, "--board", "greenhouse", "--method", "oscillator", "--json")[1])
    assert other["inputs"]["method"] == "oscillator" and other["polarity"] == -1


def test_plain_text_when_piped(capsys):
    code, out, _ = run(capsys, "--material", "acrylic", "--thickness-mm", "2", "--pad-diameter-mm", "15",
                       "--hum-pf", "0.05")
    assert code == 0 and "\x1b[" not in out
    assert "verdict" in out and "count change" in out and "from memory" in out


@pytest.mark.parametrize("args, words", [
    (["--material", "acrylic", "--thickness-mm", "2", "--pad-mm", "12y12"], "--pad-mm '12y12'"),
    (["--pad", "zone1", "--material", "acrylic", "--thickness-mm", "2"], "give --board too"),
    (["--board", "greenhouse", "--pad", "zone9"], "has pads zone1"),
    (["--board", "greenhouse", "--set", "r_ohm"], "KEY=NUMBER"),
    (["--board", "greenhouse", "--set", "r_ohms=5"], "did you mean r_ohm"),
    (["--material", "acrylic", "--thickness-mm", "0"], "--thickness-mm must be above zero"),
    (["--material", "unobtainium", "--thickness-mm", "2"], "unknown overlay material"),
    (["--board", "greenhouse", "--noise-pf", "-1"], "--noise-pf must be from 0 to 100"),
    (["--board", "greenhouse", "--hum-pf", "1e308"], "--hum-pf must be from 0 to 100"),
    (["--board", "greenhouse", "--isolated", "--body-pf", "80"], "not both"),
    (["--material", "acrylic", "--thickness-mm", "inf"], "--thickness-mm must be a finite number"),
    (["--material", "acrylic", "--thickness-mm", "60"], "at most 50"),
    (["--board", "greenhouse", "--noise-pf", "nan"], "--noise-pf must be a finite number"),
    (["--board", "greenhouse", "--pad-mm", "nanxnan"], "--pad-mm 'nanxnan'"),
    (["--board", "greenhouse", "--pad-mm", "1e6"], "at most 200 mm"),
    (["--board", "greenhouse", "--set", "r_ohm=inf"], "KEY=NUMBER"),
    (["--board", "greenhouse", "--body-pf", "0"], "--body-pf must be from 1 to 2000"),
    (["--board", "greenhouse", "--air-gap-mm", "-1"], "--air-gap-mm must be from 0 to 20"),
])
def test_mistakes(capsys, args, words):
    code, _, err = run(capsys, *args)
    assert code == 2 and words in err and len(err.strip().splitlines()) == 1, err


def test_components_out_of_range_give_an_unusable_verdict(capsys):
    # An ADC whose reference is below the shared voltage clips at full scale: no SNR verdict applies.
    code, out, _ = run(capsys, "--material", "acrylic", "--thickness-mm", "3", "--method", "charge_share",
                       "--set", "vdd_v=5", "--set", "vref_v=3.3", "--json")
    e = json.loads(out)
    assert code == 0 and e["verdict"].startswith("unusable") and "outside the method's range" in e["notes"][0]


def test_output_into_a_closed_pipe_is_quiet():
    # `padtune estimate ... | head -1`: the reader leaves early; no traceback, exit 0.
    import subprocess
    import sys

    proc = subprocess.Popen([sys.executable, "-m", "tui.cli", "estimate", "--board", "greenhouse", "--json"],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    proc.stdout.close()  # nobody reads: the first write meets a broken pipe
    _, err = proc.communicate(timeout=60)
    assert proc.returncode == 0 and b"Traceback" not in err, err

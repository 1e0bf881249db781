"""Board description files: the bundled boards load, and every kind of mistake is one clear line."""

import pytest

from devices.boards import list_boards, load_board
from protocol.errors import UserError

GOOD = """
[board]
name = "mini"
rate_hz = 50
[method]
kind = "charge_share"
sample_pf = 20
[overlay]
material = "acrylic"
thickness_mm = 2
[pad_defaults]
width_mm = 10
height_mm = 10
[[pad]]
name = "a"
[[pad]]
name = "b"
x_mm = 15
"""


def write(tmp_path, text):
    path = tmp_path / "board.toml"
    path.write_text(text)
    return str(path)


def test_bundled_boards_load():
    assert {"greenhouse", "pumphouse", "grid64"} <= set(list_boards())
    gh = load_board("greenhouse")
    assert gh.names == ("zone1", "zone2", "zone3", "zone4", "stop", "dur0", "dur1", "dur2", "dur3")
    assert gh.overlay.material.key == "polycarbonate" and gh.overlay.thickness_m == pytest.approx(3e-3)
    assert gh.sliders[0].pads == ("dur0", "dur1", "dur2", "dur3")
    assert gh.method.kind == "charge_time" and gh.loop_s == 30
    ph = load_board("pumphouse")
    assert ph.method.kind == "oscillator" and ph.overlay.material.key == "soda-lime-glass"
    assert ph.overlay.thickness_m == pytest.approx(6e-3) and ph.noise.hum_touch_pf > gh.noise.hum_touch_pf
    grid = load_board("grid64")
    assert grid.channels == 64 and grid.rate_hz == 1000 and grid.method.kind == "charge_share"
    assert len(set(grid.names)) == 64


def test_minimal_file_and_parasitic_estimate(tmp_path):
    spec = load_board(write(tmp_path, GOOD))
    assert spec.names == ("a", "b")
    assert spec.pads[0].area_m2 == pytest.approx(1e-4)
    assert 3e-12 < spec.pads[0].parasitic_f < 30e-12  # estimated from area when not given


@pytest.mark.parametrize("change, words", [
    (("rate_hz = 50", "rate_hz = 0"), "board.rate_hz: must be >= 1"),
    (("kind = \"charge_share\"", "kind = \"magic\""), "unknown method"),
    (("material = \"acrylic\"", "material = \"acrylik\""), "did you mean acrylic"),
    (("thickness_mm = 2", "thickness_mm = 0"), "overlay.thickness_mm: must be > 0"),
    (("name = \"b\"", "name = \"a\""), "used twice"),
    (("name = \"b\"", "name = \"b c\""), "not a plain name"),
    (("x_mm = 15", "x_mn = 15"), "pad[1].x_mn: unknown key (did you mean x_mm?)"),
    (("sample_pf = 20", "sample_pf = \"20\""), "positive number"),
    (("[board]", "[bord]"), "unknown key (did you mean board?)"),
])
def test_mistakes_give_one_line_messages(tmp_path, change, words):
    text = GOOD.replace(*change, 1)
    with pytest.raises(UserError) as err:
        load_board(write(tmp_path, text))
    msg = str(err.value)
    assert words in msg, msg
    assert "\n" not in msg and msg.startswith("board.toml")


def test_script_mistakes(tmp_path):
    base = GOOD + "[script]\nloop_s = 5\n"
    cases = [
        ("[[script.touch]]\npad = \"z\"\nat_s = 1\nhold_s = 1\n", "no pad named 'z'"),
        ("[[script.touch]]\npad = \"a\"\nat_s = 4\nhold_s = 2\n", "shorter than the script"),
        ("[[script.touch]]\npad = \"a\"\nslider = \"s\"\nat_s = 1\nhold_s = 1\n", "exactly one of"),
        ("[[script.touch]]\npad = \"a\"\nat_s = 1\n", "hold_s: missing"),
    ]
    for extra, words in cases:
        with pytest.raises(UserError) as err:
            load_board(write(tmp_path, base + extra))
        assert words in str(err.value), str(err.value)


def test_unknown_board_name_and_bad_toml(tmp_path):
    with pytest.raises(UserError) as err:
        load_board("greenhous")
    assert "did you mean greenhouse" in str(err.value)
    with pytest.raises(UserError) as err:
        load_board(write(tmp_path, "[board\nname="))
    assert "not valid TOML" in str(err.value) and "\n" not in str(err.value)
    with pytest.raises(UserError):
        load_board(str(tmp_path / "missing.toml"))


def test_boards_too_wide_for_one_protocol_line_are_refused(tmp_path):
    # protocol v1 drops lines over 1024 bytes: a board whose frames could not fit is a file mistake.
    text = GOOD.split("[[pad]]")[0] + "[pad_grid]\nrows = 16\ncols = 16\npitch_mm = 10\n"
    with pytest.raises(UserError, match="longer than the protocol's 1024 bytes"):
        load_board(write(tmp_path, text))


def test_width_fault_too_wide_is_refused():
    from devices.faults import FaultPlan
    from devices.simulator import SimBoard

    with pytest.raises(UserError, match="would not fit"):
        SimBoard("grid64", faults=FaultPlan.parse(["width:250@1"]))


def test_script_who_touches(tmp_path):
    base = GOOD + "[[script.touch]]\npad = \"a\"\nat_s = 1\nhold_s = 1\n"
    spec = load_board(write(tmp_path, base + "who = \"isolated\"\n"))
    assert spec.script[0].body_f == pytest.approx(50e-12)
    assert load_board(write(tmp_path, base + "body_pf = 80\n")).script[0].body_f == pytest.approx(80e-12)
    assert load_board(write(tmp_path, base)).script[0].body_f is None
    with pytest.raises(UserError, match="use standing or isolated"):
        load_board(write(tmp_path, base + "who = \"ghost\"\n"))


@pytest.mark.parametrize("extra, words", [
    ("[slider]\nname = \"s\"\npads = [\"a\", \"b\"]\n", "slider: must be a list of tables"),
    ("[[slider]]\nname = \"s\"\npads = [\"a\", \"a\"]\n", "names a pad twice"),
    ("[[slider]]\nname = \"s\"\npads = [\"a\", \"b\"]\n[[slider]]\nname = \"s\"\npads = [\"b\", \"a\"]\n",
     "the slider name 's' is used twice"),
    ("[script]\ntouch = 3\n", "script.touch: must be a list of tables"),
    ("[script]\n[script.touch]\npad = \"a\"\nat_s = 1\nhold_s = 1\n", "script.touch: must be a list"),
    ("[noise]\ncrosstalk = 5\n", "noise.crosstalk: is the fraction"),
])
def test_structure_mistakes_are_one_line(tmp_path, extra, words):
    with pytest.raises(UserError) as err:
        load_board(write(tmp_path, GOOD + extra))
    assert words in str(err.value) and "\n" not in str(err.value), str(err.value)


@pytest.mark.parametrize("change, words", [
    (("name = \"mini\"", "name = \"mini\"\nfw = \"v 1=2\""), "board.fw: 'v 1=2' is not a plain version"),
    (("name = \"mini\"", "name = \"mini\"\ndescription = \"two\\nlines\""), "must be one line"),
    (("name = \"mini\"", "name = \"mini\"\ndescription = \"" + "x" * 300 + "\""), "at most 200"),
])
def test_text_that_goes_on_the_wire_is_checked(tmp_path, change, words):
    # The info line cannot carry spaces in a value and a comment is one line of at most 1024 bytes
    # (protocol/PROTOCOL.md): a board file that would break them is refused when it is read.
    with pytest.raises(UserError) as err:
        load_board(write(tmp_path, GOOD.replace(*change, 1)))
    assert words in str(err.value), str(err.value)


def test_grid_rows_must_be_whole(tmp_path):
    text = GOOD.split("[[pad]]")[0] + "[pad_grid]\nrows = 2.5\ncols = 2\npitch_mm = 10\n"
    with pytest.raises(UserError, match=r"pad_grid\.rows: must be a whole number"):
        load_board(write(tmp_path, text))


@pytest.mark.parametrize("extra, words", [
    ("[script.random]\nper_min = 1e9\n", "script.random.per_min: must be <= 600"),
    ("[script.random]\nper_min = 10\nhold_min_s = 0\n", "script.random.hold_min_s: must be >= 0.02 s"),
])
def test_random_touches_are_bounded(tmp_path, extra, words):
    # Unbounded rates with zero-length touches would make the touch plan loop without end.
    with pytest.raises(UserError) as err:
        load_board(write(tmp_path, GOOD + extra))
    assert words in str(err.value), str(err.value)

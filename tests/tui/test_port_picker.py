"""The port picker that bare `padtune` opens: ports first, then the simulated boards; Enter opens one."""

from __future__ import annotations

from textual.widgets import OptionList

from tui.screens.port_picker import Choice, PortPickerApp, choices


def test_choices_list_ports_then_simulated_boards() -> None:
    got = choices([("/dev/ttyACM0", "touch dev board"), ("/dev/ttyUSB1", "")], ["greenhouse", "grid64"])
    assert [c.target for c in got] == ["/dev/ttyACM0", "/dev/ttyUSB1", "sim://greenhouse", "sim://grid64"]
    assert got[0].label == "/dev/ttyACM0  touch dev board" and not got[0].simulated and got[2].simulated
    assert got[1].label == "/dev/ttyUSB1  serial port"  # no description: still says what it is


async def test_enter_opens_the_highlighted_choice() -> None:
    app = PortPickerApp(lambda: choices([("/dev/ttyACM0", "board")], ["greenhouse"]))
    async with app.run_test() as pilot:
        await pilot.press("down", "enter")
    assert app.return_value == "sim://greenhouse"


async def test_without_ports_it_says_so_and_still_offers_the_simulated_boards() -> None:
    scans: list[int] = []

    def scan() -> list[Choice]:
        scans.append(1)
        return choices([], ["greenhouse"])

    app = PortPickerApp(scan)
    async with app.run_test() as pilot:
        options = app.query_one(OptionList)
        assert "no serial ports found" in str(options.get_option_at_index(0).prompt)
        await pilot.press("r")  # look again
        assert len(scans) == 2
        await pilot.press("enter")  # the highlight skips the disabled hint line
    assert app.return_value == "sim://greenhouse"


async def test_escape_leaves_without_a_choice() -> None:
    app = PortPickerApp(lambda: choices([], ["greenhouse"]))
    async with app.run_test() as pilot:
        await pilot.press("escape")
    assert app.return_value is None

"""Subcommand modules, one per command; `default_command` runs for a bare `padtune` (the port picker)."""

from __future__ import annotations

import argparse


def default_command(args: argparse.Namespace) -> int:
    """Let the user pick a serial port or a simulated board, then open the live screen on it."""
    from tui.live import run_live
    from tui.screens.port_picker import PortPickerApp, scan_choices

    target = PortPickerApp(scan_choices).run()
    if not target:
        return 0
    start = None
    if target.startswith("sim://"):
        from tui.demo_profile import demo_profile

        start = demo_profile(target.removeprefix("sim://").split("?")[0])
    return run_live(target, 115200, None, demo=target.startswith("sim://"), start_profile=start)

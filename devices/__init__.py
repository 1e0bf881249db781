"""What gets plugged in: simulated boards and their physics, board descriptions, the C reference library."""

from __future__ import annotations


def register_url_handlers() -> None:
    """Let pyserial open `sim://BOARD?...` URLs (it imports `devices.protocol_sim` for that scheme)."""
    import serial

    if "devices" not in serial.protocol_handler_packages:
        serial.protocol_handler_packages.append("devices")

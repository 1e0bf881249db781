"""The serial ports of this machine, with description and USB identity, and finding a USB port again.

pyserial's `list_ports` never shows pseudo-terminals or URLs; those are opened by name.
"""

from __future__ import annotations

import os
from dataclasses import dataclass

from serial.tools import list_ports as _list_ports


@dataclass(frozen=True, slots=True)
class PortInfo:
    device: str
    description: str
    vid: int | None = None
    pid: int | None = None
    serial_number: str | None = None
    manufacturer: str | None = None
    location: str | None = None

    @property
    def vid_pid(self) -> str:
        """`VVVV:PPPP` in hex for USB ports, empty otherwise."""
        return "" if self.vid is None or self.pid is None else f"{self.vid:04X}:{self.pid:04X}"

    def as_dict(self) -> dict[str, object]:
        return {
            "device": self.device,
            "description": self.description,
            "vid_pid": self.vid_pid or None,
            "vid": self.vid,
            "pid": self.pid,
            "serial_number": self.serial_number,
            "manufacturer": self.manufacturer,
            "location": self.location,
        }


def list_ports() -> list[PortInfo]:
    """Every serial port the OS reports, sorted by device name."""
    out = []
    for p in _list_ports.comports():
        description = "" if p.description in (None, "n/a") else str(p.description)
        out.append(
            PortInfo(
                device=p.device,
                description=description,
                vid=p.vid,
                pid=p.pid,
                serial_number=p.serial_number,
                manufacturer=p.manufacturer,
                location=p.location,
            )
        )
    return sorted(out, key=lambda p: p.device)


@dataclass(frozen=True, slots=True)
class UsbIdentity:
    """What stays the same when a USB board is unplugged and comes back, maybe under a new name."""

    vid: int
    pid: int
    serial_number: str | None


def usb_identity(device: str, ports: list[PortInfo] | None = None) -> UsbIdentity | None:
    """The USB identity of a device path (symlinks such as /dev/serial/by-id/... resolved)."""
    real = os.path.realpath(device)
    for p in list_ports() if ports is None else ports:
        if p.vid is not None and p.pid is not None and os.path.realpath(p.device) == real:
            return UsbIdentity(p.vid, p.pid, p.serial_number)
    return None


def find_usb(identity: UsbIdentity, ports: list[PortInfo] | None = None) -> str | None:
    """The device path that now carries `identity`; with no serial number, the only VID:PID match."""
    matches = [
        p.device
        for p in (list_ports() if ports is None else ports)
        if (p.vid, p.pid) == (identity.vid, identity.pid) and p.serial_number == identity.serial_number
    ]
    if identity.serial_number is None and len(matches) != 1:
        return None  # two look-alike boards without serial numbers: refuse to guess
    return matches[0] if matches else None

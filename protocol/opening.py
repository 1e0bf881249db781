"""Opening a device path or a pyserial URL, with a one-line what-to-do message for every failure.

`open_port` is re-exported by `protocol.link`; it is here so the messages stay in one small module.
"""

from __future__ import annotations

import errno
import sys

import serial

from protocol.errors import UserError

KNOWN_SCHEMES = "socket://, rfc2217://, loop://, spy://, hwgrep://, alt://, sim://"


def is_url(port: str) -> bool:
    return "://" in port


def open_port(port_or_url: str, baud: int, timeout_s: float) -> serial.SerialBase:
    """Open and return the port; UserError (one line, says what to do) if that is not possible."""
    if not port_or_url or not port_or_url.strip():
        raise UserError("no port given: name a device such as /dev/ttyACM0 or COM3, or a URL")
    if isinstance(baud, bool) or not isinstance(baud, int) or baud <= 0:
        raise UserError(f"baud rate {baud!r} is not valid: give a positive whole number such as 115200")
    extra = {} if is_url(port_or_url) else {"exclusive": True}
    try:
        return serial.serial_for_url(
            port_or_url, baudrate=baud, timeout=timeout_s, write_timeout=1.0, **extra
        )
    except UserError:
        raise
    except ValueError as exc:
        raise UserError(_value_message(port_or_url, baud, exc)) from None
    except (serial.SerialException, OSError) as exc:
        raise UserError(_open_message(port_or_url, exc)) from None


def _value_message(port: str, baud: int, exc: ValueError) -> str:
    text = str(exc)
    if "protocol" in text and "not known" in text:
        scheme = port.split("://", 1)[0]
        return (
            f"unknown port URL scheme {scheme}://: use a device path (/dev/ttyACM0, COM3) or {KNOWN_SCHEMES}"
        )
    if "baud" in text.lower():
        return f"baud rate {baud} is not supported by {port}: try 115200"
    return f"cannot open {port}: {text}"


def _open_message(port: str, exc: BaseException) -> str:
    code = getattr(exc, "errno", None)
    text = str(exc)
    lowered = text.lower()
    if code in (errno.ENOENT, errno.ENODEV, errno.ENXIO) or "filenotfounderror" in lowered:
        return f"port {port} not found: is the board plugged in? `padtune ports` lists the ports"
    if code in (errno.EBUSY, errno.EAGAIN, errno.EWOULDBLOCK) or "exclusively lock" in lowered:
        return f"port {port} is busy: another program (a serial monitor, ModemManager) has it open; close it"
    if code in (errno.EACCES, errno.EPERM) or "permissionerror" in lowered or "access is denied" in lowered:
        if sys.platform.startswith("linux"):
            return (
                f"no permission to open {port}: add yourself to the dialout group "
                "(sudo usermod -aG dialout $USER), then log out and in again"
            )
        if sys.platform == "win32":
            return f"cannot open {port}: access denied, usually another program has it open; close it"
        return f"no permission to open {port}: ask for access to the serial device"
    if code == errno.EISDIR or "is a directory" in lowered:
        return f"{port} is a folder, not a serial port: name a device such as /dev/ttyACM0, or a URL"
    if code == errno.ECONNREFUSED or "connection refused" in lowered:
        return f"cannot connect to {port}: connection refused; is the server running?"
    detail = text.splitlines()[0] if text else type(exc).__name__
    return f"cannot open {port}: {detail}"

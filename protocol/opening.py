"""Opening a device path or a pyserial URL, with a one-line what-to-do message for every failure.

`open_port` is re-exported by `protocol.link`; it is here so the messages stay in one small module.
Whatever a URL handler raises while opening (pyserial's handlers raise SerialException, ValueError,
NotImplementedError, KeyError...) becomes one `UserError` line that names the port: never a traceback.
Options are passed only where the handler takes them: the RFC 2217 client refuses `write_timeout`
(its socket has its own 5 s timeout), so it is left out there.
"""

from __future__ import annotations

import errno
import sys
from urllib.parse import urlsplit

import serial

from protocol.errors import UserError

KNOWN_SCHEMES = "socket://, rfc2217://, loop://, spy://, hwgrep://, alt://, sim://"
WRITE_TIMEOUT_S = 1.0
_NETWORK_SCHEMES = ("socket", "rfc2217")  # URLs of the form scheme://host:port[?options]


def is_url(port: str) -> bool:
    return "://" in port


def scheme_of(port: str) -> str:
    """The URL scheme in lower case (`socket`, `rfc2217`, ...), or "" for a device path."""
    return port.split("://", 1)[0].lower() if is_url(port) else ""


def has_baud_rate(port: str) -> bool:
    """False where a baud rate means nothing: a plain TCP link (socket://) or the loop-back (loop://).

    rfc2217:// does have one: the client sets the remote port's rate. Device paths and the wrapping
    URLs (spy://, alt://, hwgrep://) open real serial ports.
    """
    return scheme_of(port) not in ("socket", "loop")


def open_port(port_or_url: str, baud: int, timeout_s: float) -> serial.SerialBase:
    """Open and return the port; UserError (one line, says what to do) if that is not possible."""
    if not port_or_url or not port_or_url.strip():
        raise UserError("no port given: name a device such as /dev/ttyACM0 or COM3, or a URL")
    if isinstance(baud, bool) or not isinstance(baud, int) or baud <= 0:
        raise UserError(f"baud rate {baud!r} is not valid: give a positive whole number such as 115200")
    scheme = scheme_of(port_or_url)
    if scheme in _NETWORK_SCHEMES:
        _check_host_port(port_or_url, scheme)
    extra: dict[str, object] = {} if scheme else {"exclusive": True}
    if scheme != "rfc2217":  # its client raises NotImplementedError for a write timeout
        extra["write_timeout"] = WRITE_TIMEOUT_S
    try:
        return serial.serial_for_url(port_or_url, baudrate=baud, timeout=timeout_s, **extra)
    except UserError:
        raise
    except ValueError as exc:
        raise UserError(_value_message(port_or_url, baud, exc)) from None
    except (serial.SerialException, OSError) as exc:
        raise UserError(_open_message(port_or_url, exc)) from None
    except Exception as exc:  # a URL handler's own error (KeyError, NotImplementedError...): one line
        raise UserError(_other_message(port_or_url, exc)) from None


def _check_host_port(port: str, scheme: str) -> None:
    """socket:// and rfc2217:// need HOST:PORT; pyserial's own message for a bad one is garbled."""
    example = f"{scheme}://192.168.1.20:4000"
    try:
        parts = urlsplit(port)
        number = parts.port
        host = parts.hostname
    except ValueError:
        number, host = None, None
    if not host or number is None or not 0 < number < 65536:
        raise UserError(f"{port} is not a valid address: give {scheme}://HOST:PORT, such as "
                        f"{example}")


def _other_message(port: str, exc: BaseException) -> str:
    text = str(exc).splitlines()[0] if str(exc) else ""
    what = type(exc).__name__
    return f"cannot open {port}: {what}{': ' + text if text else ''}"


def _value_message(port: str, baud: int, exc: ValueError) -> str:
    text = str(exc)
    if "protocol" in text and "not known" in text:
        scheme = port.split("://", 1)[0]
        return (
            f"unknown port URL scheme {scheme}:// in {port}: use a device path (/dev/ttyACM0, COM3) or "
            f"{KNOWN_SCHEMES}"
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
    if "name or service not known" in lowered or "temporary failure in name resolution" in lowered \
            or "nodename nor servname" in lowered or "getaddrinfo failed" in lowered:
        return f"cannot connect to {port}: no such host; check the name, or give its IP address"
    if "timed out" in lowered:
        return f"cannot connect to {port}: no answer (timed out); is the server running and reachable?"
    if "does not seem to support rfc2217" in lowered or "does not accept parameter change" in lowered:
        return (f"cannot open {port}: the server does not speak RFC 2217; for a plain TCP serial bridge "
                f"use socket://{urlsplit(port).netloc}")
    detail = text.splitlines()[0] if text else type(exc).__name__
    prefix = f"could not open port {port}: "
    if detail.lower().startswith(prefix.lower()):  # pyserial repeats the port: say it once
        detail = detail[len(prefix):] or type(exc).__name__
    return f"cannot open {port}: {detail}"

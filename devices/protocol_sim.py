"""pyserial URL handler for simulated boards: `serial.serial_for_url("sim://greenhouse?seed=7")`.

pyserial imports this module for the `sim` scheme once `devices.register_url_handlers()` has run.
The port reads the bytes a `devices.simulator.SimBoard` has sent by now (paced by the clock, times
the speed factor) and writes go to the board as host commands (`?`, `+PAD`, `-PAD`; see README.md).

URL: `sim://BOARD?seed=7&speed=4&fault=drop:0.01&fault=reset@5&checksum=1&script=1&random=20&states=1`
(BOARD is a bundled board name, or `sim:///path/to/board.toml`); `settings=0` makes a board that does
not take PROTOCOL.md section 7's commands, `flash=PATH` keeps the board's kept settings in a file
(so `keep` survives this process too). The board object itself is
`port.board`, so Python callers can also `port.press("zone1")`.
"""

from __future__ import annotations

import math
import os
import threading
import time
import urllib.parse

from serial.serialutil import PortNotOpenError, SerialBase, SerialException

from devices.board_settings import Flash
from devices.faults import FaultPlan
from devices.simulator import SimBoard
from protocol.errors import UserError

OPTIONS = ("seed", "speed", "fault", "checksum", "script", "random", "backlog_s", "packet_ms", "settings",
           "flash", "states")
MAX_BACKLOG_S = 2.0  # a host that stops reading longer than this loses frames, as with a full OS buffer
PACKET_S = 0.01  # frames are released in 10 ms packets, as a board's USB buffer would send them


def _flag(name: str, value: str) -> bool:
    if value.lower() in ("1", "yes", "on", "true"):
        return True
    if value.lower() in ("0", "no", "off", "false"):
        return False
    raise UserError(f"sim:// option {name}={value!r}: use 1 or 0")


def _number(name: str, value: str, kind: type = float) -> float:
    try:
        return kind(value)
    except ValueError:
        raise UserError(f"sim:// option {name}={value!r}: must be a number") from None


def board_from_url(url: str) -> tuple[SimBoard, float, float]:
    """The SimBoard a `sim://` URL describes, its backlog limit and packet time in seconds."""
    parts = urllib.parse.urlsplit(url)
    if parts.scheme != "sim":
        raise UserError(f"{url!r} is not a sim:// URL")
    name = parts.netloc or parts.path
    if not name:
        raise UserError("sim:// needs a board: sim://greenhouse (see `padtune sim --list`)")
    query = urllib.parse.parse_qs(parts.query, keep_blank_values=True)
    for key in query:
        if key not in OPTIONS:
            raise UserError(f"sim:// option {key!r} is not known; options: {', '.join(OPTIONS)}")
    one = {k: v[-1] for k, v in query.items()}
    board = SimBoard(
        name, seed=int(_number("seed", one.get("seed", "0"), int)),
        speed=_number("speed", one.get("speed", "1")),
        faults=FaultPlan.parse(query.get("fault", [])),
        checksum=_flag("checksum", one.get("checksum", "1")),
        script=_flag("script", one.get("script", "1")),
        random_per_min=_number("random", one["random"]) if "random" in one else None,
        settings=_flag("settings", one.get("settings", "1")),
        flash=flash_at(one["flash"]) if "flash" in one else None,
        states=_flag("states", one.get("states", "0")),
    )
    backlog_s = _number("backlog_s", one.get("backlog_s", str(MAX_BACKLOG_S)))
    if not 0.0 < backlog_s <= 3600.0:  # also refuses nan
        raise UserError(f"sim:// option backlog_s={backlog_s:g}: use more than 0 and at most 3600 s")
    packet_s = _number("packet_ms", one.get("packet_ms", str(PACKET_S * 1e3))) / 1e3
    if not 0.0 <= packet_s <= 1.0:
        raise UserError(f"sim:// option packet_ms={packet_s * 1e3:g}: use 0 to 1000 ms")
    return board, backlog_s, packet_s


def flash_at(path: str) -> Flash:
    """The board's non-volatile memory in a file (created by the first `keep`)."""
    if not path:
        raise UserError("sim:// option flash=: give a file path for the board's kept settings")
    target = os.path.expanduser(path)
    if os.path.exists(target) and not os.path.isfile(target):
        raise UserError(f"sim:// option flash={path}: not a regular file")
    folder = os.path.dirname(os.path.abspath(target))
    if not os.path.isdir(folder):
        raise UserError(f"sim:// option flash={path}: the folder {folder} does not exist")
    return Flash(target)


class Serial(SerialBase):
    """A serial port whose far end is a simulated board."""

    def __init__(self, *args, **kwargs) -> None:
        self.board: SimBoard | None = None
        self._buffer = bytearray()
        self._lock = threading.Lock()
        self._cancel = threading.Event()
        self._backlog_s = MAX_BACKLOG_S
        self._packet_s = PACKET_S
        super().__init__(*args, **kwargs)

    # --- pyserial plumbing ------------------------------------------------------------------------
    def open(self) -> None:
        if self.is_open:
            raise SerialException("Port is already open.")
        if self._port is None:
            raise SerialException("Port must be configured before it can be used.")
        try:
            self.board, self._backlog_s, self._packet_s = board_from_url(self.portstr)
        except UserError as exc:
            # pyserial callers expect SerialException from open(); the message stays one clear line.
            raise SerialException(str(exc)) from exc
        self._buffer.clear()
        self.is_open = True

    def close(self) -> None:
        self.is_open = False
        self._cancel.set()
        super().close()

    def from_url(self, url: str) -> SimBoard:
        return board_from_url(url)[0]

    def _packet_board_s(self, board: SimBoard) -> float:
        return self._packet_s * board.speed

    def _reconfigure_port(self) -> None:
        """Baud rate, parity and the like mean nothing to a simulated board."""

    def _update_dtr_state(self) -> None:
        pass

    def _update_rts_state(self) -> None:
        pass

    def _update_break_state(self) -> None:
        pass

    @property
    def cts(self) -> bool:
        return True

    @property
    def dsr(self) -> bool:
        return True

    @property
    def ri(self) -> bool:
        return False

    @property
    def cd(self) -> bool:
        return True

    # --- data -------------------------------------------------------------------------------------
    def _pull(self) -> None:
        board = self._require()
        with self._lock:
            behind_s = board.sim_time_s - board.generated_s
            if behind_s > self._backlog_s * board.speed:
                board.skip_until(board.sim_time_s - self._backlog_s * board.speed)
            # Frames go out in whole packets: generating a frame or two per read would cost far more.
            packet = self._packet_board_s(board)
            now = board.sim_time_s
            release = math.floor(now / packet) * packet if packet > 0 else now
            board.generate_until(release)
            self._buffer += board.take()

    def _require(self) -> SimBoard:
        if not self.is_open or self.board is None:
            raise PortNotOpenError()
        return self.board

    @property
    def in_waiting(self) -> int:
        self._pull()
        return len(self._buffer)

    def read(self, size: int = 1) -> bytes:
        board = self._require()
        deadline = None if self._timeout is None else time.monotonic() + self._timeout
        self._cancel.clear()
        while True:
            self._pull()
            if len(self._buffer) >= size or self._timeout == 0 or self._cancel.is_set() or not self.is_open:
                break
            wait = max(self._seconds_to_release(board), 0.0005)
            if deadline is not None:
                left = deadline - time.monotonic()
                if left <= 0:
                    break
                wait = min(wait, left)
            self._cancel.wait(wait)
        with self._lock:
            out = bytes(self._buffer[:size])
            del self._buffer[:size]
        return out

    def _seconds_to_release(self, board: SimBoard) -> float:
        """Clock seconds until the packet holding the next frame goes out."""
        packet = self._packet_board_s(board)
        due = board.generated_s if packet <= 0 else math.ceil(board.generated_s / packet - 1e-9) * packet
        return max(0.0, (due - board.sim_time_s) / board.speed)

    def cancel_read(self) -> None:
        self._cancel.set()

    def write(self, data: bytes) -> int:
        board = self._require()
        with self._lock:
            return board.write(bytes(data))

    def reset_input_buffer(self) -> None:
        self._pull()
        with self._lock:
            self._buffer.clear()

    def reset_output_buffer(self) -> None:
        self._require()

    @property
    def out_waiting(self) -> int:
        return 0

    def press(self, pad: str | int, pressed: bool = True, strength: float = 1.0) -> None:
        """Put a simulated finger on a pad (or lift it), as a Python call instead of a `+PAD` line."""
        board = self._require()
        with self._lock:
            board.press(pad, pressed, strength)

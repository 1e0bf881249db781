"""Playing a `Board` on a real wire: a pseudo-terminal, a TCP socket, or a pty behind an RFC 2217 server.

`Player` is the board's own thread: it prints the board's lines at its frame rate (paced by the clock,
catching up in a burst if the machine stalls it, so frame numbers never depend on timing), reads what
the host writes and answers `?` when the board knows how. A board that is `running` prints from
power-up, whether or not anyone has the port open, as a board behind a UART bridge does; bytes nobody
reads are dropped when the pseudo-terminal is full, and whatever the host's open flushes is gone.

`Rfc2217Server` is pyserial's own `serial.rfc2217.PortManager` in front of the pty's slave side, with the
modem lines a pty lacks stubbed (FIELD-NOTES: pyserial), so `rfc2217://` is tested against a real server.
"""

from __future__ import annotations

import contextlib
import dataclasses
import fcntl
import os
import select
import socket
import struct
import termios
import threading
import time
import tty

import serial
import serial.rfc2217

from tests.acceptance.boards import Board, Touch

WRITE_DEADLINE_S = 30.0  # a host that stops reading this long is broken, not slow
ASK_GIVE_UP_S = 4.0  # a running board whose host never asks `?` stops after this (the test then fails)


class HostGone(Exception):
    """The host closed its end (a socket reset): the board stops printing, as a bridge would."""


class PtyWire:
    """A pseudo-terminal: the board writes its master side, the host opens `url` (the slave's path).
    The test keeps the slave open too, so `unread()` can see how many bytes the host has not read yet."""

    kind = "pty"

    def __init__(self) -> None:
        self.halt = threading.Event()  # set when the board is stopped: no write waits any longer
        self.master, self.slave = os.openpty()
        tty.setraw(self.slave)
        os.set_blocking(self.master, False)
        self.url = os.ttyname(self.slave)

    def accept(self, halt: threading.Event) -> bool:
        return True

    def write(self, data: bytes, drop_if_full: bool = False) -> bool:
        """Write all of `data` (True), or, with `drop_if_full`, nothing when the pty is full (False)."""
        view = memoryview(data)
        deadline = time.monotonic() + (0.2 if drop_if_full else WRITE_DEADLINE_S)
        first = True
        while view:
            try:
                view = view[os.write(self.master, view):]
            except BlockingIOError:
                if (first and drop_if_full) or self.halt.is_set():
                    return False
                if time.monotonic() > deadline:
                    if drop_if_full:
                        return False  # a torn line: the host's open flushes it, or it reads as garbage
                    raise TimeoutError("the host stopped reading the pseudo-terminal") from None
                select.select([], [self.master], [], 0.01)
            first = False
        return True

    def read(self) -> bytes:
        try:
            return os.read(self.master, 4096)
        except (BlockingIOError, OSError):
            return b""

    def unread(self) -> int | None:
        """Bytes written to the host that it has not read yet (TIOCINQ on the slave)."""
        got = fcntl.ioctl(self.slave, termios.TIOCINQ, struct.pack("i", 0))
        return struct.unpack("i", got)[0]

    def close(self) -> None:
        for fd in (self.master, self.slave):
            with contextlib.suppress(OSError):
                os.close(fd)


class SocketWire:
    """A TCP server on 127.0.0.1 serving one client: the board behind `socket://` (a Wi-Fi bridge)."""

    kind = "socket"

    def __init__(self) -> None:
        self.halt = threading.Event()
        self.server = socket.create_server(("127.0.0.1", 0))
        self.url = f"socket://127.0.0.1:{self.server.getsockname()[1]}"
        self.conn: socket.socket | None = None

    def accept(self, halt: threading.Event) -> bool:
        self.server.settimeout(0.1)
        while not halt.is_set():
            try:
                self.conn, _ = self.server.accept()
            except TimeoutError:
                continue
            self.conn.setblocking(False)
            return True
        return False

    def write(self, data: bytes, drop_if_full: bool = False) -> bool:
        assert self.conn is not None
        view = memoryview(data)
        deadline = time.monotonic() + WRITE_DEADLINE_S
        while view:
            try:
                view = view[self.conn.send(view):]
            except (BrokenPipeError, ConnectionResetError):
                raise HostGone() from None
            except BlockingIOError:
                if self.halt.is_set():
                    return False
                if time.monotonic() > deadline:
                    raise TimeoutError("the host stopped reading the socket") from None
                select.select([], [self.conn], [], 0.01)
        return True

    def read(self) -> bytes:
        if self.conn is None:
            return b""
        try:
            return self.conn.recv(4096)
        except (BlockingIOError, OSError):
            return b""

    def unread(self) -> int | None:
        return None  # the host's receive queue is not visible from here

    def close(self) -> None:
        for s in (self.conn, self.server):
            if s is not None:
                with contextlib.suppress(OSError):
                    s.close()


class _PtyPort(serial.Serial):
    """The server's side of the pty as a pyserial port. A pty has no modem lines: the RFC 2217 server
    sets DTR/RTS and polls CTS/DSR/RI/CD, so those are stubbed (FIELD-NOTES: pyserial)."""

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


class Rfc2217Wire(PtyWire):
    """A board on a pty, served to the network by pyserial's RFC 2217 PortManager (a test-started
    server, one client): socket bytes go through `filter()` to the port, port bytes through `escape()`."""

    kind = "rfc2217"

    def __init__(self) -> None:
        super().__init__()
        self.port = _PtyPort(os.ttyname(self.slave), baudrate=115200, timeout=0.05)
        self.server = socket.create_server(("127.0.0.1", 0))
        self.server.settimeout(0.1)
        self.url = f"rfc2217://127.0.0.1:{self.server.getsockname()[1]}"
        self._stop = threading.Event()
        self._conn: socket.socket | None = None
        self._lock = threading.Lock()
        self.manager: serial.rfc2217.PortManager | None = None
        self.server_error: BaseException | None = None
        self._thread = threading.Thread(target=self._serve, name="rfc2217-server", daemon=True)
        self._thread.start()

    # PortManager writes its telnet replies through `connection.write`.
    def _send(self, data: bytes) -> None:
        with self._lock:
            if self._conn is not None:
                self._conn.sendall(data)

    def _serve(self) -> None:
        try:
            while not self._stop.is_set():
                try:
                    conn, _ = self.server.accept()
                except TimeoutError:
                    continue
                conn.settimeout(0.05)
                self._conn = conn
                self.manager = serial.rfc2217.PortManager(self.port, _Connection(self._send))
                to_net = threading.Thread(target=self._port_to_net, daemon=True)
                to_net.start()
                self._net_to_port(conn)
                to_net.join(2)
                return
        except BaseException as exc:  # reported by the self-test and in failures, never swallowed
            self.server_error = exc

    def _net_to_port(self, conn: socket.socket) -> None:
        while not self._stop.is_set():
            try:
                data = conn.recv(4096)
            except TimeoutError:
                continue
            except OSError:
                return
            if not data:
                return
            assert self.manager is not None
            self.port.write(b"".join(self.manager.filter(data)))

    def _port_to_net(self) -> None:
        while not self._stop.is_set():
            data = self.port.read(self.port.in_waiting or 1)
            if data:
                assert self.manager is not None
                try:
                    self._send(b"".join(self.manager.escape(data)))
                except OSError:
                    return

    def close(self) -> None:
        self._stop.set()
        self._thread.join(3)
        for s in (self._conn, self.server):
            if s is not None:
                with contextlib.suppress(OSError):
                    s.close()
        with contextlib.suppress(Exception):
            self.port.close()
        super().close()


@dataclasses.dataclass
class _Connection:
    write: object


def make_wire(kind: str) -> PtyWire | SocketWire | Rfc2217Wire:
    return {"pty": PtyWire, "socket": SocketWire, "rfc2217": Rfc2217Wire}[kind]()


class Player(threading.Thread):
    """Plays `board` on `wire`. Set `go` when the host has the port open (a board that is `running` does
    not wait). `written` holds the frame numbers whose lines were written whole, in order; `asks` the
    moments the host wrote a `?` line (monotonic s, the next frame by then). `finished` is set when it
    has printed all its frames; it listens to the host until `stop()`."""

    def __init__(self, board: Board, wire: PtyWire | SocketWire | Rfc2217Wire, speed: float = 1.0) -> None:
        super().__init__(name=f"board {board.name}", daemon=True)
        self.board = board
        self.speed = speed  # the self-test plays boards faster than life
        self.wire = wire
        self.go = threading.Event()
        self.halt = threading.Event()
        self.finished = threading.Event()
        self.written: list[int] = []
        self.asks: list[tuple[float, int]] = []
        self.host_lines: list[bytes] = []
        self.anchor: int | None = None  # a running board's frame at the host's first `?`
        self.opened_at: float | None = None  # set by the test when the host reports the port open
        self.error: BaseException | None = None
        self.host_gone = False
        self.next_frame = 0
        self._host = b""

    @property
    def sent(self) -> int:
        return len(self.written)

    def run(self) -> None:
        try:
            if self.wire.accept(self.halt):
                self._play()
                self.finished.set()
                while not self.halt.is_set():  # printed all it had: keeps listening (a `?` is news)
                    self._listen()
                    time.sleep(0.01)
        except HostGone:
            self.host_gone = True
        except BaseException as exc:  # shown by the test that reads this board, never swallowed
            self.error = exc
        finally:
            self.finished.set()

    def _wait_go(self) -> bool:
        while not self.go.wait(0.01):
            if self.halt.is_set():
                return False
        return True

    def _listen(self) -> None:
        data = self.wire.read()
        if not data:
            return
        self._host += data
        *whole, self._host = self._host.replace(b"\r", b"\n").split(b"\n")
        for line in whole:
            if not line:
                continue
            self.host_lines.append(line)
            if line.strip() == b"?":
                self.asks.append((time.monotonic(), self.next_frame))
                if self.board.running and self.anchor is None:
                    self.anchor = self.next_frame
                    self.board = dataclasses.replace(self.board, touches=tuple(
                        Touch(t.key, t.start + self.anchor, t.length) for t in self.board.touches))
                if self.board.answer is not None:
                    self.wire.write(self.board.answer_bytes())

    def _play(self) -> None:
        board = self.board
        if not board.running and not self._wait_go():
            return
        self.wire.write(board.boot_bytes(), drop_if_full=board.running)
        t0 = time.monotonic()
        stalled = False
        while not self.halt.is_set():
            frame = self.next_frame
            self._listen()
            if self._over(frame):
                return
            if board.stall is not None and frame == board.stall[0] and not stalled:
                stalled = True
                self._sleep_listening(board.stall[1] / self.speed)
                t0 += board.stall[1] / self.speed
            now = time.monotonic()
            due = t0 + frame / (board.rate_hz * self.speed)
            if now < due:
                time.sleep(min(due - now, 0.005))
                continue
            listening = self.anchor is None and self.board.running  # nobody may have the port open yet
            if self.wire.write(self.board.lines(frame), drop_if_full=listening):
                self.written.append(frame)
            self.next_frame = frame + 1

    def _over(self, frame: int) -> bool:
        board = self.board
        if not board.running:
            return frame >= board.frames
        if self.anchor is not None:
            return frame >= self.anchor + board.frames
        return self.opened_at is not None and time.monotonic() > self.opened_at + ASK_GIVE_UP_S

    def _sleep_listening(self, seconds: float) -> None:
        end = time.monotonic() + seconds
        while time.monotonic() < end and not self.halt.is_set():
            self._listen()
            time.sleep(0.01)

    def stop(self) -> None:
        self.halt.set()
        self.wire.halt.set()
        self.join(5)

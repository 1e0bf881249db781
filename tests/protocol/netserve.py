"""Network serial servers for end-to-end tests: a plain TCP bridge (for socket:// URLs) and a real
RFC 2217 server (for rfc2217:// URLs), each started by the test on a free localhost port.

The RFC 2217 server is pyserial's own `serial.rfc2217.PortManager` in front of a pseudo-terminal, as
pyserial's example server wires it: bytes from the network go through `filter()` to the port, bytes
from the port through `escape()` to the network. The test is the board at the pty's master side. A
pty has no modem lines, so the server's port reports a ready cable and ignores DTR/RTS/break.
Both sides offer `out(bytes)` (the board prints; dropped when nobody takes it, as a UART's bytes are)
and `inp()` (what the host sent, without waiting) for `tests.protocol.runningboard.RunningBoard`.
"""

from __future__ import annotations

import contextlib
import fcntl
import os
import select
import socket
import threading
import tty

import serial
import serial.rfc2217


class TcpBridge:
    """A TCP server standing for a network serial bridge: one client at a time."""

    def __init__(self) -> None:
        self._server = socket.create_server(("127.0.0.1", 0))
        self.port = self._server.getsockname()[1]
        self.url = f"socket://127.0.0.1:{self.port}"
        self._client: socket.socket | None = None
        self._lock = threading.Lock()
        self._closed = False
        threading.Thread(target=self._accept, name="tcp bridge", daemon=True).start()

    def _accept(self) -> None:
        while not self._closed:
            try:
                conn, _ = self._server.accept()
            except OSError:
                return
            conn.setblocking(False)
            with self._lock:
                old, self._client = self._client, conn
            if old is not None:
                old.close()

    def out(self, data: bytes) -> None:
        with self._lock:
            conn = self._client
            if conn is None:
                return  # nobody connected: the bytes are lost
            with contextlib.suppress(BlockingIOError, OSError):
                conn.sendall(data)  # a full or closed connection drops bytes, like an unread UART

    def inp(self) -> bytes:
        with self._lock:
            conn = self._client
            if conn is None:
                return b""
            try:
                return conn.recv(4096)
            except (BlockingIOError, OSError):
                return b""

    def close(self) -> None:
        self._closed = True
        self._server.close()
        with self._lock:
            if self._client is not None:
                self._client.close()


class PtyPort(serial.Serial):
    """The RFC 2217 server's serial port on a pty's slave: modem lines read as a ready cable."""

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


class Rfc2217Server:
    """pyserial's PortManager serving a pty; the board writes to and reads from the pty's master."""

    def __init__(self) -> None:
        self.master, self._slave = os.openpty()
        tty.setraw(self._slave)
        fcntl.fcntl(self.master, fcntl.F_SETFL, fcntl.fcntl(self.master, fcntl.F_GETFL) | os.O_NONBLOCK)
        self.serial = PtyPort(os.ttyname(self._slave), 115200, timeout=0.05)
        self.baudrates: list[int] = []  # every rate the client set, as the server's port saw it
        self._server = socket.create_server(("127.0.0.1", 0))
        self.port = self._server.getsockname()[1]
        self.url = f"rfc2217://127.0.0.1:{self.port}"
        self._conn: socket.socket | None = None
        self._send_lock = threading.Lock()
        self._closed = threading.Event()
        threading.Thread(target=self._accept, name="rfc2217 accept", daemon=True).start()

    # -- the connection PortManager writes to -------------------------------------------------------
    def write(self, data: bytes) -> None:
        with self._send_lock:
            if self._conn is not None:
                with contextlib.suppress(OSError):
                    self._conn.sendall(data)

    def _accept(self) -> None:
        while not self._closed.is_set():
            try:
                conn, _ = self._server.accept()
            except OSError:
                return
            conn.setsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY, 1)
            self._conn = conn
            manager = serial.rfc2217.PortManager(self.serial, self)
            done = threading.Event()
            reader = threading.Thread(target=self._port_to_net, args=(manager, done), daemon=True)
            reader.start()
            self._net_to_port(conn, manager)
            done.set()
            reader.join(5)
            with self._send_lock:
                self._conn = None
            conn.close()

    def _net_to_port(self, conn: socket.socket, manager: serial.rfc2217.PortManager) -> None:
        while not self._closed.is_set():
            try:
                data = conn.recv(1024)
            except OSError:
                return
            if not data:
                return
            before = self.serial.baudrate
            self.serial.write(b"".join(manager.filter(data)))
            if self.serial.baudrate != before or not self.baudrates:
                self.baudrates.append(self.serial.baudrate)

    def _port_to_net(self, manager: serial.rfc2217.PortManager, done: threading.Event) -> None:
        while not done.is_set() and not self._closed.is_set():
            try:
                data = self.serial.read(self.serial.in_waiting or 1)
            except (serial.SerialException, OSError):
                # The client's purge flushes the pty between select() and read(): pyserial then says
                # "readiness to read but returned no data". Not the end of the port: read on.
                done.wait(0.01)
                continue
            if data:
                self.write(b"".join(manager.escape(data)))

    # -- the board's side ---------------------------------------------------------------------------
    def out(self, data: bytes) -> None:
        with contextlib.suppress(BlockingIOError, OSError):
            os.write(self.master, data)  # a full pty takes part or nothing: the rest is lost

    def inp(self) -> bytes:
        ready, _, _ = select.select([self.master], [], [], 0)
        if not ready:
            return b""
        try:
            return os.read(self.master, 4096)
        except (BlockingIOError, OSError):
            return b""

    def close(self) -> None:
        self._closed.set()
        self._server.close()
        if self._conn is not None:
            with contextlib.suppress(OSError):
                self._conn.shutdown(socket.SHUT_RDWR)
        self.serial.close()
        for fd in (self.master, self._slave):
            with contextlib.suppress(OSError):
                os.close(fd)

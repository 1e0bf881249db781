"""Issue 9, item 5 (and the socket half of item 6): every URL opens, every open failure is one line.

`rfc2217://` against pyserial's own RFC 2217 server (`serial.rfc2217.PortManager`, started by the test in
front of a pseudo-terminal), `socket://` against a TCP server the test runs, `loop://`; and the ways an
open fails, each one `padtune: ...` line on stderr and exit 2, whatever the driver raised.
"""

from __future__ import annotations

import socket
import threading

import pytest

from tests.acceptance.runs import check_keys, run_cli
from tests.acceptance.scenarios import BOARDS, NAMES

pytestmark = pytest.mark.e2e


def _run(outcome, name):
    o = outcome(name)
    assert o.returncode == 0 and not o.timed_out, o.describe()
    return o


@pytest.mark.scenarios("rfc2217")
def test_rfc2217_reads_a_board_behind_a_real_server(outcome):
    """Today: a traceback (the client refuses `write_timeout`). Now: the falling-count board is read
    whole through the server, its keys learn `-` and detect at the right frames."""
    o = _run(outcome, "rfc2217")
    assert not [x for x in o.stderr if "Traceback" in x], o.stderr
    assert o.summary["frames"] == BOARDS["commas"].frames == o.player.sent, o.describe()
    problems = check_keys(o, NAMES["rfc2217"])
    assert not problems, "\n".join(problems) + "\n" + o.describe()
    assert not o.links("baud_suspect")


@pytest.mark.scenarios("socket")
def test_socket_reads_a_board_and_says_baud_has_no_effect(outcome):
    """A board behind a TCP bridge, run with `--baud 9600`: read and detected as on a pty; stderr says
    once that the baud rate has no effect there (contract 9; wording open: one line with "baud" and
    "effect"); never a baud-rate diagnosis."""
    o = _run(outcome, "socket")
    assert o.summary["frames"] == BOARDS["plotter_pairs"].frames == o.player.sent, o.describe()
    problems = check_keys(o, NAMES["socket"])
    assert not problems, "\n".join(problems) + "\n" + o.describe()
    said = o.stderr_with("baud")
    assert len(said) == 1 and "effect" in said[0], o.stderr
    assert not o.links("baud_suspect")


@pytest.mark.scenarios("socket_binary")
def test_no_baud_rate_advice_for_a_socket(outcome):
    """The issue lists baud advice given for a socket as wrong: a socket has no baud rate, so even noise
    on it must not send the user changing one (the contract's rule names only the bytes; this follows
    the issue's list of failures)."""
    o = _run(outcome, "socket_binary")
    assert not o.links("baud_suspect"), o.describe()
    # No advice to change a baud rate; a sentence saying the network link has none (and that the bridge's
    # serial side may be set wrong) is true and allowed.
    told = [line for line in o.stderr_with("baud") if "probably wrong" in line or "try the board" in line]
    assert not told, o.stderr


def _refused_port() -> int:
    """A local port with nothing listening (bound, then closed)."""
    with socket.create_server(("127.0.0.1", 0)) as s:
        return s.getsockname()[1]


@pytest.fixture
def mute_tcp_server():
    """A TCP server that accepts and never says a word: what `rfc2217://` meets at a raw TCP bridge."""
    server = socket.create_server(("127.0.0.1", 0))
    held: list[socket.socket] = []
    stop = threading.Event()

    def serve() -> None:
        server.settimeout(0.1)
        while not stop.is_set():
            try:
                held.append(server.accept()[0])
            except TimeoutError:
                continue
            except OSError:
                return

    thread = threading.Thread(target=serve, daemon=True)
    thread.start()
    yield server.getsockname()[1]
    stop.set()
    thread.join(5)
    for s in [*held, server]:
        s.close()


@pytest.mark.parametrize("kind", ["refused socket", "refused rfc2217", "unknown scheme", "missing device",
                                  "folder", "bad rfc2217 option", "bad loop option",
                                  "rfc2217 at a mute server"])
def test_an_open_failure_is_one_line_and_exit_2(kind, tmp_path, mute_tcp_server):
    """Today `loop://?logging=nope` ends in a KeyError traceback and `rfc2217://` in NotImplementedError."""
    port = {
        "refused socket": lambda: f"socket://127.0.0.1:{_refused_port()}",
        "refused rfc2217": lambda: f"rfc2217://127.0.0.1:{_refused_port()}",
        "unknown scheme": lambda: "tcp+nope://127.0.0.1:1",
        "missing device": lambda: "/dev/ttyPADTUNE-not-here",
        "folder": lambda: str(tmp_path),
        "bad rfc2217 option": lambda: f"rfc2217://127.0.0.1:{_refused_port()}?nosuchoption",
        "bad loop option": lambda: "loop://?logging=nope",
        "rfc2217 at a mute server": lambda: f"rfc2217://127.0.0.1:{mute_tcp_server}",
    }[kind]()
    out = run_cli("monitor", port, "--json", "--duration", "2")
    assert out.returncode == 2, (out.returncode, out.stdout[-500:], out.stderr[-2000:])
    lines = out.stderr.splitlines()
    assert len(lines) == 1 and lines[0].startswith("padtune: "), out.stderr
    assert "Traceback" not in out.stderr


def test_loop_url_opens():
    """`loop://` (a port that echoes what is written) opens and runs to its summary."""
    out = run_cli("monitor", "loop://", "--json", "--duration", "1")
    assert out.returncode == 0, out.stderr
    assert '"type":"summary"' in out.stdout.splitlines()[-1]

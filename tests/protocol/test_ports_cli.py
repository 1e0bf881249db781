"""`padtune ports` as a user runs it: a subprocess, piped (plain text) and with --json."""

import json
import os
import subprocess
import sys

import pytest

pytestmark = pytest.mark.e2e


def run(*args):
    env = {**os.environ, "NO_COLOR": "1"}
    return subprocess.run([sys.executable, "-m", "tui.cli", "ports", *args], capture_output=True, text=True,
                          timeout=120, env=env)


def test_ports_plain_when_piped():
    out = run()
    assert out.returncode == 0, out.stderr
    assert "\x1b[" not in out.stdout
    first = out.stdout.splitlines()[0]
    assert first.startswith("PORT") or first.startswith("no serial ports found")


def test_ports_json():
    out = run("--json")
    assert out.returncode == 0, out.stderr
    ports = json.loads(out.stdout)
    assert isinstance(ports, list)
    for p in ports:
        assert {"device", "description", "vid_pid", "serial_number"} <= set(p)


def test_ports_listing_with_fake_usb(monkeypatch, capsys):
    import argparse

    from serial.tools import list_ports_common

    import protocol.ports as ports_module
    from tui.commands import ports as command

    info = list_ports_common.ListPortInfo("/dev/ttyACM0", skip_link_detection=True)
    info.vid, info.pid, info.serial_number, info.description = 0x1209, 0x7D00, "GH-01", "greenhouse panel"
    monkeypatch.setattr(ports_module._list_ports, "comports", lambda: [info])
    assert command.run(argparse.Namespace(json=False)) == 0
    text = capsys.readouterr().out
    assert "/dev/ttyACM0" in text and "1209:7D00" in text and "GH-01" in text and "greenhouse panel" in text


def test_ports_on_a_terminal_draws_a_table_and_honours_no_color():
    """Run as a user at a terminal: stdout is a pseudo-terminal, NO_COLOR set."""
    import tty

    master, slave = os.openpty()
    tty.setraw(slave)
    env = {**os.environ, "NO_COLOR": "1", "COLUMNS": "100"}
    proc = subprocess.Popen([sys.executable, "-m", "tui.cli", "ports"], stdout=slave, stderr=subprocess.PIPE,
                            env=env)
    os.close(slave)
    out = b""
    try:
        while True:
            try:
                chunk = os.read(master, 4096)
            except OSError:  # the child closed its end
                break
            if not chunk:
                break
            out += chunk
    finally:
        os.close(master)
    assert proc.wait(timeout=120) == 0, proc.stderr.read()
    text = out.decode()
    assert "pseudo-terminals and URLs" in text
    assert "\x1b[3" not in text  # no colour codes under NO_COLOR

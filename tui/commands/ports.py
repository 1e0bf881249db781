"""`padtune ports`: the serial ports of this machine, with description and USB VID:PID.

A thin shell over `protocol.ports.list_ports`: a table on a terminal, plain columns when piped
(no colour codes; NO_COLOR honoured), or JSON with `--json`.
"""

from __future__ import annotations

import argparse
import json
import sys

from protocol.ports import PortInfo, list_ports

NOT_LISTED = "pseudo-terminals and URLs (socket://, sim://greenhouse) are not listed but open by name"


def register(subparsers: argparse._SubParsersAction) -> None:
    p = subparsers.add_parser(
        "ports", help="list serial ports with description and USB VID:PID",
        description=f"List the serial ports of this machine. Note: {NOT_LISTED}.",
    )
    p.add_argument("--json", action="store_true", help="print the ports as a JSON list")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    ports = list_ports()
    if args.json:
        print(json.dumps([p.as_dict() for p in ports], indent=2))
    elif sys.stdout.isatty():
        _print_table(ports)
    else:
        _print_plain(ports)
    return 0


def _rows(ports: list[PortInfo]) -> list[tuple[str, str, str, str]]:
    return [(p.device, p.vid_pid or "-", p.serial_number or "-", p.description or "-") for p in ports]


def _print_plain(ports: list[PortInfo]) -> None:
    if not ports:
        print(f"no serial ports found ({NOT_LISTED})")
        return
    rows = [("PORT", "VID:PID", "SERIAL", "DESCRIPTION"), *_rows(ports)]
    widths = [max(len(r[i]) for r in rows) for i in range(3)]
    for row in rows:
        print("  ".join(cell.ljust(w) for cell, w in zip(row[:3], widths, strict=True)) + "  " + row[3])


def _print_table(ports: list[PortInfo]) -> None:
    from rich.console import Console
    from rich.table import Table

    console = Console()
    if not ports:
        console.print(f"no serial ports found ({NOT_LISTED})")
        return
    table = Table("Port", "VID:PID", "Serial", "Description", box=None, header_style="bold")
    for row in _rows(ports):
        table.add_row(*row)
    console.print(table)
    console.print(f"[dim]{NOT_LISTED}[/dim]")

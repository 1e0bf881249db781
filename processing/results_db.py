"""The production results database: its schema, writing one unit's result, reading a lot back.

Python's `sqlite3`, one file given by the caller (nothing else is written). Every unit is one
transaction (`BEGIN IMMEDIATE` ... `COMMIT`): a station killed mid-write (kill -9, power cut) loses at
most the unit it was writing, never half of one. Several stations may share the file: it is kept in
WAL mode (readers never block the writer) and every connection waits up to `BUSY_TIMEOUT_S` for
another writer's lock instead of failing. The schema (README, "The results database"):

    meta(key TEXT PRIMARY KEY, value TEXT)                 schema_version
    units(id INTEGER PRIMARY KEY, unit TEXT, serial TEXT, port TEXT, station TEXT, profile TEXT,
          board TEXT, started_utc TEXT, elapsed_s REAL, duration_s REAL, touch INTEGER,
          status TEXT ('pass' | 'fail' | 'error'), reason TEXT, channel_count INTEGER, report TEXT)
    channels(unit_id INTEGER, channel INTEGER, name TEXT, passed INTEGER, baseline REAL,
             noise_pp REAL, noise_rms REAL, signal REAL, snr REAL, stuck_at_s REAL, reasons TEXT)
    checks(unit_id INTEGER, channel INTEGER, name TEXT, check_name TEXT, result TEXT)

`report` is the unit's whole JSON object as `padtune check --json` printed it; `reasons` a JSON list.
"""

from __future__ import annotations

import json
import math
import sqlite3
import time
from collections.abc import Callable, Iterator
from contextlib import closing, contextmanager
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from processing.atomic import NotRegularFile, refuse_non_regular
from protocol.errors import UserError

SCHEMA_VERSION = 1
BUSY_TIMEOUT_S = 30.0  # another station's transaction is one unit's rows: milliseconds (generous)
STATUSES = ("pass", "fail", "error")

_SCHEMA = """
CREATE TABLE IF NOT EXISTS meta (key TEXT PRIMARY KEY, value TEXT NOT NULL);
CREATE TABLE IF NOT EXISTS units (
    id INTEGER PRIMARY KEY, unit TEXT, serial TEXT, port TEXT NOT NULL, station TEXT, profile TEXT,
    board TEXT, started_utc TEXT NOT NULL, elapsed_s REAL, duration_s REAL, touch INTEGER NOT NULL,
    status TEXT NOT NULL CHECK (status IN ('pass', 'fail', 'error')), reason TEXT,
    channel_count INTEGER NOT NULL, report TEXT NOT NULL);
CREATE TABLE IF NOT EXISTS channels (
    unit_id INTEGER NOT NULL REFERENCES units(id), channel INTEGER NOT NULL, name TEXT NOT NULL,
    passed INTEGER NOT NULL, baseline REAL, noise_pp REAL, noise_rms REAL, signal REAL, snr REAL,
    stuck_at_s REAL, reasons TEXT NOT NULL, PRIMARY KEY (unit_id, channel));
CREATE TABLE IF NOT EXISTS checks (
    unit_id INTEGER NOT NULL REFERENCES units(id), channel INTEGER NOT NULL, name TEXT NOT NULL,
    check_name TEXT NOT NULL, result TEXT NOT NULL, PRIMARY KEY (unit_id, channel, check_name));
CREATE INDEX IF NOT EXISTS units_by_unit ON units(unit);
"""


@dataclass
class UnitRecord:
    """One tested unit: who it is, where and when, its verdict, and the check's report per channel
    (`channels` are `ChannelVerdict.as_dict()` objects, as `padtune check --json` prints them)."""

    port: str
    started_utc: str
    status: str
    unit: str | None = None
    serial: str | None = None
    station: str | None = None
    profile: str | None = None
    board: str | None = None
    elapsed_s: float | None = None
    duration_s: float | None = None
    touch: bool = False
    reason: str | None = None
    channels: list[dict[str, Any]] = field(default_factory=list)
    report: dict[str, Any] = field(default_factory=dict)
    row_id: int | None = None

    @property
    def key(self) -> str:
        """What tells units apart in a lot: the unit id, else the serial, else this test's own row."""
        return self.unit or self.serial or f"#{self.row_id}"


def _connect(path: Path) -> sqlite3.Connection:
    conn = sqlite3.connect(path, timeout=BUSY_TIMEOUT_S, isolation_level=None)
    conn.execute(f"PRAGMA busy_timeout = {int(BUSY_TIMEOUT_S * 1000)}")
    return conn


def _make(conn: sqlite3.Connection) -> None:
    mode = conn.execute("PRAGMA journal_mode = WAL").fetchone()[0]
    if str(mode).lower() != "wal":
        raise sqlite3.OperationalError(f"journal mode {mode}, WAL needed to share the file")
    # One script, one transaction: two stations creating the file at once make it once.
    conn.executescript(f"BEGIN IMMEDIATE; {_SCHEMA} INSERT OR IGNORE INTO meta VALUES "
                       f"('schema_version', '{SCHEMA_VERSION}'); COMMIT;")


def _while_locked(conn: sqlite3.Connection, step: Callable[[sqlite3.Connection], None]) -> None:
    """Run `step`, again while another station holds the file, for up to BUSY_TIMEOUT_S.

    SQLite answers "database is locked" at once, without its busy wait, when two connections that both
    read the new file race to switch it to WAL (waiting could deadlock them), so the wait is ours here.
    """
    deadline = time.monotonic() + BUSY_TIMEOUT_S
    while True:
        try:
            step(conn)
            return
        except sqlite3.OperationalError as exc:
            if "locked" not in str(exc) or time.monotonic() > deadline:
                raise
            if conn.in_transaction:  # a script stopped inside its BEGIN: start clean next time
                conn.rollback()
            time.sleep(0.02)


def _problem(path: Path, exc: Exception, create: bool) -> UserError:
    what = "a new file name or " if create else ""
    return UserError(f"{path}: cannot use it as a results database ({exc}); give {what}a database "
                     "written by `padtune check --results`")


def open_results(path: str | Path, create: bool = True) -> sqlite3.Connection:
    """Open (and with `create`, make) a results database; anything else is a one-line UserError."""
    p = Path(path).expanduser()
    if p.is_dir():
        raise UserError(f"{p}: is a folder, not a results database file")
    try:  # sqlite would open a device or a FIFO and write its journal next to it
        refuse_non_regular(p)
    except NotRegularFile as exc:
        raise UserError(f"{p}: {exc.strerror} for the results database") from None
    if not create and not p.exists():
        raise UserError(f"{p}: no such results database")
    if create and not p.parent.is_dir():
        raise UserError(f"{p}: its folder {p.parent} does not exist")
    try:
        conn = _connect(p)
        if create:
            _while_locked(conn, _make)
        row = conn.execute("SELECT value FROM meta WHERE key = 'schema_version'").fetchone()
    except sqlite3.Error as exc:
        raise _problem(p, exc, create) from None
    if row is None or row[0] != str(SCHEMA_VERSION):
        conn.close()
        raise UserError(f"{p}: results schema version {row[0] if row else 'missing'}, this padtune reads "
                        f"version {SCHEMA_VERSION}")
    return conn


def _num(v: Any) -> float | None:
    return None if v is None or not isinstance(v, int | float) or not math.isfinite(v) else float(v)


def write_unit(conn: sqlite3.Connection, rec: UnitRecord) -> int:
    """Append one unit (its row, its channels, its checks) in one transaction; returns its row id."""
    if rec.status not in STATUSES:
        raise ValueError(f"status {rec.status!r} is not one of {STATUSES}")
    conn.execute("BEGIN IMMEDIATE")
    try:
        cur = conn.execute(
            "INSERT INTO units (unit, serial, port, station, profile, board, started_utc, elapsed_s, "
            "duration_s, touch, status, reason, channel_count, report) VALUES (?,?,?,?,?,?,?,?,?,?,?,?,?,?)",
            (rec.unit, rec.serial, rec.port, rec.station, rec.profile, rec.board, rec.started_utc,
             _num(rec.elapsed_s), _num(rec.duration_s), int(rec.touch), rec.status, rec.reason,
             len(rec.channels), json.dumps(rec.report)))
        row_id = int(cur.lastrowid or 0)
        for ch in rec.channels:
            conn.execute(
                "INSERT INTO channels VALUES (?,?,?,?,?,?,?,?,?,?,?)",
                (row_id, int(ch["index"]), str(ch["name"]), int(bool(ch["passed"])), _num(ch.get("baseline")),
                 _num(ch.get("noise_pp")), _num(ch.get("noise_rms")), _num(ch.get("signal")),
                 _num(ch.get("snr")), _num(ch.get("stuck_at_s")), json.dumps(list(ch.get("reasons", [])))))
            conn.executemany("INSERT INTO checks VALUES (?,?,?,?,?)",
                             [(row_id, int(ch["index"]), str(ch["name"]), name, str(result))
                              for name, result in dict(ch.get("checks", {})).items()])
        conn.execute("COMMIT")
    except BaseException:
        conn.execute("ROLLBACK")
        raise
    rec.row_id = row_id
    return row_id


_CHANNEL_KEYS = ("index", "name", "passed", "baseline", "noise_pp", "noise_rms", "signal", "snr",
                 "stuck_at_s", "reasons")


def read_units(conn: sqlite3.Connection) -> list[UnitRecord]:
    """Every unit in the file, oldest first, with its channels and checks (one read transaction)."""
    conn.execute("BEGIN")
    try:
        units = conn.execute(
            "SELECT id, unit, serial, port, station, profile, board, started_utc, elapsed_s, duration_s, "
            "touch, status, reason FROM units ORDER BY id").fetchall()
        chans: dict[int, list[dict[str, Any]]] = {}
        by_channel: dict[tuple[int, int], dict[str, Any]] = {}
        for row in conn.execute("SELECT unit_id, channel, name, passed, baseline, noise_pp, noise_rms, "
                                "signal, snr, stuck_at_s, reasons FROM channels ORDER BY unit_id, channel"):
            d = dict(zip(_CHANNEL_KEYS, row[1:], strict=True))
            d["passed"], d["reasons"], d["checks"] = bool(d["passed"]), json.loads(d["reasons"]), {}
            chans.setdefault(row[0], []).append(d)
            by_channel[(row[0], row[1])] = d
        for unit_id, channel, check, result in conn.execute(
                "SELECT unit_id, channel, check_name, result FROM checks ORDER BY rowid"):
            if (unit_id, channel) in by_channel:
                by_channel[(unit_id, channel)]["checks"][check] = result
    finally:
        conn.execute("COMMIT")
    return [UnitRecord(port=r[3], started_utc=r[7], status=r[11], unit=r[1], serial=r[2], station=r[4],
                       profile=r[5], board=r[6], elapsed_s=r[8], duration_s=r[9], touch=bool(r[10]),
                       reason=r[12], channels=chans.get(r[0], []), row_id=r[0]) for r in units]


@contextmanager
def results_file(path: str | Path, create: bool = True) -> Iterator[sqlite3.Connection]:
    """`open_results` as a context manager that closes the connection."""
    with closing(open_results(path, create)) as conn:
        yield conn

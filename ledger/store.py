"""The ledger file: DuckDB schema, schema version, transactions and as-of views.

One DuckDB file holds everything. Runs and actual revisions are only ever appended; the one
column that changes after a write is ``runs.superseded_by``, set when a newer run replaces a
run of the same model and origin (the old run stays).
"""

from __future__ import annotations

import contextlib
import datetime as dt
import hashlib
import os
import time
from collections.abc import Iterator
from pathlib import Path

import duckdb
import numpy as np
from .lazy import pandas as pd

from .version import __version__
from .errors import LedgerBusy, LedgerError, NotALedger, SchemaTooNew, SchemaTooOld, describe_os_error
from .migrations import ACTUAL_WRITES_DDL, ACTUALS_DDL, ATTRIBUTES_DDL, CYCLE_DDL, MIGRATIONS, OVERRIDES_DDL

__all__ = [
    "SCHEMA_VERSION",
    "DDL",
    "Store",
    "utc_now",
    "parse_as_of",
    "live_runs_sql",
    "latest_actuals_sql",
    "DEFAULT_WAIT",
    "bounded_memory",
]

# History of the schema (bump on any change to DDL and add the step to migrations.MIGRATIONS):
#   1 — first version: meta, series, runs, forecasts, bounds, quantiles, actuals.
#   2 — attributes: versioned series attributes (region, family, planner, …).
#   3 — injective content hashes: runs re-hashed with a length-prefixed canonical form (the
#       version-1 form joined names with a separator byte that a name could hold); actuals get
#       chain_hash per revision and actual_writes a row per write (see hashing.py).
#   4 — events (versioned, optionally excluding cells from scoring) and stored reviews:
#       reviews, review_findings, review_models (issue 19).
#   5 — overrides: which model adjusts which, versioned (ledger/overrides.py; issue 14).
SCHEMA_VERSION = 5

DDL = """
-- Facts about the file itself: schema_version, created_at, writer_version, and settings
-- such as the incumbent model.
CREATE TABLE meta (
    key   VARCHAR PRIMARY KEY,
    value VARCHAR NOT NULL
);

-- A row per series, fixed at first sight. season_length defaults from the frequency.
CREATE TABLE series (
    series        VARCHAR PRIMARY KEY,
    frequency     VARCHAR NOT NULL,
    season_length INTEGER NOT NULL,
    first_seen    TIMESTAMP NOT NULL
);

-- A row per forecast run: one model's forecasts made at one origin. Immutable except for
-- superseded_by, which names the run that replaced it. content_hash covers model, origin,
-- frequency and every forecast, bound and quantile of the run.
CREATE TABLE runs (
    run_id        VARCHAR PRIMARY KEY,
    model         VARCHAR NOT NULL,
    frequency     VARCHAR NOT NULL,
    origin        DATE NOT NULL,
    origin_index  INTEGER NOT NULL,
    recorded_at   TIMESTAMP NOT NULL,
    source        VARCHAR,
    note          VARCHAR,
    content_hash  VARCHAR NOT NULL,
    n_cells       BIGINT NOT NULL,
    superseded_by VARCHAR
);

-- A row per (run, series, target period): the point forecast. horizon = period_index -
-- origin_index >= 1. No declared key: uniqueness is enforced at ingest, and an index would
-- slow million-row snapshots.
CREATE TABLE forecasts (
    run_id       VARCHAR NOT NULL,
    series       VARCHAR NOT NULL,
    period       DATE NOT NULL,
    period_index INTEGER NOT NULL,
    horizon      INTEGER NOT NULL,
    point        DOUBLE NOT NULL
);

-- A row per forecast and interval level (a percentage in (0, 100)).
CREATE TABLE bounds (
    run_id       VARCHAR NOT NULL,
    series       VARCHAR NOT NULL,
    period_index INTEGER NOT NULL,
    level        DOUBLE NOT NULL,
    lower        DOUBLE NOT NULL,
    upper        DOUBLE NOT NULL
);

-- A row per forecast and quantile level tau in (0, 1).
CREATE TABLE quantiles (
    run_id       VARCHAR NOT NULL,
    series       VARCHAR NOT NULL,
    period_index INTEGER NOT NULL,
    tau          DOUBLE NOT NULL,
    value        DOUBLE NOT NULL
);
""" + ACTUALS_DDL + ATTRIBUTES_DDL + ACTUAL_WRITES_DDL + CYCLE_DDL + OVERRIDES_DDL

TABLES = ("meta", "series", "runs", "forecasts", "bounds", "quantiles", "actuals", "attributes", "actual_writes",
          "events", "reviews", "review_findings", "review_models", "overrides")


def utc_now() -> dt.datetime:
    """The current time in UTC, without tzinfo (how the ledger stores times)."""
    return dt.datetime.now(dt.UTC).replace(tzinfo=None)


def parse_as_of(value: str | dt.datetime | dt.date | None) -> dt.datetime:
    """An as-of time in UTC (naive). None means now; a bare date means the end of that day (UTC)."""
    if value is None:
        return utc_now()
    if isinstance(value, dt.datetime):
        stamp = value
    elif isinstance(value, dt.date):
        return dt.datetime.combine(value, dt.time.max)
    else:
        text = str(value).strip()
        try:
            stamp = dt.datetime.fromisoformat(text.replace("Z", "+00:00"))
        except ValueError:
            raise LedgerError(
                f"--as-of {value!r} is not a time; use ISO 8601, e.g. 2026-11-30 or 2026-11-30T17:00"
            ) from None
        if len(text) == 10:
            return dt.datetime.combine(stamp.date(), dt.time.max)
    if stamp.tzinfo is not None:
        try:
            stamp = stamp.astimezone(dt.UTC).replace(tzinfo=None)
        except OverflowError:
            raise LedgerError(f"--as-of {value!r} falls outside the years 1 to 9999 in UTC") from None
    return stamp


def live_runs_sql() -> str:
    """Runs in force at the as-of ($as_of): the newest run per model, frequency and origin."""
    return """
    SELECT run_id, model, frequency, origin, origin_index, recorded_at FROM (
        SELECT r.*, row_number() OVER (
            PARTITION BY model, frequency, origin_index ORDER BY recorded_at DESC) AS rn
        FROM runs r WHERE recorded_at <= $as_of) t
    WHERE rn = 1"""


def latest_actuals_sql() -> str:
    """The newest revision of each actual recorded at or before the as-of ($as_of)."""
    return """
    SELECT series, period, period_index, value, revision, recorded_at FROM (
        SELECT a.*, row_number() OVER (
            PARTITION BY series, period_index ORDER BY revision DESC) AS rn
        FROM actuals a WHERE recorded_at <= $as_of) t
    WHERE rn = 1"""


#: DuckDB's memory limit for work that scans whole tables (imports, verify): beyond it DuckDB
#: spills to LEDGER.tmp/ beside the file. The usual limit (most of the machine) is restored after.
BOUNDED_MEMORY = "1GB"


@contextlib.contextmanager
def bounded_memory(con: duckdb.DuckDBPyConnection, limit: str = BOUNDED_MEMORY) -> Iterator[None]:
    """Cap DuckDB's memory for the block, so a multi-GB import or check stays under 2 GB of RSS."""
    before = con.execute("SELECT current_setting('memory_limit')").fetchone()[0]
    con.execute(f"SET memory_limit = '{limit}'")
    try:
        yield
    finally:
        with contextlib.suppress(duckdb.Error):
            con.execute(f"SET memory_limit = '{before}'")


class Store:
    """An open ledger file. Use :meth:`open`; close with :meth:`close` or a ``with`` block."""

    def __init__(self, con: duckdb.DuckDBPyConnection, path: Path):
        self.con = con
        self.path = path
        self.migrated: tuple[int, Path] | None = None  # (old version, backup copy) when migrated on open
        # Where write times come from; the demo replays history with the files' arrival times.
        self.clock = utc_now
        self._depth = 0  # nesting of transaction() blocks; only the outermost commits

    @classmethod
    def open(cls, path: str | os.PathLike, *, create: bool = True, read_only: bool = False,
             wait: float | None = None) -> "Store":
        """Open (or, with ``create``, create) the ledger at ``path``.

        DuckDB lets one process write a file, or several read it, never both. While another
        process holds the file, this waits up to ``wait`` seconds (default: the environment
        variable BACKSIGHT_WAIT, else 10) and then raises :class:`LedgerBusy`.
        """
        path = Path(path)
        if path.is_dir():
            raise NotALedger(f"{path} is a folder, not a ledger file")
        if not path.exists() and not create:
            raise NotALedger(
                f"no ledger at {path}; record something first (backsight snapshot FILE or "
                "backsight actuals FILE), or point --ledger at an existing file"
            )
        seconds = _wait_seconds(wait)
        if not (read_only and path.exists()):
            return _open_writer(path, seconds)
        con = _connect(path, read_only=True, wait=seconds)
        migrated = None
        if _needs_writer(con):       # not created yet, or an older schema: a writer sets it up
            con.close()
            writer = _open_writer(path, seconds)
            migrated = writer.migrated
            writer.close()
            con = _connect(path, read_only=True, wait=seconds)
        store = cls(con, path)
        store.migrated = migrated
        try:
            store._check_schema()
        except BaseException:
            con.close()
            raise
        return store

    def _setup(self) -> None:
        """Create, migrate or check the schema, holding the write lock (so only one process does it)."""
        if not _has_tables(self.con):
            if not _is_empty_db(self.con):
                raise NotALedger(f"{self.path} is a DuckDB file but not a Backsight ledger (no meta table)")
            self._create()
            self.con.execute("CHECKPOINT")
            return
        found = _schema_version(self.con)
        if found is not None and found < SCHEMA_VERSION:
            self.migrated = _migrate(self.con, self.path, found)
        self._check_schema()

    def close(self) -> None:
        self.con.close()

    def __enter__(self) -> "Store":
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    def _create(self) -> None:
        with self.transaction():
            self.con.execute(DDL)
            now = utc_now().isoformat(timespec="microseconds")
            self.con.executemany(
                "INSERT INTO meta VALUES (?, ?)",
                [["schema_version", str(SCHEMA_VERSION)], ["created_at", now],
                 ["writer_version", __version__]],
            )

    def _check_schema(self) -> None:
        rows = self.con.execute("SELECT value FROM meta WHERE key = 'schema_version'").fetchall()
        if not rows:
            raise NotALedger(f"{self.path} has a meta table but no schema_version; not a Backsight ledger")
        found = int(rows[0][0])
        if found > SCHEMA_VERSION:
            raise SchemaTooNew(
                f"{self.path} has schema version {found}, newer than this Backsight "
                f"({__version__}) understands ({SCHEMA_VERSION}); upgrade Backsight"
            )
        if found < SCHEMA_VERSION:
            raise SchemaTooOld(f"{self.path} has schema version {found}; this Backsight needs {SCHEMA_VERSION}")

    @contextlib.contextmanager
    def transaction(self) -> Iterator[duckdb.DuckDBPyConnection]:
        """All or nothing: commit when the block ends, roll back on any exception.

        A block inside another joins it (a review writes many files in one transaction): only
        the outermost block commits, and an exception that leaves it rolls everything back.
        """
        if self._depth:
            self._depth += 1
            try:
                yield self.con
            finally:
                self._depth -= 1
            return
        self.con.execute("BEGIN TRANSACTION")
        self._depth = 1
        try:
            yield self.con
        except BaseException:
            # a failed write (no space …) may leave nothing to roll back; the first error is the news
            with contextlib.suppress(duckdb.Error):
                self.con.execute("ROLLBACK")
            raise
        finally:
            self._depth = 0
        self.con.execute("COMMIT")

    def get_setting(self, key: str) -> str | None:
        rows = self.con.execute("SELECT value FROM meta WHERE key = ?", [key]).fetchall()
        return rows[0][0] if rows else None

    def set_setting(self, key: str, value: str) -> None:
        with self.transaction() as con:
            con.execute("DELETE FROM meta WHERE key = ?", [key])
            con.execute("INSERT INTO meta VALUES (?, ?)", [key, value])

    def next_timestamp(self) -> dt.datetime:
        """Now, or just after the newest recorded time, so that as-of order is strict."""
        row = self.con.execute(
            "SELECT max(t) FROM (SELECT max(recorded_at) t FROM runs UNION ALL "
            "SELECT max(recorded_at) FROM actuals UNION ALL SELECT max(recorded_at) FROM events "
            "UNION ALL SELECT max(recorded_at) FROM overrides)"
        ).fetchall()[0]
        now = self.clock()
        if row[0] is not None and row[0] >= now:
            return row[0] + dt.timedelta(microseconds=1)
        return now

    def state_hash(self, as_of: dt.datetime) -> str:
        """A content hash of what the ledger held at ``as_of``: live runs and actual revisions."""
        runs = self.con.execute(
            f"SELECT content_hash FROM ({live_runs_sql()}) l JOIN runs USING (run_id) "
            "ORDER BY content_hash", {"as_of": as_of}
        ).fetchall()
        acts = self.con.execute(
            "SELECT series, period_index, revision, value FROM actuals WHERE recorded_at <= $as_of "
            "ORDER BY series, period_index, revision", {"as_of": as_of}
        ).df()
        digest = hashlib.sha256()
        for (h,) in runs:
            digest.update(h.encode())
        digest.update(b"\x00actuals\x00")
        _hash_frame(digest, acts)
        events = self.con.execute(
            "SELECT target, first_day, end_day, label, exclude FROM events WHERE recorded_at <= $as_of "
            "ORDER BY ALL", {"as_of": as_of}).df()
        if len(events):  # events change the scores; a ledger without any keeps its earlier hash
            digest.update(b"\x00events\x00")
            _hash_frame(digest, events.astype(str))
        overrides = self.con.execute(
            "SELECT override, base, recorded_at FROM overrides WHERE recorded_at <= $as_of ORDER BY ALL",
            {"as_of": as_of}).df()
        if len(overrides):  # the relation changes findings; a ledger without one keeps its earlier hash
            digest.update(b"\x00overrides\x00")
            _hash_frame(digest, overrides.astype(str))
        return digest.hexdigest()

    def table_hash(self, table: str) -> str:
        """A content hash of one table (every row, in a canonical order); used by tests and verify."""
        if table not in TABLES:
            raise LedgerError(f"unknown table {table!r}; tables are {', '.join(TABLES)}")
        frame = self.con.execute(f"SELECT * FROM {table} ORDER BY ALL").df()
        digest = hashlib.sha256()
        _hash_frame(digest, frame)
        return digest.hexdigest()


def _hash_frame(digest, frame: pd.DataFrame) -> None:
    for name in frame.columns:
        digest.update(f"\x00{name}\x00".encode())
        col = frame[name]
        if pd.api.types.is_float_dtype(col) or pd.api.types.is_integer_dtype(col):
            digest.update(np.ascontiguousarray(col.to_numpy(dtype="float64", na_value=np.nan)).tobytes())
        else:
            digest.update("\x1f".join("" if pd.isna(v) else str(v) for v in col).encode())


DEFAULT_WAIT = 10.0


def _wait_seconds(wait: float | None) -> float:
    if wait is not None:
        return max(0.0, float(wait))
    try:
        return max(0.0, float(os.environ.get("BACKSIGHT_WAIT", DEFAULT_WAIT)))
    except ValueError:
        raise LedgerError(f"BACKSIGHT_WAIT={os.environ['BACKSIGHT_WAIT']!r} is not a number of seconds") from None


def quiet(con: duckdb.DuckDBPyConnection) -> duckdb.DuckDBPyConnection:
    """No progress bar on this connection: DuckDB draws it on stdout, which carries CSV and JSON
    for programs (it cannot be set at connect time)."""
    con.execute("SET enable_progress_bar = false")
    return con


def _connect(path: Path, *, read_only: bool, wait: float) -> duckdb.DuckDBPyConnection:
    deadline = time.monotonic() + wait
    pause = 0.05
    while True:
        try:
            return quiet(duckdb.connect(str(path), read_only=read_only))
        except duckdb.IOException as exc:
            text = str(exc)
            if (age := _empty_file_age(path)) is not None:
                # a creator may be writing it this instant (young file); else a kill left it
                if age > 5 or time.monotonic() >= deadline:
                    raise NotALedger(f"{path} is empty (0 bytes), probably left by a command stopped while "
                                     "creating it; delete it and run the command again") from None
            elif describe_os_error(exc):
                raise                       # permission, no space …: worded by the CLI, like every OS error
            elif "lock" not in text.lower():
                raise NotALedger(f"{path} cannot be opened as a ledger: {text.splitlines()[0]}") from None
            if time.monotonic() >= deadline:
                raise LedgerBusy(f"the ledger {path} is in use by another process; try again") from None
        except duckdb.Error as exc:
            raise NotALedger(f"{path} is not a Backsight ledger ({str(exc).splitlines()[0]})") from None
        time.sleep(min(pause, max(0.0, deadline - time.monotonic())))
        pause = min(pause * 2, 0.5)


def _empty_file_age(path: Path) -> float | None:
    """Seconds since a 0-byte ledger file was last touched; None when it is not empty."""
    try:
        stat = path.stat()
    except OSError:
        return None
    return time.time() - stat.st_mtime if stat.st_size == 0 else None


def _schema_version(con: duckdb.DuckDBPyConnection) -> int | None:
    if not _has_tables(con):
        return None
    rows = con.execute("SELECT value FROM meta WHERE key = 'schema_version'").fetchall()
    return int(rows[0][0]) if rows else None


def _backup_path(path: Path, version: int) -> Path:
    backup = path.with_name(f"{path.name}.schema-v{version}.bak")
    n = 2
    while backup.exists():
        backup = path.with_name(f"{path.name}.schema-v{version}.bak{n}")
        n += 1
    return backup


def _open_writer(path: Path, wait: float) -> Store:
    store = Store(_connect(path, read_only=False, wait=wait), path)
    try:
        store._setup()
    except BaseException:
        store.close()
        raise
    return store


def _copy_database(con: duckdb.DuckDBPyConnection, target: Path) -> None:
    """A copy of the open database in a new file, made by DuckDB itself.

    Not a file copy: closing any descriptor of the ledger file in this process would drop
    DuckDB's POSIX lock on it, and a second process could then migrate it too.
    """
    name = con.execute("SELECT current_database()").fetchall()[0][0]
    con.execute(f"ATTACH '{str(target).replace(chr(39), chr(39) * 2)}' AS _backup")
    try:
        con.execute('COPY FROM DATABASE "' + name.replace('"', '""') + '" TO _backup')
    finally:
        con.execute("DETACH _backup")


def _needs_writer(con: duckdb.DuckDBPyConnection) -> bool:
    if not _has_tables(con):
        return _is_empty_db(con)
    found = _schema_version(con)
    return found is not None and found < SCHEMA_VERSION


def _migrate(con: duckdb.DuckDBPyConnection, path: Path, found: int) -> tuple[int, Path]:
    """Bring an older ledger to SCHEMA_VERSION while holding its write lock: first a backup copy
    beside it, then every migration step in one transaction. Returns (old version, backup path)."""
    if found not in MIGRATIONS:
        raise SchemaTooOld(f"{path} has schema version {found}, which this Backsight cannot migrate")
    backup = _backup_path(path, found)
    _copy_database(con, backup)
    con.execute("BEGIN TRANSACTION")
    try:
        for version in range(found, SCHEMA_VERSION):
            MIGRATIONS[version](con)
        con.execute("UPDATE meta SET value = ? WHERE key = 'schema_version'", [str(SCHEMA_VERSION)])
    except BaseException:
        con.execute("ROLLBACK")
        raise
    con.execute("COMMIT")
    con.execute("CHECKPOINT")            # into the file now: a reader must never replay the migration's WAL
    return found, backup


def _has_tables(con: duckdb.DuckDBPyConnection) -> bool:
    return con.execute(
        "SELECT count(*) FROM information_schema.tables WHERE table_name = 'meta'"
    ).fetchall()[0][0] > 0


def _is_empty_db(con: duckdb.DuckDBPyConnection) -> bool:
    return con.execute("SELECT count(*) FROM information_schema.tables").fetchall()[0][0] == 0

"""The results store: one SQLite file per sweep.

Tables
------
``meta``        key/value: format version, the spec's fingerprint and JSON, model path, players, coordinates.
``batches``     one row per finished batch (the unit of commit and of resumption).
``points``      one row per point: its axis values (a column per axis, named as given), status, reason.
``equilibria``  one row per (point, equilibrium): actions, payoffs, residual, Nash label, stability.
``results``     a view joining the two, one row per (point, equilibrium).

A batch's rows are written in one transaction together with its ``batches``
row, so a store killed at any moment holds whole batches only; running the
same sweep again skips them. A store made from another spec or model file is
refused unless a new one is asked for (the old file is then kept under a new
name, never deleted).
"""

from __future__ import annotations

import csv
import json
import os
import sqlite3
import time

from .._errors import InputError

FORMAT = "equipoise-sweep-2"

_EQ_COLUMNS = ("point", "k", "actions", "payoffs", "residual", "nash", "starts", "equal_speeds", "equal_abscissa",
               "player_speeds", "coordinate_speeds", "hicksian", "learning_rate_limit", "best_response_radius",
               "stability")


def _quote(name: str) -> str:
    return '"' + name.replace('"', '""') + '"'


class Store:
    """An open results store (see the module docstring). Use :meth:`create_or_resume` or :meth:`read`."""

    def __init__(self, path: str, conn: sqlite3.Connection):
        self.path = path
        self.conn = conn
        try:
            self.meta = {k: json.loads(v) for k, v in conn.execute("SELECT key, value FROM meta")}
            missing = [k for k in ("fingerprint", "axes", "players", "coordinates") if k not in self.meta]
        except (sqlite3.Error, json.JSONDecodeError, TypeError) as exc:
            conn.close()
            raise InputError(f"{path}: results store is damaged (its meta table cannot be read: {exc})") from None
        if missing:
            conn.close()
            raise InputError(f"{path}: results store is damaged (meta lacks {', '.join(missing)})")

    # ------------------------------------------------------------ opening
    @classmethod
    def read(cls, path: str | os.PathLike) -> "Store":
        """Open an existing store for reading; one clear line if it is missing or not a store."""
        path = os.fspath(path)
        if not os.path.isfile(path):
            raise InputError(f"{path}: results store not found; expected a file written by `equipoise sweep`")
        return cls(path, _connect_existing(path))

    @classmethod
    def create_or_resume(cls, path: str | os.PathLike, *, fingerprint: str, spec: dict, model: str,
                         players: dict, coordinates: list[str], new: bool = False) -> "Store":
        """Open ``path`` to continue the sweep with ``fingerprint``, or create it.

        An existing store with another fingerprint, or a file that is not a
        readable store, raises :class:`InputError` unless ``new``; then it is
        renamed aside (``<path>.replaced-<time>``), never deleted, and a new
        store is created.
        """
        path = os.fspath(path)
        if os.path.isdir(path):
            raise InputError(f"{path}: is a directory; expected the path of a results store file")
        if os.path.exists(path):
            try:
                store = cls(path, _connect_existing(path))
            except InputError:
                if not new:
                    raise
                store = None  # unreadable, and a new store was asked for: keep the file aside below
            if store is not None:
                if store.meta.get("fingerprint") == fingerprint:
                    store._check_writable()
                    return store
                store.close()
                if not new:
                    raise InputError(
                        f"{path}: this store was made from another spec or from different contents of the model "
                        f"file ({store.meta.get('model')}); pass --new to keep it aside and start a new store, "
                        "or choose another --store")
            aside = _free_name(path)
            try:
                os.replace(path, aside)
            except OSError as exc:
                raise InputError(f"{path}: cannot keep the old store aside as {aside} ({exc.strerror})") from None
        folder = os.path.dirname(os.path.abspath(path))
        if not os.path.isdir(folder):
            raise InputError(f"{path}: folder {folder} does not exist; expected a writable place for the store")
        # Built under a temporary name and renamed into place: a failed or interrupted creation leaves no store.
        scratch = f"{path}.creating-{os.getpid()}"
        try:
            conn = sqlite3.connect(scratch)
            try:
                _create(conn, fingerprint, spec, model, players, coordinates)
            finally:
                conn.close()
            os.replace(scratch, path)
        except (sqlite3.Error, OSError) as exc:
            if os.path.exists(scratch):
                os.remove(scratch)
            raise InputError(f"{path}: cannot create the results store ({exc})") from None
        return cls(path, sqlite3.connect(path))

    def _check_writable(self) -> None:
        try:
            self.conn.execute("BEGIN IMMEDIATE")
            self.conn.execute("ROLLBACK")
        except sqlite3.Error as exc:
            self.close()
            raise InputError(f"{self.path}: cannot write to the results store ({exc}); "
                             "expected a writable file in a writable folder") from None

    def close(self) -> None:
        self.conn.close()

    def __enter__(self) -> "Store":
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    # ------------------------------------------------------------ writing
    def done_batches(self) -> set[int]:
        return {int(b) for (b,) in self.conn.execute("SELECT id FROM batches")}

    def write_batch(self, batch: int, records: list[dict], seconds: float, engine: str) -> bool:
        """Write one batch's points and equilibria atomically; False if it was already stored."""
        axes = self.meta["axes"]
        cols = ", ".join(["id", "batch"] + [_quote(a) for a in axes] + ["status", "reason", "equilibria"])
        marks = ", ".join("?" * (len(axes) + 5))
        try:
            with self.conn:
                self.conn.execute("INSERT INTO batches (id, points, seconds, engine, finished) VALUES (?, ?, ?, ?, ?)",
                                  (batch, len(records), seconds, engine, time.strftime("%Y-%m-%dT%H:%M:%S")))
                self.conn.executemany(
                    f"INSERT INTO points ({cols}) VALUES ({marks})",
                    [(r["index"], batch, *r["values"], r["status"], r["reason"], len(r["equilibria"]))
                     for r in records])
                self.conn.executemany(
                    f"INSERT INTO equilibria ({', '.join(_EQ_COLUMNS)}) VALUES ({', '.join('?' * len(_EQ_COLUMNS))})",
                    [_eq_row(r["index"], k, e) for r in records for k, e in enumerate(r["equilibria"])])
        except sqlite3.IntegrityError:
            if self.conn.execute("SELECT 1 FROM batches WHERE id = ?", (batch,)).fetchone():
                return False  # stored already (by another run)
            raise
        except sqlite3.OperationalError as exc:
            raise InputError(f"{self.path}: cannot write to the results store ({exc})") from None
        return True

    # ------------------------------------------------------------ reading
    def points(self) -> list[dict]:
        """Every stored point, in point order: ``id``, ``values``, ``status``, ``reason``, ``equilibria``."""
        axes = self.meta["axes"]
        q = f"SELECT id, {', '.join(_quote(a) for a in axes)}, status, reason, equilibria FROM points ORDER BY id"
        return [{"id": row[0], "values": list(row[1:1 + len(axes)]), "status": row[-3], "reason": row[-2],
                 "equilibria": row[-1]} for row in self._query(q)]

    def equilibria(self, stability: bool = False) -> list[dict]:
        """Every stored equilibrium, ordered by point and rank, decoded.

        The full stability object (certificates included) is decoded only with
        ``stability=True``; otherwise ``e["stability"]`` is None.
        """
        cols = _EQ_COLUMNS if stability else _EQ_COLUMNS[:-1]
        out = []
        for row in self._query(f"SELECT {', '.join(cols)} FROM equilibria ORDER BY point, k"):
            e = dict(zip(cols, row))
            for key in ("actions", "payoffs", "stability"):
                e[key] = None if e.get(key) is None else json.loads(e[key])
            e["hicksian"] = None if e["hicksian"] is None else bool(e["hicksian"])
            out.append(e)
        return out

    def _query(self, q: str):
        try:
            return self.conn.execute(q).fetchall()
        except sqlite3.DatabaseError as exc:
            raise InputError(f"{self.path}: results store is damaged ({exc})") from None

    def counts(self) -> dict[str, int]:
        """Points by status, and the number of equilibria stored."""
        out = {s: n for s, n in self._query("SELECT status, COUNT(*) FROM points GROUP BY status")}
        out["equilibria"] = self._query("SELECT COUNT(*) FROM equilibria")[0][0]
        return out

    def verdict_counts(self) -> dict[str, dict[str, int]]:
        """``{column: {label: count}}`` for the Nash label and each stability verdict."""
        out = {}
        for col in ("nash", "equal_speeds", "player_speeds", "coordinate_speeds"):
            rows = self._query(f"SELECT {col}, COUNT(*) FROM equilibria WHERE {col} IS NOT NULL GROUP BY {col}")
            out[col] = {label: n for label, n in rows}
        return out

    def export_csv(self, target: str | os.PathLike) -> int:
        """Write one CSV row per (point, equilibrium); points without one get a row with empty fields.

        Columns: ``point``, one per axis (named as given), ``status``,
        ``equilibrium`` (1-based rank), one per action (``player`` or
        ``player[k]``), ``payoff[player]`` per player, ``residual``, ``nash``,
        ``equal_speeds``, ``equal_abscissa``, ``player_speeds``,
        ``coordinate_speeds``, ``hicksian``, ``learning_rate_limit``,
        ``best_response_radius``, ``reason``. Returns the number of rows.
        """
        target = os.fspath(target)
        if os.path.exists(target) and os.path.samefile(target, self.path):
            raise InputError(f"--csv {target}: is the results store itself; expected another file name")
        axes, coords, players = self.meta["axes"], self.meta["coordinates"], list(self.meta["players"])
        header = (["point"] + axes + ["status", "equilibrium"] + coords + [f"payoff[{p}]" for p in players]
                  + ["residual", "nash", "equal_speeds", "equal_abscissa", "player_speeds", "coordinate_speeds",
                     "hicksian", "learning_rate_limit", "best_response_radius", "reason"])
        by_point: dict[int, list[dict]] = {}
        for e in self.equilibria():
            by_point.setdefault(e["point"], []).append(e)
        rows = 0
        scratch = f"{target}.writing-{os.getpid()}"
        try:
            fh = open(scratch, "w", newline="")
        except OSError as exc:
            raise InputError(f"{target}: cannot write the CSV file ({exc.strerror})") from None
        with fh:
            w = csv.writer(fh)
            w.writerow(header)
            for p in self.points():
                head = [p["id"]] + [_num(v) for v in p["values"]] + [p["status"]]
                for e in by_point.get(p["id"], []) or [None]:
                    if e is None:
                        w.writerow(head + [""] * (len(header) - len(head) - 1) + [p["reason"] or ""])
                    else:
                        w.writerow(head + [e["k"] + 1] + [_num(v) for v in e["actions"]]
                                   + [_num(v) for v in e["payoffs"]]
                                   + [_num(e["residual"]), e["nash"], e["equal_speeds"] or "",
                                      _num(e["equal_abscissa"]), e["player_speeds"] or "",
                                      e["coordinate_speeds"] or "",
                                      "" if e["hicksian"] is None else str(e["hicksian"]).lower(),
                                      _num(e["learning_rate_limit"]), _num(e["best_response_radius"]),
                                      p["reason"] or ""])
                    rows += 1
        os.replace(scratch, target)  # a finished file or none: never half a CSV
        return rows


def _free_name(path: str) -> str:
    """``<path>.replaced-<time>``, with a counter if that name is taken: an older copy is never overwritten."""
    stem = f"{path}.replaced-{time.strftime('%Y%m%d-%H%M%S')}"
    name, k = stem, 1
    while os.path.exists(name):
        k += 1
        name = f"{stem}-{k}"
    return name


def _num(v) -> str:
    return "" if v is None else repr(float(v))


def _eq_row(point: int, k: int, e: dict) -> tuple:
    return (point, k, json.dumps(e["actions"]), json.dumps(e["payoffs"]), e["residual"], e["nash"], e["starts"],
            e["equal_speeds"], e["equal_abscissa"], e["player_speeds"], e["coordinate_speeds"],
            None if e["hicksian"] is None else int(e["hicksian"]), e["learning_rate_limit"], e["best_response_radius"],
            None if e["stability"] is None else json.dumps(e["stability"]))


def _connect_existing(path: str) -> sqlite3.Connection:
    what = "expected a file written by `equipoise sweep`"
    conn = None
    try:
        conn = sqlite3.connect(f"file:{path}?mode=rw", uri=True)
        ok = conn.execute("PRAGMA quick_check").fetchone()[0]
        if ok != "ok":
            raise InputError(f"{path}: results store is damaged (SQLite integrity check: {ok}); {what}")
        tables = {t for (t,) in conn.execute("SELECT name FROM sqlite_master WHERE type = 'table'")}
        if not {"meta", "batches", "points", "equilibria"} <= tables:
            raise InputError(f"{path}: not an equipoise results store (missing tables); {what}")
        row = conn.execute("SELECT value FROM meta WHERE key = 'format'").fetchone()
    except sqlite3.DatabaseError as exc:
        if conn is not None:
            conn.close()
        raise InputError(f"{path}: not a readable results store ({exc}); {what}") from None
    except InputError:
        conn.close()
        raise
    try:
        fmt = None if row is None else json.loads(row[0])
    except (json.JSONDecodeError, TypeError):
        fmt = row[0]
    if row is None or fmt != FORMAT:
        conn.close()
    if row is None:
        raise InputError(f"{path}: not an equipoise results store (no format entry); {what}")
    if fmt != FORMAT:
        raise InputError(f"{path}: store format {fmt!r} is not this version's {FORMAT!r}; "
                         "run the sweep again with --new (the old file is kept aside)")
    return conn


def _create(conn: sqlite3.Connection, fingerprint: str, spec: dict, model: str, players: dict,
            coordinates: list[str]) -> None:
    axes = [a["name"] for a in spec["axes"]]
    axis_cols = "".join(f", {_quote(a)} REAL NOT NULL" for a in axes)
    with conn:
        conn.execute("CREATE TABLE meta (key TEXT PRIMARY KEY, value TEXT NOT NULL)")
        conn.execute("CREATE TABLE batches (id INTEGER PRIMARY KEY, points INTEGER NOT NULL, seconds REAL, "
                     "engine TEXT, finished TEXT)")
        conn.execute(f"CREATE TABLE points (id INTEGER PRIMARY KEY, batch INTEGER NOT NULL{axis_cols}, "
                     "status TEXT NOT NULL, reason TEXT, equilibria INTEGER NOT NULL)")
        conn.execute("CREATE TABLE equilibria (point INTEGER NOT NULL REFERENCES points(id), k INTEGER NOT NULL, "
                     "actions TEXT NOT NULL, payoffs TEXT NOT NULL, residual REAL, nash TEXT NOT NULL, "
                     "starts INTEGER, equal_speeds TEXT, equal_abscissa REAL, player_speeds TEXT, "
                     "coordinate_speeds TEXT, hicksian INTEGER, learning_rate_limit REAL, best_response_radius REAL, "
                     "stability TEXT, PRIMARY KEY (point, k))")
        conn.execute("CREATE VIEW results AS SELECT p.*, e.k AS rank, e.actions, e.payoffs, e.residual, e.nash, "
                     "e.equal_speeds, e.equal_abscissa, e.player_speeds, e.coordinate_speeds, e.hicksian, "
                     "e.learning_rate_limit, e.best_response_radius "
                     "FROM points p LEFT JOIN equilibria e ON e.point = p.id")
        meta = {"format": FORMAT, "fingerprint": fingerprint, "spec": spec, "model": model, "axes": axes,
                "players": players, "coordinates": coordinates,
                "created": time.strftime("%Y-%m-%dT%H:%M:%S")}
        conn.executemany("INSERT INTO meta (key, value) VALUES (?, ?)",
                         [(k, json.dumps(v)) for k, v in meta.items()])



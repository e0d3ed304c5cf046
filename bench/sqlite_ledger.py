#!/usr/bin/python3
"""What a user would write instead of alphaledger's durable ledger: one SQLite row per decision.

Each decision is one INSERT of (stream, step, id, p_value, level, rejected, wealth) into a table
whose primary key is (stream, id), so a repeated id is refused as the ledger refuses it, with
journal_mode=WAL and synchronous=FULL (each COMMIT is synced). Decisions are committed in groups of
BATCH rows, as `alphaledger decide --file --sync-every BATCH` does. The level is a constant here:
this measures storage, not a rule.

Usage: sqlite_ledger.py FOLDER SECONDS BATCH [BATCH...]
Prints one line per batch size: batch=N decisions=D wall_seconds=W cpu_seconds=C per_second=R
Uses Debian's /usr/bin/python3 and its sqlite3 module; the database lives in FOLDER (removed after).
"""
import os
import shutil
import sqlite3
import sys
import time


def run(folder, seconds, batch):
    path = os.path.join(folder, f"sqlite-{batch}.db")
    for suffix in ("", "-wal", "-shm"):
        if os.path.exists(path + suffix):
            os.remove(path + suffix)
    db = sqlite3.connect(path, isolation_level=None)
    db.execute("PRAGMA journal_mode=WAL")
    db.execute("PRAGMA synchronous=FULL")
    db.execute(
        "CREATE TABLE decision (stream TEXT NOT NULL, step INTEGER NOT NULL, id TEXT NOT NULL,"
        " p_value REAL NOT NULL, level REAL NOT NULL, rejected INTEGER NOT NULL, wealth REAL NOT NULL,"
        " PRIMARY KEY (stream, id))"
    )
    done = 0
    t0 = time.perf_counter()
    c0 = time.process_time()
    while time.perf_counter() - t0 < seconds:
        rows = [("bench", done + k + 1, f"exp-{done + k}", 0.5, 0.001, 0, 0.025) for k in range(batch)]
        db.execute("BEGIN")
        db.executemany("INSERT INTO decision VALUES (?, ?, ?, ?, ?, ?, ?)", rows)
        db.execute("COMMIT")
        done += batch
    wall = time.perf_counter() - t0
    cpu = time.process_time() - c0
    db.close()
    print(f"batch={batch} decisions={done} wall_seconds={wall:.3f} cpu_seconds={cpu:.3f} "
          f"per_second={done / wall:.0f}", flush=True)


def main():
    if len(sys.argv) < 4:
        print(__doc__, file=sys.stderr)
        return 2
    folder, seconds = sys.argv[1], float(sys.argv[2])
    os.makedirs(folder, exist_ok=True)
    try:
        for batch in sys.argv[3:]:
            run(folder, seconds, int(batch))
    finally:
        shutil.rmtree(folder, ignore_errors=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())

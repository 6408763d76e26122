"""Fault injection on the history store: kill -9 and Ctrl-C during a write, racing creators of a
new store, concurrent writers. Prints tried / consistent / lost per case (bounded: a few minutes).

A store is consistent when SQLite's integrity check passes and every run it holds has all its
checks; a run is lost when a writer reported success (or the case demands it landed) and the run
is not in the store. Usage: ``nice -n 19 python studies/store_faults.py [ROUNDS]``.
"""

from __future__ import annotations

import os
import signal
import sqlite3
import subprocess
import sys
import tempfile
import textwrap
import time
from pathlib import Path

PLUGIN = str(Path(__file__).resolve().parents[1] / "plugin")
CHECKS_PER_RUN = 50

_WRITER = textwrap.dedent(
    """
    import os, sys, time
    sys.path.insert(0, {plugin!r})
    from meanband.store.history import HistoryStore
    path, label, go, trials = sys.argv[1], sys.argv[2], sys.argv[3], int(sys.argv[4])
    env = {{"hostname": "h", "machine": "m", "platform": "p", "python": "3", "meanband": "0"}}
    rows = [{{"nodeid": f"t::{{i}}", "series": "", "kind": "unchecked", "unit": None,
              "source": "values", "values": [float(j) for j in range(trials)], "warmup": [],
              "decision": None, "notes": [], "settings": {{}}, "timing": None}}
            for i in range({checks})]
    while not os.path.exists(go):
        time.sleep(0.0005)
    with HistoryStore(path, timeout=60) as store:
        store.record_run(rows, label=label, environment=env)
    print("ok", flush=True)
    """
)


def consistent(path: Path) -> tuple[bool, set[str]]:
    """Integrity check passes and every run has all its checks; and the labels present."""
    if not path.exists():
        return True, set()
    conn = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
    try:
        if conn.execute("PRAGMA user_version").fetchone()[0] == 0:
            return True, set()
        ok = conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
        counts = conn.execute(
            "SELECT label, (SELECT COUNT(*) FROM checks WHERE run_id = runs.id) FROM runs"
        ).fetchall()
    finally:
        conn.close()
    return ok and all(n == CHECKS_PER_RUN for _, n in counts), {label for label, _ in counts}


def spawn(script: Path, store: Path, label: str, go: Path, trials: int) -> subprocess.Popen[str]:
    return subprocess.Popen([sys.executable, str(script), str(store), label, str(go), str(trials)],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)


def interrupted_writes(script: Path, root: Path, rounds: int, sig: int) -> tuple[int, int, int]:
    """One finished run, then a large write that ``sig`` stops at a random moment."""
    tried = good = lost = 0
    for r in range(rounds):
        store, go = root / f"{sig}-{r}.sqlite", root / f"go-{sig}-{r}"
        go.touch()
        first = spawn(script, store, "kept", go, 10)
        first.communicate(timeout=120)
        victim = spawn(script, store, "victim", go, 20000)
        time.sleep(0.2 + 0.6 * (r / max(rounds - 1, 1)))
        victim.send_signal(sig)
        out, _ = victim.communicate(timeout=120)
        is_ok, labels = consistent(store)
        tried += 1
        good += is_ok
        lost += "kept" not in labels or ("ok" in out and "victim" not in labels)
    return tried, good, lost


def racing(script: Path, root: Path, rounds: int, writers: int, fresh: bool) -> tuple[int, int, int]:
    """``writers`` processes released by one barrier, into a new store or an existing one."""
    tried = good = lost = 0
    for r in range(rounds):
        store, go = root / f"race-{fresh}-{r}.sqlite", root / f"go-race-{fresh}-{r}"
        if not fresh:
            go.touch()
            spawn(script, store, "seed", go, 10).communicate(timeout=120)
            go.unlink()
        children = [spawn(script, store, f"w{i}", go, 200) for i in range(writers)]
        go.touch()
        outs = [child.communicate(timeout=300)[0] for child in children]
        is_ok, labels = consistent(store)
        tried += writers
        good += writers if is_ok else 0
        lost += sum(1 for i, out in enumerate(outs) if f"w{i}" not in labels or "ok" not in out)
    return tried, good, lost


def main() -> None:
    rounds = int(sys.argv[1]) if len(sys.argv) > 1 else 8
    with tempfile.TemporaryDirectory() as folder:
        root = Path(folder)
        script = root / "writer.py"
        script.write_text(_WRITER.format(plugin=PLUGIN, checks=CHECKS_PER_RUN))
        cases = [
            ("kill -9 during a write", lambda: interrupted_writes(script, root, rounds, signal.SIGKILL)),
            ("Ctrl-C during a write", lambda: interrupted_writes(script, root, rounds, signal.SIGINT)),
            ("6 creators of a new store", lambda: racing(script, root, rounds, 6, fresh=True)),
            ("4 concurrent writers", lambda: racing(script, root, rounds, 4, fresh=False)),
        ]
        print(f"{'case':28} {'tried':>6} {'consistent':>11} {'lost':>5}")
        for name, case in cases:
            tried, good, lost = case()
            print(f"{name:28} {tried:6d} {good:11d} {lost:5d}", flush=True)


if __name__ == "__main__":
    os.environ.setdefault("PYTHONDONTWRITEBYTECODE", "1")
    main()

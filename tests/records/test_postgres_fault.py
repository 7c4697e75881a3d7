"""The PostgreSQL server stopped in the middle of a write burst, then restarted.

Each test runs its own throw-away cluster (``.ci/postgres.sh``, 127.0.0.1 and a free port) so
stopping it disturbs no other test. Checked, with real processes and a real ``pg_ctl stop -m
fast``:

- a writer whose reconnect window outlasts the outage rides it out: every note lands exactly
  once, in order, both chains verify;
- a writer with a short window gets a clear :class:`StoreUnavailable` (no traceback), retries
  later with the same event id, and still nothing is lost or doubled;
- the command line says so in one line with exit code 3.
"""

from __future__ import annotations

import os
import subprocess
import sys
import time
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[2]
ENV = dict(os.environ, PYTHONPATH=str(REPO) + os.pathsep + os.environ.get("PYTHONPATH", ""))


WRITER = r"""
import sys, time
from deviation.records.backends import StoreUnavailable
from deviation.records.store import open_store
url, rid, n, keyed = sys.argv[1], sys.argv[2], int(sys.argv[3]), sys.argv[4] == "keyed"
s = open_store(url)
worst = 0.0
for i in range(n):
    for attempt in range(200):  # bounded: about a minute of the caller retrying
        t = time.perf_counter()
        try:
            e = s.note(rid, f"note-{i}", actor="olga", role="operator",
                       event_id=f"olga-{i}" if keyed else None)
            break
        except StoreUnavailable as exc:
            print(f"UNAVAILABLE unknown={exc.outcome_unknown} {exc}", flush=True)
            if not keyed:
                sys.exit(3)
            time.sleep(0.3)
    else:
        sys.exit("gave up")
    worst = max(worst, time.perf_counter() - t)
    print(f"OK {i} {e.seq}", flush=True)
print(f"WORST {worst:.3f}", flush=True)
"""


def _burst(cluster, keyed: bool, window_s: str, n: int, down_s: float):
    from deviation.records.store import open_store

    s = open_store(cluster.url)
    rid = s.create_record({"case": {}}, lot="L-1", retort_id="R1", process_id="P-1",
                          actor="olga", role="operator")
    s.close()
    env = dict(ENV, DEVIATION_DB_RECONNECT_S=window_s)
    proc = subprocess.Popen([sys.executable, "-c", WRITER, cluster.url, rid, str(n),
                             "keyed" if keyed else "plain"], env=env, cwd=REPO, text=True,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    lines = []
    try:
        while len([x for x in lines if x.startswith("OK")]) < 40:  # well into the burst
            line = proc.stdout.readline()
            assert line, proc.stderr.read()
            lines.append(line.strip())
        cluster.stop("fast")  # pg_ctl stop -m fast: sessions are terminated mid-write
        time.sleep(down_s)
        cluster.start()
        out, err = proc.communicate(timeout=180)
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait(timeout=30)
    lines += out.splitlines()
    assert "Traceback" not in err, err
    assert proc.returncode == 0, err
    s = open_store(cluster.url)
    try:
        evs = s.events(rid)
        assert [e.payload.get("text") for e in evs[1:]] == [f"note-{i}" for i in range(n)]  # once each, in order
        assert [e.seq for e in evs] == list(range(1, n + 2))
        res = s.verify()
        assert res.ok, res.first_broken
        assert res.checked_events == n + 1
    finally:
        s.close()
    return lines


@pytest.mark.timeout(600)
def test_a_writer_rides_out_a_server_restart_without_loss_or_duplicates(pg_cluster):
    lines = _burst(pg_cluster, keyed=False, window_s="60", n=300, down_s=2.0)
    assert not [x for x in lines if x.startswith("UNAVAILABLE")]
    worst = float(lines[-1].split()[1])
    assert worst >= 1.5  # one append did wait out the outage (the server was down 2 s)


@pytest.mark.timeout(600)
def test_a_short_window_gives_a_clear_error_and_a_keyed_retry_is_not_doubled(pg_cluster):
    lines = _burst(pg_cluster, keyed=True, window_s="0.5", n=200, down_s=3.0)
    errors = [x for x in lines if x.startswith("UNAVAILABLE")]
    assert errors, lines[-5:]
    assert all("cannot reach the database server or lost the connection to it" in x for x in errors)
    assert all(f":{pg_cluster.port}" in x or "127.0.0.1" in x for x in errors)  # names the store


@pytest.mark.timeout(300)
def test_the_command_reports_a_stopped_server_in_one_line(pg_cluster):
    from deviation.records.store import open_store

    s = open_store(pg_cluster.url)
    rid = s.create_record({"case": {}}, lot="L-1", retort_id="R1", process_id="P-1",
                          actor="olga", role="operator")
    s.close()
    pg_cluster.stop("fast")
    env = dict(ENV, DEVIATION_DB_RECONNECT_S="1")
    for argv in (["record", "note", rid, "--text", "x", "--role", "operator"], ["verify"]):
        out = subprocess.run([sys.executable, "-m", "deviation.cli", *argv, "--db", pg_cluster.url],
                             env=env, cwd=REPO, capture_output=True, text=True, timeout=120)
        assert out.returncode == 3, (out.stdout, out.stderr)
        assert "Traceback" not in out.stderr
        assert out.stderr.startswith("error: ") and len(out.stderr.strip().splitlines()) == 1, out.stderr
        assert "cannot reach the database server" in out.stderr
    pg_cluster.start()
    out = subprocess.run([sys.executable, "-m", "deviation.cli", "verify", "--db", pg_cluster.url, "--json"],
                         env=env, cwd=REPO, capture_output=True, text=True, timeout=120)
    assert out.returncode == 0, out.stderr

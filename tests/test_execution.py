"""Where work runs: serial, a local Dask cluster started by the tool, or an existing scheduler.

Outcomes come back in the order given, failures are captured per item with the reason, and a
distributed run equals the serial one.
"""

from __future__ import annotations

import contextlib
import http.server
import socket
import threading
import time

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from test_cli import CHAIN, assert_user_error
from test_cli import run as run_cli

from bandpert.errors import InputError
from bandpert.runs import execution
from bandpert.runs.execution import Engine, blocks, guarded, run, run_block


def _square_or_fail(x: int) -> int:
    """A work item that fails for negative numbers (user error) and for zero (a bug)."""
    if x < 0:
        raise InputError(f"negative value {x}", "sweep", "value")
    if x == 0:
        raise ZeroDivisionError("division by zero")
    return x * x


@settings(max_examples=50, deadline=None)
@given(st.integers(0, 500), st.integers(1, 16), st.one_of(st.none(), st.integers(1, 40)))
def test_blocks_cover_every_item_once_in_order(n_items, n_workers, size):
    parts = blocks(n_items, n_workers, size)
    covered = [i for s in parts for i in range(s.start, s.stop)]
    assert covered == list(range(n_items))
    if n_items and size is None:
        assert len(parts) >= min(n_items, execution.TASKS_PER_WORKER * n_workers) // 2


def test_guarded_separates_user_errors_from_bugs():
    ok = guarded(_square_or_fail, 3)
    assert ok.ok and ok.value == 9
    bad = guarded(_square_or_fail, -2)
    assert not bad.ok and bad.user_error and "negative value -2" in bad.error
    bug = guarded(_square_or_fail, 0)
    assert not bug.ok and not bug.user_error and bug.error.startswith("ZeroDivisionError")
    assert "test_execution.py" in bug.error  # where it happened, for the report


def test_serial_run_keeps_order_and_the_other_items():
    seen = []
    outcomes = run(_square_or_fail, [2, -1, 3, 0, 4], progress=lambda d, t: seen.append((d, t)))
    assert [o.value for o in outcomes] == [4, None, 9, None, 16]
    assert [o.ok for o in outcomes] == [True, False, True, False, True]
    assert seen[-1] == (5, 5)


def test_run_block_guards_every_item():
    outcomes = run_block(_square_or_fail, [1, -1])
    assert [o.ok for o in outcomes] == [True, False]


@pytest.mark.parametrize("kwargs, key", [
    ({"kind": "cloud"}, "engine"),
    ({"kind": "scheduler"}, "address"),
    ({"kind": "local", "workers": 0}, "workers"),
])
def test_bad_engines_are_user_errors(kwargs, key):
    with pytest.raises(InputError) as exc:
        Engine(**kwargs)
    assert exc.value.key == key


def test_engine_descriptions():
    assert "serial" in Engine("serial").describe()
    assert "3 worker processes" in Engine("local", workers=3).describe()
    assert "tcp://h:1" in Engine("scheduler", address="tcp://h:1").describe()


def test_existing_scheduler_runs_the_items(dask_scheduler):
    from conftest import bundled

    from bandpert.runs.mesh_dos import mesh_block

    chain = bundled("cosine-chain")
    k = np.linspace(0, 0.5, 12)[:, None] * 2 * np.pi / chain.a_A
    items = [(chain, 60.0, k[i:i + 3], 4) for i in range(0, 12, 3)]
    serial = run(mesh_block, items)
    spread = run(mesh_block, items, Engine("scheduler", address=dask_scheduler))
    assert all(o.ok for o in spread)
    for a, b in zip(serial, spread, strict=True):
        assert np.allclose(a.value, b.value, rtol=0, atol=1e-10)


def test_local_cluster_is_started_and_stopped_by_the_tool():
    import psutil
    from conftest import bundled

    from bandpert.runs.mesh_dos import mesh_block

    chain = bundled("cosine-chain")
    k = np.array([[0.0], [0.3]])
    before = {p.pid for p in psutil.Process().children(recursive=True)}
    outcomes = run(mesh_block, [(chain, 60.0, k, 3)] * 3, Engine("local", workers=1))
    assert all(o.ok for o in outcomes)
    assert np.allclose(outcomes[0].value, run(mesh_block, [(chain, 60.0, k, 3)])[0].value,
                       rtol=0, atol=1e-10)
    left = {p.pid for p in psutil.Process().children(recursive=True)
            if p.is_running() and p.status() != psutil.STATUS_ZOMBIE} - before
    assert not left  # the worker processes and the scheduler are gone


def test_unreachable_scheduler_is_a_user_error(monkeypatch):
    monkeypatch.setattr(execution, "CONNECT_TIMEOUT", "1s")
    with pytest.raises(InputError) as exc:
        run(_square_or_fail, [1], Engine("scheduler", address="tcp://127.0.0.1:9"))
    assert exc.value.key == "address" and "cannot reach" in str(exc.value)


@contextlib.contextmanager
def _listener(kind: str):
    """A service on 127.0.0.1 that is not a Dask scheduler; yields its tcp:// address.

    "silent": accepts and says nothing; "http": a plain HTTP server (waits for a request);
    "chatty": greets with a banner line, as many line-based services do.
    """
    if kind == "http":
        server = http.server.ThreadingHTTPServer(("127.0.0.1", 0),
                                                 http.server.SimpleHTTPRequestHandler)
        thread = threading.Thread(target=server.serve_forever, daemon=True)
        thread.start()
        try:
            yield f"tcp://127.0.0.1:{server.server_address[1]}"
        finally:
            server.shutdown()
            server.server_close()
        return
    sock = socket.create_server(("127.0.0.1", 0))
    held = []

    def accept() -> None:
        with contextlib.suppress(OSError):
            while True:
                conn, _ = sock.accept()
                held.append(conn)
                if kind == "chatty":
                    conn.sendall(b"SSH-2.0-NotDask_1.0\r\n" * 4)

    threading.Thread(target=accept, daemon=True).start()
    try:
        yield f"tcp://127.0.0.1:{sock.getsockname()[1]}"
    finally:
        sock.close()
        for conn in held:
            conn.close()


@pytest.mark.parametrize("kind, fragment", [("silent", "no Dask greeting"),
                                            ("http", "no Dask greeting"),
                                            ("chatty", "does not speak the Dask protocol")])
def test_a_service_that_is_not_a_scheduler_is_refused(monkeypatch, kind, fragment):
    # A Dask server sends its handshake first (distributed's comm/core.py, common practice, no
    # source); anything else is refused in one line naming the address, before the client
    # would hang (HTTP) or read a banner as a frame length of exabytes.
    monkeypatch.setattr(execution, "PROBE_TIMEOUT_S", 1.0)
    with _listener(kind) as address:
        with pytest.raises(InputError) as exc:
            run(_square_or_fail, [1], Engine("scheduler", address=address))
    assert exc.value.key == "address"
    assert address in str(exc.value) and fragment in str(exc.value)
    assert "expected the address of a running Dask scheduler" in str(exc.value)


def test_the_check_passes_a_real_scheduler(dask_scheduler):
    execution.check_scheduler(dask_scheduler)  # raises on failure


def test_not_a_scheduler_exits_2_within_15_seconds(tmp_path):
    # Through the command line with the default time-outs: one line, exit 2, nothing written.
    with _listener("http") as address:
        start = time.perf_counter()
        code, _, err = run_cli(["dos", str(CHAIN), "--scheduler", address, "--mesh", "4",
                                "--out", str(tmp_path / "out")])
        elapsed = time.perf_counter() - start
    assert_user_error(code, err, "--scheduler", address)
    assert elapsed < 15.0
    assert not (tmp_path / "out").exists()

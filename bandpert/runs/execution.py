"""Where the work of a sweep or a dense k-mesh runs: in this process, or on dask.distributed.

The library hands this module a plain function and a list of work items (one parameter point, or
one block of k-points); the module groups items into tasks, runs them, and returns one
:class:`Outcome` per item, in the order given, whatever ran where:

- ``Engine(kind="serial")``: in this process, no Dask;
- ``Engine(kind="local", workers=n)`` (the default): a :class:`distributed.LocalCluster` of ``n``
  worker processes on 127.0.0.1, one thread each, started and stopped here;
- ``Engine(kind="scheduler", address="tcp://host:8786")``: an existing Dask scheduler.

A failing item is caught where it runs and comes back as an :class:`Outcome` holding the error
text and the item, so one bad parameter point never loses the others; a task lost as a whole (a
worker killed, say) marks every item in it as failed with the reason.

Reproducibility: every task runs its linear algebra on one BLAS thread
(:func:`bandpert.planewave.single_blas_thread` inside the solvers, and the worker environment
sets OPENBLAS/OMP/MKL thread counts to 1), so a result does not depend on how many processes ran
it; tests hold serial and distributed results equal to 1e-10 eV.
"""

from __future__ import annotations

import logging
import os
import socket
import struct
import traceback
from collections.abc import Callable, Iterator, Sequence
from contextlib import contextmanager
from dataclasses import dataclass
from typing import Any

import dask.config
from distributed import Client, LocalCluster, as_completed

from ..errors import InputError

Progress = Callable[[int, int], None]

#: Aim for at least this many tasks per worker, so a slow task does not leave a worker idle.
TASKS_PER_WORKER = 4

#: Environment of local worker processes: one thread per BLAS/OpenMP pool, and glibc's malloc
#: kept from handing every array above 128 KiB back to the kernel. Dask sets
#: MALLOC_TRIM_THRESHOLD_ for its workers, which freezes glibc's adaptive mmap threshold; the
#: many 0.5 MiB temporaries of the mass and refinement code then each cost an mmap, page faults
#: and an munmap: a silicon sweep point with masses took 1.77 s in a worker against 0.67 s in
#: the calling process (measured); with the mmap threshold at 64 MiB it takes 0.63 s.
WORKER_ENV = {"OPENBLAS_NUM_THREADS": "1", "OMP_NUM_THREADS": "1", "MKL_NUM_THREADS": "1",
              "MALLOC_MMAP_THRESHOLD_": str(64 * 2**20)}

ENGINE_KINDS = ("serial", "local", "scheduler")

#: How long to wait for an existing scheduler to answer.
CONNECT_TIMEOUT = "10s"

#: Seconds allowed for each step of the protocol check of a scheduler address (TCP connect,
#: then the scheduler's greeting): a service that is not Dask is refused within twice this.
PROBE_TIMEOUT_S = 3.0

#: Largest greeting accepted from a scheduler (its handshake is about 60 bytes).
_MAX_GREETING_BYTES = 1 << 16


@dataclass(frozen=True)
class Engine:
    """How to run a batch of work items.

    Attributes
    ----------
    kind : str
        "serial", "local" (a local Dask cluster started for the run) or "scheduler".
    workers : int or None
        Worker processes of a local cluster (default: the machine's cores).
    address : str or None
        Scheduler address for ``kind="scheduler"`` (e.g. ``tcp://10.0.0.5:8786``).
    """

    kind: str = "local"
    workers: int | None = None
    address: str | None = None

    def __post_init__(self) -> None:
        if self.kind not in ENGINE_KINDS:
            raise InputError(f"unknown engine '{self.kind}'; expected one of "
                             f"{', '.join(ENGINE_KINDS)}", key="engine")
        if self.kind == "scheduler" and not self.address:
            raise InputError("a scheduler engine needs an address such as tcp://host:8786",
                             key="address")
        if self.workers is not None and self.workers < 1:
            raise InputError(f"must be at least 1, got {self.workers}", key="workers")

    def describe(self) -> str:
        """One line for the terminal and the JSON settings."""
        if self.kind == "serial":
            return "serial (this process)"
        if self.kind == "scheduler":
            return f"Dask scheduler at {self.address}"
        return f"local Dask cluster, {self.local_workers()} worker processes"

    def local_workers(self) -> int:
        """Worker processes a local cluster gets."""
        return self.workers or max(1, os.cpu_count() or 1)


@dataclass(frozen=True)
class Outcome:
    """The result of one work item, or why it failed.

    Attributes
    ----------
    item : Any
        The work item as given.
    value : Any
        The function's return value (None when it failed).
    error : str or None
        One line: the exception's type and message. None on success.
    user_error : bool
        True when the failure was an :class:`~bandpert.errors.InputError` (bad parameters),
        False for anything else (a bug, or a lost worker).
    """

    item: Any
    value: Any = None
    error: str | None = None
    user_error: bool = False

    @property
    def ok(self) -> bool:
        """True when the item succeeded."""
        return self.error is None


#: Run in this process, no Dask.
SERIAL = Engine("serial")


def guarded(function: Callable[[Any], Any], item: Any) -> Outcome:
    """Run ``function(item)`` and return an :class:`Outcome`; no exception escapes."""
    try:
        return Outcome(item=item, value=function(item))
    except InputError as exc:
        return Outcome(item=item, error=str(exc), user_error=True)
    except Exception as exc:  # noqa: BLE001 - reported per item, the rest goes on
        last = traceback.extract_tb(exc.__traceback__)[-1] if exc.__traceback__ else None
        where = f" ({os.path.basename(last.filename)}:{last.lineno})" if last else ""
        return Outcome(item=item, error=f"{type(exc).__name__}: {exc}{where}")


def run_block(function: Callable[[Any], Any], items: Sequence[Any]) -> list[Outcome]:
    """One task: the items of a block, each guarded. Module-level, so workers can import it."""
    return [guarded(function, item) for item in items]


def blocks(n_items: int, n_workers: int, block_size: int | None = None) -> list[slice]:
    """Split ``n_items`` into contiguous blocks: at least :data:`TASKS_PER_WORKER` per worker.

    Parameters
    ----------
    n_items : int
    n_workers : int
    block_size : int, optional
        Items per block; by default ``ceil(n_items / (TASKS_PER_WORKER · n_workers))``.
    """
    if n_items == 0:
        return []
    size = block_size or max(1, -(-n_items // (TASKS_PER_WORKER * max(1, n_workers))))
    return [slice(i, min(n_items, i + size)) for i in range(0, n_items, size)]


def local_cluster(n_workers: int) -> Any:
    """A :class:`distributed.LocalCluster` of ``n_workers`` single-threaded processes on
    127.0.0.1, with :data:`WORKER_ENV` in their environment and no dashboard beyond loopback.
    """
    environ = dict(dask.config.get("distributed.nanny.pre-spawn-environ", {}) or {})
    environ.update(WORKER_ENV)
    with dask.config.set({"distributed.nanny.pre-spawn-environ": environ}):
        return LocalCluster(n_workers=n_workers, threads_per_worker=1, processes=True,
                            host="127.0.0.1", dashboard_address="127.0.0.1:0",
                            worker_dashboard_address="127.0.0.1:0", silence_logs=logging.ERROR)


def check_scheduler(address: str, timeout_s: float = PROBE_TIMEOUT_S) -> None:
    """Check that ``address`` is a Dask scheduler before handing it to :class:`distributed.Client`.

    A Dask server speaks first: on a new TCP connection it sends its handshake, a message framed
    as an 8-byte little-endian byte count followed by msgpack frames holding, among others, its
    ``compression`` and ``python`` entries (distributed's ``comm/tcp.py`` and ``comm/core.py``;
    common practice, no source beyond the library). A service that stays silent (an HTTP
    server waits for a request) or sends anything else is refused here, in one line, instead
    of hanging the client or making it allocate a "message" of absurd size. Only ``tcp://``
    (or scheme-less) addresses are checked; other transports go straight to the client.

    Raises
    ------
    InputError
        Key ``address``: unreachable, silent, or not speaking the Dask protocol.
    """
    scheme, _, location = address.rpartition("://")
    if scheme not in ("", "tcp"):
        return
    host, _, port_text = location.rpartition(":")
    host = host.strip("[]")
    try:
        port = int(port_text)
    except ValueError:
        raise InputError(f"'{address}' has no port; expected tcp://host:port, e.g. "
                         "tcp://10.0.0.5:8786", key="address") from None
    expected = "expected the address of a running Dask scheduler (tcp://host:port)"
    try:
        conn = socket.create_connection((host or "127.0.0.1", port), timeout=timeout_s)
    except OSError as exc:
        reason = "timed out" if isinstance(exc, TimeoutError) else exc.strerror or str(exc)
        raise InputError(f"cannot reach a Dask scheduler at {address} ({reason}); {expected}",
                         key="address") from None
    with conn:
        try:
            conn.settimeout(timeout_s)
            head = _receive(conn, 8)
            size = struct.unpack("<Q", head)[0] if len(head) == 8 else 0
            body = _receive(conn, size) if 0 < size <= _MAX_GREETING_BYTES else b""
        except TimeoutError:
            raise InputError(f"{address} accepts connections but sent no Dask greeting within "
                             f"{timeout_s:g} s (an HTTP server or another service?); {expected}",
                             key="address") from None
        except OSError as exc:
            raise InputError(f"{address} closed the connection ({exc.strerror or exc}); "
                             f"{expected}", key="address") from None
    if b"compression" not in body or b"python" not in body:
        raise InputError(f"{address} does not speak the Dask protocol (it sent "
                         f"{head[:8]!r}…); {expected}", key="address")


def _receive(conn: socket.socket, n: int) -> bytes:
    """Up to ``n`` bytes from ``conn`` (fewer if the peer closes)."""
    chunks, got = [], 0
    while got < n:
        chunk = conn.recv(n - got)
        if not chunk:
            break
        chunks.append(chunk)
        got += len(chunk)
    return b"".join(chunks)


@contextmanager
def dask_client(engine: Engine) -> Iterator[Any]:
    """A :class:`distributed.Client` for the engine; a local cluster is closed on exit."""
    if engine.kind == "scheduler":
        check_scheduler(engine.address)
        try:
            client = Client(engine.address, timeout=CONNECT_TIMEOUT)
        except (OSError, TimeoutError, ValueError) as exc:
            raise InputError(f"cannot reach a Dask scheduler at {engine.address} ({exc}); "
                             "expected the address of a running scheduler",
                             key="address") from None
        try:
            yield client
        finally:
            client.close()
        return
    cluster = local_cluster(engine.local_workers())
    try:
        client = Client(cluster)
        try:
            yield client
        finally:
            client.close()
    finally:
        cluster.close()


class Runner:
    """An engine held open: several batches share one cluster (see :func:`session`)."""

    def __init__(self, engine: Engine, client: Any = None):
        self.engine = engine
        self.client = client

    def map(self, function: Callable[[Any], Any], items: Sequence[Any],
            progress: Progress | None = None, block_size: int | None = None) -> list[Outcome]:
        """Run ``function`` on every item; the outcomes in the order of ``items``."""
        items = list(items)
        total = len(items)
        if self.client is None:
            outcomes = []
            for i, item in enumerate(items):
                outcomes.append(guarded(function, item))
                if progress:
                    progress(i + 1, total)
            return outcomes
        n_workers = max(1, len(self.client.scheduler_info().get("workers", {})) or
                        self.engine.local_workers())
        parts = blocks(total, n_workers, block_size)
        return _gather(self.client, function, items, parts, progress)


@contextmanager
def session(engine: Engine = SERIAL) -> Iterator[Runner]:
    """Open the engine once (a local cluster is started here and stopped on exit)."""
    if engine.kind == "serial":
        yield Runner(engine)
        return
    with dask_client(engine) as client:
        yield Runner(engine, client)


def run(function: Callable[[Any], Any], items: Sequence[Any], engine: Engine | Runner = SERIAL,
        progress: Progress | None = None, block_size: int | None = None) -> list[Outcome]:
    """Run ``function`` on every item and return the outcomes in the order of ``items``.

    Parameters
    ----------
    function : callable
        A module-level function (workers import it by name) taking one item.
    items : sequence
        Picklable work items.
    engine : Engine or Runner
        Where to run (default: serially in this process); a :class:`Runner` from
        :func:`session` reuses an open cluster.
    progress : callable, optional
        ``progress(done, total)`` in items, called as tasks finish.
    block_size : int, optional
        Items per task (default: see :func:`blocks`).

    Returns
    -------
    list of Outcome
    """
    if isinstance(engine, Runner):
        return engine.map(function, items, progress, block_size)
    with session(engine) as runner:
        return runner.map(function, items, progress, block_size)


def _gather(client: Any, function: Callable[[Any], Any], items: list, parts: list[slice],
            progress: Progress | None) -> list[Outcome]:
    futures = {client.submit(run_block, function, items[s], pure=False): s for s in parts}
    results: list[Outcome | None] = [None] * len(items)
    done = 0
    for future in as_completed(futures):
        s = futures[future]
        try:
            block = future.result()
        except Exception as exc:  # noqa: BLE001 - a lost task fails its items, not the run
            block = [Outcome(item=item, error=f"task lost: {type(exc).__name__}: {exc}")
                     for item in items[s]]
        results[s] = block
        done += s.stop - s.start
        if progress:
            progress(done, len(items))
    return results  # type: ignore[return-value]

"""Classifying a set on a Dask cluster (dask.distributed): the per-run work of
:mod:`basinmark.core.run_task` runs as tasks on the cluster's workers; this client lists the runs, sends them
out in batches, gathers the rows into one table and leaves writing the label journal to its caller (once,
as one batch, exactly as a local classification does).

The cluster is either a scheduler someone started (``address``: started by hand, by a batch-queue system, by
any cluster tool; see docs/cluster.md) or a local one of ``workers`` processes on this machine.  Dask is an
optional extra (``pip install 'basinmark[cluster]'``): this module imports it only when asked to run, and
says which extra to install when it is missing.

The workers read the set's files themselves, so the set must sit on a file system every worker sees, at the
same path as here.  Nothing is cached: each run is read from its files.
"""

from __future__ import annotations

import json
import logging
import math
from pathlib import Path
from typing import Callable

from basinmark.core.errors import BasinmarkError
from basinmark.core.model import LoadFailure, TrajectorySet
from basinmark.core.rules import Rules
from basinmark.core.run_task import BatchResult, assemble, assemble_table, classify_runs

#: the optional-dependency group of pyproject.toml that brings dask and distributed
EXTRA = "cluster"
INSTALL_HINT = f"pip install 'basinmark[{EXTRA}]'"
#: seconds to wait for a scheduler to answer, and for a first worker to join it
CONNECT_TIMEOUT_S = 10.0
WORKER_WAIT_S = 120.0
#: runs per task: enough to spread a set over each worker several times, few enough that the scheduler's
#: per-task cost (about a millisecond) stays small against reading the runs (common practice, no source)
MAX_BATCH = 32
TASKS_PER_WORKER = 8

Progress = Callable[[int, int, "str | None"], None]


class ClusterError(BasinmarkError):
    """The cluster cannot be used: Dask missing, no scheduler at the address, no worker, workers unlike the client."""


def _distributed():
    try:
        import distributed
    except ImportError:
        raise ClusterError(f"running on a Dask cluster needs the optional extra '{EXTRA}', which is not installed: "
                           f"{INSTALL_HINT} (brings dask and distributed)") from None
    return distributed


def batch_size(n_runs: int, n_workers: int) -> int:
    """Runs per task for ``n_runs`` runs on ``n_workers`` workers (see :data:`MAX_BATCH`)."""
    return max(1, min(MAX_BATCH, math.ceil(n_runs / max(1, n_workers * TASKS_PER_WORKER))))


def worker_check(probe: str) -> tuple[str, bool]:
    """Run on each worker before the work: its basinmark version, and whether it sees the file ``probe``."""
    import basinmark

    return basinmark.__version__, Path(probe).exists()


class _Connection:
    """A client of the scheduler at ``address``, or of a local cluster of ``workers`` processes (``processes=False``:
    threads of this process, for tests), closed (with the local cluster) on leaving the ``with`` block."""

    def __init__(self, address: str | None, workers: int | None, connect_timeout: float, processes: bool):
        self.address, self.workers, self.timeout, self.processes = address, workers, connect_timeout, processes
        self.cluster = self.client = None

    def __enter__(self):
        dist = _distributed()
        if self.address:
            # a scheduler file (JSON written by a scheduler started with one, e.g. in a queued job) or an address
            where = {"scheduler_file": self.address} if Path(self.address).is_file() else {"address": self.address}
            try:
                self.client = dist.Client(**where, timeout=self.timeout, set_as_default=False)
            except ValueError as exc:
                raise ClusterError(f"{self.address!r} is not a scheduler address ({exc}); give it as "
                                   "tcp://HOST:PORT, as the scheduler printed it") from None
            except (OSError, TimeoutError) as exc:
                raise ClusterError(f"cannot reach a Dask scheduler at {self._named()} within {self.timeout:g} s "
                                   f"({exc}); check the address and that the scheduler is running and reachable "
                                   "from this machine (docs/cluster.md)") from None
        else:
            import dask

            try:
                # the workers' sampling profiler feeds a dashboard nobody looks at here, and costs ~15 % CPU on
                # reading and classifying (measured: 64 runs x 3 on one worker, 2.38 s against 2.02 s without)
                with dask.config.set({"distributed.worker.profile.enabled": False}):
                    self.cluster = dist.LocalCluster(n_workers=self.workers, threads_per_worker=1,
                                                     processes=self.processes, dashboard_address=":0",
                                                     silence_logs=logging.ERROR)
                self.client = dist.Client(self.cluster, set_as_default=False)
            except Exception as exc:  # e.g. no new processes allowed, no free port
                self.__exit__()
                raise ClusterError(f"could not start a local Dask cluster of {self.workers} workers "
                                   f"({type(exc).__name__}: {exc}); classify without --workers") from None
        return self.client

    def __exit__(self, *exc) -> None:
        for part in (self.client, self.cluster):
            if part is not None:
                try:
                    part.close()
                except Exception:  # closing a broken connection must not hide the error that broke it
                    pass

    def _named(self) -> str:
        """The address, and the one a scheduler file gives."""
        if not Path(self.address).is_file():
            return self.address
        try:
            inside = json.loads(Path(self.address).read_text(encoding="utf-8")).get("address", "no address")
        except (OSError, ValueError, AttributeError):
            inside = "unreadable"
        return f"{inside} (from the scheduler file {self.address})"

    @property
    def where(self) -> str:
        return f"the scheduler at {self.address}" if self.address else f"a local cluster of {self.workers} workers"


def _check_workers(client, conn: _Connection, probe: Path, worker_wait: float) -> int:
    """Wait for a first worker, then check every worker runs this basinmark and sees the set; the worker count."""
    import basinmark

    try:
        client.wait_for_workers(1, timeout=worker_wait)
    except TimeoutError:
        raise ClusterError(f"no worker joined {conn.where} within {worker_wait:g} s; start workers for it "
                           "(docs/cluster.md) or wait longer with --worker-wait") from None
    try:
        seen = client.run(worker_check, str(probe))
    except Exception as exc:  # e.g. the workers cannot import basinmark at all
        raise ClusterError(f"the workers of {conn.where} cannot run basinmark ({type(exc).__name__}: {exc}); "
                           f"install it in the workers' environment: {INSTALL_HINT}") from None
    for addr, (version, sees) in sorted(seen.items()):
        if version != basinmark.__version__:
            raise ClusterError(f"worker {addr} runs basinmark {version}, this client {basinmark.__version__}; "
                               "install the same version on both so that every run is classified alike")
        if not sees:
            raise ClusterError(f"worker {addr} cannot see {probe}: the set must be on a file system every worker "
                               "shares, at the same path as on this machine")
    return len(seen)


def _lost(batch, exc: BaseException) -> list[tuple[str, LoadFailure]]:
    """A task that died with its worker (out of memory, killed): each of its runs fails, named with its file."""
    out = []
    for spec in batch:
        path = spec.files[0] if spec.files else Path(spec.run_id)
        out.append((spec.run_id, LoadFailure(path, f"{path}: run {spec.run_id} was lost on the cluster "
                                                   f"({type(exc).__name__}: {exc})")))
    return out


def classify_on_cluster(root: str | Path, rules: Rules, *, address: str | None = None, workers: int | None = None,
                        connect_timeout: float = CONNECT_TIMEOUT_S, worker_wait: float = WORKER_WAIT_S,
                        progress: Progress | None = None, batch: int | None = None,
                        processes: bool = True) -> tuple[TrajectorySet, list[BatchResult]]:
    """Read and classify every run of the set at ``root`` on a Dask cluster (``address``, or a local cluster of
    ``workers``); returns the set (its runs as outlines without coordinates: :meth:`RunOutline.trajectory`) and
    the batches' results, from which :func:`basinmark.core.run_task.assemble_table` makes the table once the
    set's atoms have been checked against the rules.  ``progress(done, total, None)`` after each batch."""
    from basinmark.core.sets import discover

    if not address and not workers:
        raise ClusterError("give a scheduler address or a number of local workers")
    _distributed()  # say which extra is missing before reading anything
    plan = discover(Path(root).expanduser().resolve())  # workers elsewhere need whole paths
    total = len(plan.runs)
    if progress:
        progress(0, total, None)
    if not total:
        return assemble(plan, []), []
    conn = _Connection(address, workers, connect_timeout, processes)
    with conn as client:
        n_workers = _check_workers(client, conn, plan.runs[0].files[0], worker_wait)
        size = batch or batch_size(total, n_workers)
        batches = [plan.runs[i:i + size] for i in range(0, total, size)]
        dist = _distributed()
        futures = client.map(classify_runs, batches, layout=plan.layout, rules=rules, pure=False)
        which = {f.key: b for f, b in zip(futures, batches)}
        parts: list[BatchResult] = []
        done = 0
        try:
            for fut in dist.as_completed(futures, loop=client.loop):
                try:
                    parts.append(fut.result())
                except Exception as exc:  # the worker died under it (retried elsewhere first by the scheduler)
                    parts.append(BatchResult(failures=_lost(which[fut.key], exc)))
                done += len(which[fut.key])
                if progress:
                    progress(done, total, None)
        finally:
            client.cancel(futures)  # nothing left running on a shared cluster when stopped early
    return assemble(plan, parts), parts


"""Per-candidate evaluations on the workers of a Dask cluster, through a ``distributed.Client``.

The objective reaches the workers once per run through a worker plugin and
tasks run through the scheduling loop of :mod:`optim.evaluation.tasks`, as
with local worker processes; a worker running an evaluation that exceeds the
timeout is ended and restarted by its nanny. dask and distributed are
imported only when a cluster is used.
"""

from __future__ import annotations

import contextlib
import logging
import os
import time
import uuid
from typing import Optional

import numpy as np

from optim.evaluation.shipping import ObjectiveUnavailable, WorkerError, score_rows, ship_problem
from optim.evaluation.tasks import WORKER_WAIT, run_tasks, timeout_errors
from optim.problem import Problem
from optim.text import first_line

__all__ = ["ClusterUnavailable", "DaskBackend", "CONNECT_TIMEOUT"]

#: Seconds to wait for a Dask scheduler to answer.
CONNECT_TIMEOUT = 20.0

_LOST = (
    "lost the connection to the Dask scheduler at {}; start it again (dask scheduler) and resume the run "
    "from its checkpoint"
)


class ClusterUnavailable(WorkerError):
    """The Dask scheduler cannot be reached, was lost during the run, or has no workers."""


async def _end_worker_process() -> None:
    """Run in a Dask worker's event loop (so even while its task thread hangs): end the process now."""
    os._exit(1)


def _import_distributed():
    try:
        import distributed
    except ImportError:
        raise WorkerError(
            "running on Dask needs dask and distributed; install them with pip install 'optim[cluster]'"
        ) from None
    return distributed


def _installer(token: str, payload: bytes):
    """A worker plugin that unpickles the objective on every worker, including workers that join or restart later."""
    from distributed.diagnostics.plugin import WorkerPlugin

    class ObjectiveInstaller(WorkerPlugin):
        def __init__(self, token, payload):
            self.token, self.payload = token, payload

        def setup(self, worker):
            from optim.evaluation import shipping  # the worker's own module, which the tasks read

            shipping.install(self.token, self.payload)

        def teardown(self, worker):
            from optim.evaluation import shipping

            shipping.uninstall(self.token)

    return ObjectiveInstaller(token, payload)


class DaskBackend:
    """Per-candidate evaluations on a Dask cluster.

    Parameters
    ----------
    problem : Problem
        The objective; optim (and what the objective imports) must be
        installed on the workers.
    address : str or distributed.Client
        A scheduler address (``tcp://host:8786``), ``"local"`` for a new
        ``LocalCluster`` of ``local_workers`` single-threaded worker processes
        that lives until :meth:`close`, or a client used as it is.
    timeout : float or None
        Seconds per evaluation; a worker running a longer one is restarted by
        its nanny.
    local_workers : int
        Workers of the ``"local"`` cluster.

    Notes
    -----
    The objective reaches the workers once per run through a worker plugin,
    which the scheduler also gives to workers that join or restart later; a
    task carries only its candidates. At most one task per worker thread is
    out at a time.
    """

    kind = "dask"

    def __init__(self, problem: Problem, address, timeout: Optional[float] = None, local_workers: int = 2):
        distributed = _import_distributed()
        self.timeout = timeout
        self.token = uuid.uuid4().hex
        payload = ship_problem(problem)
        self._client = self._cluster = None
        self._own_client = False
        self._plugin: Optional[str] = None
        self._capacity = 0
        try:
            if isinstance(address, distributed.Client):
                self._client = address
            elif address == "local":
                self._cluster = self._local_cluster(distributed, int(local_workers))
                self._client, self._own_client = distributed.Client(self._cluster), True
            else:
                try:
                    self._client = distributed.Client(address, timeout=CONNECT_TIMEOUT)
                except (OSError, *timeout_errors()) as exc:
                    raise ClusterUnavailable(
                        f"cannot reach the Dask scheduler at {address!r} ({first_line(exc)}); start one with "
                        f"`dask scheduler` and workers with `dask worker ADDRESS`, or use --dask local"
                    ) from None
                self._own_client = True
            self.address = self._client.scheduler.address
            self._plugin = f"optim-objective-{self.token}"
            self._client.register_plugin(_installer(self.token, payload), name=self._plugin)
        except BaseException:
            self.close()
            raise

    @staticmethod
    def _local_cluster(distributed, workers: int):
        import dask

        # a worker that dies fails its task at once (the default retries it on three more workers); no dashboard,
        # and the scheduler's small HTTP server (health, metrics) on a free local port instead of 0.0.0.0:8787
        with dask.config.set({"distributed.scheduler.allowed-failures": 0}):
            return distributed.LocalCluster(
                n_workers=workers,
                threads_per_worker=1,
                processes=True,
                dashboard_address=None,
                scheduler_kwargs={"dashboard_address": "127.0.0.1:0"},
            )

    def score(self, X: np.ndarray) -> list:
        self._capacity = 0
        return run_tasks(self, X, self.timeout)

    # the pool interface of run_tasks
    def _lost(self) -> ClusterUnavailable:
        return ClusterUnavailable(_LOST.format(self.address))

    def _check_connected(self) -> None:
        if self._client.status != "running":
            raise self._lost()

    @contextlib.contextmanager
    def _connection(self):
        """Errors of a client that lost its scheduler become :class:`ClusterUnavailable`."""
        try:
            yield
        except WorkerError:
            raise
        except Exception:
            if self._client.status != "running":
                raise self._lost() from None
            raise

    def capacity(self) -> int:
        if self._capacity:
            return self._capacity
        self._check_connected()
        with self._connection():
            try:
                threads = sum(self._client.nthreads().values())
                if threads == 0:
                    self._client.wait_for_workers(1, timeout=WORKER_WAIT)
                    threads = sum(self._client.nthreads().values())
            except timeout_errors():
                raise ClusterUnavailable(
                    f"the Dask cluster at {self.address} has no workers; start some with `dask worker {self.address}`"
                ) from None
        self._capacity = max(1, threads)
        return self._capacity

    def submit(self, rows: np.ndarray):
        self._check_connected()
        with self._connection():
            return self._client.submit(score_rows, self.token, rows, pure=False)

    def wait(self, futures, timeout):
        import distributed

        poll = 5.0 if timeout is None else min(max(timeout, 0.01), 5.0)
        with self._connection():  # futures cancelled by a lost connection, a closed comm, ...
            try:
                done, _ = distributed.wait(futures, timeout=poll, return_when="FIRST_COMPLETED")
            except timeout_errors():
                done = set()
        if not done:
            self._check_connected()
        return done

    def result(self, future):
        from distributed.scheduler import KilledWorker

        if future.status == "finished":
            return "ok", future.result()
        if future.status != "error":
            raise self._lost()
        exc = future.exception()
        if isinstance(exc, KilledWorker):
            self._capacity = 0
            return "crash", ""
        if isinstance(exc, ObjectiveUnavailable):
            raise WorkerError(f"the Dask workers cannot load the objective: {exc}")
        raise WorkerError(
            f"a Dask worker failed outside the objective: {first_line(exc)} (is the same version "
            f"of optim installed on the workers?)"
        )

    def kill(self, expired, unfinished) -> None:
        keys = {f.key for f in expired}
        with self._connection():
            victims = [w for w, held in self._client.processing().items() if keys & set(held)]
            self._client.cancel(list(expired) + list(unfinished))
            if victims:
                # A hung evaluation cannot be stopped inside a worker: end the worker process at once (its nanny
                # starts a fresh one); a graceful restart_workers takes seconds longer for the same outcome.
                self._client.run(_end_worker_process, workers=victims, wait=False)
                give_up = time.monotonic() + WORKER_WAIT
                while set(victims) & set(self._client.nthreads()) and time.monotonic() < give_up:
                    time.sleep(0.05)  # until the scheduler has let the old workers go, so no task goes to them
        self._capacity = 0

    def reset(self, running) -> None:
        if self._client is not None and self._client.status == "running" and running:
            with contextlib.suppress(Exception):  # on the way out of an error already being raised
                self._client.cancel(running)

    def close(self) -> None:
        """Remove the objective from the workers; close the client and cluster this backend opened."""
        client, cluster = self._client, self._cluster
        self._client = self._cluster = None
        if client is not None and self._plugin is not None and client.status == "running":
            try:
                client.unregister_worker_plugin(self._plugin)
            except Exception:  # cleanup of a cluster that is going away: nothing more to do
                pass
        if client is not None and self._own_client:
            # a lost client's reconnection attempts are cancelled here: no traceback for an error already reported
            loggers = [logging.getLogger(n) for n in ("distributed", "distributed.client", "distributed.utils")]
            levels = [logger.level for logger in loggers]
            if client.status != "running":
                for logger in loggers:
                    logger.setLevel(logging.CRITICAL + 1)
            try:
                client.close(timeout=CONNECT_TIMEOUT)
            finally:
                for logger, level in zip(loggers, levels, strict=True):
                    logger.setLevel(level)
        if cluster is not None:
            cluster.close(timeout=CONNECT_TIMEOUT)

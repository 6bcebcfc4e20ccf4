"""Where a campaign's jobs run: in this process, a local process pool, or a Dask cluster.

Every executor has one verb, ``map_unordered(function, context, tasks)``, which yields
``function(context, task)`` for every task in completion order. The context (the design, the
configuration) is shipped once per worker, not once per task. Results must depend only on
(context, task): the campaign seeds every task from its own indices, so the order of completion
and the number of workers change nothing but the speed.
"""

import multiprocessing
import os
import pickle
from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait

from ..errors import ConfigError
from ..inference.forked import die_with_parent

_WORKER_CONTEXT = {}
#: Worker processes run one BLAS thread each: the workers already fill the cores, and idle
#: BLAS threads spinning beside another worker cost more than they give on small matrices.
SINGLE_THREAD_ENV = {"OPENBLAS_NUM_THREADS": "1", "OMP_NUM_THREADS": "1", "MKL_NUM_THREADS": "1"}


def available_cores():
    """Cores this process may run on."""
    try:
        return len(os.sched_getaffinity(0))
    except AttributeError:  # pragma: no cover - not Linux
        return os.cpu_count() or 1


class SerialExecutor:
    """Run every task in this process, one after the other."""

    workers = 1
    description = "serial"

    def map_unordered(self, function, context, tasks):
        for task in tasks:
            yield function(context, task)

    def close(self):
        pass


def _install_context(parent_pid, context_bytes):
    # The worker's BLAS thread limits are already in the environment it was spawned with
    # (`ProcessExecutor.map_unordered`): setting them here would come after numpy's import.
    die_with_parent(parent_pid)
    _WORKER_CONTEXT["context"] = pickle.loads(context_bytes)


def _limit_threads_of_children() -> dict:
    """Put SINGLE_THREAD_ENV into this process's environment (where the user has not set them),
    for children spawned from now on; returns what to restore."""
    saved = {name: os.environ.get(name) for name in SINGLE_THREAD_ENV}
    for name, value in SINGLE_THREAD_ENV.items():
        os.environ.setdefault(name, value)
    return saved


def _restore_environment(saved: dict) -> None:
    for name, value in saved.items():
        if value is None:
            os.environ.pop(name, None)
        else:
            os.environ[name] = value


def _call_with_worker_context(function, task):
    return function(_WORKER_CONTEXT["context"], task)


class ProcessExecutor:
    """A pool of local worker processes (default: one per available core).

    Workers are spawned (fresh interpreters, one BLAS thread each) and receive the context once.
    As with any spawned pool, a script that uses it must guard its entry point with
    ``if __name__ == "__main__":`` (notebooks and the command line need nothing).
    At most ``2 * workers`` tasks are in flight, so an interrupted run has started little it will
    not finish.
    """

    def __init__(self, workers=None):
        if workers is not None and (not isinstance(workers, int) or workers < 1):
            raise ConfigError(f"--workers: expected an integer >= 1, got {workers!r}")
        self.workers = workers or available_cores()
        self.description = f"process pool, {self.workers} workers"
        self._pool = None

    def map_unordered(self, function, context, tasks):
        # A spawned worker imports the parent's __main__ (a script importing numpy) before the
        # initializer runs, so the thread limits must already be in the environment it starts
        # with: set here while the pool lives (12x faster mock fits on 2 busy cores).
        saved = _limit_threads_of_children()
        self._pool = ProcessPoolExecutor(max_workers=self.workers,
                                         mp_context=multiprocessing.get_context("spawn"),
                                         initializer=_install_context,
                                         initargs=(os.getpid(), pickle.dumps(context)))
        tasks = iter(tasks)
        pending = set()
        try:
            while True:
                for task in tasks:
                    pending.add(self._pool.submit(_call_with_worker_context, function, task))
                    if len(pending) >= 2 * self.workers:
                        break
                if not pending:
                    return
                done, pending = wait(pending, return_when=FIRST_COMPLETED)
                for future in done:
                    yield future.result()
        finally:
            for future in pending:
                future.cancel()
            self.close()
            _restore_environment(saved)

    def close(self):
        if self._pool is not None:
            self._pool.shutdown(wait=True, cancel_futures=True)
            self._pool = None


class DaskExecutor:
    """A Dask distributed cluster: an existing scheduler ("tcp://host:port") or "local".

    "local" starts a LocalCluster on the loopback interface (127.0.0.1) with `workers` single-threaded
    workers (processes by default; ``processes=False`` runs them as threads of this process).
    """

    def __init__(self, address, *, workers=None, processes=True):
        try:
            from distributed import Client, LocalCluster
        except ImportError:  # pragma: no cover - dask is a declared dependency
            raise ConfigError("--scheduler: Dask is not installed; install 'dask[distributed]'") from None
        self._cluster = None
        if address == "local":
            n = workers or available_cores()
            self._cluster = LocalCluster(host="127.0.0.1", protocol="tcp", n_workers=n,
                                         threads_per_worker=1,
                                         processes=processes, dashboard_address=None)
            self.client = Client(self._cluster)
            self.description = f"Dask LocalCluster on 127.0.0.1, {n} workers"
        else:
            if "://" not in str(address):
                raise ConfigError(f"--scheduler: expected 'local' or an address like "
                                  f"tcp://host:8786, got {address!r}")
            try:
                self.client = Client(address, timeout="20s")
            except (OSError, TimeoutError) as exc:
                raise ConfigError(f"--scheduler: cannot reach {address}: {exc}") from None
            self.description = f"Dask scheduler {address}"
        self.workers = max(1, sum(self.client.nthreads().values()))

    def map_unordered(self, function, context, tasks):
        from distributed import as_completed

        shared = self.client.scatter(context, broadcast=True)
        tasks = list(tasks)
        futures = [self.client.submit(function, shared, task, pure=False) for task in tasks]
        try:
            for future in as_completed(futures):
                yield future.result()
        finally:
            self.client.cancel(futures)

    def close(self):
        self.client.close()
        if self._cluster is not None:
            self._cluster.close()


def make_executor(*, workers=None, scheduler=None, processes=True):
    """The executor the command line asked for: Dask when `scheduler` is given, else a pool of
    `workers` processes (default: all cores).

    One worker is a pool of one spawned process too, not this process: the fits then run with one
    BLAS thread, which on a busy machine is ten times faster than OpenBLAS's default threading for
    the optimiser's tiny matrices (measured: L-BFGS-B's setulb 9 us vs 3.3 ms per call at load 6).
    """
    if scheduler is not None:
        return DaskExecutor(scheduler, workers=workers, processes=processes)
    return ProcessExecutor(workers)

"""Work done beside the main process: a function started in a forked child, its result collected later.

A fit on a 2-core machine leaves the second core idle while it samples (one core per walker
ensemble) and while it works through the verdicts' profile fits. `Beside(function, *args)` starts
`function(*args)` in a forked process at once; `result()` returns its value (sent back through a pipe)
and the seconds it took. `Halves(function)` evaluates a vectorised function of walkers in two
separate calls, the second half in a forked child that stays for the whole chain. Results are those of the same call made in the parent: the child holds a
copy of the parent's memory at the moment of the fork and nothing else. When fork is unavailable,
fewer than two cores are free, or `enabled` is False, the call runs in the parent when `result()` is
asked for; when the child fails or dies, too (so any error surfaces in the parent, as usual).

A child dies with its parent (`die_with_parent`), so killing a fit leaves nothing behind.
"""

import multiprocessing
import os
import signal
import threading
import time

import numpy as np

_PR_SET_PDEATHSIG = 1  # linux/prctl.h
#: Catalogues from this size send work beside the fit. Below it the work is short and the second
#: core is busy already: the figure drawers import matplotlib while the chain runs (at N = 10⁴ a
#: cross-check beside the sampling slowed the sampling by 0.5 s).
BESIDE_MIN_OBJECTS = 50_000
#: Catalogues from this size are sampled with each half-ensemble evaluated in two calls of half the
#: walkers (`Halves`), the second beside in a forked child when one can run: a call's arithmetic
#: (0.4 ms per 8 walkers at N = 10⁴) then far exceeds the round trip through a pipe (~0.03 ms).
HALVES_MIN_OBJECTS = 5_000
_SPIN_SECONDS = 0.002  # how long the child of `Halves` polls for the next call before it blocks
_yield = getattr(os, "sched_yield", lambda: None)


def die_with_parent(parent_pid: int) -> None:
    """End this process whenever `parent_pid`, the process that started it, dies.

    A pool's workers otherwise wait for work forever once the campaign process is killed (SIGKILL
    gives it no chance to stop them). On Linux the kernel is asked to send SIGKILL at the parent's
    death (prctl PR_SET_PDEATHSIG); a parent that died before that request, e.g. during the pool's
    start-up, is caught by comparing the current parent with `parent_pid`, which the parent
    recorded itself (a worker's own `os.getppid()` may already be its adoptive init). A watcher
    thread repeats that comparison every second, for systems without prctl.
    """
    try:
        import ctypes

        libc = ctypes.CDLL(None, use_errno=True)
        libc.prctl(_PR_SET_PDEATHSIG, signal.SIGKILL, 0, 0, 0)
    except (OSError, AttributeError):  # pragma: no cover - not Linux: the watcher still works
        pass
    if os.getppid() != parent_pid:
        os._exit(1)
    threading.Thread(target=_exit_with_parent, args=(parent_pid,), daemon=True).start()


def _exit_with_parent(parent_pid, every_s=1.0):
    while os.getppid() == parent_pid:
        time.sleep(every_s)
    os._exit(1)


def can_fork() -> bool:
    """Whether a forked child would get a core of its own (fork exists, two cores are free)."""
    if "fork" not in multiprocessing.get_all_start_methods():
        return False
    try:
        return len(os.sched_getaffinity(0)) >= 2
    except AttributeError:  # pragma: no cover - not Linux
        return (os.cpu_count() or 1) >= 2


class _Child:
    """A forked child reached through `_connection`, stopped and reaped by `close()`."""

    _connection, _pid, forked = None, None, False

    def _fork(self, serve, *, enabled: bool, duplex: bool):
        """Fork a child running `serve(end)` on its end of a new pipe (the sending end when not
        `duplex`), keeping the other end here; nothing when not `enabled` or no core is free. The
        child dies with this process and leaves without running this process's exit handlers."""
        self.forked = bool(enabled) and can_fork()
        if not self.forked:
            return
        here, there = multiprocessing.Pipe(duplex=duplex)
        parent = os.getpid()
        pid = os.fork()
        if pid == 0:
            here.close()
            code = 0
            try:
                die_with_parent(parent)
                signal.signal(signal.SIGTERM, signal.SIG_DFL)  # not the parent's clean-up handler
                serve(there)
            except BaseException:  # noqa: BLE001 - the parent computes it again and reports
                code = 1
            finally:
                os._exit(code)
        there.close()
        self._connection, self._pid = here, pid

    def close(self):
        """Stop the child (if still running) and reap it."""
        if self._connection is not None:
            self._connection.close()
            self._connection = None
        if self._pid is not None:
            try:
                os.kill(self._pid, signal.SIGKILL)
            except ProcessLookupError:
                pass
            os.waitpid(self._pid, 0)
            self._pid = None

    def __del__(self):
        try:
            self.close()
        except Exception:  # noqa: BLE001 - interpreter shutdown
            pass


class Beside(_Child):
    """`function(*args)` computed in a forked child from now on (or in the parent when asked for).

    Attributes
    ----------
    forked : bool, the call runs in a child
    """

    def __init__(self, function, *args, enabled: bool = True):
        self.function, self.args = function, args

        def compute_and_send(sender):
            start = time.perf_counter()
            value = function(*args)
            sender.send(("ok", value, time.perf_counter() - start))

        self._fork(compute_and_send, enabled=enabled, duplex=False)

    def result(self):
        """(value, seconds the call took, in the child or here)."""
        reply = None
        if self._connection is not None:
            try:
                reply = self._connection.recv()
            except (EOFError, OSError):  # the child failed or died
                reply = None
            finally:
                self.close()
        if reply is not None and reply[0] == "ok":
            return reply[1], reply[2]
        start = time.perf_counter()
        value = self.function(*self.args)
        return value, time.perf_counter() - start


class Halves(_Child):
    """A vectorised function of walkers, (n, ndim) -> (n,), evaluated as two separate calls on the
    first and the second half of the rows: the second in a forked child (`enabled` and a free core),
    else both here. Each half is the same call either way, so the values do not depend on whether a
    child ran (with `function` deterministic). A child that fails or dies is replaced by this
    process for the rest of the run; `close()` (or leaving a `with` block) stops it.

    Attributes
    ----------
    forked : bool, a child evaluates the second halves
    """

    def __init__(self, function, ndim: int, *, enabled: bool = True):
        self.function, self.ndim = function, int(ndim)
        self._fork(lambda connection: _serve(function, self.ndim, connection), enabled=enabled, duplex=True)

    def __call__(self, theta):
        theta = np.atleast_2d(np.asarray(theta, dtype=float))
        cut = (len(theta) + 1) // 2
        first, second = theta[:cut], theta[cut:]
        sent = False
        if self._connection is not None and len(second):
            try:
                self._connection.send_bytes(np.ascontiguousarray(second).tobytes())
                sent = True
            except OSError:
                self.close()
        head = self.function(first)
        tail = None
        if sent:
            try:
                _await(self._connection)
                reply = self._connection.recv_bytes()
                tail = np.frombuffer(reply, dtype=float).copy() if reply else None
            except (EOFError, OSError):
                tail = None
            if tail is None or len(tail) != len(second):  # failed or died: this process from now on
                self.close()
                tail = None
        if tail is None:
            tail = self.function(second) if len(second) else np.zeros(0)
        return np.concatenate([np.asarray(head, dtype=float), np.asarray(tail, dtype=float)])

    def close(self):
        """Stop the child (if any) and reap it; this process evaluates every call from now on."""
        super().close()
        self.forked = False

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()


def _await(connection):
    """Poll `connection` for up to _SPIN_SECONDS (the reply or the next call is usually that close:
    a process blocked in a read takes ~0.1 ms to wake on a virtual machine), then return. Each poll
    yields the core to any other process that is ready (the figure drawers import matplotlib while
    the chain starts)."""
    deadline = time.perf_counter() + _SPIN_SECONDS
    while time.perf_counter() < deadline:
        if connection.poll(0):
            return
        _yield()


def _serve(function, ndim, connection):
    """The child of `Halves`: rows in, values out (an empty reply when the call fails)."""
    while True:
        _await(connection)
        try:
            message = connection.recv_bytes()
        except (EOFError, OSError):
            return
        try:
            rows = np.frombuffer(message, dtype=float).reshape(-1, ndim)
            reply = np.ascontiguousarray(function(rows), dtype=float).tobytes()
        except Exception:  # noqa: BLE001 - the parent evaluates it again and reports
            reply = b""
        connection.send_bytes(reply)

"""Work done beside the main process: a function started in a forked child, its result collected later.

A fit on a 2-core machine leaves the second core idle while it samples (one core per walker
ensemble) and while it works through the verdicts' profile fits. `Beside(function, *args)` starts
`function(*args)` in a forked process at once; `result()` returns its value (sent back through a pipe)
and the seconds it took. Results are those of the same call made in the parent: the child holds a
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

_PR_SET_PDEATHSIG = 1  # linux/prctl.h
#: Catalogues from this size send work beside the fit. Below it the work is short and the second
#: core is busy already: the figure drawers import matplotlib while the chain runs (at N = 10⁴ a
#: cross-check beside the sampling slowed the sampling by 0.5 s).
BESIDE_MIN_OBJECTS = 50_000


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


class Beside:
    """`function(*args)` computed in a forked child from now on (or in the parent when asked for).

    Attributes
    ----------
    forked : bool, the call runs in a child
    """

    def __init__(self, function, *args, enabled: bool = True):
        self.function, self.args = function, args
        self._connection, self._pid = None, None
        self.forked = bool(enabled) and can_fork()
        if not self.forked:
            return
        receiver, sender = multiprocessing.Pipe(duplex=False)
        parent = os.getpid()
        pid = os.fork()
        if pid == 0:  # the child: compute, send, leave without running the parent's exit handlers
            receiver.close()
            code = 0
            try:
                die_with_parent(parent)
                signal.signal(signal.SIGTERM, signal.SIG_DFL)  # not the parent's clean-up handler
                start = time.perf_counter()
                value = function(*args)
                sender.send(("ok", value, time.perf_counter() - start))
            except BaseException:  # noqa: BLE001 - the parent computes it again and reports
                code = 1
            finally:
                os._exit(code)
        sender.close()
        self._connection, self._pid = receiver, pid

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

"""Running many independent design evaluations: local processes or a Dask cluster.

Design workflows (sweeps, tolerance runs, Monte Carlo) evaluate the same
function on many inputs.  :func:`map_chunked` splits the inputs into chunks
and runs them

* serially in this process for tiny jobs (or ``jobs=1``),
* on all local cores with :class:`concurrent.futures.ProcessPoolExecutor`
  (``jobs=None`` means every core this process may use), or
* on an existing Dask distributed cluster (``dask="tcp://host:8786"`` or a
  ``distributed.Client``); ``dask[distributed]`` is the optional extra
  ``qwell[dask]`` and is imported only when asked for.

The results come back in input order and do not depend on how the work was
split: every chunk runs the same function on the same inputs, so a local run,
a parallel run and a cluster run give identical numbers.

The function given to :func:`map_chunked` must take a *list* of items and
return a list of results of the same length; it must be picklable (a
module-level function, or a :func:`functools.partial` of one).
"""

from __future__ import annotations

import gc
import math
import multiprocessing
import os
import re
import signal
import socket
import sys
import time
from concurrent.futures import ProcessPoolExecutor, as_completed

from .errors import QwellError, one_line

__all__ = [
    "ClusterError",
    "default_jobs",
    "resolve_jobs",
    "map_chunked",
    "chunk",
    "DASK_TIMEOUT_S",
    "MIN_PARALLEL_ITEMS",
    "Progress",
    "check_dask_address",
]

#: Seconds to wait for a Dask scheduler before giving up.
DASK_TIMEOUT_S = 10.0
#: Below this many items the work runs serially (process start-up costs more).
MIN_PARALLEL_ITEMS = 16
#: Chunks per worker (load balancing and progress granularity).
_CHUNKS_PER_WORKER = 4


class ClusterError(ConnectionError, QwellError):
    """A Dask cluster is unavailable (package missing, address unreachable)."""


def default_jobs() -> int:
    """Number of cores this process may run on (at least 1)."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):
        return max(1, os.cpu_count() or 1)


def resolve_jobs(jobs) -> int:
    """Validate a ``jobs`` setting: None -> all cores; an int >= 1 otherwise.

    Raises
    ------
    QwellError
        For zero, negative or non-integer values.
    """
    if jobs is None:
        return default_jobs()
    if isinstance(jobs, bool) or not isinstance(jobs, int) or jobs < 1:
        raise QwellError(f"jobs = {jobs!r}: expected a whole number >= 1 (or none for all cores)")
    return jobs


def chunk(items: list, n_chunks: int) -> list[list]:
    """Split ``items`` into at most ``n_chunks`` contiguous, nearly equal chunks."""
    items = list(items)
    n_chunks = max(1, min(n_chunks, len(items)))
    size = math.ceil(len(items) / n_chunks) if items else 0
    return [items[i:i + size] for i in range(0, len(items), size)] if items else []


class Progress:
    """A one-line progress bar on stderr, shown only when stderr is a terminal.

    Parameters
    ----------
    total : int
        Number of items.
    label : str
        Short text in front of the bar.
    enabled : bool or None
        Force on/off; None means "stderr is a terminal".
    """

    def __init__(self, total: int, label: str = "", enabled: bool | None = None):
        self.total = max(int(total), 0)
        self.done = 0
        self.label = label
        if enabled is None:
            try:
                enabled = sys.stderr.isatty()
            except (AttributeError, ValueError):
                enabled = False
        self.enabled = bool(enabled) and self.total > 0
        self._t0 = time.perf_counter()
        self._last = 0.0

    def update(self, n: int) -> None:
        self.done += n
        if not self.enabled:
            return
        now = time.perf_counter()
        if self.done < self.total and now - self._last < 0.1:
            return
        self._last = now
        frac = self.done / self.total
        width = 30
        bar = "#" * int(round(frac * width))
        sys.stderr.write(f"\r{self.label} [{bar:<{width}}] {self.done}/{self.total} "
                         f"{now - self._t0:5.1f} s")
        sys.stderr.flush()

    def close(self) -> None:
        if self.enabled:
            sys.stderr.write("\n")
            sys.stderr.flush()


def _mp_context():
    # fork is cheap (the parent's imports and caches are inherited); use it where
    # the platform has it, else the default start method.
    if sys.platform != "win32" and "fork" in multiprocessing.get_all_start_methods():
        return multiprocessing.get_context("fork")
    return multiprocessing.get_context()


_DASK_ADDRESS = re.compile(r"^(?:(?:tcp|tls|ws|wss|ucx)://)?"
                           r"(?:[A-Za-z0-9](?:[A-Za-z0-9.-]{0,252})|\[[0-9A-Fa-f:.]+\])"
                           r":(\d{1,5})$")


def check_dask_address(address: str) -> str:
    """Check the form of a Dask scheduler address (``[tcp://]host:port``) before any
    connection is tried.

    Raises
    ------
    ClusterError
        Not of the form ``tcp://host:port`` (or tls, ws, wss, ucx), or a port
        outside 1-65535.
    """
    text = address.strip() if isinstance(address, str) else ""
    m = _DASK_ADDRESS.match(text)
    if not m or not 1 <= int(m.group(1)) <= 65535:
        raise ClusterError(f"--dask {one_line(repr(address))[:60]}: not a scheduler address; "
                           "expected tcp://HOST:PORT, e.g. tcp://127.0.0.1:8786")
    return text


def _dask_client(dask, timeout_s: float):
    """(client, owned) for an address string or an existing Client."""
    if not isinstance(dask, str):
        if hasattr(dask, "map") and hasattr(dask, "gather"):
            return dask, False
        raise ClusterError(f"--dask {dask!r}: expected a scheduler address such as "
                           "tcp://127.0.0.1:8786")
    address = dask.strip()
    if not address:
        raise ClusterError("--dask: empty address; expected e.g. tcp://127.0.0.1:8786")
    check_dask_address(address)
    # distributed is an optional extra (qwell[dask]) and heavy: imported only when asked for
    try:
        from distributed import Client
    except ImportError:
        raise ClusterError("--dask needs the optional package 'distributed' "
                           "(install it with: pip install 'qwell[dask]')") from None
    _probe_scheduler(address, timeout_s)
    failure = None
    previous_hook = sys.unraisablehook
    # a Client that failed to connect complains from its __del__ (a traceback on stderr);
    # it is collected here, with that hook silenced, so the error stays one line
    sys.unraisablehook = _ignore_unraisable
    try:
        try:
            client = Client(address, timeout=timeout_s, set_as_default=False)
        except Exception as exc:  # OSError, TimeoutError, ValueError (bad address), ...
            why = " ".join(str(exc).split()) or type(exc).__name__
            if len(why) > 120:
                why = why[:117] + "..."
            failure = f"{type(exc).__name__}: {why}"
        if failure is not None:
            gc.collect()
    finally:
        sys.unraisablehook = previous_hook
    if failure is not None:
        raise ClusterError(f"cannot reach the Dask scheduler at {address!r} within "
                           f"{timeout_s:g} s ({one_line(failure)})")
    return client, True


def _ignore_unraisable(unraisable) -> None:
    return None


def _probe_scheduler(address: str, timeout_s: float) -> None:
    """Open (and close) a plain TCP connection to a tcp:// scheduler first: an unreachable
    address fails here within the timeout, with one line, before any Dask machinery starts."""
    m = re.match(r"^(?:tcp://)?(\[[0-9A-Fa-f:.]+\]|[^:/\[\]]+):(\d+)$", address)
    if not m:
        return  # tls, ws, ucx: left to distributed
    host, port = m.group(1).strip("[]"), int(m.group(2))
    try:
        with socket.create_connection((host, port), timeout=timeout_s):
            pass
    except OSError as exc:
        why = one_line(str(exc.strerror or exc or type(exc).__name__))
        raise ClusterError(f"cannot reach the Dask scheduler at {address!r} within "
                           f"{timeout_s:g} s ({why})") from None


def _worker_init() -> None:
    """Workers leave Ctrl-C and SIGTERM to the parent, which stops them (see _stop_pool)."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    signal.signal(signal.SIGTERM, signal.SIG_DFL)


def _stop_pool(pool) -> None:
    """Cancel pending chunks and terminate the worker processes at once."""
    procs = list((getattr(pool, "_processes", None) or {}).values())
    pool.shutdown(wait=False, cancel_futures=True)
    for proc in procs:
        try:
            proc.terminate()
        except (OSError, AttributeError, ValueError):
            pass
    deadline = time.monotonic() + 1.0
    for proc in procs:
        try:
            proc.join(max(0.0, deadline - time.monotonic()))
            if proc.is_alive():
                proc.kill()
        except (OSError, AttributeError, ValueError, AssertionError):
            pass


def map_chunked(fn, items, *, jobs=None, dask=None, dask_timeout_s: float = DASK_TIMEOUT_S,
                progress: bool | None = None, label: str = "", min_parallel: int = MIN_PARALLEL_ITEMS,
                chunks_per_worker: int = _CHUNKS_PER_WORKER) -> list:
    """Apply ``fn`` to chunks of ``items`` and return the flat list of results, in order.

    Parameters
    ----------
    fn : callable
        ``fn(list_of_items) -> list_of_results`` (same length), picklable.
    items : sequence
    jobs : int or None
        Local worker processes; None = all cores, 1 = serial.
    dask : str, distributed.Client or None
        Run on this Dask cluster instead of local processes.
    dask_timeout_s : float
        How long to wait for the scheduler [s].
    progress : bool or None
        Progress bar on stderr; None = only when stderr is a terminal.
    label : str
        Text in front of the progress bar.
    min_parallel : int
        Fewer items than this run serially (local mode only).

    Raises
    ------
    ClusterError
        ``distributed`` missing or the scheduler unreachable within the timeout.
    QwellError
        Whatever the evaluated function raises on purpose.
    """
    items = list(items)
    if not items:
        return []
    bar = Progress(len(items), label, progress)
    try:
        if dask is not None:
            client, owned = _dask_client(dask, dask_timeout_s)
            try:
                try:
                    n_workers = max(1, len(client.scheduler_info().get("workers", {})))
                except Exception:
                    n_workers = 1
                parts = chunk(items, n_workers * chunks_per_worker)
                futures = client.map(fn, parts, pure=False)
                results: list = [None] * len(parts)
                for i, fut in enumerate(futures):  # in order; the cluster works on all of them
                    results[i] = client.gather(fut)
                    bar.update(len(parts[i]))
            finally:
                if owned:
                    client.close()
            return [r for part in results for r in part]

        n_jobs = resolve_jobs(jobs)
        if n_jobs == 1 or len(items) < min_parallel:
            out = []
            for part in chunk(items, max(1, min(len(items), 20))):
                out.extend(fn(part))
                bar.update(len(part))
            return out
        parts = chunk(items, n_jobs * chunks_per_worker)
        results = [None] * len(parts)
        pool = ProcessPoolExecutor(max_workers=min(n_jobs, len(parts)), mp_context=_mp_context(),
                                   initializer=_worker_init)
        try:
            futures = {pool.submit(fn, part): i for i, part in enumerate(parts)}
            for fut in as_completed(futures):
                i = futures[fut]
                results[i] = fut.result()
                bar.update(len(parts[i]))
        except BaseException:
            # Ctrl-C, SIGTERM or a failed chunk: stop the workers now instead of waiting
            # for the chunks they are computing
            _stop_pool(pool)
            raise
        pool.shutdown(wait=True)
        return [r for part in results for r in part]
    finally:
        bar.close()

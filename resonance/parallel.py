"""Jobs with results shared between this process and forked workers (edge layer).

:class:`SharedJobs` forks its workers at once; they take jobs from a shared
counter while this process goes on with other work.  When this process calls
:meth:`SharedJobs.finish` it takes the jobs that are left itself, then collects
the workers' results (pickled once, when a worker has no job left).  A job that
raises, or a worker that dies, only leaves its result out: the caller computes
what is missing itself, so the outcome never depends on the workers, only the
time does.

Fork is used because the jobs are closures over the study objects (nothing but
the results is pickled).  Where fork is not available, or other threads run in
this process (forking a multi-threaded process can deadlock the child), no
worker is started and :meth:`SharedJobs.finish` runs every job here.
"""

from __future__ import annotations

import multiprocessing as mp
import os
import pickle
import threading
from typing import Callable, Sequence

__all__ = ["SharedJobs", "default_workers", "can_fork", "claimed", "MAX_WORKERS"]

#: processes used at most by default (this one included)
MAX_WORKERS = 2


def default_workers() -> int:
    """Processes to use: the CPUs this process may run on, at most :data:`MAX_WORKERS` [unitless]."""
    try:
        n = len(os.sched_getaffinity(0))
    except AttributeError:  # pragma: no cover - not on Linux
        n = os.cpu_count() or 1
    return max(1, min(MAX_WORKERS, n))


def can_fork() -> bool:
    """True where a worker may be forked safely (fork exists and no other Python thread runs)."""
    return "fork" in mp.get_all_start_methods() and threading.active_count() == 1


def claimed(n_jobs: int, counter):
    """Job indices taken one at a time from a shared counter until ``n_jobs`` are gone."""
    while True:
        with counter.get_lock():
            i = counter.value
            counter.value = i + 1
        if i >= n_jobs:
            return
        yield i


def _take(jobs: Sequence[Callable[[], object]], counter, results: dict) -> None:
    """Run jobs from the shared counter until none is left; results by job index."""
    for i in claimed(len(jobs), counter):
        try:
            results[i] = jobs[i]()
        except Exception:  # noqa: BLE001 - left out; the caller recomputes it and sees the error itself
            pass


def _worker(jobs, counter, conn) -> None:
    results: dict = {}
    try:
        _take(jobs, counter, results)
        payload = pickle.dumps(results, protocol=pickle.HIGHEST_PROTOCOL)
    except BaseException:  # noqa: BLE001 - nothing usable: the parent recomputes
        payload = pickle.dumps({}, protocol=pickle.HIGHEST_PROTOCOL)
    try:
        conn.send_bytes(payload)
        conn.close()
    finally:
        os._exit(0)


class SharedJobs:
    """Independent jobs run ahead by forked workers; this process takes the rest.

    Parameters
    ----------
    jobs : sequence of callables
        Jobs without arguments; each returns a picklable result.
    workers : int, optional
        Processes, this one included (:func:`default_workers` when None; 1: no
        worker, :meth:`finish` runs every job here) [unitless].

    Notes
    -----
    Jobs are taken in order, so the first ones start at once in a worker.
    """

    def __init__(self, jobs: Sequence[Callable[[], object]], workers: int | None = None):
        self.jobs = list(jobs)
        self._procs: list = []
        self._conns: list = []
        n_child = min((workers or default_workers()) - 1, len(self.jobs))
        if n_child >= 1 and can_fork():
            ctx = mp.get_context("fork")
            self._counter = ctx.Value("l", 0)
            try:
                for _ in range(n_child):
                    recv, send = ctx.Pipe(duplex=False)
                    p = ctx.Process(target=_worker, args=(self.jobs, self._counter, send), daemon=True)
                    p.start()
                    send.close()
                    self._procs.append(p)
                    self._conns.append(recv)
            except OSError:  # no process could be started: everything runs here
                self._stop()
        if not self._procs:
            self._counter = _LocalCounter()

    @property
    def forked(self) -> int:
        """Worker processes started [unitless]."""
        return len(self._procs)

    def finish(self, timeout_s: float = 900.0) -> dict:
        """Take the jobs left here, then collect the workers' results.

        Parameters
        ----------
        timeout_s : float
            Longest wait for a worker after this process has run out of jobs [s];
            a worker that has not reported by then is stopped and its results are
            left out.

        Returns
        -------
        dict
            Job index -> result, for every job that ran to the end (here or in a
            worker).
        """
        results: dict = {}
        try:
            _take(self.jobs, self._counter, results)
            for conn in self._conns:
                try:
                    if conn.poll(timeout_s):
                        results.update(pickle.loads(conn.recv_bytes()))
                except (EOFError, OSError, pickle.UnpicklingError):
                    pass
        finally:
            self._stop()
        return results

    def close(self) -> None:
        """Stop every worker now (their results are dropped); safe to call more than once."""
        for p in self._procs:
            if p.is_alive():
                p.terminate()
        self._stop()

    def _stop(self) -> None:
        for p in self._procs:
            if p.is_alive():
                p.join(timeout=5.0)
            if p.is_alive():
                p.terminate()
            if p.pid is not None:
                p.join()
        for c in self._conns:
            c.close()
        self._procs, self._conns = [], []


class _LocalCounter:
    """The counter interface of ``multiprocessing.Value`` for this process alone."""

    def __init__(self):
        self.value = 0
        self._lock = threading.Lock()

    def get_lock(self):
        return self._lock

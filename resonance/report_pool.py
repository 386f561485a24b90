"""Run the report's PDF and its stand-alone figure files side by side in forked processes.

Edge layer.  The PDF is one serial task (one ``PdfPages`` file); the figure files
are many small independent jobs.  :func:`run_side_by_side` runs the serial task in
this process while forked workers take file jobs from a shared counter; when the
serial task is done this process takes jobs too.  Every job builds its own figure
and writes only its own files, so the files do not depend on which process ran
which job, nor on the order.

Fork is used because the jobs are closures over the study objects (nothing is
pickled).  Where fork is not available, or other threads run in this process
(forking a multi-threaded process can deadlock the child), everything runs here,
one after the other.
"""

from __future__ import annotations

import multiprocessing as mp
import os
import traceback
from typing import Callable, Sequence

from .parallel import MAX_WORKERS, can_fork as _can_fork, claimed, default_workers

__all__ = ["run_side_by_side", "default_workers", "MAX_WORKERS"]


def _take(jobs: Sequence[Callable[[], None]], counter) -> None:
    """Run jobs from the shared counter until none is left."""
    for i in claimed(len(jobs), counter):
        jobs[i]()


def _worker(jobs, counter, conn) -> None:
    try:
        _take(jobs, counter)
    except BaseException:  # noqa: BLE001 - reported to the parent, which raises
        conn.send(traceback.format_exc())
        conn.close()
        os._exit(1)
    conn.send(None)
    conn.close()


def run_side_by_side(serial: Callable[[], None], jobs: Sequence[Callable[[], None]],
                     workers: int | None = None) -> None:
    """Run ``serial()`` here and ``jobs`` shared between ``workers - 1`` forked processes and this one.

    Parameters
    ----------
    serial : callable
        Task run in this process first (the PDF).
    jobs : sequence of callables
        Independent tasks without arguments or results (they write files).
    workers : int, optional
        Processes, this one included (:func:`default_workers` when None; 1: no
        fork, the jobs run here after ``serial``) [unitless].

    Raises
    ------
    RuntimeError
        A job failed in a worker (the message carries the worker's traceback)
        or a worker ended without reporting.

    Notes
    -----
    On any exception here the workers are terminated and waited for before the
    exception propagates, so no process writes after this function returns.
    """
    n_child = min((workers or default_workers()) - 1, len(jobs))
    if n_child < 1 or not _can_fork():
        serial()
        for job in jobs:
            job()
        return
    ctx = mp.get_context("fork")
    counter = ctx.Value("l", 0)
    recv, send = ctx.Pipe(duplex=False)
    procs = [ctx.Process(target=_worker, args=(jobs, counter, send), daemon=True) for _ in range(n_child)]
    try:
        for p in procs:
            p.start()
        send.close()  # the workers hold their own copies; EOF once they have all ended
        serial()
        _take(jobs, counter)
        errors = []
        for _ in procs:
            try:
                msg = recv.recv()
            except EOFError:
                errors.append("a figure worker ended without reporting")
                break
            if msg is not None:
                errors.append(msg)
        for p in procs:
            p.join()
        bad = [p.exitcode for p in procs if p.exitcode != 0]
        if errors or bad:
            raise RuntimeError("writing the report figures failed in a worker process"
                               + (f" (exit codes {bad})" if bad else "") + ":\n" + "\n".join(errors))
    finally:
        for p in procs:
            if p.is_alive():
                p.terminate()
            if p.pid is not None:
                p.join()
        recv.close()
        if not send.closed:
            send.close()

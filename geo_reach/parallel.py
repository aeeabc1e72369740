"""Scale-out: run independent chunks of work in-process or on a dask.distributed cluster.

One small interface for every fan-out (all-link criticality now; scenarios,
siting and many-source mean paths later)::

    from geo_reach.parallel import executor

    with executor(workers=None, scheduler=None, timeout_s=30) as ex:
        results = ex.map(func, chunks, shared={"ptr": ptr, "cost": cost})

``func(chunk, shared)`` is called once per chunk; ``results`` come back in
chunk order.

* Neither ``workers`` nor ``scheduler``: every chunk runs here, one after the
  other (no dask needed at run time).
* ``workers=N``: a local cluster of N worker processes (one thread each) is
  started for the ``with`` block and shut down after it.
* ``scheduler="tcp://host:8786"``: join a running cluster (started with
  ``dask scheduler`` and ``dask worker tcp://host:8786`` on each machine).

``shared`` (a dict of numpy arrays: the network and baseline arrays) is
scattered to the workers once, before the chunks are submitted; every task
refers to that one copy, never ships its own.  A worker that dies during a
run loses nothing: the scheduler runs its tasks again elsewhere (dask's own
bookkeeping), and the results are the same - ``func`` must be a pure
function of its chunk and ``shared``.  With the same chunks, integers come
back bit for bit and floats to the last bit (the same compiled code runs on
the same inputs); the guarantee given to callers is 1e-9 relative.

Refusals (one line, :class:`ClusterError`, exit status 2 on the command
line): a scheduler that does not answer within ``timeout_s``; a cluster
with no workers within ``timeout_s``; workers without geo-reach (or with
another version of it), naming what to install.
"""

from __future__ import annotations

import contextlib
import logging
from typing import Callable, Sequence

from .errors import OptionError

__all__ = ["executor", "Executor", "InProcess", "DaskExecutor", "ClusterError", "balanced_chunks"]


class ClusterError(OptionError):
    """A cluster cannot be used: no answer, no workers, or workers without geo-reach."""


class Executor:
    """Runs ``func(chunk, shared)`` for each chunk; results in chunk order."""

    #: Worker processes the work spreads over (1 in-process).
    n_workers: int = 1

    def map(self, func: Callable, chunks: Sequence, shared: dict | None = None,
            progress: Callable[[int, int], None] | None = None) -> list:
        """Apply ``func`` to each chunk.

        Parameters
        ----------
        func : callable
            ``func(chunk, shared) -> result``; importable on the workers
            (a module-level function of geo-reach).
        chunks : sequence
        shared : dict, optional
            Read-only data every call needs (sent to each worker once).
        progress : callable, optional
            ``progress(done, total)`` after each chunk finishes.

        Returns
        -------
        list
            One result per chunk, in chunk order.
        """
        raise NotImplementedError


class InProcess(Executor):
    """Every chunk here, in order."""

    def map(self, func, chunks, shared=None, progress=None):
        out = []
        total = len(chunks)
        for i, c in enumerate(chunks):
            out.append(func(c, shared))
            if progress:
                progress(i + 1, total)
        return out


def _make_probe():
    """A function that reports whether geo-reach imports on a worker.

    Made inside a function so it travels by value (a worker without
    geo-reach could not import a module-level function to run it).
    """

    def probe():
        import importlib
        import sys

        try:
            mod = importlib.import_module("geo_reach")
            return {"ok": True, "version": getattr(mod, "__version__", "?"), "python": sys.version.split()[0]}
        except Exception as err:  # noqa: BLE001 - reported to the user, whatever it is
            return {"ok": False, "error": f"{type(err).__name__}: {err}", "python": sys.version.split()[0]}

    return probe


class DaskExecutor(Executor):
    """Chunks as tasks on a dask.distributed cluster (see the module notes).

    Attributes
    ----------
    client : distributed.Client
    cluster : distributed.LocalCluster or None
        The local cluster this executor started (None when joining one).
    """

    def __init__(self, client, cluster=None):
        self.client = client
        self.cluster = cluster

    @property
    def n_workers(self) -> int:
        return max(1, len(self.client.scheduler_info().get("workers", {})))

    def worker_pids(self) -> dict:
        """Process id of each worker, by address."""
        import os

        return self.client.run(os.getpid)

    def map(self, func, chunks, shared=None, progress=None):
        from distributed import as_completed

        client = self.client
        shared_f = client.scatter([shared if shared is not None else {}], broadcast=True, hash=False)[0]
        futures = [client.submit(func, c, shared_f, pure=False) for c in chunks]
        index = {f.key: i for i, f in enumerate(futures)}
        out = [None] * len(futures)
        done = 0
        try:
            for fut, res in as_completed(futures, with_results=True):
                out[index[fut.key]] = res
                done += 1
                if progress:
                    progress(done, len(futures))
        finally:
            for f in futures:
                f.release()
            shared_f.release()
        return out

    def close(self):
        with contextlib.suppress(Exception):
            self.client.close()
        if self.cluster is not None:
            with contextlib.suppress(Exception):
                self.cluster.close()


def _check_workers(client, timeout_s: float, where: str):
    from ._meta import __version__

    try:
        client.wait_for_workers(1, timeout=timeout_s)
    except Exception as err:  # TimeoutError (dask raises its own subclasses)
        raise ClusterError(f"{where}: no worker joined within {timeout_s:g} s; start workers with "
                           "'dask worker ADDRESS' on each machine") from err
    answers = client.run(_make_probe())
    bad = {a: r for a, r in answers.items() if not r.get("ok")}
    if bad:
        addr, r = next(iter(bad.items()))
        raise ClusterError(f"{where}: {len(bad)} of {len(answers)} workers cannot import geo-reach (worker {addr}: "
                           f"{r.get('error')}); install geo-reach {__version__} on every worker machine "
                           f"(pip install geo-reach=={__version__}, or 'pip install .' from the same checkout) "
                           "into the Python that runs 'dask worker'")
    other = {a: r for a, r in answers.items() if r.get("version") != __version__}
    if other:
        addr, r = next(iter(other.items()))
        raise ClusterError(f"{where}: worker {addr} runs geo-reach {r.get('version')}, this machine {__version__}; "
                           f"install geo-reach {__version__} on every worker machine")


@contextlib.contextmanager
def executor(workers: int | None = None, scheduler: str | None = None, timeout_s: float = 30.0):
    """The executor for a run: in-process, a local cluster, or a running cluster.

    Parameters
    ----------
    workers : int, optional
        Start a local cluster of this many worker processes (one thread each).
    scheduler : str, optional
        Address of a running scheduler, e.g. ``tcp://host:8786``.
    timeout_s : float, default 30
        How long to wait for the scheduler to answer and a worker to join.

    Yields
    ------
    Executor

    Raises
    ------
    OptionError
        Both ``workers`` and ``scheduler`` given, or ``workers`` < 1.
    ClusterError
        See the module notes.
    """
    if workers is not None and scheduler is not None:
        raise OptionError("give either a number of local workers or a scheduler address, not both")
    if workers is not None and (int(workers) != workers or workers < 1):
        raise OptionError(f"workers {workers}: give a whole number of worker processes, 1 or more")
    if not (timeout_s > 0):
        raise OptionError(f"timeout {timeout_s}: give a positive number of seconds")
    if workers is None and scheduler is None:
        yield InProcess()
        return
    try:
        from distributed import Client, LocalCluster
    except ImportError as err:  # pragma: no cover - distributed is a dependency
        raise ClusterError("dask.distributed is not installed; install geo-reach with its dependencies "
                           "(pip install geo-reach)") from err
    for name in ("distributed", "distributed.core", "distributed.comm", "distributed.worker",
                 "distributed.scheduler", "distributed.nanny"):
        logging.getLogger(name).setLevel(logging.ERROR)
    ex = None
    try:
        if workers is not None:
            cluster = LocalCluster(n_workers=int(workers), threads_per_worker=1, processes=True,
                                   dashboard_address=None, silence_logs=logging.ERROR)
            client = Client(cluster, timeout=f"{timeout_s}s")
            ex = DaskExecutor(client, cluster)
            _check_workers(client, timeout_s, f"local cluster of {int(workers)} workers")
        else:
            try:
                client = Client(scheduler, timeout=f"{timeout_s}s")
            except (OSError, TimeoutError, ValueError) as err:
                raise ClusterError(f"scheduler {scheduler}: no answer within {timeout_s:g} s ({type(err).__name__}); "
                                   "check the address and that 'dask scheduler' runs there") from err
            ex = DaskExecutor(client, None)
            _check_workers(client, timeout_s, f"scheduler {scheduler}")
        yield ex
    finally:
        if ex is not None:
            ex.close()


def balanced_chunks(items, weights, n_chunks: int) -> list:
    """Split ``items`` (in order) into at most ``n_chunks`` runs of about equal total ``weight``.

    >>> [c.tolist() for c in balanced_chunks([10, 11, 12, 13], [1, 1, 1, 3], 2)]
    [[10, 11, 12], [13]]
    """
    import numpy as np

    items = np.asarray(items)
    if len(items) == 0:
        return []
    w = np.asarray(weights, dtype=np.float64)
    n_chunks = max(1, min(int(n_chunks), len(items)))
    cum = np.cumsum(w)
    total = cum[-1]
    cuts = np.searchsorted(cum, total * np.arange(1, n_chunks) / n_chunks, side="left") + 1
    cuts = np.unique(np.clip(cuts, 1, len(items) - 1)) if len(items) > 1 else np.zeros(0, np.int64)
    return [c for c in np.split(items, cuts) if len(c)]


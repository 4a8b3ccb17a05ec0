"""Where the record-scaling work runs: in this process, or on a Dask cluster.

The stages whose cost grows with the number of records (spatial assignment of modern
occurrences, occupancy binning over age draws, the parametric bootstrap and the
hindcast bootstrap) cut their work into chunks that depend only on the data and the
stage options, never on the engine, and give every chunk that draws random numbers its
own child ``numpy.random.Generator`` spawned from the stage's generator. An engine only
decides where the chunks run, so both engines give identical numbers for the same seed.

``get_engine('local')`` runs the chunks one after another in this process (the
default). ``get_engine('dask')`` starts a local Dask cluster (two worker processes,
one thread each, no dashboard); ``get_engine('dask', scheduler='tcp://host:8786')``
connects to a running cluster instead. Dask is optional: ``pip install "analog[dask]"``.
"""
from __future__ import annotations

from abc import ABC, abstractmethod
from typing import Any, Callable, Sequence

from .errors import AnalogError

__all__ = ["Engine", "LocalEngine", "DaskEngine", "get_engine", "engine_scope", "split_counts", "ENGINE_NAMES"]

ENGINE_NAMES = ("local", "dask")
_INSTALL_HINT = 'install the optional Dask libraries with: pip install "analog[dask]"'


class Engine(ABC):
    """Runs independent chunks of work and returns their results in order.

    Subclasses implement :meth:`map`. An engine is a context manager; leaving the
    block releases what the engine started (a local cluster), never a cluster it
    merely connected to.
    """

    name = "engine"

    @abstractmethod
    def map(self, fn: Callable, chunks: Sequence, *, shared: Any = None,
            progress: Callable[[int, int], None] | None = None) -> list:
        """``[fn(chunk, shared) for chunk in chunks]``, wherever the engine runs them.

        Parameters
        ----------
        fn : callable
            A module-level function ``fn(chunk, shared) -> result`` (it must be picklable
            for a cluster). It must not depend on anything but its arguments.
        chunks : sequence
            One item per unit of work.
        shared : object, optional
            Read-only data every chunk needs (sent to each worker once).
        progress : callable, optional
            ``progress(done, total)`` after each finished chunk.

        Returns
        -------
        list
            Results in the order of ``chunks``.
        """

    def describe(self) -> str:
        """One line saying where the work runs."""
        return self.name

    def close(self) -> None:
        """Release what this engine started."""

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()
        return False

    def __repr__(self) -> str:
        return f"<{type(self).__name__}: {self.describe()}>"


class LocalEngine(Engine):
    """Every chunk in this process, one after another."""

    name = "local"

    def map(self, fn, chunks, *, shared=None, progress=None) -> list:
        chunks = list(chunks)
        out = []
        for i, chunk in enumerate(chunks):
            out.append(fn(chunk, shared))
            if progress is not None:
                progress(i + 1, len(chunks))
        return out

    def describe(self) -> str:
        return "local (in this process)"


class DaskEngine(Engine):
    """Chunks submitted to a Dask ``distributed`` cluster.

    Parameters
    ----------
    scheduler : str, optional
        Address of a running scheduler (``tcp://host:8786``). Without it a
        ``LocalCluster`` is started on this machine and closed with the engine.
    n_workers : int, default=2
        Workers of the local cluster (ignored with ``scheduler``).
    processes : bool, default=True
        Local cluster workers as processes (True) or threads of this process.
    client : distributed.Client, optional
        Use this client as it is (the caller keeps ownership).

    Notes
    -----
    Shared data are scattered to every worker once per :meth:`map` call
    (``Client.scatter(..., broadcast=True)``), the chunks are scattered, and the
    function is mapped over them with ``Client.map``; results are gathered in
    order. Workers must run the same versions of analog, numpy, pandas and
    shapely as this process for results to match the local engine bit for bit.
    """

    name = "dask"

    def __init__(self, scheduler: str | None = None, *, n_workers: int = 2, processes: bool = True,
                 client=None):
        distributed = _import_distributed()
        self._cluster = None
        self._own_client = client is None
        self.scheduler = scheduler
        if client is not None:
            self.client = client
            return
        if scheduler:
            try:
                self.client = distributed.Client(scheduler, timeout="20s", set_as_default=False)
            except (OSError, TimeoutError) as exc:
                raise AnalogError(f"could not reach the Dask scheduler at {scheduler!r} ({exc}); check the "
                                  "address (e.g. tcp://host:8786) and that the scheduler is running") from exc
            return
        self._cluster = distributed.LocalCluster(n_workers=n_workers, threads_per_worker=1, processes=processes,
                                                 dashboard_address=None, silence_logs=40,
                                                 # the scheduler's small health endpoint: any free local port
                                                 scheduler_kwargs={"dashboard_address": "127.0.0.1:0"})
        self.client = distributed.Client(self._cluster, set_as_default=False)

    def map(self, fn, chunks, *, shared=None, progress=None) -> list:
        from distributed import as_completed

        chunks = list(chunks)
        if not chunks:
            return []
        # wrapped in a list so a tuple or list is sent as one object, not scattered item by item
        shared_ref = (self.client.scatter([shared], broadcast=True, hash=False)[0]
                      if shared is not None else None)
        # chunks are sent to the workers as data, not inside the task graph
        chunk_refs = self.client.scatter(chunks, hash=False)
        futures = self.client.map(fn, chunk_refs, [shared_ref] * len(chunks), pure=False)
        try:
            done = 0
            for _ in as_completed(futures, loop=self.client.loop):
                done += 1
                if progress is not None:
                    progress(done, len(chunks))
            return self.client.gather(futures)
        finally:
            for f in futures + chunk_refs:
                f.release()
            if shared_ref is not None:
                shared_ref.release()

    def describe(self) -> str:
        if self._cluster is not None:
            return f"dask (local cluster, {len(self._cluster.workers)} workers)"
        return f"dask (scheduler {self.scheduler or self.client.scheduler.address})"

    def close(self) -> None:
        if self._own_client and getattr(self, "client", None) is not None:
            self.client.close()
        if self._cluster is not None:
            self._cluster.close()
            self._cluster = None


def _import_distributed():
    try:
        import dask  # noqa: F401
        import distributed
    except ImportError as exc:
        raise AnalogError(f"engine 'dask' needs Dask, which is not installed; {_INSTALL_HINT}") from exc
    return distributed


def get_engine(name: str | Engine | None = "local", scheduler: str | None = None, **options) -> Engine:
    """An engine by name.

    Parameters
    ----------
    name : {'local', 'dask'} or Engine, default='local'
        An :class:`Engine` is returned as it is; ``None`` means 'local'.
    scheduler : str, optional
        Dask scheduler address; only with ``name='dask'``. Without it a local cluster
        (2 worker processes, no dashboard) is started.
    **options
        Passed to :class:`DaskEngine` (``n_workers``, ``processes``, ``client``).

    Returns
    -------
    Engine
        Close it (or use it in a ``with`` block) when done.
    """
    if isinstance(name, Engine):
        return name
    name = "local" if name is None else name
    if name == "local":
        if scheduler:
            raise AnalogError(f"a scheduler address ({scheduler!r}) was given with engine 'local'; "
                              "use engine 'dask' to run on that cluster")
        return LocalEngine()
    if name == "dask":
        return DaskEngine(scheduler, **options)
    raise AnalogError(f"`engine` was {name!r} but is expected to be in {{'local', 'dask'}}")


class engine_scope:
    """``with engine_scope(engine) as eng``: an engine for one stage call.

    ``engine`` may be ``None``, a name or an :class:`Engine`; an engine created here
    from a name is closed on exit, one passed in is left open for its owner.
    """

    def __init__(self, engine: str | Engine | None):
        self._given = engine
        self._owned = None

    def __enter__(self) -> Engine:
        if isinstance(self._given, Engine):
            return self._given
        self._owned = get_engine(self._given)
        return self._owned

    def __exit__(self, *exc):
        if self._owned is not None:
            self._owned.close()
        return False


def split_counts(total: int, size: int) -> list[tuple[int, int]]:
    """``(start, stop)`` pairs cutting ``range(total)`` into pieces of at most ``size``."""
    size = max(1, int(size))
    return [(s, min(s + size, total)) for s in range(0, int(total), size)]

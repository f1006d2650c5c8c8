"""Analyse every star of a ledger: all local cores, or a Dask cluster.

The parent process is the only one that touches the ledger.  It reads the
stars that need analysis in chunks, sends each chunk's light curves (arrays,
never the ledger) to a worker, and writes each chunk's results as it comes
back, one transaction per write.  A bounded number of chunks is in flight,
so memory does not grow with the size of the ledger.  A chunk whose worker is
lost (killed, out of memory, a crash in compiled code) is retried star by
star, each alone, so that only the star that takes its worker down again is
recorded as failed.  A run that is stopped,
interrupted or killed keeps every result already written; the next run asks
the ledger what is still missing (or stale) and does only that.

The worker function :func:`analyse_chunk` is pure (light curves and settings
in, plain dicts out) and runs unchanged on a local process pool and on Dask
workers.  Inside a chunk, stars observed at the same epochs get their
periodograms from one batched call (:func:`shared_epoch_groups`,
:func:`core.periodogram.shared_epoch_periodograms`); missing points carry
zero weight there, so the result equals the star-by-star one.
"""

from __future__ import annotations

import dataclasses
import importlib
import math
import multiprocessing
import os
import signal
import threading
import time
import traceback
from collections.abc import Callable, Iterable, Iterator, Sequence
from concurrent.futures import FIRST_COMPLETED, Future, ProcessPoolExecutor
from concurrent.futures import wait as wait_futures
from concurrent.futures.process import BrokenProcessPool
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from .errors import PhasewiseError, plain_reason
from .threads import limit_blas_threads

__all__ = [
    "DASK_WORKER_CONFIG",
    "DEFAULT_ANALYSE",
    "ONLY_CHOICES",
    "Progress",
    "BatchSummary",
    "StarOutcome",
    "EpochGroup",
    "analyse_ledger",
    "analyse_chunk",
    "shared_epoch_groups",
    "default_workers",
    "load_settings",
]

#: The analysis a batch runs unless told otherwise ("module:function").
DEFAULT_ANALYSE = "phasewise.core.analysis:analyse"

#: Which stars a run takes (see ``Ledger.stars_needing_analysis``).
ONLY_CHOICES = ("unanalysed", "stale", "all")

#: Failure messages kept in a summary (all failures are counted and stored).
KEPT_FAILURES = 200

#: Methods whose periodograms can be batched over shared epochs.
BATCHED_METHODS = ("gls", "mhgls")

#: Seconds to wait for a Dask scheduler to answer.
SCHEDULER_TIMEOUT = 10.0

#: Thread pools of the numerical libraries, one thread per worker process: a
#: pool of processes each running a full BLAS/OpenMP pool oversubscribes the
#: cores (measured here: five times slower per star).  Values the user set win.
WORKER_THREAD_VARIABLES = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS")

#: A shared-epoch group may hold at most this many epochs per epoch of its
#: largest member; further stars start a group of their own.
MAX_EPOCH_GROWTH = 1.5


def load_settings(path):
    """:class:`~core.analysis.AnalysisSettings` from a TOML file (see core.settings_file)."""
    from .settings_file import load_settings as _load

    return _load(path)


# ------------------------------------------------------------------ records
@dataclass(frozen=True)
class Progress:
    """Where a run stands; given to the ``progress`` callback.

    Attributes
    ----------
    done : int
        Stars finished in this run (analysed or failed).
    failed : int
        Of those, stars whose analysis failed.
    skipped : int
        Stars of the ledger left alone (already analysed with these settings).
    total : int
        Stars this run set out to analyse.
    rate : float
        Stars per second so far.
    eta : float or None
        Seconds left at that rate (None before the first result).
    elapsed : float
        Seconds since the run started.
    """

    done: int
    failed: int
    skipped: int
    total: int
    rate: float
    eta: float | None
    elapsed: float = 0.0

    @property
    def fraction(self) -> float:
        return 1.0 if self.total == 0 else self.done / self.total


@dataclass(frozen=True)
class BatchSummary:
    """What a run did.

    ``analysed`` counts stars with a stored result, ``failed`` stars recorded
    as failed (``failures`` keeps the first messages), ``skipped`` stars left
    alone, ``remaining`` stars not reached because the run was stopped;
    ``stale_left`` stars whose results are stale but were not asked for
    (``only="unanalysed"``).
    """

    ledger: str
    settings_hash: str
    engine: str
    workers: int
    total: int
    analysed: int
    failed: int
    skipped: int
    remaining: int
    elapsed: float
    stopped: bool = False
    interrupted: bool = False
    failures: tuple[tuple[str, str], ...] = ()
    shared_epoch_stars: int = 0
    stale_left: int = 0

    @property
    def rate(self) -> float:
        done = self.analysed + self.failed
        return done / self.elapsed if self.elapsed > 0 else 0.0

    def to_dict(self) -> dict[str, Any]:
        return {
            "ledger": self.ledger,
            "settings_hash": self.settings_hash,
            "engine": self.engine,
            "workers": self.workers,
            "total": self.total,
            "analysed": self.analysed,
            "failed": self.failed,
            "skipped": self.skipped,
            "remaining": self.remaining,
            "elapsed": self.elapsed,
            "rate": self.rate,
            "stopped": self.stopped,
            "interrupted": self.interrupted,
            "failures": [{"star_id": s, "message": m} for s, m in self.failures],
            "shared_epoch_stars": self.shared_epoch_stars,
            "stale_left": self.stale_left,
        }


@dataclass(frozen=True)
class StarOutcome:
    """One star's outcome as a worker returns it: a result dict or an error message."""

    star_id: str
    result: dict[str, Any] | None = None
    error: str | None = None  # our own sentence for the person
    shared_epochs: bool = False
    detail: str | None = None  # the raw exception text, kept for debugging only

    @property
    def failed(self) -> bool:
        return self.error is not None


@dataclass(frozen=True, eq=False)
class EpochGroup:
    """Stars whose good points fall on one common set of epochs.

    ``mag`` and ``mag_err`` are (n_stars, n_epochs) with NaN where a star has
    no good point; ``frequency`` is the grid every member would get alone.
    """

    members: tuple[int, ...]
    time: np.ndarray
    mag: np.ndarray
    mag_err: np.ndarray
    frequency: np.ndarray


# ------------------------------------------------------------------ worker side
def resolve_analyse(name: str | Callable) -> Callable:
    """The analysis function named ``"module:function"`` (or a callable, as it is)."""
    if callable(name):
        return name
    module_name, _, attr = str(name).partition(":")
    if not module_name or not attr:
        raise PhasewiseError(f"expected 'module:function', got {name!r}", field="analyse_fn")
    try:
        target: Any = importlib.import_module(module_name)
        for part in attr.split("."):
            target = getattr(target, part)
    except (ImportError, AttributeError) as exc:
        raise PhasewiseError(f"cannot import {name!r}: {exc}", field="analyse_fn") from exc
    if not callable(target):
        raise PhasewiseError(f"{name!r} is not a function", field="analyse_fn")
    return target


def _analyse_name(fn: str | Callable | None) -> str:
    """A name workers can import the function by (process pools and Dask send names)."""
    if fn is None:
        return DEFAULT_ANALYSE
    if isinstance(fn, str):
        resolve_analyse(fn)
        return fn
    name = f"{getattr(fn, '__module__', '')}:{getattr(fn, '__qualname__', '')}"
    if "<" in name or resolve_analyse(name) is not fn:
        raise PhasewiseError(
            f"{fn!r} cannot be imported by name; pass a module-level function",
            field="analyse_fn",
        )
    return name


def _error_text(exc: BaseException) -> str:
    """``Type: message (at file:line in function)``: enough to find a bug later."""
    text = f"{type(exc).__name__}: {exc}"
    frames = traceback.extract_tb(exc.__traceback__)
    if frames:
        last = frames[-1]
        text += f" (at {Path(last.filename).name}:{last.lineno} in {last.name})"
    return text


def _outcome(star_id: str, result: Any, shared: bool) -> StarOutcome:
    data = result.to_dict() if hasattr(result, "to_dict") else dict(result)
    if data.get("status") == "failed":
        reason = data.get("reason") or "no reason given"
        return StarOutcome(star_id, error=f"analysis failed: {reason}", shared_epochs=shared)
    return StarOutcome(star_id, result=data, shared_epochs=shared)


def analyse_chunk(
    lightcurves: Sequence,
    settings=None,
    analyse_fn: str | Callable = DEFAULT_ANALYSE,
    shared_epochs: bool = False,
) -> list[StarOutcome]:
    """Analyse a chunk of stars; the pure worker function of every engine.

    Parameters
    ----------
    lightcurves : sequence of LightCurve
    settings : AnalysisSettings, optional
    analyse_fn : str or callable
        ``"module:function"`` with the signature of
        :func:`core.analysis.analyse` (``fn(lc, settings, periodogram=None)``).
    shared_epochs : bool
        Batch the periodograms of stars that share their epochs.  Off by
        default: exact, but measured no faster than star by star once
        transform plans are reused (0.98x whole analysis, 0.97x periodogram
        stage, ``benchmarks/bench_batch.py``) and it raises worker memory.

    Returns
    -------
    list of StarOutcome
        In the order of ``lightcurves``.  Never raises for one star: an
        exception becomes that star's error message.
    """
    from .analysis import AnalysisSettings

    settings = AnalysisSettings() if settings is None else settings
    fn = resolve_analyse(analyse_fn)
    lightcurves = list(lightcurves)
    periodograms: dict[int, Any] = {}
    if shared_epochs and len(lightcurves) > 1:
        periodograms = _shared_periodograms(lightcurves, settings)
    outcomes = []
    for index, lc in enumerate(lightcurves):
        pgram = periodograms.get(index)
        try:
            if pgram is None:
                result = fn(lc, settings)
            else:
                result = fn(lc, settings, periodogram=pgram)
            outcomes.append(_outcome(lc.star_id, result, pgram is not None))
        except Exception as exc:  # noqa: BLE001 - one star's bug must not stop the run
            outcomes.append(
                StarOutcome(lc.star_id, error=plain_reason(exc), detail=_error_text(exc))
            )
    return outcomes


def _shared_periodograms(lightcurves: Sequence, settings) -> dict[int, Any]:
    from .periodogram import shared_epoch_periodograms

    try:
        groups = shared_epoch_groups(lightcurves, settings)
    except Exception:  # noqa: BLE001 - batching is an optimisation: then star by star
        return {}
    out: dict[int, Any] = {}
    for group in groups:
        try:
            pgrams = shared_epoch_periodograms(
                group.time,
                group.mag,
                group.mag_err,
                settings.periodogram,
                frequency=group.frequency,
            )
        except Exception:  # noqa: BLE001 - its stars compute their own (and report any error)
            continue
        out.update(zip(group.members, pgrams, strict=True))
    return out


def shared_epoch_groups(lightcurves: Sequence, settings) -> list[EpochGroup]:
    """Group stars whose periodograms can be computed in one batched call.

    A star joins a group when its search uses one band, its cleaned good
    points fall on distinct epochs, and it would get the same frequency grid
    alone (same baseline); its epochs need not be all of the group's (the
    missing ones get zero weight), but a group holds at most
    :data:`MAX_EPOCH_GROWTH` times the epochs of its largest member.  Stars
    that fit no group of two or more are left out (analysed one by one).

    Exactness: the periodogram is computed from the *cleaned* curve, as
    :func:`core.analysis.analyse` would compute it.
    """
    from .clean import clean
    from .lightcurve import MIN_GOOD_POINTS
    from .periodogram import grid_parameters, search_bands

    pset = settings.periodogram
    if pset.method not in BATCHED_METHODS:
        return []
    candidates = []  # (n_points, index, key, t, m, e)
    for index, lc in enumerate(lightcurves):
        try:
            cleaned, _ = clean(lc, settings.clean)
            bands = search_bands(cleaned, pset)
            if len(bands) != 1 or cleaned.n_good < MIN_GOOD_POINTS:
                continue
            t, m, e = cleaned.arrays(bands[0])
            if np.ptp(m) == 0:
                continue
            order = np.argsort(t, kind="stable")
            t, m, e = t[order], m[order], e[order]
            if np.any(np.diff(t) <= 0):
                continue  # two points at one epoch cannot share one row
            grid = grid_parameters(t, pset)
        except PhasewiseError:
            continue  # the star-by-star analysis reports the problem
        key = (grid.fmin, grid.df, grid.n, bool(cleaned.has_errors))
        candidates.append((t.size, index, key, t, m, e))
    candidates.sort(key=lambda c: (-c[0], c[1]))
    clusters: list[dict[str, Any]] = []
    for n, index, key, t, m, e in candidates:
        for cluster in clusters:
            if cluster["key"] != key:
                continue
            union = cluster["time"]
            if np.isin(t, union).all():
                cluster["members"].append((index, t, m, e))
                break
            merged = np.union1d(union, t)
            if merged.size <= MAX_EPOCH_GROWTH * cluster["largest"]:
                cluster["time"] = merged
                cluster["members"].append((index, t, m, e))
                break
        else:
            clusters.append({"key": key, "time": t, "largest": n, "members": [(index, t, m, e)]})
    groups = []
    for cluster in clusters:
        members = sorted(cluster["members"], key=lambda item: item[0])
        if len(members) < 2:
            continue
        epochs = cluster["time"]
        mag = np.full((len(members), epochs.size), np.nan)
        err = np.full((len(members), epochs.size), np.nan)
        for row, (_, t, m, e) in enumerate(members):
            at = np.searchsorted(epochs, t)
            mag[row, at] = m
            err[row, at] = e
        fmin, df, n, _ = cluster["key"]
        frequency = fmin + df * np.arange(n)
        groups.append(EpochGroup(tuple(item[0] for item in members), epochs, mag, err, frequency))
    return groups


def _worker_init(parent_pid: int) -> None:
    """Start-up of a pool worker: Ctrl-C is the parent's; die with the parent."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    limit_blas_threads()

    def watch() -> None:
        while True:
            time.sleep(0.5)
            if os.getppid() != parent_pid:
                os._exit(1)  # the parent was killed: nobody will read our results

    threading.Thread(target=watch, name="phasewise-parent-watch", daemon=True).start()


# ------------------------------------------------------------------ engines
class _Engine:
    name = "engine"
    workers = 1

    @property
    def depth(self) -> int:
        """Chunks in flight: one running and one waiting per worker."""
        return 2 * max(1, self.workers)

    def submit(self, lightcurves: list, settings, fn_name: str, shared: bool) -> Any:
        raise NotImplementedError

    def wait_any(self, pending: Iterable[Any], timeout: float) -> set[Any]:
        raise NotImplementedError

    def cancel_waiting(self, future: Any) -> bool:
        """Cancel a chunk that has not started; True if it was cancelled."""
        return False

    def close(self, pending: Iterable[Any], wait: bool = True) -> None:
        raise NotImplementedError


class _InlineEngine(_Engine):
    """No pool: chunks run in this process (``workers=0``; debugging and tests)."""

    name = "inline"
    depth = 1  # a chunk runs when submitted

    def submit(self, lightcurves, settings, fn_name, shared):
        future: Future = Future()
        try:
            future.set_result(analyse_chunk(lightcurves, settings, fn_name, shared))
        except Exception as exc:  # noqa: BLE001 - reported per chunk like the pools do
            future.set_exception(exc)
        return future

    def wait_any(self, pending, timeout):
        return set(pending)

    def close(self, pending, wait=True):
        pass


class _LocalEngine(_Engine):
    """A process pool on this machine (spawned workers: safe beside threads)."""

    name = "local"

    def __init__(self, workers: int) -> None:
        self.workers = workers
        # spawned children read these when they start (on demand, during submits)
        self._set_env = [v for v in WORKER_THREAD_VARIABLES if v not in os.environ]
        for name in self._set_env:
            os.environ[name] = "1"
        self._pool = self._new_pool()

    def _new_pool(self) -> ProcessPoolExecutor:
        return ProcessPoolExecutor(
            max_workers=self.workers,
            mp_context=multiprocessing.get_context("spawn"),
            initializer=_worker_init,
            initargs=(os.getpid(),),
        )

    def submit(self, lightcurves, settings, fn_name, shared):
        try:
            return self._pool.submit(analyse_chunk, lightcurves, settings, fn_name, shared)
        except BrokenProcessPool:
            self._pool.shutdown(wait=False, cancel_futures=True)
            self._pool = self._new_pool()
            return self._pool.submit(analyse_chunk, lightcurves, settings, fn_name, shared)

    def cancel_waiting(self, future):
        return future.cancel()

    def wait_any(self, pending, timeout):
        done, _ = wait_futures(list(pending), timeout=timeout, return_when=FIRST_COMPLETED)
        return done

    def close(self, pending, wait=True):
        try:
            # after Ctrl-C, running chunks are abandoned: their workers leave on their own
            self._pool.shutdown(wait=wait, cancel_futures=True)
        finally:
            for name in self._set_env:
                os.environ.pop(name, None)


#: Dask configuration for workers Phasewise starts (LocalCluster in tests and
#: benchmarks); put the same in the dask configuration of a cluster you start
#: yourself (see DEVELOPERS.md).  Two things made a star cost more CPU on a
#: Dask worker than in the local pool (``benchmarks/bench_dask.py``):
#:
#: * distributed's nanny sets ``MALLOC_TRIM_THRESHOLD_=65536`` in its workers'
#:   environment; with it glibc stops adapting its mmap threshold, every large
#:   array is mapped and unmapped afresh, and a star cost about 2.4x the local
#:   pool's CPU in page faults.  ``None`` removes the variable (the nanny skips
#:   keys whose value is None).
#: * the worker's background samplers: the statistical profiler walks the
#:   running task's Python stack every 10 ms, and the system and memory
#:   monitors poll every 0.5 s and 0.1 s.  With the variable removed, a star
#:   still cost 1.86x the pool's marginal CPU; with the profiler off and the
#:   monitors polling every few seconds, 0.94x (128 stars, 2 workers, one run).
#:   The memory monitor still runs (every 2 s), so a worker past its memory
#:   limit is still paused or restarted.
DASK_WORKER_CONFIG: dict[str, Any] = {
    "distributed.nanny.pre-spawn-environ.MALLOC_TRIM_THRESHOLD_": None,
    "distributed.worker.profile.enabled": False,
    "distributed.admin.system-monitor.interval": "5s",
    "distributed.worker.memory.monitor-interval": "2s",
}


def _dask_worker_setup() -> bool:
    """Run on every Dask worker when a batch connects: one BLAS thread, as in the pool."""
    return limit_blas_threads(environment=False)


class _DaskEngine(_Engine):
    """A Dask distributed cluster reached at a scheduler address."""

    name = "dask"

    def __init__(self, scheduler: str, workers: int | None) -> None:
        try:
            from distributed import Client
        except ImportError as exc:
            raise PhasewiseError(
                "a Dask scheduler was given but Dask is not installed; "
                "install the extra with: pip install phasewise[dask]",
                field="scheduler",
            ) from exc
        try:
            self._client = Client(scheduler, timeout=SCHEDULER_TIMEOUT, set_as_default=False)
        except (OSError, TimeoutError) as exc:
            raise PhasewiseError(
                f"cannot reach the Dask scheduler at {scheduler}: {exc}", field="scheduler"
            ) from exc
        except (ValueError, TypeError) as exc:  # a malformed address
            raise PhasewiseError(
                f"not a scheduler address: {scheduler!r}; expected tcp://HOST:PORT "
                f"(or tls://HOST:PORT) ({exc})",
                field="scheduler",
            ) from None
        threads = sum(self._client.nthreads().values())
        self.workers = workers or max(1, threads)
        # workers already running; those that join later start as their cluster's config says
        self._client.run(_dask_worker_setup)

    def submit(self, lightcurves, settings, fn_name, shared):
        return self._client.submit(
            analyse_chunk, lightcurves, settings, fn_name, shared, pure=False
        )

    def wait_any(self, pending, timeout):
        deadline = time.monotonic() + timeout
        while True:
            done = {f for f in pending if f.done()}
            if done or time.monotonic() >= deadline:
                return done
            time.sleep(0.02)

    def close(self, pending, wait=True):
        for future in pending:
            future.cancel()
        self._client.close()


def default_workers() -> int:
    """Cores this process may use."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # not on Linux
        return max(1, os.cpu_count() or 1)


def _check_workers(workers: Any) -> None:
    if workers is not None and (
        isinstance(workers, bool) or not isinstance(workers, int) or workers < 0
    ):
        raise PhasewiseError(f"got {workers!r}; expected 0 or more workers", field="workers")


class _IdleEngine(_InlineEngine):
    """Stands for the engine asked for when there is nothing to do."""

    def __init__(self, workers: int | None, scheduler: str | None) -> None:
        self.name = "dask" if scheduler else ("inline" if workers == 0 else "local")
        self.workers = 1 if workers == 0 else (workers or (0 if scheduler else default_workers()))


def _engine(workers: int | None, scheduler: str | None) -> _Engine:
    _check_workers(workers)
    if scheduler:
        return _DaskEngine(scheduler, workers or None)
    if workers == 0:
        return _InlineEngine()
    return _LocalEngine(workers or default_workers())


# ------------------------------------------------------------------ the run
def _chunks(ids: list[str], size: int) -> Iterator[list[str]]:
    for start in range(0, len(ids), size):
        yield ids[start : start + size]


def _auto_chunk_size(total: int, workers: int) -> int:
    # big enough for shared-epoch batches, small enough to spread over the workers
    return int(max(1, min(64, math.ceil(total / max(1, 4 * workers)))))


def _stopped(stop) -> bool:
    if stop is None:
        return False
    if hasattr(stop, "is_set"):
        return bool(stop.is_set())
    return bool(stop())


def analyse_ledger(
    ledger_path: str | os.PathLike,
    settings=None,
    *,
    workers: int | None = None,
    scheduler: str | None = None,
    only: str = "unanalysed",
    chunk_size: int | None = None,
    progress: Callable[[Progress], None] | None = None,
    stop: threading.Event | Callable[[], bool] | None = None,
    analyse_fn: str | Callable | None = None,
    shared_epochs: bool = False,
    max_in_flight: int | None = None,
) -> BatchSummary:
    """Analyse the stars of a ledger and store the results in it.

    Parameters
    ----------
    ledger_path : path
        The ledger; it is held for writing during the run.
    settings : AnalysisSettings, optional
        None: the settings stored in the ledger, else the defaults.  The
        settings used are stored in the ledger (results of others go stale).
    workers : int, optional
        Local worker processes (default: all cores); 0 runs in this process.
        With ``scheduler``: chunks in flight are sized by it (default: the
        cluster's threads).
    scheduler : str, optional
        Address of a Dask distributed scheduler (``tcp://HOST:PORT``); needs
        the ``dask`` extra.  Workers must be able to import Phasewise.
    only : {"unanalysed", "stale", "all"}
        Stars without a result; those plus stale ones; or every star.
    chunk_size : int, optional
        Stars per chunk sent to a worker (default: from the work and workers).
    progress : callable, optional
        Called with a :class:`Progress` after each chunk is written.
    stop : threading.Event or callable, optional
        When set (or returning True) no more chunks are sent; those already
        running are written, and the run returns.
    analyse_fn : str or callable, optional
        The per-star analysis, ``"module:function"`` importable by the
        workers (default :data:`DEFAULT_ANALYSE`); tests pass their own.
    shared_epochs : bool
        Batch the periodograms of stars sharing their epochs (off by
        default; see :func:`analyse_chunk`).
    max_in_flight : int, optional
        Chunks sent but not yet written (default: twice the workers).

    Returns
    -------
    BatchSummary
        Also after Ctrl-C (``interrupted``) or ``stop`` (``stopped``).

    Raises
    ------
    PhasewiseError
        The ledger cannot be opened for writing, ``only`` or ``workers`` is
        invalid, or the Dask scheduler cannot be reached.
    """
    from .ledger import Ledger
    from .settings_file import ledger_settings

    if only not in ONLY_CHOICES:
        raise PhasewiseError(
            f"got {only!r}; expected one of {', '.join(ONLY_CHOICES)}", field="only"
        )
    if chunk_size is not None and (not isinstance(chunk_size, int) or chunk_size < 1):
        raise PhasewiseError(f"got {chunk_size!r}; expected 1 or more", field="chunk_size")
    fn_name = _analyse_name(analyse_fn)
    _check_workers(workers)
    started = time.monotonic()
    ledger = Ledger.open(ledger_path)
    try:
        if settings is None:
            settings = ledger_settings(ledger, source=str(ledger_path))
        todo = ledger.stars_needing_analysis(settings.hash, only=only)
        skipped = ledger.n_stars - len(todo)
        stale_left = 0
        if only == "unanalysed":
            stale_left = len(ledger.stars_needing_analysis(settings.hash, "stale")) - len(todo)
        # no pool for nothing to do; a scheduler that cannot be reached changes nothing
        engine = _engine(workers, scheduler) if todo else _IdleEngine(workers, scheduler)
        try:
            ledger.set_analysis_settings(settings.to_dict(), settings.hash)
            run = _Run(ledger, settings, engine, todo, skipped, started, progress)
            run.go(
                chunk_size or _auto_chunk_size(len(todo), engine.workers),
                max_in_flight or engine.depth,
                fn_name,
                shared_epochs,
                stop,
            )
        finally:
            if "run" in locals():
                engine.close(run.pending, wait=not run.interrupted)
            else:
                engine.close(())
    finally:
        ledger.close()
    summary = run.summary(str(ledger_path), settings.hash, engine, time.monotonic() - started)
    return dataclasses.replace(summary, stale_left=stale_left)


@dataclass
class _Run:
    """The parent's loop: send chunks, write what comes back, report progress."""

    ledger: Any
    settings: Any
    engine: _Engine
    todo: list[str]
    skipped: int
    started: float
    progress: Callable[[Progress], None] | None
    pending: dict[Any, tuple[list[str], bool]] = field(default_factory=dict)
    retry: list[list[str]] = field(default_factory=list)
    analysed: int = 0
    failed: int = 0
    shared: int = 0
    failures: list[tuple[str, str]] = field(default_factory=list)
    stopped: bool = False
    interrupted: bool = False

    def go(self, chunk_size, max_in_flight, fn_name, shared_epochs, stop) -> None:
        chunks = _chunks(self.todo, chunk_size)
        self._report()
        try:
            exhausted = False
            while True:
                if not self.stopped and _stopped(stop):
                    self.stopped = True
                    for future in list(self.pending):
                        if self.engine.cancel_waiting(future):
                            del self.pending[future]
                while not self.stopped and len(self.pending) < max_in_flight:
                    if self.retry and self.pending:
                        break  # a retried star runs alone: if its worker dies, it is the cause
                    retried = bool(self.retry)
                    ids = self.retry.pop(0) if retried else None
                    if ids is None and not exhausted:
                        ids = next(chunks, None)
                        exhausted = ids is None
                    if ids is None:
                        break
                    lightcurves, unreadable = self._read(ids)
                    if unreadable:
                        self._write(unreadable)
                    if lightcurves:
                        future = self.engine.submit(
                            lightcurves, self.settings, fn_name, shared_epochs
                        )
                        self.pending[future] = ([lc.star_id for lc in lightcurves], retried)
                if not self.pending and (self.stopped or (exhausted and not self.retry)):
                    return
                for future in self.engine.wait_any(self.pending, timeout=0.25):
                    self._collect(future, *self.pending.pop(future))
        except KeyboardInterrupt:
            self.interrupted = True

    def _read(self, ids: list[str]) -> tuple[list, list[StarOutcome]]:
        lightcurves, unreadable = [], []
        for star_id in ids:
            try:
                lightcurves.append(self.ledger.lightcurve(star_id))
            except PhasewiseError as exc:
                unreadable.append(StarOutcome(star_id, error=f"cannot read the star: {exc}"))
        return lightcurves, unreadable

    def _collect(self, future: Any, ids: list[str], retried: bool = False) -> None:
        try:
            outcomes = future.result()
        except Exception as exc:  # noqa: BLE001 - a lost chunk (dead worker) is recorded, not fatal
            # analyse_chunk never raises for a star: the worker itself was lost (killed,
            # out of memory, a crash in compiled code).  Retry the stars one by one, so
            # that only a star that loses its worker again is recorded as failed.
            if not retried:
                self.retry.extend([star_id] for star_id in ids)
                return
            message = (
                "the process analysing this star stopped (killed, out of memory, or a crash "
                "in compiled code) twice; it is recorded as failed"
            )
            outcomes = [StarOutcome(ids[0], error=message, detail=_error_text(exc))]
        self._write(outcomes)

    def _write(self, outcomes: list[StarOutcome]) -> None:
        results = [(o.star_id, self.settings.hash, o.result) for o in outcomes if not o.failed]
        failures = [
            (o.star_id, self.settings.hash, o.error, o.detail) for o in outcomes if o.failed
        ]
        if results:
            self.ledger.store_results(results)
        if failures:
            self.ledger.store_failures(failures)
        self.analysed += len(results)
        self.failed += len(failures)
        self.shared += sum(o.shared_epochs for o in outcomes)
        room = KEPT_FAILURES - len(self.failures)
        self.failures.extend((s, m) for s, _, m, _ in failures[: max(0, room)])
        self._report()

    def _report(self) -> None:
        if self.progress is None:
            return
        elapsed = time.monotonic() - self.started
        done = self.analysed + self.failed
        rate = done / elapsed if elapsed > 0 else 0.0
        eta = (len(self.todo) - done) / rate if rate > 0 else None
        self.progress(Progress(done, self.failed, self.skipped, len(self.todo), rate, eta, elapsed))

    def summary(self, path: str, settings_hash: str, engine: _Engine, elapsed: float):
        done = self.analysed + self.failed
        return BatchSummary(
            ledger=path,
            settings_hash=settings_hash,
            engine=engine.name,
            workers=engine.workers,
            total=len(self.todo),
            analysed=self.analysed,
            failed=self.failed,
            skipped=self.skipped,
            remaining=len(self.todo) - done,
            elapsed=elapsed,
            stopped=self.stopped,
            interrupted=self.interrupted,
            failures=tuple(self.failures),
            shared_epoch_stars=self.shared,
        )

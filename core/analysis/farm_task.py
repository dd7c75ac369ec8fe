"""The unit of farm work: check one trace, or one frame range of it, inside a worker process.

Runs wherever the engine puts it (a Dask worker on another machine, a local process, a thread),
so it takes only plain picklable arguments, configures its own process (kernel cache folder,
solver threads) and never raises for a bad trace: a trace that cannot be read comes back as a
:class:`PartResult` with a one-line ``error``. Only unexpected failures raise (the engine records
them against the trace).

Importing this module loads neither numba nor h5py: a scheduler or client that only unpickles
results stays light.
"""
from __future__ import annotations

import atexit
import os
import sys
import threading
import time
from dataclasses import dataclass, field

from resweep.core.jit.cache_env import CACHE_ENV
from resweep.core.analysis.farm_plan import RANGE_ROWS


@dataclass(frozen=True)
class FarmOptions:
    """What every part of a farm is checked with.

    Attributes:
        settings: SolverSettings (same for every trace).
        limit: divergences kept per trace (counts stay exact); 0 keeps none (summary only).
        range_rows: entity-frames per frame range of a split trace (see ``farm_plan``).
        threads: solver threads per worker; None leaves numba's default (all cores of the node).
        cache_dir: kernel cache folder for workers; None lets each worker use its own default
            (``$RESWEEP_CACHE_DIR`` or the user cache folder of the node).
    """

    settings: object
    limit: int = 1000
    range_rows: int = RANGE_ROWS
    threads: int | None = None
    cache_dir: str | None = None


@dataclass
class PartResult:
    """What one task returns.

    Attributes:
        path: the trace. frames: (f0, f1) range checked, or None when nothing was checked.
        report: TraceReport of that range (None on error or when a plan is returned).
        error: one-line reason the trace could not be read, else None.
        plan: ranges to check as separate tasks when the trace is too big for one (else None).
        seconds: wall time spent in the task, for the farm's statistics.
    """

    path: str
    frames: tuple[int, int] | None = None
    report: object = None
    error: str | None = None
    plan: list = field(default=None)
    seconds: float = 0.0


@dataclass
class PackedPart:
    """A :class:`PartResult` as the isolated child pickled it. The worker passes the bytes on
    without opening them, so it never imports the check (and numba with it); the engine that
    hands results to the farm unpacks them (:func:`unpack`).

    Attributes:
        path, frames: the job. blob: the pickled PartResult. error: it carries a reason.
        checked: it carries a report. rows: the report's entity-frames (0 without one).
    """

    path: str
    frames: tuple[int, int] | None
    blob: bytes
    error: bool
    checked: bool
    rows: int


def unpack(part):
    """The PartResult of ``part`` (a PartResult, or a PackedPart from a worker's child)."""
    if isinstance(part, PackedPart):
        import pickle
        return pickle.loads(part.blob)
    return part


def _tally(part, whole: bool) -> tuple[int, int]:
    """(traces finished, entity-frames checked) by one result of a job (``whole``: not a range)."""
    if isinstance(part, PackedPart):
        return int(part.error or part.checked and whole), part.rows
    return (int(part.error is not None or part.report is not None and whole),
            part.report.entity_frames if part.report is not None else 0)


_warmed: set = set()
_local = threading.local()


def configure(options: FarmOptions) -> None:
    """Point this process at the farm's kernel cache (before any kernel module loads; a process
    that already loaded kernels keeps them) and set the solver threads of the calling thread."""
    if options.cache_dir and "resweep.core.jit.nb_jit" not in sys.modules:
        os.environ[CACHE_ENV] = options.cache_dir
    if options.threads is not None:
        import numba
        numba.set_num_threads(max(1, min(int(options.threads), numba.config.NUMBA_NUM_THREADS)))


def check_part(path: str, options: FarmOptions, frames: tuple[int, int] | None = None,
               should_stop=None, progress=None) -> PartResult:
    """Check trace ``path`` whole (``frames`` None) or frames ``[f0, f1)``.

    With ``frames`` None a trace bigger than about 1.5 ``options.range_rows`` entity-frames is not
    checked here: the result carries the ``plan`` of ranges for the engine to hand out.
    ``progress(rows)`` is called per frame block with the entity-frames read so far (frames
    times entities, an estimate of the rows the report will count).
    """
    t0 = time.perf_counter()
    configure(options)
    from resweep.core.errors import TraceFormatError
    from resweep.core.format.reader import open_trace
    try:
        with open_trace(path, worlds=_worlds()) as trace:
            if frames is None:
                plan = _plan(trace, options)
                if len(plan) > 1:
                    return PartResult(path, plan=plan, seconds=time.perf_counter() - t0)
                frames = (0, trace.frame_count)
            report = _check(trace, options, frames, should_stop, progress)
    except TraceFormatError as exc:
        return PartResult(path, frames, error=exc.one_line(), seconds=time.perf_counter() - t0)
    return PartResult(path, tuple(frames), report=report, seconds=time.perf_counter() - t0)


def _worlds():
    """This thread's world cache (a worker with several task threads keeps one per thread: a
    cached world is moved through its edits by one check at a time)."""
    from resweep.core.world.world_cache import WorldCache
    cache = getattr(_local, "worlds", None)
    if cache is None:
        cache = _local.worlds = WorldCache()
    return cache


def forget_worlds() -> None:
    """Drop this thread's world cache (after a MemoryError)."""
    _local.worlds = None


def check_batch(jobs, options: FarmOptions, should_stop=None, report=None) -> list:
    """:func:`check_part` for each ``(path, frames)`` of ``jobs`` in turn (one task for many small
    traces); stops early, leaving the rest out of the result, when ``should_stop()`` is True.

    Every job runs in the isolated child this worker keeps for batch after batch
    (``farm_child``: the validator's limited process with the kernels loaded), so a hostile file
    cannot hang or crash the worker, no batch pays for starting a child, and each file is opened
    once; a job the child dies or hangs on comes back with the one-line reason and the next job
    gets a new child. With ``RESWEEP_ISOLATE=0`` jobs run in this process.

    ``report(traces, entity_frames)``, when given, hears what this task has done so far (traces
    finished, entity-frames checked or being checked) as it goes; it may drop calls (throttling).
    Returns PartResults, or PackedParts from the child (:func:`unpack` turns either into a
    PartResult).
    """
    from resweep.core.format.vet import ISOLATE_ENV
    isolated = os.environ.get(ISOLATE_ENV, "1") != "0"
    if not isolated:
        configure(options)
    out = []
    done = [0, 0]  # traces finished, entity-frames of finished parts

    def running(rows):
        report(done[0], done[1] + rows)

    def finished(part, frames):
        out.append(part)
        traces, rows = _tally(part, frames is None)
        done[0] += traces
        done[1] += rows
        if report is not None:
            report(done[0], done[1])

    progress = running if report is not None else None
    if isolated:
        _in_child(jobs, options, should_stop, progress, finished)
        return out
    for path, frames in jobs:
        if should_stop is not None and should_stop():
            break
        finished(check_part(path, options, frames, should_stop, progress), frames)
    return out


_child = None
_child_lock = threading.Lock()
_closer: list = []


def _close_child() -> None:
    """At exit: end the kept child and reap it (it would end by itself when its input closes, but
    unreaped its CPU time is counted nowhere)."""
    global _child
    if _child is not None and _child_lock.acquire(timeout=1):
        try:
            if _child is not None:
                _child.close()
                _child = None
        finally:
            _child_lock.release()


def _child_setup(options: FarmOptions):
    """(environment, extra address space) of the farm child for ``options``."""
    from resweep.core.analysis.farm_child import KERNEL_ADDRESS_SPACE
    env = {}
    if options.cache_dir:
        env[CACHE_ENV] = options.cache_dir
    if options.threads is not None:
        env["NUMBA_NUM_THREADS"] = str(max(1, int(options.threads)))
    return env, KERNEL_ADDRESS_SPACE


def start_child(options: FarmOptions) -> bool:
    """Start this process's kept farm child for ``options`` now, if it is not running (a farm's
    engine asks every worker for this before the first task, see ``DaskEngine.prewarm``), so the
    child's interpreter and imports (about half a second) overlap the farm's first tasks instead of
    delaying a worker's first job; a worker idle until a big trace's plan comes back would
    otherwise start its child only then. Returns at once (the child imports on its own); False
    when ``RESWEEP_ISOLATE=0`` (jobs run in this process: no child)."""
    from resweep.core.format.vet import ISOLATE_ENV
    if os.environ.get(ISOLATE_ENV, "1") == "0":
        return False
    with _child_lock:
        _ensure_child(*_child_setup(options))
    return True


def _ensure_child(env: dict, extra: int) -> None:
    """The kept child, started (or replaced when it ended or was started otherwise) with ``env``
    and ``extra`` address space; the caller holds ``_child_lock``."""
    global _child
    from resweep.core.analysis import farm_child
    from resweep.core.format.vet import IsolatedChild
    if _child is not None and not _child.fits(farm_child.__name__, env, extra):
        _child.close()
        _child = None
    if _child is None:
        if not _closer:
            _closer.append(atexit.register(_close_child))
        _child = IsolatedChild(farm_child.__name__, env, extra)


#: Requests written to the kept child ahead of the one it works on: it starts the next job as soon
#: as it answers one, instead of waiting for this process to read the answer and write again.
AHEAD = 1


def _in_child(jobs, options: FarmOptions, should_stop, progress, finished) -> None:
    """Run ``jobs`` in turn in this process's kept farm child (started, or replaced, as needed),
    calling ``finished(part, frames)`` for each; stops early when ``should_stop()`` becomes True
    (between jobs, or while the child works on one: the child is then killed).

    Up to :data:`AHEAD` more requests wait in the child's input while it works. When the child dies
    or hangs on a job, that job comes back with the reason; the jobs written after it, which it
    never answered, go to the next child.
    """
    global _child
    from collections import deque
    from resweep.core.analysis import farm_child
    from resweep.core.errors import TraceFormatError
    from resweep.core.format.vet import Verdict, _answer
    env, extra = _child_setup(options)
    heard = None if progress is None else (lambda doc: progress(int(doc["progress"])))
    todo, sent = deque(jobs), deque()  # sent: written to the current child, not yet answered
    with _child_lock:
        while todo or sent:
            if not sent:
                if should_stop is not None and should_stop():
                    return
                _ensure_child(env, extra)
            while todo and len(sent) <= AHEAD and not (sent and should_stop is not None and should_stop()):
                job = todo.popleft()
                _child.send(farm_child.request(*job, options))
                sent.append(job)
            path, frames = sent.popleft()
            t0 = time.perf_counter()
            got = _child.receive(heard, should_stop)
            mem = _child.mem
            if not _child.alive:
                _child = None
                todo.extendleft(reversed(sent))  # the dead child never answered these
                sent.clear()
            if got is None:  # stopped while the child worked on it
                return
            if isinstance(got, dict) and got.get("ok"):
                part = farm_child.part_of(got, path, frames)
            else:
                why = got if isinstance(got, Verdict) else _answer(got, mem)
                part = PartResult(path, frames, error=TraceFormatError(path, why.dataset, why.reason).one_line(),
                                  seconds=time.perf_counter() - t0)
            finished(part, frames)


def _plan(trace, options: FarmOptions):
    from resweep.core.analysis.farm_plan import plan_ranges
    return plan_ranges(trace.frame_count, trace.entity_count, trace.block_frames(), options.range_rows)


def _check(trace, options: FarmOptions, frames, should_stop, progress=None):
    from resweep.core.check.rows import warm_up
    from resweep.core.check.stream import check_trace
    key = (options.settings.precision, str(trace.frame_dtype))
    if key not in _warmed:
        _warm(*key, warm_up)
        _warmed.add(key)
    f0, n = frames[0], trace.entity_count
    blocks = None if progress is None else (lambda done, total: progress((done - f0) * n))
    return check_trace(trace, options.settings, limit=options.limit, should_stop=should_stop,
                       frames=tuple(frames), progress=blocks)


def _warm(precision: str, frame_dtype: str, warm_up) -> None:
    """Make this process's kernels ready, once.

    The first worker to need a precision compiles (or loads) the kernels under the cache folder's
    file lock and leaves a marker; later workers see the marker and let the kernels load on first
    use without the lock (numba writes cache entries by atomic rename, so a complete entry is safe
    to read). Holding the lock only to load would queue every worker of a cluster that shares one
    cache folder behind each other's 1-2 s loads.
    """
    from resweep.core.jit.nb_jit import CACHE_DIR
    marker = CACHE_DIR / f".ready-{precision}-{frame_dtype}"
    if marker.exists():
        return
    warm_up(precision, frame_dtype)
    try:
        marker.touch()
    except OSError:  # a read-only cache folder: every worker keeps taking the lock
        pass

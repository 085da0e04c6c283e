"""The processor cores one check may use, and ordered maps that use them.

Shapely 2 and numpy release the global interpreter lock inside their
vectorised loops (GEOS unions, differences, intersections, predicates;
numpy's array arithmetic), so threads of one process share the
geometry-heavy stages of a check: the reference copper of each layer, the
unions between layer pairs, the shielded parts of the broadside windows.
Every map here returns its results in the order of its input, so a check's
output is the same, bit for bit, whatever the number of cores.

How many: ``--cores N`` on the command line (:func:`using`), else the
environment variable ``COUPLINT_CORES``, else the cores this process may
run on (``os.sched_getaffinity``), at most :data:`MAX_CORES`. A map called
from inside another map's worker runs serially in that worker, so nested
maps never start more threads than the cores allowed.

    >>> with using(1):
    ...     ordered_map(lambda x: x * x, [1, 2, 3])
    [1, 4, 9]
"""

from __future__ import annotations

import contextlib
import contextvars
import os
import threading
from collections.abc import Callable, Iterator, Sequence
from concurrent.futures import ThreadPoolExecutor
from typing import TypeVar

import numpy as np

from .errors import UsageError

#: Most threads one check starts: beyond this the stages' serial parts dominate.
MAX_CORES = 8
#: Most field solves at once: each holds a sparse factorisation of its mesh.
SOLVE_THREADS = 2
#: Environment variable naming the cores to use when ``--cores`` is not given.
CORES_ENV = "COUPLINT_CORES"

T = TypeVar("T")
R = TypeVar("R")

_chosen: contextvars.ContextVar[int | None] = contextvars.ContextVar("couplint_cores", default=None)
_inside = threading.local()


def available() -> int:
    """The cores this process may run on (at most :data:`MAX_CORES`)."""
    try:
        n = len(os.sched_getaffinity(0))
    except (AttributeError, OSError):  # not on every platform
        n = os.cpu_count() or 1
    return max(1, min(MAX_CORES, n))


def parse_cores(text: str, where: str = "--cores") -> int:
    """A core count as written on the command line or in ``COUPLINT_CORES``."""
    try:
        n = int(str(text).strip())
    except ValueError:
        raise UsageError(f"{where}: a whole number of cores is needed, got {str(text)[:40]!r}") from None
    if n < 1:
        raise UsageError(f"{where}: at least 1 core, got {n}")
    return min(n, MAX_CORES)


def count() -> int:
    """The cores the current check may use (module docstring)."""
    chosen = _chosen.get()
    if chosen is not None:
        return chosen
    env = os.environ.get(CORES_ENV, "").strip()
    if env:
        return parse_cores(env, CORES_ENV)
    return available()


@contextlib.contextmanager
def using(n: int | None) -> Iterator[None]:
    """Within the block, checks use ``n`` cores (``None``: the default)."""
    token = _chosen.set(None if n is None else max(1, min(int(n), MAX_CORES)))
    try:
        yield
    finally:
        _chosen.reset(token)


def workers_for(tasks: int) -> int:
    """Threads worth starting for ``tasks`` independent tasks: 1 inside a
    worker already (nested maps run serially)."""
    if getattr(_inside, "worker", False):
        return 1
    return max(1, min(count(), tasks))


def _in_worker(context: contextvars.Context, fn: Callable[..., R], *args) -> R:
    _inside.worker = True
    try:
        return context.run(fn, *args)
    finally:
        _inside.worker = False


def ordered_map(fn: Callable[[T], R], items: Sequence[T] | Iterator[T], most: int | None = None) -> list[R]:
    """``[fn(x) for x in items]``, on up to :func:`count` threads (and at
    most ``most``), in the order of ``items``. Each call sees the caller's
    context variables (the resource caps, the core count). The first
    exception raised by a call is raised here, as the serial loop would
    raise it."""
    items = list(items)
    workers = workers_for(len(items) if most is None else min(len(items), most))
    if workers == 1:
        return [fn(x) for x in items]
    with ThreadPoolExecutor(max_workers=workers) as pool:
        futures = [pool.submit(_in_worker, contextvars.copy_context(), fn, x) for x in items]
        return [f.result() for f in futures]


def split_map(fn: Callable[..., np.ndarray], *arrays: np.ndarray, least: int = 2048) -> np.ndarray:
    """``fn(*arrays)`` for an element-wise ``fn`` (one result per element,
    e.g. ``shapely.intersection``), computed in up to :func:`count` slices
    of at least ``least`` elements each on threads and joined in order: the
    same array the single call gives."""
    n = len(arrays[0])
    parts = workers_for(max(1, n // max(1, least)))
    if parts == 1:
        return fn(*arrays)
    bounds = np.linspace(0, n, parts + 1).astype(np.int64)
    slices = [tuple(a[lo:hi] for a in arrays) for lo, hi in zip(bounds[:-1], bounds[1:])]
    return np.concatenate(ordered_map(lambda args: fn(*args), slices))

"""Field solves kept on disk between runs, so re-checking a board with the
same stackup pays no solver time.

An entry is keyed by the exact cross-section (every coordinate and εr as
Python writes the float, the resolution, whether Richardson was asked for)
and by a tag of the solver itself (the SHA-256 of ``fieldsolve.py`` and the
numpy and scipy versions): a hit returns exactly what solving would, and a
changed solver never reads an old entry.

Where: ``$COUPLINT_CACHE_DIR`` if set (``off`` or empty turns the cache
off), else ``$XDG_CACHE_HOME/couplint/solves``, else
``~/.cache/couplint/solves``. Safe against concurrent runs: an entry is
written to a temporary file and renamed into place (two runs writing one
key write the same bytes; the last rename wins). A damaged entry (cut
short, not an ``.npz``, wrong shapes, non-finite values) is deleted and
solved again. A folder that cannot be written (read-only home) turns the
cache off silently: it only ever saves time. The folder is pruned to its
newest :data:`MAX_ENTRIES` entries now and then.
"""

from __future__ import annotations

import contextlib
import hashlib
import io
import os
import tempfile
import threading
import time
from pathlib import Path
from typing import Any

import numpy as np
import scipy

from .fieldsolve import CapacitanceResult, CrossSection, solve

#: Entries kept; older ones (by modification time) are removed.
MAX_ENTRIES = 50_000
#: Prune at most once per this many stores.
PRUNE_EVERY = 500

_lock = threading.Lock()
_stores = 0
_tag: str | None = None


def cache_dir() -> Path | None:
    """The cache folder, or None when the cache is off."""
    given = os.environ.get("COUPLINT_CACHE_DIR")
    if given is not None:
        return None if given.strip() in ("", "off") else Path(given)
    base = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
    return Path(base) / "couplint" / "solves"


def solver_tag() -> str:
    """What the cached numbers depend on besides the cross-section."""
    global _tag
    if _tag is None:
        source = Path(__file__).with_name("fieldsolve.py").read_bytes()
        _tag = hashlib.sha256(source + f"|numpy {np.__version__}|scipy {scipy.__version__}".encode()).hexdigest()
    return _tag


def key(cs: CrossSection, resolution: float, richardson: bool) -> str:
    """The entry name of one solve (hex SHA-256)."""
    text = f"{solver_tag()}|{cs!r}|{float(resolution)!r}|{bool(richardson)}"
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def cached_solve(cs: CrossSection, resolution: float, richardson: bool = False) -> CapacitanceResult:
    """``fieldsolve.solve(cs, resolution, richardson=richardson)``, from the
    disk cache when it holds this exact solve, else solved and stored."""
    folder = cache_dir()
    if folder is None:
        return solve(cs, resolution, richardson=richardson)
    name = key(cs, resolution, richardson)
    path = folder / name[:2] / f"{name}.npz"
    hit = _load(path, richardson)
    if hit is not None:
        return hit
    result = solve(cs, resolution, richardson=richardson)
    _store(path, result)
    return result


def _load(path: Path, richardson: bool) -> CapacitanceResult | None:
    try:
        data = path.read_bytes()
    except OSError:
        return None
    try:
        with np.load(io.BytesIO(data), allow_pickle=False) as npz:
            maxwell = np.array(npz["maxwell"], dtype=np.float64)
            meta = np.array(npz["meta"], dtype=np.float64)
            error = np.array(npz["error"], dtype=np.float64) if richardson else None
            extrapolated = np.array(npz["extrapolated"], dtype=np.float64) if richardson else None
        n = maxwell.shape[0]
        arrays = [maxwell] + ([error, extrapolated] if error is not None and extrapolated is not None else [])
        if (maxwell.ndim != 2 or maxwell.shape != (n, n) or meta.shape != (3,)
                or any(a.shape != (n, n) or not np.all(np.isfinite(a)) for a in arrays)
                or not np.all(np.isfinite(meta))):
            raise ValueError("damaged entry")
        return CapacitanceResult(maxwell, float(meta[0]), (int(meta[1]), int(meta[2])),
                                 error=error, extrapolated=extrapolated)
    except Exception:  # noqa: BLE001 - any damage: drop the entry, solve again
        with contextlib.suppress(OSError):
            path.unlink()
        return None


def _store(path: Path, result: CapacitanceResult) -> None:
    global _stores
    arrays: dict[str, Any] = {"maxwell": result.maxwell,
              "meta": np.array([result.resolution, result.nodes[0], result.nodes[1]], dtype=np.float64)}
    if result.error is not None and result.extrapolated is not None:
        arrays["error"] = result.error
        arrays["extrapolated"] = result.extrapolated
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(prefix=f".{path.stem[:16]}.", suffix=".tmp", dir=path.parent)
        try:
            with os.fdopen(fd, "wb") as handle:
                np.savez(handle, **arrays)
            os.replace(tmp, path)
        except BaseException:
            with contextlib.suppress(OSError):
                os.unlink(tmp)
            raise
    except OSError:
        return  # a folder we cannot write: no cache, same results
    with _lock:
        _stores += 1
        due = _stores % PRUNE_EVERY == 0
    if due:
        prune(path.parent.parent)


def prune(folder: Path, keep: int = MAX_ENTRIES) -> int:
    """Remove all but the ``keep`` newest entries under ``folder``; returns
    how many were removed."""
    try:
        entries = [(p.stat().st_mtime, p) for p in folder.glob("*/*.npz")]
        stale = [p for p in folder.glob("*/.*.tmp") if p.stat().st_mtime < time.time() - 3600]
    except OSError:
        return 0
    for p in stale:  # a run killed while storing
        with contextlib.suppress(OSError):
            p.unlink()
    if len(entries) <= keep:
        return 0
    entries.sort(reverse=True)
    removed = 0
    for _, p in entries[keep:]:
        with contextlib.suppress(OSError):
            p.unlink()
            removed += 1
    return removed

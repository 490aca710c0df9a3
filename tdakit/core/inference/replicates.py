"""Running independent random replicates serially, on local processes or on any executor.

Replicate i always draws from ``SeedSequence(root).spawn(n)[i]``: the results are
identical for any executor and number of workers, and the first replicates do
not change when more are asked for. Completed replicates can be checkpointed to
a file and a later run resumes from it.
"""

from __future__ import annotations

import hashlib
import json
import os
import queue
import tempfile
import threading
import warnings
from collections import deque
from collections.abc import Callable, Sequence
from pathlib import Path

import numpy as np

from tdakit._validation import check_int, fail
from tdakit.errors import InvalidDataError, TdakitWarning

__all__ = ["run_replicates", "root_seed"]


def root_seed(rng, function: str) -> int:
    """An int root seed from the ``rng`` argument (drawn from it when it is a Generator or None)."""
    if rng is None or isinstance(rng, np.random.Generator):
        return int(np.random.default_rng(rng).integers(2**63 - 1))
    if isinstance(rng, np.random.SeedSequence):
        return int(rng.generate_state(2, np.uint64)[0] >> np.uint64(1))
    if isinstance(rng, (int, np.integer)) and not isinstance(rng, bool) and int(rng) >= 0:
        return int(rng)
    raise fail("rng", function, "None, a non-negative int, a SeedSequence or a numpy Generator", rng)


def _chunk(task: Callable, payload, items: Sequence[tuple[int, np.random.SeedSequence]], indexed: bool = False) -> list:
    if indexed:
        return [(i, task(payload, np.random.default_rng(seed), i)) for i, seed in items]
    return [(i, task(payload, np.random.default_rng(seed))) for i, seed in items]


def run_replicates(
    task: Callable,
    payload,
    n_replicates: int,
    seed: int,
    *,
    n_jobs: int = 1,
    executor=None,
    progress: Callable[[int, int], None] | None = None,
    checkpoint: str | os.PathLike | None = None,
    fingerprint: str = "",
    function: str = "confidence_band",
    indexed: bool = False,
) -> np.ndarray:
    """Return ``[task(payload, rng_i) for i in range(n_replicates)]`` stacked as an array.

    Parameters
    ----------
    task : callable
        ``task(payload, rng) -> float or ndarray`` (a module-level function, so it pickles).
    payload : object
        Passed to every call (the cloud and the options); shipped once per chunk.
    n_jobs : int, default=1
        Processes working when no ``executor`` is given, this one included (it takes chunks
        while the others start); -1 for all cores.
    executor : object with ``submit(fn, *args)``, optional
        A ``concurrent.futures`` executor or a ``dask.distributed.Client``.
    progress : callable, optional
        Called as ``progress(done, total)`` after every completed chunk.
    checkpoint : path, optional
        File where completed replicates are saved atomically; an existing file with the
        same ``fingerprint`` is resumed, one from another configuration is refused.
    indexed : bool, default=False
        Call ``task(payload, rng, i)`` with the replicate's index (for grids of settings).
    """
    n_replicates = check_int(n_replicates, "n_boot", function, low=1, high=10**7)
    n_jobs = check_int(n_jobs, "n_jobs", function, low=-1, high=4096)
    if n_jobs == 0:
        raise fail("n_jobs", function, "a positive int or -1 (all cores)", n_jobs)
    if executor is not None and not callable(getattr(executor, "submit", None)):
        raise fail("executor", function, "None or an object with a submit(fn, *args) method", executor)
    if progress is not None and not callable(progress):
        raise fail("progress", function, "None or a callable progress(done, total)", progress)
    if checkpoint is not None:
        _check_checkpoint_path(checkpoint, function)
    cores = os.cpu_count() or 1
    if n_jobs > cores:
        warnings.warn(f"n_jobs={n_jobs} is more than the {cores} cores here; using {cores} (the numbers do not "
                      "depend on it).", TdakitWarning, stacklevel=3)
        n_jobs = cores
    children = np.random.SeedSequence(seed).spawn(n_replicates)
    done = _load_checkpoint(checkpoint, fingerprint, seed) if checkpoint is not None else {}
    todo = [(i, children[i]) for i in range(n_replicates) if i not in done]
    workers = (os.cpu_count() or 1) if n_jobs == -1 else n_jobs
    # At least 16 chunks, so progress reports and checkpoints come often even on one worker.
    chunks = _split(todo, max(16, 4 * workers))
    for finished in _execute(task, payload, chunks, workers, executor, indexed):
        done.update(finished)
        if checkpoint is not None:
            _save_checkpoint(checkpoint, fingerprint, seed, done)
        if progress is not None:
            progress(len(done), n_replicates)
    return np.array([done[i] for i in range(n_replicates)])


def _split(items, n_chunks):
    if not items:
        return []
    size = max(1, int(np.ceil(len(items) / n_chunks)))
    return [items[s:s + size] for s in range(0, len(items), size)]


def _execute(task, payload, chunks, workers, executor, indexed):
    """Yield each chunk's results as a dict, in completion order."""
    if executor is not None:
        futures = [executor.submit(_chunk, task, payload, chunk, indexed) for chunk in chunks]
        for future in futures:
            yield dict(future.result())
    elif workers == 1:
        for chunk in chunks:
            yield dict(_chunk(task, payload, chunk, indexed))
    else:
        from joblib.externals.loky import get_reusable_executor

        helpers = workers - 1
        yield from _share_with_pool(get_reusable_executor(max_workers=helpers), helpers, task, payload, chunks, indexed)


def _share_with_pool(pool, helpers, task, payload, chunks, indexed):
    """Run the chunks on the pool's workers and in this process at the same time.

    This process starts at once, so the workers' start-up (a fresh interpreter and its
    imports, the first time) costs only their own share; each worker takes the next chunk
    the moment it finishes one. Results come back in completion order.
    """
    todo, lock, finished = deque(chunks), threading.Lock(), queue.SimpleQueue()

    def next_chunk():
        with lock:
            return todo.popleft() if todo else None

    def feed(future=None):
        if future is not None:
            finished.put(future)
        chunk = next_chunk()
        if chunk is not None:
            pool.submit(_chunk, task, payload, chunk, indexed).add_done_callback(feed)

    expected = len(chunks)
    for _ in range(helpers):
        feed()
    try:
        while expected:
            while not finished.empty():
                expected -= 1
                yield dict(finished.get().result())
            chunk = next_chunk()
            if chunk is not None:
                expected -= 1
                yield dict(_chunk(task, payload, chunk, indexed))
            elif expected:
                expected -= 1
                yield dict(finished.get().result())
    finally:  # stopped early (an error, or the caller gave up): hand out no more chunks
        with lock:
            todo.clear()


# -- checkpoints ------------------------------------------------------------------------------
def config_fingerprint(*parts) -> str:
    """Stable hash of a run's configuration (JSON of its parts)."""
    return hashlib.sha256(json.dumps(parts, sort_keys=True, default=str).encode()).hexdigest()


def _check_checkpoint_path(path, function: str) -> None:
    """Refuse, before any work, a checkpoint path that could never be written."""
    if not isinstance(path, (str, os.PathLike)):
        raise fail("checkpoint", function, "None or a file path", path)
    path = Path(path)
    if not path.parent.is_dir():
        raise fail("checkpoint", function, f"a file in an existing folder (no folder {str(path.parent)!r})", str(path))
    if path.exists() and not path.is_file():
        raise fail("checkpoint", function, "a path to a file, not a folder or a device", str(path))


def _load_checkpoint(path, fingerprint, seed) -> dict:
    path = Path(path)
    if not path.exists():
        return {}
    try:
        data = np.load(path, allow_pickle=False)
        if not hasattr(data, "files"):  # a plain .npy array, not a checkpoint
            raise ValueError("it holds a single array, not a tdakit checkpoint")
        with data:
            saved_print, saved_seed = str(data["fingerprint"]), int(data["seed"])
            indices, values = data["indices"], data["values"]
    except (OSError, ValueError, KeyError, TypeError, EOFError) as exc:
        raise InvalidDataError(f"The checkpoint file {str(path)!r} cannot be read ({exc}); delete it to start "
                               f"afresh.", parameter="checkpoint") from None
    if saved_print != fingerprint or saved_seed != seed:
        raise InvalidDataError(
            f"The checkpoint file {str(path)!r} belongs to another configuration (different data, options or "
            f"seed); resuming from it would mix runs. Use another file name or delete it.", parameter="checkpoint")
    return {int(i): v for i, v in zip(indices, values)}


def _save_checkpoint(path, fingerprint, seed, done) -> None:
    path = Path(path)
    keys = sorted(done)
    handle, temporary = tempfile.mkstemp(dir=path.parent, prefix=path.name, suffix=".tmp")
    try:
        with os.fdopen(handle, "wb") as stream:
            np.savez(stream, fingerprint=fingerprint, seed=seed, indices=np.array(keys, dtype=np.int64),
                     values=np.array([done[k] for k in keys]))
        os.replace(temporary, path)
    except BaseException:
        Path(temporary).unlink(missing_ok=True)
        raise

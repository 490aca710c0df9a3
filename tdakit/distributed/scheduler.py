"""The pipeline's ``scheduler=`` option: a Dask client for a run, its step functions, and what the run records.

``tdakit.analyze(cloud, options, scheduler="tcp://host:8786")`` (or ``tdakit analyze ... --scheduler
ADDRESS``, or the config key ``[run] scheduler``) runs on the cluster's workers: the landmark step with
:func:`~tdakit.distributed.select_landmarks_distributed` (the methods in
``tdakit.distributed.landmarks.DISTRIBUTED_METHODS``; the others run in this process), the lazy witness
edge values with :func:`~tdakit.distributed.witness_edge_values_distributed` (every point a witness) and
the band's replicates. The complex and its persistence, and gudhi's weak and strong witness complexes,
are built in this process. ``provenance["scheduler"]`` records the scheduler's address, every worker's
versions and where each step ran. The numbers are those of the same run without a scheduler.
``scheduler="local"`` starts a LocalCluster (one single-threaded worker per core) for the run.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Callable

import numpy as np

from tdakit._validation import fail

__all__ = ["open_scheduler", "check_scheduler", "landmark_function", "witness_function", "SchedulerSession"]

CONNECT_TIMEOUT = "10s"  # how long a scheduler that accepted the connection has to answer
PROBE_SECONDS = 3.0  # how long to wait for a TCP address to accept a connection at all
_PACKAGES = ("tdakit", "numpy", "scipy", "numba", "dask", "distributed")


@dataclasses.dataclass
class SchedulerSession:
    """A client for one run and the cluster it started (``"local"`` only)."""

    client: object
    cluster: object | None
    address: str

    def record(self) -> dict:
        """The scheduler's address and each worker's Python and package versions."""
        versions = self.client.get_versions(check=False, packages=list(_PACKAGES))
        workers = {address: _packages(info) for address, info in sorted(versions.get("workers", {}).items())}
        return {"address": self.address, "started_locally": self.cluster is not None, "n_workers": len(workers),
                "scheduler": _packages(versions.get("scheduler", {})), "workers": workers}

    def steps(self):
        """The run's step functions on this cluster (a :class:`tdakit.pipeline.RunSteps`)."""
        from tdakit.distributed.landmarks import DISTRIBUTED_METHODS
        from tdakit.pipeline import RunSteps

        methods = tuple(DISTRIBUTED_METHODS)
        return RunSteps(landmarks=landmark_function(self.client, methods),
                        lazy_witness_edges=witness_function(self.client), replicates=self.client,
                        cluster_methods=methods)

    def close(self) -> None:
        self.client.close()
        if self.cluster is not None:
            self.cluster.close()


def _packages(info: dict) -> dict:
    packages = dict(info.get("packages", {}))
    return {name: packages.get(name) for name in ("python", *_PACKAGES)}


def open_scheduler(scheduler, function: str = "analyze") -> SchedulerSession:
    """Connect to ``scheduler`` (an address such as ``"tcp://10.0.0.5:8786"``) or start ``"local"``.

    Parameters
    ----------
    scheduler : str
        A Dask scheduler address, or ``"local"`` for a LocalCluster with one single-threaded worker
        per core of this machine.
    function : str
        The public function asking (for error messages).

    Notes
    -----
    A ``tcp://`` address is first probed: it must accept a connection within ``PROBE_SECONDS`` and answer dask's
    identity call as a scheduler; a refused, unknown or silent address, or a server that is no scheduler, is
    refused within seconds, never after dask's own connection timeout.
    """
    scheduler = check_scheduler(scheduler, function)
    from distributed import Client, LocalCluster

    if scheduler == "local":
        import os

        cores = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else (os.cpu_count() or 1)
        cluster = LocalCluster(n_workers=cores, threads_per_worker=1, processes=True, dashboard_address=None)
        return SchedulerSession(Client(cluster), cluster, cluster.scheduler_address)
    try:
        client = Client(scheduler, timeout=CONNECT_TIMEOUT)
    except Exception as exc:  # noqa: BLE001 - OSError, TimeoutError, ValueError, or a foreign server's garbage
        raise fail("scheduler", function, f"the address of a running Dask scheduler (connecting failed: "
                   f"{type(exc).__name__}: {exc})", scheduler) from None
    return SchedulerSession(client, None, scheduler)


def check_scheduler(scheduler, function: str = "analyze") -> str:
    """The address, stripped, once it can be used: dask is installed and a ``tcp://`` address answers as a scheduler.

    Starts and keeps nothing (``"local"`` is only checked to be possible), so a front end can refuse a dead
    address within seconds before a long read; :func:`open_scheduler` makes the same checks.

    Parameters
    ----------
    scheduler : str
        As in :func:`open_scheduler`.
    function : str
        The public function asking (for error messages).

    Returns
    -------
    str
    """
    if not isinstance(scheduler, str) or not scheduler.strip():
        raise fail("scheduler", function, "None, 'local' or a Dask scheduler address such as 'tcp://host:8786'",
                   scheduler)
    try:
        import distributed  # noqa: F401
    except ImportError:
        raise fail("scheduler", function, "None unless dask.distributed is installed (pip install "
                   "tdakit[distributed])", scheduler) from None
    scheduler = scheduler.strip()
    if scheduler != "local":
        _probe(scheduler, function)
    return scheduler


def _probe(scheduler: str, function: str) -> None:
    """Fail within ``PROBE_SECONDS`` when a TCP address is malformed, unknown or not listening.

    dask's Client retries a refused connection until its timeout and then leaves a half-made client whose
    finaliser waits and prints a traceback at exit; a plain socket connection first avoids both.
    """
    import socket

    from distributed.comm import parse_address
    from distributed.comm.addressing import parse_host_port

    try:
        scheme, location = parse_address(scheduler)
        if scheme != "tcp":
            return  # tls, ws, inproc, ucx: left to dask
        host, port = parse_host_port(location)
        port = int(port)
    except (ValueError, TypeError) as exc:
        raise fail("scheduler", function, f"a Dask scheduler address such as 'tcp://host:8786' ({exc})",
                   scheduler) from None
    if not 0 < port < 65536:
        raise fail("scheduler", function, "an address whose port is between 1 and 65535", scheduler)
    try:
        with socket.create_connection((host, port), timeout=PROBE_SECONDS):
            pass
    except (OSError, UnicodeError) as exc:
        reason = "timed out" if isinstance(exc, TimeoutError) else (exc.strerror or str(exc))
        raise fail("scheduler", function, f"the address of a running Dask scheduler (connecting to {host}:{port} "
                   f"failed within {PROBE_SECONDS:g} s: {reason})", scheduler) from None
    kind = _identity(scheduler)
    if kind != "Scheduler":
        raise fail("scheduler", function, f"the address of a running Dask scheduler ({host}:{port} accepts "
                   f"connections but does not answer as one: {kind})", scheduler)


def _identity(address: str) -> str:
    """What answers at ``address`` ("Scheduler" for a Dask scheduler), asked in a thread of its own (so it works
    under a running event loop, as in Jupyter) and given at most ``PROBE_SECONDS``.
    """
    import asyncio
    import concurrent.futures

    from distributed.core import rpc

    async def ask() -> str:
        async with rpc(address, timeout=PROBE_SECONDS) as remote:
            answer = await asyncio.wait_for(remote.identity(), PROBE_SECONDS)
        return str(answer.get("type")) if isinstance(answer, dict) else f"an answer of type {type(answer).__name__}"

    pool = concurrent.futures.ThreadPoolExecutor(1, thread_name_prefix="tdakit-probe")
    try:
        return pool.submit(asyncio.run, ask()).result(timeout=2 * PROBE_SECONDS + 1)
    except concurrent.futures.TimeoutError:
        return f"no answer within {PROBE_SECONDS:g} s"
    except Exception as exc:  # noqa: BLE001 - whatever a foreign server sends back must end as a refusal
        return f"{type(exc).__name__}: {' '.join(str(exc).split())[:200]}"
    finally:
        pool.shutdown(wait=False)


def landmark_function(client=None, methods: tuple[str, ...] | None = None) -> Callable:
    """The landmark selection a run calls: on ``client``'s cluster for the methods it offers, else in memory.

    Parameters
    ----------
    client : distributed.Client, optional
        None: :func:`tdakit.select_landmarks` itself.
    methods : tuple of str, optional
        The methods run on the cluster; default ``tdakit.distributed.landmarks.DISTRIBUTED_METHODS`` as it is
        when the returned function is called. The method's own options (``density_power``,
        ``density_neighbors``, ``keep_fraction``) are passed on wherever it runs.

    Returns
    -------
    callable
        ``f(cloud, n_landmarks, *, method="maxmin", rng=None, start=None, **options) -> Landmarks``.
    """
    from tdakit.core.geometry.landmarks import select_landmarks

    if client is None:
        return select_landmarks

    def select(cloud, n_landmarks, *, method="maxmin", rng=None, start=None, **options):
        from tdakit.distributed.landmarks import DISTRIBUTED_METHODS, select_landmarks_distributed

        if method not in (DISTRIBUTED_METHODS if methods is None else methods):
            return select_landmarks(cloud, n_landmarks, method=method, rng=rng, start=start, **options)
        return select_landmarks_distributed(cloud, n_landmarks, method=method, rng=rng, start=start, client=client,
                                            **options)

    return select


def witness_function(client) -> Callable[..., np.ndarray]:
    """The lazy witness edge values on ``client``'s cluster, with the signature of :func:`tdakit.witness_edge_values`.

    The cloud's rows go to the workers, each lowers the matrix over its own witnesses and this process takes
    the minimum (exact: the in-memory matrix). For ``compute_diagrams(..., lazy_witness_edges=...)``.
    """

    def edges(cloud, landmarks, *, nu: int = 1, max_scale: float | None = None) -> np.ndarray:
        from tdakit.distributed.witness import witness_edge_values_distributed

        return witness_edge_values_distributed(cloud, landmarks, nu=nu, max_scale=max_scale, client=client)

    return edges

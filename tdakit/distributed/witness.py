"""The lazy witness edge values with every point of a cluster-held cloud a witness."""

from __future__ import annotations

import numpy as np

from tdakit._validation import check_float, check_int, fail
from tdakit.core.geometry.landmarks import Landmarks
from tdakit.distributed._cluster import Workers, describe_source, get_client, resolve_metric, worker_addresses
from tdakit.errors import MemoryBudgetError

__all__ = ["witness_edge_values_distributed"]

_FN = "witness_edge_values_distributed"


def witness_edge_values_distributed(
    source,
    landmarks,
    *,
    nu: int = 1,
    max_scale: float | None = None,
    client=None,
    metric=None,
    box=None,
    p: float | None = None,
    chunk_rows: int | None = None,
) -> np.ndarray:
    r"""Lazy witness edge values between landmarks, as :func:`tdakit.witness_edge_values`, each worker its own rows.

    Every worker lowers an (n_landmarks x n_landmarks) matrix over its rows with the compiled
    in-memory kernel; the driver takes the elementwise minimum (exact), so the matrix is the
    in-memory one whatever the number of workers. Bytes moved: the landmarks' coordinates out,
    one matrix (8 n_landmarks^2 bytes) back per worker.

    Parameters
    ----------
    source, client, metric, box, p, chunk_rows
        As in :func:`~tdakit.distributed.select_landmarks_distributed`.
    landmarks : Landmarks or 1-D array of int
        Rows of the landmarks (e.g. from :func:`~tdakit.distributed.select_landmarks_distributed`).
    nu : int, default=1
        0, 1 or 2: witnesses are measured from their nu-th nearest landmark.
    max_scale : float, optional
        Edges above it are inf.

    Returns
    -------
    ndarray of shape (n_landmarks, n_landmarks)
        e(a, b) = max(0, min_w [max(d(a, w), d(b, w)) - m_nu(w)]); zero diagonal.

    Raises
    ------
    MemoryBudgetError
        The matrices (8 n_landmarks^2 bytes per worker, plus two here) would exceed a quarter of this machine's
        memory; refused before any worker starts.

    References
    ----------
    .. [1] V. de Silva, G. Carlsson, "Topological estimation using witness complexes",
       Symposium on Point-Based Graphics (2004).
    """
    described, cloud_metric = describe_source(source, _FN)
    rows = landmarks.indices if isinstance(landmarks, Landmarks) else np.asarray(landmarks)
    if rows.ndim != 1 or rows.size == 0 or rows.dtype.kind not in "iu" or rows.min() < 0 \
            or rows.max() >= described.n_rows or np.unique(rows).size != rows.size:
        raise fail("landmarks", _FN, f"Landmarks or a non-empty 1-D array of distinct rows in [0, "
                   f"{described.n_rows - 1}]", landmarks)
    nu = check_int(nu, "nu", _FN, low=0, high=min(2, rows.size))
    cap = np.inf if max_scale is None else check_float(max_scale, "max_scale", _FN, low=0.0, low_open=True,
                                                       allow_inf=True)
    chosen_metric = resolve_metric(metric, box, p, cloud_metric, described.n_cols, _FN)
    client = get_client(client, _FN)
    _check_matrix_memory(rows.size, len(worker_addresses(client, _FN)))
    workers = Workers(client, described, chosen_metric, 1, chunk_rows, _FN)
    try:
        marks = workers.coordinates(rows.tolist())
        edges = np.minimum.reduce(workers.call("witness_edges", marks, nu, cap))
    finally:
        workers.close()
    edges = np.maximum(np.minimum(edges, edges.T), 0.0)
    np.fill_diagonal(edges, 0.0)
    return edges


def _check_matrix_memory(n_landmarks: int, n_workers: int) -> None:
    """Refuse landmark counts whose matrices (one per worker, all gathered here) exceed the memory budget."""
    from tdakit.core.topology.preflight import default_memory_budget

    need, budget = 8.0 * n_landmarks**2 * (max(n_workers, 1) + 2), default_memory_budget()
    if need > budget:
        raise MemoryBudgetError(
            f"The 'landmarks' parameter of {_FN} holds {n_landmarks:,} landmarks: one {n_landmarks:,} x "
            f"{n_landmarks:,} matrix per worker ({n_workers}), gathered and reduced here, would take "
            f"{need / 2**30:.3g} GiB, over the memory budget of {budget / 2**30:.3g} GiB (a quarter of this "
            f"machine's memory). Use fewer landmarks.", parameter="landmarks")

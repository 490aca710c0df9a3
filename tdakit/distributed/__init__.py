"""Landmarks and coverage for clouds larger than one process, on a Dask cluster.

Imported on demand (``import tdakit`` does not load it, nor dask): ``from tdakit.distributed import
select_landmarks_distributed``. It needs the ``distributed`` extra (``pip install tdakit[distributed]``).

select_landmarks_distributed
    Exact maxmin and uniform landmarks, and the exact coverage radius, with each worker keeping its own rows.
knn_radius_distributed
    Every point's exact distance to its k-th nearest neighbour, rows meeting by spatial cell on the workers.
witness_edge_values_distributed
    The lazy witness edge values between landmarks, every point a witness, each worker scanning its rows.
open_scheduler
    A Client for a scheduler address or ``"local"``, and the versions of its workers (the pipeline's
    ``scheduler=`` option).
"""

from __future__ import annotations

__all__ = [
    "select_landmarks_distributed",
    "knn_radius_distributed",
    "witness_edge_values_distributed",
    "open_scheduler",
]


def __getattr__(name: str):
    if name == "select_landmarks_distributed":
        from tdakit.distributed.landmarks import select_landmarks_distributed

        return select_landmarks_distributed
    if name == "knn_radius_distributed":
        from tdakit.distributed.density import knn_radius_distributed

        return knn_radius_distributed
    if name == "witness_edge_values_distributed":
        from tdakit.distributed.witness import witness_edge_values_distributed

        return witness_edge_values_distributed
    if name == "open_scheduler":
        from tdakit.distributed.scheduler import open_scheduler

        return open_scheduler
    raise AttributeError(f"module 'tdakit.distributed' has no attribute {name!r}")

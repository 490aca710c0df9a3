"""tdakit: persistent-homology diagnostics for large point clouds.

Subpackages
-----------
core
    Clouds and metrics, landmarks, filtrations, persistence diagrams, diagram distances.
io
    Reading clouds from arrays, DataFrames and files.
shapes, scenarios
    Samplers of shapes with known topology; the invented demo scenarios.
cli
    The ``tdakit`` command line.

``import tdakit`` loads neither ipywidgets, matplotlib.pyplot nor dask.
"""

from tdakit.core import (
    Band,
    Cloud,
    Diagrams,
    Landmarks,
    Metric,
    PermutationResult,
    compute_diagrams,
    confidence_band,
    densest_points,
    diagram_distance,
    knn_density,
    knn_radius,
    landmarks_from_indices,
    permutation_test,
    persistence_landscape,
    select_landmarks,
    significance_table,
    witness_edge_values,
)
from tdakit.io import load_cloud

__version__ = "0.1.0"

__all__ = [
    "Band",
    "Cloud",
    "Diagrams",
    "Landmarks",
    "Metric",
    "PermutationResult",
    "compute_diagrams",
    "confidence_band",
    "densest_points",
    "diagram_distance",
    "knn_density",
    "knn_radius",
    "landmarks_from_indices",
    "permutation_test",
    "persistence_landscape",
    "load_cloud",
    "select_landmarks",
    "significance_table",
    "witness_edge_values",
]

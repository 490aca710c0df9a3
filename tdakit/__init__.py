"""tdakit: persistent-homology diagnostics for large point clouds.

Subpackages
-----------
core
    Clouds and metrics, landmarks, filtrations, persistence diagrams, diagram distances.
io
    Reading clouds from arrays, DataFrames and files.
shapes
    Samplers of shapes with known topology (for tests and demos).

``import tdakit`` loads neither ipywidgets, matplotlib.pyplot nor dask.
"""

from tdakit.core import (
    Cloud,
    Diagrams,
    Landmarks,
    Metric,
    compute_diagrams,
    densest_points,
    knn_density,
    knn_radius,
    landmarks_from_indices,
    select_landmarks,
)
from tdakit.io import load_cloud

__version__ = "0.1.0"

__all__ = [
    "Cloud",
    "Diagrams",
    "Landmarks",
    "Metric",
    "compute_diagrams",
    "densest_points",
    "knn_density",
    "knn_radius",
    "landmarks_from_indices",
    "load_cloud",
    "select_landmarks",
]

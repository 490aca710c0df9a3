"""The computational core: clouds, metrics, landmarks, filtrations, diagrams and distances.

Plain functions and small frozen dataclasses over numpy arrays; imports only
numpy, scipy, gudhi, scikit-learn and joblib (persim and POT lazily).
"""

from tdakit.core.bands import Band
from tdakit.core.cloud import Cloud
from tdakit.core.compare import PermutationResult, permutation_test
from tdakit.core.confidence import band_at_level, confidence_band
from tdakit.core.density import densest_points, knn_density, knn_radius
from tdakit.core.diagrams import Diagrams
from tdakit.core.distances import diagram_distance
from tdakit.core.filtrations import compute_diagrams, stability_constant, witness_edge_values
from tdakit.core.landmarks import Landmarks, landmarks_from_indices, select_landmarks
from tdakit.core.landscapes import persistence_landscape
from tdakit.core.metrics import METRICS, Metric
from tdakit.core.tables import significance_table

__all__ = [
    "Band", "Cloud", "Diagrams", "Landmarks", "METRICS", "Metric", "PermutationResult", "band_at_level",
    "compute_diagrams", "confidence_band", "densest_points", "diagram_distance", "knn_density", "knn_radius",
    "landmarks_from_indices", "permutation_test", "persistence_landscape", "select_landmarks", "significance_table",
    "stability_constant", "witness_edge_values",
]

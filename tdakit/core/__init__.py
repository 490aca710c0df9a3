"""The computational core, in three packages that follow the science.

geometry
    Clouds and metrics, distances and neighbours, density, landmark selection.
topology
    Filtrations on landmarks, persistence diagrams, diagram distances, landscapes.
inference
    Confidence bands, replicates, per-feature p-values, significance tables, group tests.

Plain functions and small frozen dataclasses over numpy arrays; imports only
numpy, scipy, gudhi, scikit-learn and joblib (persim and POT lazily).
"""

from tdakit.core.geometry import (
    METRICS,
    Cloud,
    Landmarks,
    Metric,
    densest_points,
    knn_density,
    knn_radius,
    landmarks_from_indices,
    select_landmarks,
)
from tdakit.core.inference import (
    Band,
    PermutationResult,
    band_at_level,
    confidence_band,
    permutation_test,
    significance_table,
    universal_pvalue_support,
    universal_pvalues,
)
from tdakit.core.topology import (
    Diagrams,
    compute_diagrams,
    diagram_distance,
    persistence_landscape,
    stability_constant,
    witness_edge_values,
)

__all__ = [
    "Band", "Cloud", "Diagrams", "Landmarks", "METRICS", "Metric", "PermutationResult", "band_at_level",
    "compute_diagrams", "confidence_band", "densest_points", "diagram_distance", "knn_density", "knn_radius",
    "landmarks_from_indices", "permutation_test", "persistence_landscape", "select_landmarks", "significance_table",
    "stability_constant", "universal_pvalue_support", "universal_pvalues", "witness_edge_values",
]

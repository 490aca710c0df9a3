"""tdakit: persistent-homology diagnostics for large point clouds.

Subpackages
-----------
core
    Clouds and metrics, landmarks, filtrations, persistence diagrams, diagram distances.
config, pipeline, study
    Frozen run options; the one pipeline (analyze, rerun); the subsampling study.
io
    Reading clouds from arrays, DataFrames and files; run files.
plotting
    Figures for papers (matplotlib Figure only; imported on demand).
shapes, scenarios
    Samplers of shapes with known topology; the invented demo scenarios.
cli
    The ``tdakit`` command line.

``import tdakit`` loads neither ipywidgets, matplotlib.pyplot nor dask.
"""

from tdakit.config import AnalysisOptions, BandOptions, ComplexOptions, SamplingOptions, StudyOptions
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
    universal_pvalue_support,
    universal_pvalues,
    witness_edge_values,
)
from tdakit.io import (
    SkyConversion,
    load_cloud,
    load_run,
    parallax_to_cartesian,
    read_catalogue,
    redshift_to_cartesian,
    save_run,
)
from tdakit.pipeline import RunResult, analyze, rerun
from tdakit.study import StudyResult, subsampling_study

__version__ = "0.1.0"

__all__ = [
    "AnalysisOptions",
    "BandOptions",
    "ComplexOptions",
    "RunResult",
    "SamplingOptions",
    "StudyOptions",
    "StudyResult",
    "analyze",
    "load_run",
    "rerun",
    "save_run",
    "subsampling_study",
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
    "read_catalogue",
    "SkyConversion",
    "parallax_to_cartesian",
    "redshift_to_cartesian",
    "select_landmarks",
    "significance_table",
    "universal_pvalue_support",
    "universal_pvalues",
    "witness_edge_values",
]

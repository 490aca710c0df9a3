"""Figures for papers, built on matplotlib.figure.Figure only (never pyplot).

Every drawing function takes an ``ax`` (or makes its own figure) and returns a dict
of what it drew; the command line and the widgets use the same functions and the same
visual code (``DIMENSION_STYLE``, ``FEATURE_LABEL``, ``NEVER_DIES_COLOR`` in
:mod:`tdakit.plotting.style`).
"""

from tdakit.plotting.cloud import cloud_projection, plot_cloud
from tdakit.plotting.compare import plot_permutation_null, plot_run_pair
from tdakit.plotting.curves import betti_curve, plot_betti_curves, plot_landscape
from tdakit.plotting.diagrams import plot_barcode, plot_diagram
from tdakit.plotting.features import feature_numbers, significant_features
from tdakit.plotting.study import plot_study
from tdakit.plotting.style import (
    DIMENSION_COLORS,
    DIMENSION_MARKERS,
    DIMENSION_STYLE,
    FEATURE_LABEL,
    NEVER_DIES_COLOR,
    PRESETS,
    DimensionStyle,
    figure_bytes,
    house_style,
    new_figure,
    save_figure,
)
from tdakit.plotting.summary import run_caption, summary_figure, write_run_figures, write_study_figures

__all__ = [
    "DIMENSION_COLORS", "DIMENSION_MARKERS", "DIMENSION_STYLE", "FEATURE_LABEL", "NEVER_DIES_COLOR", "PRESETS",
    "DimensionStyle", "betti_curve", "cloud_projection", "feature_numbers", "figure_bytes", "house_style",
    "new_figure", "plot_barcode", "plot_betti_curves", "plot_cloud", "plot_diagram", "plot_landscape",
    "plot_permutation_null", "plot_run_pair", "plot_study", "run_caption", "save_figure", "significant_features",
    "summary_figure", "write_run_figures", "write_study_figures",
]

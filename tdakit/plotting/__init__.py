"""Figures for papers, built on matplotlib.figure.Figure only (never pyplot).

Every drawing function takes an ``ax`` (or makes its own figure) and returns a dict
of what it drew; the command line and the widgets use the same functions.
"""

from tdakit.plotting.cloud import plot_cloud, significant_features
from tdakit.plotting.compare import plot_permutation_null, plot_run_pair
from tdakit.plotting.curves import betti_curve, plot_betti_curves, plot_landscape
from tdakit.plotting.diagrams import plot_barcode, plot_diagram
from tdakit.plotting.study import plot_study
from tdakit.plotting.style import DIMENSION_COLORS, DIMENSION_MARKERS, PRESETS, figure_bytes, new_figure, save_figure
from tdakit.plotting.summary import summary_figure, write_run_figures, write_study_figures

__all__ = [
    "DIMENSION_COLORS", "DIMENSION_MARKERS", "PRESETS", "betti_curve", "figure_bytes", "new_figure", "plot_barcode",
    "plot_betti_curves", "plot_cloud", "plot_diagram", "plot_landscape", "plot_study", "save_figure",
    "summary_figure", "write_run_figures", "write_study_figures", "plot_permutation_null", "plot_run_pair",
    "significant_features",
]

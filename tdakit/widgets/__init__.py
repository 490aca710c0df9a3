"""Notebook widgets over the one pipeline: the explorer, the subsampling panel, the two-catalogue panel.

The only part of tdakit that imports ipywidgets. Heavy work runs in a worker process that the
Cancel button stops.
"""

from tdakit.widgets.comparison import ComparisonPanel
from tdakit.widgets.explorer import Explorer
from tdakit.widgets.subsampling import SubsamplingPanel
from tdakit.widgets.worker import BackgroundJob

__all__ = ["BackgroundJob", "ComparisonPanel", "Explorer", "SubsamplingPanel"]

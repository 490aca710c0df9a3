"""Reading point clouds from arrays, DataFrames and files; writing and reading run files."""

from tdakit.io.readers import FILE_TYPES, load_cloud
from tdakit.io.runfiles import RUN_FORMAT_VERSION, RUN_SUFFIX, load_run, save_run

__all__ = ["FILE_TYPES", "RUN_FORMAT_VERSION", "RUN_SUFFIX", "load_cloud", "load_run", "save_run"]

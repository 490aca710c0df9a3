"""Reading point clouds (and, later, run files) from arrays, DataFrames and files."""

from tdakit.io.readers import FILE_TYPES, load_cloud

__all__ = ["FILE_TYPES", "load_cloud"]

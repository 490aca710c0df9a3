"""Reading point clouds from arrays, DataFrames and files; writing and reading run files."""

from tdakit.io._atomic import atomic_output, write_table
from tdakit.io.catalogues import CATALOGUE_FORMATS, catalogue_to_npy, read_catalogue
from tdakit.io.coordinates import (
    SkyConversion,
    comoving_distance,
    cosmology_record,
    parallax_to_cartesian,
    redshift_to_cartesian,
    sky_to_unit_vectors,
)
from tdakit.io.readers import FILE_TYPES, load_cloud
from tdakit.io.runfiles import RUN_FORMAT_VERSION, RUN_SUFFIX, load_run, save_run

__all__ = [
    "CATALOGUE_FORMATS",
    "FILE_TYPES",
    "RUN_FORMAT_VERSION",
    "RUN_SUFFIX",
    "SkyConversion",
    "atomic_output",
    "catalogue_to_npy",
    "comoving_distance",
    "cosmology_record",
    "load_cloud",
    "load_run",
    "parallax_to_cartesian",
    "read_catalogue",
    "redshift_to_cartesian",
    "save_run",
    "sky_to_unit_vectors",
    "write_table",
]

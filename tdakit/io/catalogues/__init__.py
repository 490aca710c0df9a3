"""Catalogue files: FITS binary tables, HDF5 datasets and groups, Parquet; row filters; chunked reading.

The format libraries (astropy, h5py, pyarrow; ``pip install tdakit[formats]``) are imported only when a file of
their format is read.
"""

from tdakit.io.catalogues._formats import MissingExtraError
from tdakit.io.catalogues.convert import catalogue_to_npy
from tdakit.io.catalogues.loading import MixedUnitsWarning, is_catalogue_request, load_catalogue
from tdakit.io.catalogues.reading import (
    CATALOGUE_FORMATS,
    CatalogueTable,
    LargeReadWarning,
    catalogue_format,
    read_catalogue,
)
from tdakit.io.catalogues.where import RowFilter, parse_where

__all__ = [
    "CATALOGUE_FORMATS",
    "CatalogueTable",
    "LargeReadWarning",
    "MissingExtraError",
    "MixedUnitsWarning",
    "RowFilter",
    "catalogue_format",
    "catalogue_to_npy",
    "is_catalogue_request",
    "load_catalogue",
    "parse_where",
    "read_catalogue",
]

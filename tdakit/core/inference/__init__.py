"""Inference: confidence bands, replicates, per-feature p-values, significance tables, group tests."""

from tdakit.core.inference.bands import Band
from tdakit.core.inference.compare import PermutationResult, permutation_test
from tdakit.core.inference.confidence import band_at_level, confidence_band
from tdakit.core.inference.tables import significance_table
from tdakit.core.inference.universal import UniversalPValues, universal_pvalue_support, universal_pvalues

__all__ = ["Band", "PermutationResult", "band_at_level", "confidence_band", "permutation_test",
           "significance_table", "UniversalPValues", "universal_pvalue_support", "universal_pvalues"]

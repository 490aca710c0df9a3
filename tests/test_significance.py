"""A CI-sized subset of the planted-truth evaluation (benchmarks/significance.py), with asserted bounds.

The full evaluation (every band x filtration x landmark count x scenario, 100 seeds) is in benchmarks/README.md;
here the default band runs on a null, one planted loop and planted clusters, small enough for CI.
"""

import importlib.util
import sys
from pathlib import Path

import pytest
from scipy.stats import binom

SEEDS = 20


@pytest.fixture(scope="module")
def significance():
    path = Path(__file__).resolve().parents[1] / "benchmarks" / "significance.py"
    spec = importlib.util.spec_from_file_location("significance", path)
    module = importlib.util.module_from_spec(spec)
    sys.modules["significance"] = module  # dataclasses look their module up there
    spec.loader.exec_module(module)
    return module


@pytest.fixture(scope="module")
def quick(significance):
    return {config.scenario: significance.evaluate(config, SEEDS) for config in significance.quick_grid()}


def test_null_cloud_gives_false_features_within_the_target_rate(quick):
    # Target: false features in at most 5 % of runs at level 0.95 on every null. Bound: the 99.9 % binomial
    # quantile of 20 runs at rate 0.05 (a calibrated test fails this one time in a thousand).
    summary = quick["uniform_sphere"]
    assert summary["status"] == "ok" and summary["runs"] == SEEDS and summary["errors"] == 0
    assert summary["fwer"] * SEEDS <= binom.ppf(0.999, SEEDS, 0.05)


def test_planted_loop_is_found(quick):
    # Target: the one planted loop in at least 95 % of runs; bound: the 0.1 % binomial quantile at that rate.
    summary = quick["noisy_circle"]
    assert summary["power_h1"] * SEEDS >= binom.ppf(1e-3, SEEDS, 0.95)
    assert summary["fwer"] * SEEDS <= binom.ppf(0.999, SEEDS, 0.05)


def test_planted_clusters_are_found_and_nothing_else(quick):
    # Five well-separated Gaussian clumps: five components (common practice), found by the density-type band.
    summary = quick["gaussian_clumps"]
    assert summary["truth"][0] == 5
    assert summary["power_h0"] * SEEDS >= binom.ppf(1e-3, SEEDS, 0.95)
    assert summary["fwer"] * SEEDS <= binom.ppf(0.999, SEEDS, 0.05)

"""Shared fixtures: a deterministic hypothesis profile and a seed sweep.

TDAKIT_SEEDS="all" (or a comma-separated list) sweeps many seeds through every
test that takes ``global_seed``; the default is one seed, so no test depends on
a lucky draw without us being able to find out.
"""

import os

import matplotlib
import pytest
from hypothesis import HealthCheck, settings

matplotlib.use("Agg")

settings.register_profile("ci", derandomize=True, deadline=None, max_examples=60,
                          suppress_health_check=[HealthCheck.too_slow])
settings.register_profile("thorough", deadline=None, max_examples=500)
settings.load_profile(os.environ.get("TDAKIT_HYPOTHESIS", "ci"))


def _seeds():
    value = os.environ.get("TDAKIT_SEEDS", "")
    if value == "all":
        return list(range(20))
    if value:
        return [int(v) for v in value.split(",")]
    return [42]


@pytest.fixture(params=_seeds())
def global_seed(request):
    return request.param

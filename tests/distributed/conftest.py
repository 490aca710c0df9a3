"""Dask clusters shared by the distributed tests: two workers in this process, and (slow) two processes."""

import pytest

from tests.helpers import in_process_client

distributed = pytest.importorskip("distributed")


@pytest.fixture(scope="module")
def client():
    """Two single-threaded workers in this process: the same actors and messages, without process start-up."""
    with in_process_client(2) as connected:
        yield connected


@pytest.fixture(scope="module")
def process_client():
    """Two worker processes, as on a real cluster (rows reach them by file or as dask blocks)."""
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None,
                                  memory_limit=0) as cluster:
        with distributed.Client(cluster) as connected:
            yield connected

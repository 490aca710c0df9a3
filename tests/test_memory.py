"""Peak memory of a block of work (the operating system's high-water mark)."""

import sys

import numpy as np
import pytest

from tdakit._memory import PeakMemory


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="the resident set is read from /proc (Linux)")
def test_growth_counts_what_the_block_allocates_and_not_what_was_there():
    kept = np.ones(40 * 2**20 // 8)  # 40 MiB resident before the block: not part of its growth
    with PeakMemory() as memory:
        block = np.ones(80 * 2**20 // 8)  # 80 MiB touched inside it
        del block
    assert memory.scope == "this step"
    assert 70 * 2**20 < memory.growth_bytes < 110 * 2**20
    assert memory.peak_bytes >= memory.growth_bytes + kept.nbytes

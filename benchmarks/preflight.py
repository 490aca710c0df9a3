"""How long the memory pre-flight takes to refuse a complex that would not fit, against a baseline.

Baseline, measured in the same run: gudhi inserting just the edges (the 1-skeleton) of the same Rips complex,
the first and cheapest step of building it. The ratio shows what the check costs next to that step; the
complexes it refuses would need terabytes and hours.
Run: python benchmarks/preflight.py
"""

import time

import gudhi
import numpy as np
from scipy.spatial.distance import cdist

import tdakit
from tdakit.errors import MemoryBudgetError


def main() -> None:
    print(f"{'case':<44} {'refusal s':>10} {'baseline s':>11} {'ratio':>7}")
    for n, max_dim in ((3000, 3), (3000, 2), (1500, 3)):
        points = np.random.default_rng(0).normal(size=(n, 3))
        cloud = tdakit.load_cloud(points)
        start = time.perf_counter()
        try:
            tdakit.compute_diagrams(cloud, max_dim=max_dim)
            refused = "built!"
        except MemoryBudgetError:
            refused = ""
        refusal = time.perf_counter() - start
        start = time.perf_counter()
        gudhi.SimplexTree.create_from_array(cdist(points, points))
        baseline = time.perf_counter() - start
        case = f"Rips, {n} Gaussian points in R^3, max_dim={max_dim} {refused}"
        print(f"{case:<44} {refusal:10.3f} {baseline:11.3f} {refusal / baseline:7.2f}")


if __name__ == "__main__":
    main()

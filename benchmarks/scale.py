"""Catalogue-scale steps against baselines measured in the same run.

1. kNN density (k = 15) on 10^6 points: tdakit against scikit-learn's NearestNeighbors with its default algorithm.
2. Lazy witness complex, 10^6 witnesses, 500 landmarks, capped scale: time and peak memory over the input
   (baseline: the size of the n x m distance matrix that tdakit never holds; peak = high-water mark reset at the
   call's start, less the memory resident before it).
3. Bootstrap band with 200 replicates: n_jobs=2 (this process and one helper process) against serial (parallel
   efficiency = serial / (2 x parallel)),
   once with the workers starting ("cold") and once reusing them ("warm").
Run: python benchmarks/scale.py
"""

import time

import numpy as np

import tdakit
from tdakit import shapes
from tdakit._memory import PeakMemory


def knn_density():
    from sklearn.neighbors import NearestNeighbors

    print(f"{'kNN density, k=15':<38} {'tdakit s':>9} {'sklearn s':>10} {'ratio':>6}")
    for n, d in ((1_000_000, 3), (200_000, 8)):
        points = np.random.default_rng(0).normal(size=(n, d))
        cloud = tdakit.load_cloud(points)
        start = time.perf_counter()
        tdakit.knn_density(cloud, 15)
        ours = time.perf_counter() - start
        start = time.perf_counter()
        NearestNeighbors(n_neighbors=16).fit(points).kneighbors(points)
        theirs = time.perf_counter() - start
        print(f"{f'{n:,} Gaussian points, {d}-D':<38} {ours:9.2f} {theirs:10.2f} {theirs / ours:6.1f}")


def lazy_witness(n=1_000_000, m=500):
    points = shapes.torus(n, noise=0.05, rng=0)
    cloud = tdakit.load_cloud(points)
    marks = tdakit.select_landmarks(cloud, m, rng=0)
    with PeakMemory() as peak:
        start = time.perf_counter()
        diagrams = tdakit.compute_diagrams(cloud, landmarks=marks, filtration="witness",
                                           max_scale=4 * marks.coverage_radius)
        seconds = time.perf_counter() - start
    grown = peak.growth_bytes
    print(f"lazy witness, {n:,} witnesses, {m} landmarks, cap 4 eps: {seconds:.1f} s, peak growth "
          f"{grown / 2**20:.0f} MiB = {grown / points.nbytes:.2f} x input; a dense {n:,} x {m} matrix would be "
          f"{n * m * 8 / 2**20:.0f} MiB; {diagrams.params['n_simplices']:,} simplices")


def bootstrap_efficiency(n_boot=200):
    cloud = tdakit.load_cloud(shapes.circle(3000, noise=0.05, rng=1))
    marks = tdakit.select_landmarks(cloud, 200, rng=1)  # about 0.1 s per replicate, like a real study
    timings = {}
    # Warm this process first (lazy imports, compiled kernels), so the serial baseline carries no one-off cost.
    tdakit.confidence_band(cloud, landmarks=marks, method="bootstrap", n_boot=4, rng=3)
    for label, jobs in (("serial", 1), ("n_jobs=2, cold", 2), ("n_jobs=2, warm", 2)):
        # "cold" starts the worker processes (and their imports); "warm" reuses them, as every later call does.
        start = time.perf_counter()
        tdakit.confidence_band(cloud, landmarks=marks, method="bootstrap", n_boot=n_boot, rng=3, n_jobs=jobs)
        timings[label] = time.perf_counter() - start
    serial = timings["serial"]
    print(f"bootstrap, {n_boot} replicates: serial {serial:.1f} s; " + "; ".join(
        f"{label} {timings[label]:.1f} s, parallel efficiency {serial / (2 * timings[label]):.0%}"
        for label in ("n_jobs=2, cold", "n_jobs=2, warm")))


if __name__ == "__main__":
    lazy_witness()
    knn_density()
    bootstrap_efficiency()

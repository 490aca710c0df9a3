"""The distributed kNN radius against the in-memory one, measured in the same run.

Prints, for an invented 3-D cloud (clumps in a uniform background), the distributed time over the
in-memory time, the bytes each pass moved between workers, whether the radii are identical, and each
worker's peak memory (and its peak above the idle worker) over the bytes of its rows. The workers
read the rows from a .npy file themselves.

    python benchmarks/distributed_density.py            # 10^6 points
    python benchmarks/distributed_density.py --large    # and 10^7 points
"""

from __future__ import annotations

import argparse
import tempfile
import time
import warnings
from pathlib import Path

import numpy as np


def invented_cloud(n_points: int, seed: int = 0) -> np.ndarray:
    """Half the points in 20 tight clumps, half uniform in a cube of side 100 (an invented scene)."""
    rng = np.random.default_rng(seed)
    centres = rng.uniform(0, 100, size=(20, 3))
    clumps = centres[rng.integers(0, 20, n_points // 2)] + rng.normal(scale=1.5, size=(n_points // 2, 3))
    return np.concatenate((clumps, rng.uniform(0, 100, size=(n_points - n_points // 2, 3))))


def reset_peak() -> int:
    """Reset this process's peak resident memory (Linux: ``/proc/self/clear_refs``); its current memory in bytes."""
    with open("/proc/self/clear_refs", "w") as handle:
        handle.write("5")
    return _status("VmRSS")


def peak_memory() -> int:
    """This process's peak resident memory since the last reset, in bytes (``VmHWM``)."""
    return _status("VmHWM")


def _status(field: str) -> int:
    with open("/proc/self/status") as handle:
        for line in handle:
            if line.startswith(field + ":"):
                return int(line.split()[1]) * 1024
    return 0


def run(n_points: int, k: int, n_workers: int, folder: Path) -> dict:
    import distributed

    import tdakit
    from tdakit.core.geometry.density import knn_radius
    from tdakit.distributed._cluster import Workers, describe_source, resolve_metric
    from tdakit.distributed.density import compute_radii

    points = invented_cloud(n_points)
    path = folder / f"cloud_{n_points}.npy"
    np.save(path, points)
    with distributed.LocalCluster(n_workers=n_workers, threads_per_worker=1, processes=True, memory_limit=0,
                                  dashboard_address=None) as cluster, distributed.Client(cluster) as client:
        start = client.run(reset_peak)
        began = time.perf_counter()
        described, _ = describe_source(str(path), "benchmark")
        workers = Workers(client, described, resolve_metric(None, None, None, None, 3, "benchmark"), 1, None,
                          "benchmark")
        try:
            cost = compute_radii(workers, k, None)
            parts = [part for reply in workers.call("density_radius", None) for part in reply]
        finally:
            workers.close()
        radius = np.empty(n_points)
        for offset, values in parts:
            radius[offset:offset + values.size] = values
        on_cluster = time.perf_counter() - began
        peaks = client.run(peak_memory)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        cloud = tdakit.load_cloud(points)
    began = time.perf_counter()
    expected = knn_radius(cloud, k)
    in_memory = time.perf_counter() - began
    data_per_worker = points.nbytes / n_workers
    return {"n": n_points, "in_memory_s": in_memory, "distributed_s": on_cluster, "cells": cost["cells"],
            "pass_one_bytes": cost["pass_one_bytes"], "pass_two_bytes": cost["pass_two_bytes"],
            "halo_rows": cost["halo_rows"], "identical": bool(np.array_equal(radius, expected)),
            "peak_over_data": [peaks[w] / data_per_worker for w in sorted(peaks)],
            "added_over_data": [(peaks[w] - start[w]) / data_per_worker for w in sorted(peaks)]}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--large", action="store_true", help="also 10^7 points")
    parser.add_argument("--sizes", type=int, nargs="+", help="these numbers of points instead")
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument("-k", type=int, default=15)
    args = parser.parse_args()
    sizes = args.sizes or ([10**6, 10**7] if args.large else [10**6])
    with tempfile.TemporaryDirectory() as folder:
        for n_points in sizes:
            row = run(n_points, args.k, args.workers, Path(folder))
            print(f"n={row['n']:.0e} k={args.k} workers={args.workers} cells={row['cells']}: in memory "
                  f"{row['in_memory_s']:.1f} s, distributed {row['distributed_s']:.1f} s (ratio "
                  f"{row['distributed_s'] / row['in_memory_s']:.2f}); pass 1 moved {row['pass_one_bytes'] / 2**20:.0f} "
                  f"MiB, pass 2 {row['pass_two_bytes'] / 2**20:.1f} MiB ({row['halo_rows']} boundary balls); "
                  f"identical: {'yes' if row['identical'] else 'NO'}; per-worker peak memory / its rows' bytes: "
                  f"{', '.join(f'{v:.1f}' for v in row['peak_over_data'])} (above the idle worker: "
                  f"{', '.join(f'{v:.1f}' for v in row['added_over_data'])})", flush=True)


if __name__ == "__main__":
    main()

"""Exact maxmin landmarks on a Dask LocalCluster against the in-memory routine, on a memory-mapped .npy file.

Writes an (n x d) float64 cloud (uniform in a cube with denser clumps, seed 0) to a temporary .npy file, selects
maxmin landmarks with ``tdakit.distributed.select_landmarks_distributed`` on a LocalCluster (each worker maps
its own rows of the file; every point's nearest landmark and distance go to memory-mapped files), then loads
the whole file into this process and runs ``tdakit.select_landmarks`` with the same seed. Prints whether the
indices and coverage radius are identical, the wall-time ratio (distributed, reading included / in-memory
selection alone), each process's peak resident memory against the data's size, and the per-round latency
measured on a tiny cloud on the same cluster. The file is deleted at the end.

Run: python benchmarks/distributed_landmarks.py --points 100000000 (2.4 GB in --dir, default /tmp; takes both
cores and about 9 GB of memory for the in-memory baseline). Smaller: --points 1000000.
"""

from __future__ import annotations

import argparse
import json
import shutil
import signal
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROWS_PER_WRITE = 1 << 22


def write_cloud(path: Path, n: int, d: int, seed: int = 0) -> None:
    """Uniform points in [0, 100)^d with a tenth of them in 50 tight clumps, written in blocks."""
    rng = np.random.default_rng(seed)
    out = np.lib.format.open_memmap(path, mode="w+", dtype=np.float64, shape=(n, d))
    centres = rng.uniform(0, 100, size=(50, d))
    for start in range(0, n, ROWS_PER_WRITE):
        size = min(ROWS_PER_WRITE, n - start)
        block = rng.uniform(0, 100, size=(size, d))
        clumped = rng.random(size) < 0.1
        block[clumped] = np.clip(centres[rng.integers(50, size=clumped.sum())]
                                 + rng.normal(scale=0.5, size=(clumped.sum(), d)), 0, 100)
        out[start:start + size] = block
    out.flush()
    del out


def peak_rss() -> int:
    """This process's peak resident memory (VmHWM, bytes)."""
    for line in Path("/proc/self/status").read_text().splitlines():
        if line.startswith("VmHWM:"):
            return int(line.split()[1]) * 1024
    return 0


def run_distributed(path: Path, args, work: Path) -> dict:
    from dask.distributed import Client, LocalCluster

    from tdakit.distributed import select_landmarks_distributed

    with LocalCluster(n_workers=args.workers, threads_per_worker=1, processes=True, dashboard_address=None,
                      memory_limit=0) as cluster, Client(cluster) as client:
        warm = np.random.default_rng(1).random((20_000, path_dims(path)))
        select_landmarks_distributed(warm, 5, start=0, client=client)  # compile on every worker, outside timing
        tiny = select_landmarks_distributed(warm[:2000], 500, start=0, client=client, chunk_rows=1000)
        latency = tiny.params["cluster"]["select_seconds"] / tiny.params["cluster"]["rounds"]
        client.run(_reset_peak)
        _reset_peak()  # this process too: writing the file mapped it
        baselines = client.run(_worker_peak)  # each worker's resident memory before the run (interpreter, imports)
        start = time.perf_counter()
        marks = select_landmarks_distributed(str(path), args.landmarks, rng=args.seed, client=client,
                                             per_point=work / "per_point")
        seconds = time.perf_counter() - start
        worker_peaks = client.run(_worker_peak)
    return {"indices": np.asarray(marks.indices), "radius": marks.coverage_radius, "seconds": seconds,
            "cluster": marks.params["cluster"], "worker_peaks": worker_peaks, "worker_baselines": baselines,
            "round_latency": latency,
            "driver_peak": peak_rss()}


def _reset_peak() -> None:
    Path("/proc/self/clear_refs").write_text("5")


def _worker_peak() -> int:
    import psutil

    info = psutil.Process().memory_full_info()
    return max(peak_rss(), int(info.rss))


def path_dims(path: Path) -> int:
    return int(np.load(path, mmap_mode="r").shape[1])


def run_in_memory(path: Path, args) -> dict:
    import tdakit
    from tdakit.core.geometry.cloud import Cloud
    from tdakit.core.geometry.metrics import Metric

    tdakit.select_landmarks(tdakit.load_cloud(np.random.default_rng(1).random((2000, 3))), 5, start=0)  # compile
    start = time.perf_counter()
    points = np.load(path)  # the whole cloud in this process
    points.setflags(write=False)
    read = time.perf_counter() - start
    # The Cloud is built directly: load_cloud's duplicate count (a sort of every row) is not part of the selection
    # and would dominate at 10^8 rows; random float coordinates repeat with probability ~0.
    cloud = Cloud(points, Metric(), tuple(f"x{i}" for i in range(points.shape[1])), str(path))
    start = time.perf_counter()
    marks = tdakit.select_landmarks(cloud, args.landmarks, rng=args.seed)
    seconds = time.perf_counter() - start
    return {"indices": marks.indices, "radius": marks.coverage_radius, "seconds": seconds, "read_seconds": read,
            "peak": peak_rss()}


def _check_memory(data_bytes: int) -> None:
    """The in-memory baseline needs about 3.7 x the data (points, the boxes' copy, per-point results)."""
    import psutil

    need = 4 * data_bytes
    available = psutil.virtual_memory().available
    if available < need:
        sys.exit(f"Not started: the in-memory baseline needs about {need / 2**30:.1f} GiB and only "
                 f"{available / 2**30:.1f} GiB is available now; retry later or pass a smaller --points.")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--points", type=int, default=100_000_000)
    parser.add_argument("--dims", type=int, default=3)
    parser.add_argument("--landmarks", type=int, default=1000)
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument("--seed", type=int, default=7)
    parser.add_argument("--dir", type=Path, default=Path("/tmp"))
    args = parser.parse_args()
    data_bytes = args.points * args.dims * 8
    _check_memory(data_bytes)
    signal.signal(signal.SIGTERM, lambda *_: sys.exit(143))  # so that the file is deleted on kill too
    work = Path(tempfile.mkdtemp(prefix="tdakit-distributed-", dir=args.dir))
    try:
        path = work / "cloud.npy"
        start = time.perf_counter()
        write_cloud(path, args.points, args.dims)
        print(f"wrote {args.points:,} x {args.dims} float64 ({data_bytes / 2**30:.2f} GiB) in "
              f"{time.perf_counter() - start:.1f} s")
        spread = run_distributed(path, args, work)
        shutil.rmtree(work / "per_point")
        local = run_in_memory(path, args)
    finally:
        shutil.rmtree(work, ignore_errors=True)
    identical = np.array_equal(spread["indices"], local["indices"])
    report = {
        "points": args.points, "dims": args.dims, "landmarks": args.landmarks, "workers": args.workers,
        "identical_indices": bool(identical), "identical_radius": spread["radius"] == local["radius"],
        "coverage_radius": local["radius"],
        "distributed_s": round(spread["seconds"], 2),
        "distributed_load_s": round(spread["cluster"]["load_seconds"], 2),
        "distributed_select_s": round(spread["cluster"]["select_seconds"], 2),
        "in_memory_select_s": round(local["seconds"], 2), "in_memory_read_s": round(local["read_seconds"], 2),
        "ratio_distributed_over_in_memory": round(spread["seconds"] / local["seconds"], 2),
        "round_latency_ms": round(1000 * spread["round_latency"], 2),
        "rounds": spread["cluster"]["rounds"], "bytes_moved": spread["cluster"]["bytes_moved"],
        "worker_peak_over_data": {w.rsplit(":", 1)[-1]: round(b / data_bytes, 3)
                                  for w, b in spread["worker_peaks"].items()},
        "worker_growth_over_data": {w.rsplit(":", 1)[-1]: round((b - spread["worker_baselines"][w]) / data_bytes, 3)
                                    for w, b in spread["worker_peaks"].items()},
        "worker_peak_gib": {w.rsplit(":", 1)[-1]: round(b / 2**30, 2) for w, b in spread["worker_peaks"].items()},
        "driver_peak_during_distributed_over_data": round(spread["driver_peak"] / data_bytes, 3),
        "in_memory_peak_over_data": round(local["peak"] / data_bytes, 3),
    }
    print(json.dumps(report, indent=1))


if __name__ == "__main__":
    main()

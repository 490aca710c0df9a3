"""Exact maxmin landmarks on a Dask LocalCluster against the in-memory routine, on a memory-mapped .npy file.

Writes an (n x d) float64 cloud (uniform in a cube with denser clumps, seed 0) to a temporary .npy file, selects
maxmin landmarks with ``tdakit.distributed.select_landmarks_distributed`` on a LocalCluster (each worker maps
its own rows of the file; every point's nearest landmark and distance go to memory-mapped files), then loads
the whole file into this process and runs ``tdakit.select_landmarks`` with the same seed. Prints whether the
indices and coverage radius are identical, the wall-time ratio (distributed, reading included / in-memory
selection alone), each process's peak memory against the data's size, split into private (anonymous) memory and
file-backed mapped pages, and the per-round latency measured on a tiny cloud on the same cluster. The file is
deleted at the end.

Memory: a thread in this process reads /proc/<pid>/status of every worker and of itself every 20 ms during the
selection (RssAnon: private memory; RssFile: mapped file pages, i.e. the kernel's page cache, reclaimable; RssShmem)
and keeps each column's maximum; VmHWM (the high-water mark of their sum) is read at the end. The sampler is not a
thread inside the workers because their compiled passes hold the GIL. ``--keep-rows`` sets the mode
(memory/disk/auto) of ``select_landmarks_distributed``.

Run: python benchmarks/distributed_landmarks.py --points 100000000 --keep-rows disk (2.4 GB in --dir, default
/tmp, plus the workers' scratch files in their local directories; takes both cores and about 9 GB of memory for the
in-memory baseline). Smaller: --points 1000000.
"""

from __future__ import annotations

import argparse
import json
import os
import shutil
import signal
import sys
import tempfile
import threading
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


STATUS_FIELDS = ("RssAnon", "RssFile", "RssShmem", "VmHWM")


def read_status(pid: int | str = "self") -> dict[str, int]:
    """The memory fields of /proc/<pid>/status, in bytes (Linux)."""
    found = {}
    for line in Path(f"/proc/{pid}/status").read_text().splitlines():
        name, _, value = line.partition(":")
        if name in STATUS_FIELDS:
            found[name] = int(value.split()[0]) * 1024
    return found


class Sampler:
    """Each process's largest RssAnon, RssFile and RssShmem (and their sum) over the samples, every ``every`` s."""

    def __init__(self, pids: dict[str, int], every: float = 0.02):
        self.pids, self.every = pids, every
        self.peaks = {name: dict.fromkeys(("RssAnon", "RssFile", "RssShmem", "sum"), 0) for name in pids}
        self.samples = 0
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._run, daemon=True)

    def __enter__(self) -> Sampler:
        self._thread.start()
        return self

    def __exit__(self, *exc) -> None:
        self._stop.set()
        self._thread.join()
        self._sample()
        for name, pid in self.pids.items():
            self.peaks[name]["VmHWM"] = read_status(pid).get("VmHWM", 0)

    def _run(self) -> None:
        while not self._stop.wait(self.every):
            self._sample()

    def _sample(self) -> None:
        self.samples += 1
        for name, pid in self.pids.items():
            status = read_status(pid)
            peak = self.peaks[name]
            for field in ("RssAnon", "RssFile", "RssShmem"):
                peak[field] = max(peak[field], status.get(field, 0))
            peak["sum"] = max(peak["sum"], sum(status.get(f, 0) for f in ("RssAnon", "RssFile", "RssShmem")))


def run_distributed(path: Path, args, work: Path) -> dict:
    from dask.distributed import Client, LocalCluster

    from tdakit.distributed import select_landmarks_distributed

    with LocalCluster(n_workers=args.workers, threads_per_worker=1, processes=True, dashboard_address=None,
                      memory_limit=0) as cluster, Client(cluster) as client:
        warm = np.random.default_rng(1).random((20_000, path_dims(path)))
        select_landmarks_distributed(warm, 5, start=0, client=client, keep_rows=args.keep_rows)  # compile
        tiny = select_landmarks_distributed(warm[:2000], 500, start=0, client=client, chunk_rows=1000)
        latency = tiny.params["cluster"]["select_seconds"] / tiny.params["cluster"]["rounds"]
        client.run(_reset_peak)
        _reset_peak()  # this process too: writing the file mapped it
        baselines = client.run(_worker_peak)  # each worker's resident memory before the run (interpreter, imports)
        before = {w: read_status(pid) for w, pid in client.run(os.getpid).items()}
        pids = {"driver": os.getpid(), **{w.rsplit(":", 1)[-1]: pid for w, pid in client.run(os.getpid).items()}}
        with Sampler(pids) as sampler:
            start = time.perf_counter()
            marks = select_landmarks_distributed(str(path), args.landmarks, rng=args.seed, client=client,
                                                 per_point=work / "per_point", keep_rows=args.keep_rows)
            seconds = time.perf_counter() - start
        worker_peaks = client.run(_worker_peak)
    return {"indices": np.asarray(marks.indices), "radius": marks.coverage_radius, "seconds": seconds,
            "cluster": marks.params["cluster"], "worker_peaks": worker_peaks, "worker_baselines": baselines,
            "round_latency": latency, "driver_peak": peak_rss(), "sampled": sampler.peaks,
            "samples": sampler.samples, "before": {w.rsplit(":", 1)[-1]: v for w, v in before.items()}}


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
    parser.add_argument("--keep-rows", choices=("memory", "disk", "auto"), default="memory",
                        help="where each worker keeps its rows (select_landmarks_distributed's keep_rows)")
    args = parser.parse_args()
    data_bytes = args.points * args.dims * 8
    _check_memory(data_bytes)
    started = time.strftime("%Y-%m-%d %H:%M:%S UTC", time.gmtime())
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
        "started_utc": started, "points": args.points, "dims": args.dims, "landmarks": args.landmarks,
        "workers": args.workers, "keep_rows": spread["cluster"]["keep_rows"],
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
        "sampled_peaks_over_data": {name: {field: round(value / data_bytes, 3) for field, value in peak.items()}
                                    for name, peak in spread["sampled"].items()},
        "sampled_peaks_gib": {name: {field: round(value / 2**30, 3) for field, value in peak.items()}
                              for name, peak in spread["sampled"].items()},
        "worker_before_gib": {name: {field: round(value / 2**30, 3) for field, value in status.items()}
                              for name, status in spread["before"].items()},
        "samples": spread["samples"],
    }
    print(json.dumps(report, indent=1))


if __name__ == "__main__":
    main()

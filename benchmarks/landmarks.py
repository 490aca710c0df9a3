"""Maxmin landmark selection: tdakit against gudhi's choose_n_farthest_points and a plain numpy loop.

Every row is measured in the same run; ratios are baseline time / tdakit time (higher is better for tdakit).
Peak memory is the call's peak resident memory (the high-water mark, reset at the call's start) less the memory
resident before it, over the input's size, each case in a fresh subprocess; it includes the result (every point's
nearest landmark and distance). Run: python benchmarks/landmarks.py [--large] (10^7 points with --large).
"""

import json
import subprocess
import sys

import numpy as np

CASE = r"""
import json, sys, time
import numpy as np
n, d, m, who = int(sys.argv[1]), int(sys.argv[2]), int(sys.argv[3]), sys.argv[4]
points = np.random.default_rng(0).normal(size=(n, d))
import tdakit, gudhi.subsampling
from tdakit._memory import PeakMemory
cloud = tdakit.load_cloud(points)
if who == "tdakit":
    tdakit.select_landmarks(tdakit.load_cloud(points[:2000]), 5, start=0)  # compile outside the timing
with PeakMemory() as peak:
    start = time.perf_counter()
    if who == "tdakit":
        tdakit.select_landmarks(cloud, m, start=0)
    elif who == "gudhi":
        gudhi.subsampling.choose_n_farthest_points(points=points, nb_points=m, starting_point=0)
    else:
        from tdakit.core.geometry.landmarks import reference_maxmin
        reference_maxmin(cloud, m, np.arange(n), 0)
    seconds = time.perf_counter() - start
print(json.dumps({"seconds": seconds, "peak_over_input": peak.growth_bytes / points.nbytes}))
"""


def measure(n, d, m, who):
    out = subprocess.run([sys.executable, "-c", CASE, str(n), str(d), str(m), who], capture_output=True, text=True,
                         check=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


BANDWIDTH = r"""
import json, sys, time
import numpy as np
n, d, m = int(sys.argv[1]), int(sys.argv[2]), int(sys.argv[3])
points = np.random.default_rng(0).normal(size=(n, d))
from concurrent.futures import ThreadPoolExecutor
single = points.astype(np.float32).ravel()
halves = np.array_split(single, 2)
def best_rate(stream):  # the fastest of 20 passes: a vectorised maximum is bound by memory
    stream()
    times = []
    for _ in range(20):
        start = time.perf_counter()
        stream()
        times.append(time.perf_counter() - start)
    return single.nbytes / min(times)
with ThreadPoolExecutor(2) as pool:  # numpy releases the GIL: two threads may draw more bandwidth than one
    bandwidth = max(best_rate(single.max), best_rate(lambda: list(pool.map(np.max, halves))))
import tdakit
cloud = tdakit.load_cloud(points)
tdakit.select_landmarks(tdakit.load_cloud(points[:2000]), 5, start=0)
start = time.perf_counter()
tdakit.select_landmarks(cloud, m, start=0)
print(json.dumps({"seconds": time.perf_counter() - start, "bandwidth": bandwidth,
                  "limit": n * d * 4 * m / bandwidth}))
"""


def bandwidth_case(n=1_000_000, d=20, m=1000) -> None:
    """High dimension: tdakit against the time to stream the points once per landmark (float32), measured here.

    The bandwidth is the best of 20 passes with one thread and with two, so the bound is the most demanding one.
    """
    out = subprocess.run([sys.executable, "-c", BANDWIDTH, str(n), str(d), str(m)], capture_output=True, text=True,
                         check=True)
    row = json.loads(out.stdout.strip().splitlines()[-1])
    print(f"{n:,} Gaussian points, {d}-D, {m} lm: tdakit {row['seconds']:.1f} s; streaming the float32 points once per "
          f"landmark at the {row['bandwidth'] / 1e9:.1f} GB/s measured here takes {row['limit']:.1f} s; "
          f"ratio {row['seconds'] / row['limit']:.2f} (target <= 2)")


def main() -> None:
    sizes = [100_000, 300_000, 1_000_000] + ([10_000_000] if "--large" in sys.argv else [])
    print(f"{'case':<34} {'tdakit s':>9} {'gudhi s':>8} {'ratio':>6} {'plain s':>8} {'ratio':>6} {'peak/input':>10}")
    times = []
    for n in sizes:
        for d in ((3, 20) if n == 100_000 else (3,)):
            ours, theirs = measure(n, d, 1000, "tdakit"), measure(n, d, 1000, "gudhi")
            plain = measure(n, d, 1000, "plain") if n <= 300_000 else None
            plain_s = (f"{plain['seconds']:8.2f} {plain['seconds'] / ours['seconds']:6.1f}" if plain
                       else f"{'-':>8} {'-':>6}")
            print(f"{f'{n:,} Gaussian points, {d}-D, 1000 lm':<34} {ours['seconds']:9.2f} {theirs['seconds']:8.2f} "
                  f"{theirs['seconds'] / ours['seconds']:6.1f} {plain_s} {ours['peak_over_input']:10.2f}")
            if d == 3:
                times.append((n, ours["seconds"]))
    sizes_, seconds = np.log([t[0] for t in times]), np.log([t[1] for t in times])
    print(f"fitted growth exponent of tdakit time in n (3-D): {np.polyfit(sizes_, seconds, 1)[0]:.2f}")
    bandwidth_case()


if __name__ == "__main__":
    main()

"""Helpers shared by tests: deep comparison of results and a small planted cloud."""

from __future__ import annotations

import contextlib
import dataclasses
import math

import numpy as np


def assert_same(a, b, where: str = "value") -> None:
    """Recursive equality for dataclasses, arrays, dicts, sequences and floats (NaN equals NaN)."""
    if dataclasses.is_dataclass(a) and not isinstance(a, type):
        assert type(a) is type(b), f"{where}: {type(a)} vs {type(b)}"
        for item in dataclasses.fields(a):
            assert_same(getattr(a, item.name), getattr(b, item.name), f"{where}.{item.name}")
    elif isinstance(a, np.ndarray) or isinstance(b, np.ndarray):
        a, b = np.asarray(a), np.asarray(b)
        assert a.shape == b.shape and a.dtype == b.dtype, f"{where}: {a.shape}/{a.dtype} vs {b.shape}/{b.dtype}"
        assert np.array_equal(a, b, equal_nan=a.dtype.kind == "f"), f"{where}: arrays differ"
    elif isinstance(a, dict):
        assert isinstance(b, dict) and set(map(str, a)) == set(map(str, b)), f"{where}: keys differ"
        other = {str(k): v for k, v in b.items()}
        for key, value in a.items():
            assert_same(value, other[str(key)], f"{where}[{key!r}]")
    elif isinstance(a, (list, tuple)):
        assert isinstance(b, (list, tuple)) and len(a) == len(b), f"{where}: lengths differ"
        for i, (x, y) in enumerate(zip(a, b)):
            assert_same(x, y, f"{where}[{i}]")
    elif isinstance(a, float) and math.isnan(a):
        assert isinstance(b, float) and math.isnan(b), f"{where}: NaN vs {b!r}"
    else:
        assert a == b, f"{where}: {a!r} vs {b!r}"


def two_circles(n_points: int, rng=0) -> np.ndarray:
    """Circles of radius 1 at the origin and 0.7 at (3, 0), 60 % / 40 % of the points, noise s.d. 0.02.

    Known topology (common practice): two components (H0 = 2) and two loops (H1 = 2); the gap
    between the circles is 1.3, the smaller loop's Rips persistence about sqrt(3) x 0.7.
    """
    from tdakit.shapes import circle

    generator = np.random.default_rng(rng)
    big = int(0.6 * n_points)
    points = np.vstack([circle(big, rng=generator), 0.7 * circle(n_points - big, rng=generator) + [3.0, 0.0]])
    return points + generator.normal(0.0, 0.02, points.shape)


def cli(capsys, *args):
    """Run ``tdakit`` in this process: (exit code, stdout, stderr)."""
    from tdakit.cli.main import main

    try:
        code = main([str(a) for a in args])
    except SystemExit as exc:  # argparse's usage errors
        code = exc.code
    out, err = capsys.readouterr()
    return code, out, err


def assert_refused(result, needles, code=1):
    """Exit ``code`` (1: one 'tdakit: error:' line last; 2: argparse usage), no traceback, a needle named."""
    status, out, err = result
    assert status == code, (status, out, err)
    assert "Traceback" not in out + err and "internal error" not in err, err
    if code == 1:
        lines = [line for line in err.splitlines() if not line.startswith("[")]  # progress lines may come first
        assert lines and lines[-1].startswith("tdakit: error:"), err
    else:
        assert "usage:" in err, err
    needles = (needles,) if isinstance(needles, str) else needles
    assert any(needle in err for needle in needles), (needles, err)


@contextlib.contextmanager
def in_process_client(n_workers: int, *, default: bool = True):
    """A Dask client of ``n_workers`` single-threaded workers in this process (``default=False``: not set as the
    default client, so nothing may rely on one)."""
    import distributed

    with distributed.LocalCluster(n_workers=n_workers, threads_per_worker=1, processes=False,
                                  dashboard_address=None) as cluster:
        with distributed.Client(cluster, set_as_default=default) as connected:
            yield connected

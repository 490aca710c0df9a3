"""Compiled lazy witness edges (numba), imported on first use by ``tdakit.core.topology._witness``."""

import numpy as np
from numba import njit

from tdakit.core.geometry._maxmin_kernels import dist


@njit(cache=True, nogil=True)
def lazy_edges(points, marks, first, last, nu, cap, mode, p, box, edges):
    """Lower ``edges[a, b]`` (a < b positions of ``marks``) to the lazy witness value over witnesses [first, last).

    For a witness w with m_nu(w) its distance to the nu-th nearest landmark (0 for nu = 0),
    every landmark within ``cap`` of m_nu(w) is listed with its relative distance
    d(l, w) - m_nu(w); in that list sorted, the pair (i < j) costs the j-th value, the
    larger of the two. Each witness is one row of distances: no witness x landmark matrix.
    """
    m = marks.shape[0]
    reach = np.empty(m)
    listed = np.empty(m, dtype=np.int64)
    values = np.empty(m)
    for w in range(first, last):
        low1, low2 = np.inf, np.inf
        for a in range(m):
            reach[a] = dist(points, w, marks, a, mode, p, box)
            if reach[a] < low1:
                low1, low2 = reach[a], low1
            elif reach[a] < low2:
                low2 = reach[a]
        base = 0.0 if nu == 0 else (low1 if nu == 1 else low2)
        count = 0
        for a in range(m):
            if reach[a] - base <= cap:
                listed[count], values[count] = a, reach[a] - base
                count += 1
        order = np.argsort(values[:count], kind="mergesort")
        for j in range(1, count):
            value, b = values[order[j]], listed[order[j]]
            for i in range(j):
                a = listed[order[i]]
                lo, hi = min(a, b), max(a, b)
                if value < edges[lo, hi]:
                    edges[lo, hi] = value

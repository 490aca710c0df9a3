"""Comparing two groups of diagrams: a permutation test on within-group distances."""

from __future__ import annotations

import numbers
from dataclasses import dataclass, field
from itertools import combinations
from math import comb

import numpy as np
from numpy.typing import NDArray

from tdakit._validation import check_choice, check_float, check_int, check_rng, fail
from tdakit.core.topology.diagrams import Diagrams
from tdakit.core.topology.distances import as_diagram, diagram_distance

__all__ = ["PermutationResult", "permutation_test"]
_FN = "permutation_test"
EXACT_LIMIT = 20_000  # labelings enumerated exactly up to this many
# Random labelings at most: 1e6 resolve a p-value to 1e-6, and each costs time and a row of booleans in memory.
MAX_PERMUTATIONS = 1_000_000
# Measured: about 0.5 us per labeling and diagram (drawing the labeling and its loss; 12 diagrams, 10^5 labelings
# in 0.64 s).
SECONDS_PER_LABELING_DIAGRAM = 5e-7
_LOSS_BLOCK = 4096


@dataclass(frozen=True, eq=False)
class PermutationResult:
    """Outcome of a two-group permutation test.

    Attributes
    ----------
    p_value : float
        Exact: the fraction of all labelings with a loss at most the observed one.
        Monte Carlo: (Z + 1) / (N + 1), Z of N random labelings at most the observed.
    statistic : float
        The observed loss (smaller = tighter groups).
    null : ndarray
        The loss of every labeling considered (the null distribution).
    exact : bool
    distances : ndarray
        The pairwise distance matrix, first group first.
    """

    p_value: float
    statistic: float
    null: NDArray[np.float64] = field(repr=False)
    exact: bool
    distances: NDArray[np.float64] = field(repr=False)
    params: dict = field(default_factory=dict)


def permutation_test(
    group_a, group_b, *, dim: int | None = None, kind: str = "wasserstein", order: float = 2.0,
    power: float = 2.0, n_permutations: int | None = None, rng=None,
) -> PermutationResult:
    """Do two groups of persistence diagrams differ more than a random split of them would?

    Parameters
    ----------
    group_a, group_b : sequence of arrays of shape (m, 2), or of Diagrams
        At least two diagrams each; with Diagrams, ``dim`` picks the homology dimension.
    dim : int, optional
        Homology dimension (required for Diagrams objects).
    kind : {"wasserstein", "bottleneck"}, default="wasserstein"
    order : float, default=2.0
        Wasserstein order p.
    power : float, default=2.0
        Exponent q on distances in the loss.
    n_permutations : int, optional
        Random labelings, at most 1,000,000 (larger counts are refused with the time they would take);
        default: every labeling when there are at most 20,000, else 9,999.
    rng : int, Generator or None
        Randomness of the labelings: a Generator is drawn from directly, an int seeds one, so ``rng=s`` and
        ``rng=numpy.random.default_rng(s)`` give the same p-value.

    Notes
    -----
    Loss of a labeling: F = sum over groups g of 1 / (2 n_g (n_g - 1)) times the sum over
    ordered pairs i != j in g of d(X_i, X_j)^q [1]_.

    References
    ----------
    .. [1] A. Robinson, K. Turner, "Hypothesis testing for topological data analysis",
       J. Appl. Comput. Topol. 1 (2017) 241-261.
    """
    kind = check_choice(kind, "kind", _FN, ("bottleneck", "wasserstein"))
    order = check_float(order, "order", _FN, low=1.0)
    power = check_float(power, "power", _FN, low=0.0, low_open=True)
    group_a, group_b = _as_list(group_a, "group_a"), _as_list(group_b, "group_b")  # read once (generators)
    n_permutations = _check_count(n_permutations, len(group_a) + len(group_b))
    generator = check_rng(rng, _FN)
    diagrams = _collect(group_a, "group_a", dim) + _collect(group_b, "group_b", dim)
    n_a, total = len(group_a), len(diagrams)
    distances = np.zeros((total, total))
    for i, j in combinations(range(total), 2):
        distances[i, j] = distances[j, i] = diagram_distance(diagrams[i], diagrams[j], kind=kind, order=order)
    weights = distances**power
    observed = float(_losses(weights, [np.arange(total) < n_a])[0])
    labelings, exact = _labelings(total, n_a, n_permutations, generator)
    null = _losses(weights, labelings)
    tolerance = 1e-12 * max(abs(observed), 1e-300)
    at_most = int((null <= observed + tolerance).sum())
    p_value = at_most / len(null) if exact else (at_most + 1) / (len(null) + 1)
    return PermutationResult(float(p_value), float(observed), null, exact, distances,
                             {"kind": kind, "order": order, "power": power, "n_labelings": len(null)})


def _as_list(group, name):
    """The group's diagrams as a list, read once (a generator can be iterated only once)."""
    if isinstance(group, (str, bytes, dict, Diagrams)) or not hasattr(group, "__iter__"):
        raise fail(name, _FN, "a sequence of at least 2 diagrams", group)
    if isinstance(group, np.ndarray) and group.ndim != 3:
        return [group]
    return list(group)


def _check_count(n_permutations, total):
    """The number of random labelings, refused above MAX_PERMUTATIONS with the time it would take."""
    if n_permutations is None:
        return None
    if isinstance(n_permutations, numbers.Integral) and not isinstance(n_permutations, bool) \
            and n_permutations > MAX_PERMUTATIONS:
        hours = float(n_permutations) * total * SECONDS_PER_LABELING_DIAGRAM / 3600
        raise fail("n_permutations", _FN, f"at most {MAX_PERMUTATIONS:,} (a Monte Carlo p-value resolves 1 / (N + 1); "
                   f"{MAX_PERMUTATIONS:,} labelings already resolve p to 1e-6). {n_permutations:,} labelings of "
                   f"{total} diagrams would take about {hours:.3g} hour(s) and hold as many labelings in memory; "
                   "leave it None for every labeling when there are at most 20,000", n_permutations)
    return check_int(n_permutations, "n_permutations", _FN, low=1, high=MAX_PERMUTATIONS)


def _collect(items, name, dim):
    if len(items) < 2:
        raise fail(name, _FN, "a sequence of at least 2 diagrams", items)
    out = []
    for item in items:
        if isinstance(item, Diagrams):
            if dim is None:
                raise fail("dim", _FN, "a homology dimension when the groups hold Diagrams objects", dim)
            item = item[check_int(dim, "dim", _FN, low=0)]
        out.append(as_diagram(item, name, _FN))
    return out


def _losses(weights, labelings) -> NDArray[np.float64]:
    """The loss of every labeling (rows of a boolean matrix), in blocks: the same sums as ``_loss``."""
    out = np.empty(len(labelings))
    for start in range(0, len(labelings), _LOSS_BLOCK):
        masks = np.asarray(labelings[start:start + _LOSS_BLOCK], dtype=np.float64)
        for side in (masks, 1.0 - masks):
            size = side.sum(axis=1)
            within = np.einsum("ij,jk,ik->i", side, weights, side)
            with np.errstate(divide="ignore", invalid="ignore"):
                part = np.where(size > 1, within / (2 * size * (size - 1)), 0.0)
            out[start:start + _LOSS_BLOCK] = part if side is masks else out[start:start + _LOSS_BLOCK] + part
    return out


def _loss(weights, mask) -> float:
    total = 0.0
    for members in (np.flatnonzero(mask), np.flatnonzero(~mask)):
        size = members.size
        if size > 1:
            total += weights[np.ix_(members, members)].sum() / (2 * size * (size - 1))
    return total


def _labelings(total, n_a, n_permutations, generator):
    count = comb(total, n_a)
    if n_permutations is None and count <= EXACT_LIMIT:
        masks = []
        for chosen in combinations(range(total), n_a):
            mask = np.zeros(total, dtype=bool)
            mask[list(chosen)] = True
            masks.append(mask)
        return masks, True
    n_permutations = 9_999 if n_permutations is None else n_permutations
    base = np.arange(total) < n_a
    return [generator.permutation(base) for _ in range(n_permutations)], False

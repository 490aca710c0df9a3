import itertools

import numpy as np
import ot
import persim
import pytest
from hypothesis import given
from hypothesis import strategies as st

import tdakit


def brute_force(a, b, kind, order=1.0, ground="sup"):
    """Minimum over every matching of the diagonal-augmented diagrams (Cohen-Steiner et al. 2010 definition)."""
    a, b = np.asarray(a, float).reshape(-1, 2), np.asarray(b, float).reshape(-1, 2)
    n, m = len(a), len(b)
    if n + m == 0:
        return 0.0
    scale = 2.0 if ground == "sup" else np.sqrt(2.0)
    left, right = list(a) + [None] * m, list(b) + [None] * n
    best = np.inf
    for perm in itertools.permutations(range(n + m)):
        costs = []
        for i, j in enumerate(perm):
            u, v = left[i], right[j]
            if u is None and v is None:
                costs.append(0.0)
            elif u is None or v is None:
                p = u if v is None else v
                costs.append((p[1] - p[0]) / scale)
            else:
                diff = np.abs(u - v)
                costs.append(diff.max() if kind == "bottleneck" or ground == "sup" else np.hypot(*diff))
        value = max(costs) if kind == "bottleneck" else sum(c**order for c in costs) ** (1 / order)
        best = min(best, value)
    return best


def diagrams(max_points):
    pair = st.tuples(st.integers(0, 6), st.integers(0, 4)).map(lambda t: (float(t[0]), float(t[0] + t[1])))
    return st.lists(pair, min_size=0, max_size=max_points).map(lambda x: np.array(x, dtype=float).reshape(-1, 2))


@given(diagrams(3), diagrams(3))
def test_bottleneck_equals_brute_force(a, b):
    assert tdakit.diagram_distance(a, b) == pytest.approx(brute_force(a, b, "bottleneck"), abs=1e-12)


@given(diagrams(3), diagrams(3), st.sampled_from([(1.0, "sup"), (2.0, "sup"), (1.0, "euclidean"), (2.0, "euclidean")]))
def test_wasserstein_equals_brute_force(a, b, setting):
    order, ground = setting
    ours = tdakit.diagram_distance(a, b, kind="wasserstein", order=order, ground=ground)
    assert ours == pytest.approx(brute_force(a, b, "wasserstein", order, ground), abs=1e-9)


def test_known_gudhi_counter_example():
    # gudhi's bottleneck_distance returns 3.0 here; enumerating every matching gives 2.5 (probe of gudhi 3.13).
    a, b = [[0, 4], [3, 4]], [[0, 1], [0, 1], [0, 6], [0, 5]]
    assert tdakit.diagram_distance(a, b) == 2.5
    assert brute_force(a, b, "bottleneck") == 2.5


def random_diagram(rng, n, spread=1.0):
    births = rng.uniform(0, 1, n)
    return np.column_stack((births, births + rng.exponential(spread, n)))


@pytest.mark.parametrize("size", [5, 50, 400])
def test_bottleneck_agrees_with_persim_on_finite_diagrams(size, global_seed):
    # persim.bottleneck is exact on finite points (probe of persim 0.4.1; it drops points with infinite death).
    rng = np.random.default_rng(global_seed)
    a, b = random_diagram(rng, size, 0.3), random_diagram(rng, size + 3, 0.3)
    assert tdakit.diagram_distance(a, b) == pytest.approx(persim.bottleneck(a, b), abs=1e-12)


@pytest.mark.parametrize("size", [5, 60])
def test_wasserstein_agrees_with_persim(size, global_seed):
    # persim.wasserstein is the order-1 distance with the Euclidean ground norm (its source: sklearn
    # pairwise_distances and a rotation putting the diagonal distance at (d - b)/sqrt 2).
    rng = np.random.default_rng(global_seed)
    a, b = random_diagram(rng, size, 0.3), random_diagram(rng, size + 2, 0.3)
    ours = tdakit.diagram_distance(a, b, kind="wasserstein", order=1, ground="euclidean")
    assert ours == pytest.approx(persim.wasserstein(a, b), rel=1e-9)


def _pot_wasserstein(a, b, order=1.0):
    """POT's exact transport on the augmented (n+m) x (n+m) problem of Cohen-Steiner et al. (2010)."""
    n, m = len(a), len(b)
    cost = np.full((n + m, n + m), 1e6)
    cost[:n, :m] = np.abs(a[:, None, :] - b[None, :, :]).max(axis=2) ** order
    cost[n:, m:] = 0.0
    cost[np.arange(n), m + np.arange(n)] = ((a[:, 1] - a[:, 0]) / 2) ** order
    cost[n + np.arange(m), np.arange(m)] = ((b[:, 1] - b[:, 0]) / 2) ** order
    return ot.emd2(np.ones(n + m), np.ones(n + m), cost, numItermax=10**7) ** (1 / order)


@pytest.mark.parametrize("order", [1.0, 2.0])
def test_wasserstein_agrees_with_pot_on_the_augmented_problem(order, global_seed):
    # POT's exact transport (network simplex) on the (n+m) x (n+m) augmented cost matrix of
    # Cohen-Steiner et al. (2010): points, their diagonal projections, zero cost between projections.
    rng = np.random.default_rng(global_seed)
    a, b = random_diagram(rng, 40, 0.2), random_diagram(rng, 30, 0.2)
    expected = _pot_wasserstein(a, b, order)
    assert tdakit.diagram_distance(a, b, kind="wasserstein", order=order) == pytest.approx(expected, rel=1e-9)


def test_dense_route_agrees_with_the_sparse_route():
    # Far-from-diagonal diagrams take the dense network-simplex route; small ones the sparse matching.
    from tdakit.core.topology import distances

    rng = np.random.default_rng(5)
    a, b = random_diagram(rng, 60, 3.0), random_diagram(rng, 50, 3.0)
    sparse = tdakit.diagram_distance(a, b, kind="wasserstein", order=2)
    ca, cb = ((a[:, 1] - a[:, 0]) / 2) ** 2, ((b[:, 1] - b[:, 0]) / 2) ** 2
    dense = distances._dense_transport(a, b, ca, cb, 2.0, "sup") ** 0.5
    assert sparse == pytest.approx(dense, rel=1e-9)


def test_mid_sized_tied_diagrams_take_the_terminating_solver(monkeypatch):
    # 1,500 + 1,500 points with all births 0 and rounded deaths (the kind of input that made scipy's sparse
    # matching cycle): the network simplex must answer, equal to scipy's dense assignment on the augmented
    # problem (each diagram joined by the other's diagonal projections: common practice).
    from tdakit.core.topology import distances

    rng = np.random.default_rng(0)
    a, b = (np.column_stack((np.zeros(1500), np.round(rng.exponential(0.1, 1500), 3))) for _ in range(2))
    monkeypatch.setattr(distances, "min_weight_full_bipartite_matching",
                        lambda *args: pytest.fail("the sparse matching was used"))
    value = tdakit.diagram_distance(a, b, kind="wasserstein")
    ca, cb = a[:, 1] / 2, b[:, 1] / 2
    rows, cols, cost = distances._useful_pairs(a, b, ca, cb, 1.0, "sup", limit=np.inf)
    assert value == pytest.approx(distances._dense_assignment(1500, 1500, rows, cols, cost, ca, cb), rel=1e-9)


def test_essential_classes():
    inf = np.inf
    assert tdakit.diagram_distance([[0, inf]], [[0, inf], [1, inf]]) == inf
    assert tdakit.diagram_distance([[0, inf], [0, 1]], [[0.5, inf]]) == 0.5  # births 0 vs 0.5 dominate
    assert tdakit.diagram_distance([[0, inf], [2, inf]], [[3, inf], [0.25, inf]]) == 1.0  # sorted births
    w = tdakit.diagram_distance([[0, inf], [2, inf]], [[3, inf], [0.5, inf]], kind="wasserstein", order=2)
    assert w == pytest.approx(np.hypot(0.5, 1.0))
    assert tdakit.diagram_distance(np.zeros((0, 2)), []) == 0.0


@given(diagrams(5), diagrams(5), diagrams(5))
def test_metric_properties(a, b, c):
    for kind in ("bottleneck", "wasserstein"):
        ab = tdakit.diagram_distance(a, b, kind=kind)
        assert ab == pytest.approx(tdakit.diagram_distance(b, a, kind=kind), abs=1e-12)
        assert tdakit.diagram_distance(a, a, kind=kind) == 0.0
        assert ab <= tdakit.diagram_distance(a, c, kind=kind) + tdakit.diagram_distance(c, b, kind=kind) + 1e-9


def test_large_diagrams():
    rng = np.random.default_rng(0)
    a = random_diagram(rng, 10_000, 0.01)
    b = a + rng.normal(scale=0.001, size=a.shape)
    b[:, 1] = np.maximum(b[:, 1], b[:, 0])
    shift = np.abs(a - b).max()
    assert tdakit.diagram_distance(a, b) <= shift  # the identity matching costs at most the largest shift
    assert tdakit.diagram_distance(a, b, kind="wasserstein") > 0


def test_wasserstein_on_tied_h0_diagrams_terminates_and_matches_pot():
    """Regression: a 20- vs 1,200-point H0 pair (all births 0) once made the sparse matching cycle forever.

    Run in a subprocess with a time limit (scipy's matching cannot be interrupted); the value is
    cross-checked against POT's network simplex on the dense problem (Flamary et al., JMLR 22(78), 2021).
    """
    import subprocess
    import sys
    from pathlib import Path

    data = Path(__file__).resolve().parents[2] / "data" / "wasserstein_tied_h0.npz"
    code = (f"import numpy as np, tdakit; d = np.load(r'{data}'); "
            "print(tdakit.diagram_distance(d['small'], d['large'], kind='wasserstein'))")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stderr
    with np.load(data) as pair:
        small, large = pair["small"], pair["large"]
    finite_a, finite_b = small[np.isfinite(small[:, 1])], large[np.isfinite(large[:, 1])]
    expected = _pot_wasserstein(finite_a, finite_b)
    assert float(done.stdout) == pytest.approx(expected, rel=1e-9)

"""Hostile input to the cluster routines (``select_landmarks_distributed``, ``witness_edge_values_distributed``,
``open_scheduler``): refused by tdakit's own error class with a message naming the parameter, before any work.

One single-threaded worker in this process (module scope) serves the cases that reach the workers; the others are
refused before a client is asked for. Case ids start with the entry point's name, for ``benchmarks/reliability.py``.
"""

import numpy as np
import pytest

import tdakit
from tdakit import shapes
from tdakit.errors import DataFileNotFoundError, InvalidDataError, InvalidParameterError, MemoryBudgetError
from tests.helpers import in_process_client

distributed = pytest.importorskip("distributed")

from tdakit.distributed import (  # noqa: E402 - after the skip when dask.distributed is missing
    open_scheduler,
    select_landmarks_distributed,
    witness_edge_values_distributed,
)

pytestmark = pytest.mark.filterwarnings("ignore::tdakit.errors.DuplicatePointsWarning")

P, D, F, M = InvalidParameterError, InvalidDataError, DataFileNotFoundError, MemoryBudgetError
POINTS = shapes.circle(80, noise=0.05, rng=9)
SEL, WIT = "select_landmarks_distributed", "witness_edge_values_distributed"


@pytest.fixture(scope="module")
def client():
    """One worker thread in this process; not the default client, so ``client=None`` still finds none."""
    with in_process_client(1, default=False) as connected:
        yield connected


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    folder = tmp_path_factory.mktemp("hostile_distributed")
    np.save(folder / "ok.npy", POINTS)
    np.save(folder / "flat.npy", POINTS[:, 0])
    np.save(folder / "cube.npy", np.zeros((4, 4, 4)))
    with_nan = POINTS.copy()
    with_nan[41, 1] = np.nan
    np.save(folder / "nan.npy", with_nan)
    np.save(folder / "words.npy", np.array([["a", "b"], ["c", "d"]]))
    np.save(folder / "pickled.npy", np.array([[1, "a"], [2, "b"]], dtype=object), allow_pickle=True)
    (folder / "garbage.npy").write_bytes(b"\x93NUMPY not really")
    np.savetxt(folder / "points.csv", POINTS, delimiter=",")
    np.save(folder / "long.npy", np.linspace(0.0, 1.0, 100_000)[:, None])
    (folder / "a_file").write_text("not a folder\n")
    return folder


def _select(n=3, **options):
    return lambda client, folder: select_landmarks_distributed(options.pop("source", POINTS), n, **options)


def _on(source, n=3, **options):
    """A selection whose source is a file of the ``files`` folder, on the module's client."""
    return lambda client, folder: select_landmarks_distributed(folder / source, n, client=client, **options)


def _with_client(n=3, **options):
    return lambda client, folder: select_landmarks_distributed(options.pop("source", POINTS), n, client=client,
                                                               **options)


def _witness(landmarks, **options):
    return lambda client, folder: witness_edge_values_distributed(options.pop("source", POINTS), landmarks,
                                                                  client=client, **options)


CASES = [
    # n_landmarks (refused before any client is asked for)
    (f"{SEL}: n_landmarks 0", _select(0), P, "n_landmarks"),
    (f"{SEL}: n_landmarks negative", _select(-4), P, "n_landmarks"),
    (f"{SEL}: n_landmarks bool", _select(True), P, "n_landmarks"),
    (f"{SEL}: n_landmarks float", _select(2.5), P, "n_landmarks"),
    (f"{SEL}: n_landmarks numpy float", _select(np.float64(3.0)), P, "n_landmarks"),
    (f"{SEL}: n_landmarks string", _select("5"), P, "n_landmarks"),
    (f"{SEL}: n_landmarks None", _select(None), P, "n_landmarks"),
    (f"{SEL}: n_landmarks more than points", _select(81), P, "n_landmarks"),
    (f"{SEL}: n_landmarks 10**20", _select(10**20), P, "n_landmarks"),
    (f"{SEL}: more landmarks than distinct points", _with_client(3, source=np.zeros((40, 2))), P, "n_landmarks"),
    # method, metric, rng, start, progress, per_point
    (f"{SEL}: density power 11", _select(method="density", density_power=11.0), P, "density_power"),
    (f"{SEL}: density neighbours 0", _select(method="density", density_neighbors=0), P, "density_neighbors"),
    (f"{SEL}: core_maxmin fraction 0", _select(method="core_maxmin", keep_fraction=0.0), P, "keep_fraction"),
    (f"{SEL}: method upper case", _select(method="MAXMIN"), P, "method"),
    (f"{SEL}: method None", _select(method=None), P, "method"),
    (f"{SEL}: metric precomputed", _select(metric="precomputed"), P, "metric"),
    (f"{SEL}: metric unknown", _select(metric="hamming"), P, "metric"),
    (f"{SEL}: metric a number", _select(metric=2), P, "metric"),
    (f"{SEL}: Minkowski p below 1", _select(metric="minkowski", p=0.5), P, "p"),
    (f"{SEL}: periodic box negative", _select(metric="periodic", box=-1.0), P, "box"),
    (f"{SEL}: angular on 3 columns", _select(source=np.zeros((5, 3)) + np.arange(5)[:, None], metric="angular"),
     D, "angular"),
    (f"{SEL}: metric with a Cloud", _select(source=tdakit.load_cloud(POINTS), metric="euclidean"), P, "metric"),
    (f"{SEL}: precomputed Cloud", _select(2, source=tdakit.load_cloud(np.array([[0.0, 1.0], [1.0, 0.0]]),
                                                                      metric="precomputed")), P, "metric"),
    (f"{SEL}: rng float", _select(rng=1.5), P, "rng"),
    (f"{SEL}: rng string", _select(rng="seed"), P, "rng"),
    (f"{SEL}: rng negative", _select(rng=-1), P, "rng"),
    (f"{SEL}: rng bool", _select(rng=True), P, "rng"),
    (f"{SEL}: rng legacy RandomState", _select(rng=np.random.RandomState(1)), P, "rng"),
    (f"{SEL}: start out of range", _select(start=80), P, "start"),
    (f"{SEL}: start bool", _select(start=True), P, "start"),
    (f"{SEL}: progress not callable", _select(progress="bar"), P, "progress"),
    (f"{SEL}: per_point a number", _with_client(per_point=5), P, "per_point"),
    (f"{SEL}: per_point an existing file", lambda client, folder: select_landmarks_distributed(
        POINTS, 3, client=client, per_point=folder / "a_file"), P, "per_point"),
    (f"{SEL}: chunk_rows 0", _with_client(chunk_rows=0), P, "chunk_rows"),
    (f"{SEL}: chunk_rows float", _with_client(chunk_rows=2.5), P, "chunk_rows"),
    # clients
    (f"{SEL}: client an address string", _select(client="tcp://127.0.0.1:1"), P, "client"),
    (f"{SEL}: client an object", _select(client=object()), P, "client"),
    # sources
    (f"{SEL}: .npy path missing", _on("absent.npy"), F, "absent.npy"),
    (f"{SEL}: .npy 1-D", _on("flat.npy"), D, "source"),
    (f"{SEL}: .npy 3-D", _on("cube.npy"), D, "source"),
    (f"{SEL}: .npy with NaN", _on("nan.npy"), D, "NaN at row 41"),
    (f"{SEL}: .npy of strings", _on("words.npy"), D, "source"),
    (f"{SEL}: .npy of pickled objects", _on("pickled.npy"), D, "pickled.npy"),
    (f"{SEL}: .npy of garbage", _on("garbage.npy"), D, "garbage.npy"),
    (f"{SEL}: a CSV path", _on("points.csv"), P, "source"),
    (f"{SEL}: a folder path", lambda client, folder: select_landmarks_distributed(folder, 3, client=client), F,
     "source"),
    (f"{SEL}: a nested list", _select(source=POINTS.tolist()), P, "source"),
    (f"{SEL}: complex array", _select(source=POINTS + 1j), D, "source"),
    (f"{SEL}: one point", _select(1, source=POINTS[:1]), D, "source"),
    (f"{SEL}: coordinates near 1e200", _with_client(source=POINTS * 1e200), D, "overflow"),
    (f"{SEL}: infinite coordinate", _with_client(source=np.vstack([POINTS, [[np.inf, 0.0]]])), D, "infinity"),
    # witness_edge_values_distributed
    (f"{WIT}: float landmarks", _witness(np.array([0.0, 1.0])), P, "landmarks"),
    (f"{WIT}: empty landmarks", _witness([]), P, "landmarks"),
    (f"{WIT}: repeated landmarks", _witness([1, 1, 2]), P, "landmarks"),
    (f"{WIT}: landmark out of range", _witness([0, 80]), P, "landmarks"),
    (f"{WIT}: negative landmark", _witness([-1, 2]), P, "landmarks"),
    (f"{WIT}: 2-D landmarks", _witness([[0, 1], [2, 3]]), P, "landmarks"),
    (f"{WIT}: boolean mask", _witness(np.arange(80) < 3), P, "landmarks"),
    (f"{WIT}: landmarks None", _witness(None), P, "landmarks"),
    (f"{WIT}: Landmarks of a larger cloud", _witness(tdakit.select_landmarks(tdakit.load_cloud(
        shapes.circle(200, rng=1)), 90, rng=0)), P, "landmarks"),
    (f"{WIT}: nu 3", _witness([0, 1, 2], nu=3), P, "nu"),
    (f"{WIT}: nu bool", _witness([0, 1, 2], nu=True), P, "nu"),
    (f"{WIT}: nu 2 with one landmark", _witness([0], nu=2), P, "nu"),
    (f"{WIT}: max_scale zero", _witness([0, 1, 2], max_scale=0.0), P, "max_scale"),
    (f"{WIT}: max_scale NaN", _witness([0, 1, 2], max_scale=np.nan), P, "max_scale"),
    (f"{WIT}: max_scale string", _witness([0, 1, 2], max_scale="1"), P, "max_scale"),
    (f"{WIT}: metric precomputed", _witness([0, 1, 2], metric="precomputed"), P, "metric"),
    (f"{WIT}: .npy with NaN", lambda client, folder: witness_edge_values_distributed(
        folder / "nan.npy", [0, 1, 2], client=client), D, "NaN at row 41"),
    (f"{WIT}: 100,000 landmarks (80 GB of matrices)", lambda client, folder: witness_edge_values_distributed(
        folder / "long.npy", np.arange(100_000), client=client), M, "landmarks"),
]


@pytest.mark.parametrize("call, error, needle", [c[1:] for c in CASES], ids=[c[0] for c in CASES])
def test_cluster_routines_refuse_hostile_input(client, files, call, error, needle):
    with pytest.raises(error) as caught:
        call(client, files)
    assert needle in str(caught.value), str(caught.value)


@pytest.mark.entry(SEL)
def test_client_none_without_a_started_client_is_refused():
    try:
        distributed.default_client()
    except ValueError:
        pass
    else:
        pytest.skip("another test left a default Dask client")
    with pytest.raises(InvalidParameterError) as caught:
        select_landmarks_distributed(POINTS, 3)
    assert "client" in str(caught.value) and "Client(LocalCluster())" in str(caught.value)


@pytest.mark.entry(SEL)
def test_a_closed_client_is_refused(files):
    with distributed.LocalCluster(n_workers=1, threads_per_worker=1, processes=False,
                                  dashboard_address=None) as cluster:
        closed = distributed.Client(cluster, set_as_default=False)
        closed.close()
        with pytest.raises(InvalidParameterError) as caught:
            select_landmarks_distributed(POINTS, 3, client=closed)
    assert "client" in str(caught.value) and "closed" in str(caught.value)


SCHEDULERS = [("tcp://127.0.0.1:1", "within 3 s"), ("tcp://127.0.0.1:99999", "65535"),
              ("tcp://no-such-host.invalid:8786", "no-such-host.invalid"), ("tcp://host:port", "port"),
              ("gopher://host:70", "gopher"), ("", "scheduler"), (8786, "scheduler")]


@pytest.mark.hang
@pytest.mark.parametrize("address, needle", SCHEDULERS, ids=[f"open_scheduler: {a!r}" for a, _ in SCHEDULERS])
def test_a_bad_scheduler_address_fails_before_the_client_timeout(monkeypatch, address, needle):
    """Refused by the connection probe (3 s at most), never by waiting out dask's own connection timeout."""
    from tdakit.distributed import scheduler

    monkeypatch.setattr(scheduler, "CONNECT_TIMEOUT", "90s")  # a hang here would be a case past the timeout
    with pytest.raises(InvalidParameterError) as caught:
        open_scheduler(address)
    assert caught.value.parameter == "scheduler" and needle in str(caught.value), str(caught.value)


@pytest.mark.hang
@pytest.mark.entry("open_scheduler")
def test_a_worker_address_is_not_taken_for_a_scheduler():
    """A TCP server that accepts connections but is not a scheduler (here a Dask worker) is refused, naming it."""
    with distributed.LocalCluster(n_workers=1, threads_per_worker=1, processes=False, protocol="tcp",
                                  dashboard_address=None) as cluster:
        worker = next(iter(cluster.workers.values())).address
        with pytest.raises(InvalidParameterError) as caught:
            open_scheduler(worker)
    assert "Worker" in str(caught.value) and caught.value.parameter == "scheduler"


@pytest.mark.hang
@pytest.mark.entry("open_scheduler")
def test_a_server_that_answers_garbage_is_refused(monkeypatch):
    """A TCP server that is no Dask process and answers with garbage bytes (dask read the frame length from them
    and tried to allocate exabytes: a raw MemoryError, then a traceback from the half-made client at exit)."""
    import socket
    import threading

    from tdakit.distributed import scheduler

    monkeypatch.setattr(scheduler, "CONNECT_TIMEOUT", "90s")
    server = socket.create_server(("127.0.0.1", 0))
    port = server.getsockname()[1]

    def answer():
        for _ in range(2):  # the probe's connection, then dask's
            try:
                connection, _ = server.accept()
            except OSError:
                return
            with connection:
                connection.sendall(b"\xff\xfe\x07" * 64)
                connection.recv(1024)

    thread = threading.Thread(target=answer, daemon=True)
    thread.start()
    try:
        with pytest.raises(InvalidParameterError) as caught:
            open_scheduler(f"tcp://127.0.0.1:{port}")
    finally:
        server.close()
    assert caught.value.parameter == "scheduler" and f"127.0.0.1:{port}" in str(caught.value)

"""Chunk planning and the order-preserving back ends."""

import numpy as np
import pytest

from lwrad.errors import InputError
from lwrad.parallel import plan_chunks, run_chunks


def _square_sum(sl):
    x = np.arange(sl.start, sl.stop, dtype=float)
    return float(np.sum(x * x))


def test_plan_covers_everything_once():
    chunks = plan_chunks(103, 10)
    covered = np.concatenate([np.arange(s.start, s.stop) for s in chunks])
    np.testing.assert_array_equal(covered, np.arange(103))
    assert plan_chunks(0, 5) == []
    with pytest.raises(InputError):
        plan_chunks(10, 0)


@pytest.mark.parametrize("backend, workers", [("serial", 1), ("threads", 2), ("processes", 2)])
def test_backends_identical(backend, workers):
    tasks = plan_chunks(1000, 37)
    seen = []
    out = run_chunks(
        _square_sum, tasks, workers=workers, backend=backend, on_result=lambda i, r: seen.append(i)
    )
    assert out == [_square_sum(s) for s in tasks]
    assert sorted(seen) == list(range(len(tasks)))


def test_bad_backend():
    with pytest.raises(InputError):
        run_chunks(_square_sum, [slice(0, 1)], backend="gpu")
    with pytest.raises(InputError):
        run_chunks(_square_sum, [slice(0, 1)], backend="dask")


class _Payload:
    """A chunk result that can be watched with a weak reference."""

    def __init__(self, value):
        self.value = value


def _payload(sl):
    return _Payload(_square_sum(sl))


@pytest.mark.parametrize("backend, workers", [("serial", 1), ("threads", 2), ("processes", 2)])
def test_keep_results_false_drops_each_chunk_after_on_result(backend, workers):
    import gc
    import weakref

    tasks = plan_chunks(200, 23)
    values = {}
    watchers = []

    def on_result(index, result):
        values[index] = result.value
        watchers.append(weakref.ref(result))

    out = run_chunks(
        _payload, tasks, workers=workers, backend=backend, on_result=on_result, keep_results=False
    )
    assert out == [None] * len(tasks)
    # every chunk was delivered once, with the right value
    assert values == {i: _square_sum(s) for i, s in enumerate(tasks)}
    gc.collect()
    # nobody kept the payloads: run_chunks held each one only while on_result ran
    assert len(watchers) == len(tasks) and all(w() is None for w in watchers)


def test_keep_results_default_keeps_them():
    tasks = plan_chunks(50, 7)
    out = run_chunks(_payload, tasks, workers=1)
    assert [p.value for p in out] == [_square_sum(s) for s in tasks]


def test_keep_results_false_on_dask():
    distributed = pytest.importorskip("distributed")
    tasks = plan_chunks(120, 11)
    seen = {}
    with (
        distributed.LocalCluster(
            n_workers=2, threads_per_worker=1, processes=False, dashboard_address=None
        ) as cluster,
        distributed.Client(cluster) as client,
    ):
        out = run_chunks(
            _square_sum,
            tasks,
            scheduler=client,
            on_result=lambda i, r: seen.__setitem__(i, r),
            keep_results=False,
        )
        assert out == [None] * len(tasks)
        assert seen == {i: _square_sum(s) for i, s in enumerate(tasks)}
        # nothing lingers on the cluster after the run (a leaked future would keep its
        # chunk in a worker's memory; the release travels asynchronously: poll up to 10 s)
        import time

        deadline = time.monotonic() + 10
        while any(str(k).startswith("lwrad-chunk-") for k in client.who_has()):
            assert time.monotonic() < deadline, "the cluster still holds released chunks"
            time.sleep(0.05)

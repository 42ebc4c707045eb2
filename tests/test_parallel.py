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
    out = run_chunks(_square_sum, tasks, workers=workers, backend=backend, on_result=lambda i, r: seen.append(i))
    assert out == [_square_sum(s) for s in tasks]
    assert sorted(seen) == list(range(len(tasks)))


def test_bad_backend():
    with pytest.raises(InputError):
        run_chunks(_square_sum, [slice(0, 1)], backend="gpu")
    with pytest.raises(InputError):
        run_chunks(_square_sum, [slice(0, 1)], backend="dask")

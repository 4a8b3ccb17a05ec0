"""Stages that hold BLAS to one thread give the thread count back afterwards, also on errors."""
import numpy as np
import pytest
from threadpoolctl import threadpool_info

from analog._blas import one_blas_thread


def _blas_threads() -> list[int]:
    return [pool["num_threads"] for pool in threadpool_info() if pool["user_api"] == "blas"]


def test_one_thread_inside_and_previous_count_restored():
    np.ones((2, 2)) @ np.ones((2, 2))   # numpy's BLAS is loaded
    before = _blas_threads()
    assert before, "numpy's BLAS should be visible to threadpoolctl"
    with one_blas_thread():
        assert _blas_threads() == [1] * len(before)
    assert _blas_threads() == before
    with pytest.raises(RuntimeError), one_blas_thread():
        raise RuntimeError("an error inside the block")
    assert _blas_threads() == before

"""The analog stage holds OpenBLAS to one thread and gives the thread count back afterwards."""
import numpy as np
import pytest

from analog.analogs._blas import _loaded_openblas, one_blas_thread


def test_one_thread_inside_and_previous_count_restored():
    np.ones((2, 2)) @ np.ones((2, 2))   # numpy's BLAS is loaded
    libs = _loaded_openblas()
    if not libs:
        pytest.skip("no OpenBLAS library loaded in this process (another BLAS): the helper is a no-op")
    before = [get() for get, _ in libs]
    with one_blas_thread():
        assert [get() for get, _ in libs] == [1] * len(libs)
    assert [get() for get, _ in libs] == before
    with pytest.raises(RuntimeError), one_blas_thread():
        raise RuntimeError("an error inside the block")
    assert [get() for get, _ in libs] == before

"""One BLAS thread for stages that make many small matrix products.

The Firth fits of the analog stage multiply skinny matrices (thousands of rows, a handful of
columns), and the diversity-loss step makes one small sparse-by-dense product per region.
A threaded BLAS splits such products across threads once they pass a size threshold; on a
busy machine the threads wait on each other and the work takes many times longer, and the
split changes the order of the floating-point sums, so the last bits of a result would depend
on the machine's core count. Holding BLAS to one thread inside these steps makes both the
speed and the numbers independent of the core count (below the threshold, which covers small
studies, the BLAS already used one thread, so their numbers do not change).

``threadpoolctl`` finds the BLAS libraries loaded in the process (those numpy and scipy ship)
and restores their thread counts on exit.
"""
from __future__ import annotations

from threadpoolctl import threadpool_limits

__all__ = ["one_blas_thread"]


def one_blas_thread():
    """``with one_blas_thread():`` run the block with every loaded BLAS held to one thread."""
    return threadpool_limits(limits=1, user_api="blas")

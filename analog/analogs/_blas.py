"""One BLAS thread while the analog stage runs its many small least-squares-sized products.

The Firth fits multiply skinny matrices (thousands of rows, a handful of columns). OpenBLAS
splits such products across threads once they pass a size threshold; on a busy machine the
threads wait on each other and a fit takes tens of times longer, and the split also changes
the order of the floating-point sums, so the last bits of an estimate would depend on how
many cores the machine has. Holding OpenBLAS to one thread inside the stage makes both the
speed and the numbers independent of the core count (below the threshold, which covers
small studies, OpenBLAS already used one thread, so their numbers do not change).

Only OpenBLAS libraries already loaded into this process are touched (the builds numpy and
scipy wheels ship), through their ``*_set_num_threads`` entry points, and the previous
thread count is restored on exit. Elsewhere (another BLAS, another platform) this is a
no-op.
"""
from __future__ import annotations

import ctypes
import os
import threading
from contextlib import contextmanager

__all__ = ["one_blas_thread"]

_PREFIXES = ("openblas", "scipy_openblas")
_SUFFIXES = ("", "64_", "_64")
_lock = threading.Lock()


def _loaded_openblas() -> list[tuple]:
    """(get, set) function pairs of every OpenBLAS library mapped into this process."""
    try:
        with open("/proc/self/maps") as fh:
            fields = [line.split(None, 5) for line in fh]
    except OSError:
        return []
    paths = {f[5].strip() for f in fields if len(f) == 6}
    found = []
    mode = getattr(os, "RTLD_NOLOAD", 0) | getattr(os, "RTLD_LAZY", 0)
    for path in sorted(p for p in paths if "openblas" in os.path.basename(p).lower() and ".so" in p):
        try:
            lib = ctypes.CDLL(path, mode=mode)
        except OSError:
            continue
        for prefix in _PREFIXES:
            for suffix in _SUFFIXES:
                get = getattr(lib, f"{prefix}_get_num_threads{suffix}", None)
                put = getattr(lib, f"{prefix}_set_num_threads{suffix}", None)
                if get is not None and put is not None:
                    get.restype = ctypes.c_int
                    put.argtypes = [ctypes.c_int]
                    found.append((get, put))
                    break
            else:
                continue
            break
    return found


@contextmanager
def one_blas_thread():
    """``with one_blas_thread():`` run the block with OpenBLAS held to one thread."""
    with _lock:
        libs = _loaded_openblas()
        before = []
        for get, put in libs:
            before.append(int(get()))
            put(1)
    try:
        yield
    finally:
        with _lock:
            for (get, put), n in zip(libs, before):
                put(n)

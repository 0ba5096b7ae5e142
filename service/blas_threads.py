"""One BLAS thread while surgesift runs its own threads.

A screening pass reads files, writes the archive and screens sensors side by side in its own
threads, and its linear algebra is small (short least-squares fits, matrix-vector products of a
few hundred rows). OpenBLAS, which numpy and scipy ship with, would otherwise start a thread
per core for such a call and keep those threads spinning after it returns: on a two-core
machine they took the other core from the pass's own threads (measured: the detection of a
night of 100 Hz data from four loggers used 1.44 CPU-s with the default and 0.44 CPU-s with
one BLAS thread, for the same results). ``threadpoolctl`` sets the limit for every BLAS
library loaded in the process and restores it afterwards.
"""

from __future__ import annotations

from contextlib import contextmanager

import numpy  # noqa: F401  (loads numpy's BLAS before the limit is set)
import scipy.linalg  # noqa: F401  (and scipy's)
from threadpoolctl import threadpool_limits

__all__ = ["single_blas_thread"]


@contextmanager
def single_blas_thread():
    """Limit the BLAS libraries to one thread inside the block (restored on exit)."""
    with threadpool_limits(limits=1, user_api="blas"):
        yield

"""BLAS threads chosen by problem size for the engine's dense linear algebra."""

from contextlib import contextmanager

from threadpoolctl import threadpool_limits

BLAS_THREAD_THRESHOLD = 2000
"""Training rows from which BLAS keeps its own thread count. Below, one thread: measured on the
project's 2-core machine (shared with other jobs), GPClassifier().fit at n = 100-1,000, d = 16
was 2.5-4.6x faster on one BLAS thread than on OpenBLAS's default two, and one Cholesky
factorisation with a solve 4-7x faster at n = 300-2,000 (1.7x still at 4,000)."""


@contextmanager
def blas_threads_for(n, threshold=None):
    """Inside the block, BLAS runs on one thread when ``n`` (rows of the matrices factorised)
    is below ``threshold`` (default: the module's BLAS_THREAD_THRESHOLD, read at each call),
    and as configured otherwise; threadpoolctl restores the previous limits on exit, also when
    the block raises."""
    if n >= (BLAS_THREAD_THRESHOLD if threshold is None else threshold):
        yield
        return
    with threadpool_limits(limits=1, user_api="blas"):
        yield

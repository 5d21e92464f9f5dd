"""Run small dense linear algebra on one BLAS thread."""

from contextlib import contextmanager, nullcontext


@contextmanager
def single_blas_thread():
    """Limit BLAS to one thread inside the block, when threadpoolctl is installed.

    A replay makes thousands of fits on matrices of a few dozen rows. At that size a multi-threaded
    BLAS spends its time waking and synchronising threads, and on a busy machine each call can take
    tens of times longer than on one thread (measured: 1.6 ms against 76 ms per fit-and-predict step
    on the breast-cancer replay, 2 shared cores). threadpoolctl (a scikit-learn dependency) changes
    the limit at run time; without it the block runs unchanged.
    """
    try:
        from threadpoolctl import threadpool_limits
    except ImportError:
        limit = nullcontext()
    else:
        limit = threadpool_limits(limits=1, user_api="blas")
    with limit:
        yield

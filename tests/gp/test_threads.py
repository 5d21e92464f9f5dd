"""BLAS threads by problem size (labelq.gp.threads.blas_threads_for)."""
import pytest
import scipy.linalg  # noqa: F401  (loads the BLAS the engine uses, so threadpoolctl sees it)
from threadpoolctl import threadpool_info, threadpool_limits

from labelq.gp.threads import BLAS_THREAD_THRESHOLD, blas_threads_for


def _blas_threads():
    """Thread count of every loaded BLAS, as threadpoolctl reports it (the reference)."""
    return [pool["num_threads"] for pool in threadpool_info() if pool["user_api"] == "blas"]


def test_small_problems_run_on_one_thread_and_the_limit_is_restored():
    # Source: threadpoolctl.threadpool_info before, inside and after the block.
    with threadpool_limits(limits=2, user_api="blas"):  # the conftest runs tests on one
        before = _blas_threads()
        assert before and all(t == 2 for t in before)
        with blas_threads_for(100):
            assert all(t == 1 for t in _blas_threads())
        assert _blas_threads() == before


def test_the_limit_is_restored_when_the_block_raises():
    # Source: threadpoolctl.threadpool_info after an exception inside the block.
    with threadpool_limits(limits=2, user_api="blas"):
        before = _blas_threads()
        with pytest.raises(RuntimeError), blas_threads_for(10):
            raise RuntimeError("inside")
        assert _blas_threads() == before


def test_large_problems_keep_the_configured_threads():
    # Source: threadpoolctl.threadpool_info inside the block.
    with threadpool_limits(limits=2, user_api="blas"):
        before = _blas_threads()
        with blas_threads_for(BLAS_THREAD_THRESHOLD):
            assert _blas_threads() == before
        assert _blas_threads() == before

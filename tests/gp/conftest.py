"""Shared fixtures for the labelq.gp tests."""
import pytest
from threadpoolctl import threadpool_limits


@pytest.fixture(autouse=True, scope="session")
def single_blas_thread():
    """Run BLAS single-threaded: on a shared, oversubscribed machine multi-threaded OpenBLAS
    spins on small factorisations and slows these tests many times over (threadpoolctl ships
    with scikit-learn, a test dependency)."""
    with threadpool_limits(limits=1, user_api="blas"):
        yield

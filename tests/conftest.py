"""Shared test settings: a deterministic hypothesis profile and single-threaded BLAS.

The eigenproblems here are small; on a shared 2-core machine threaded BLAS makes them many
times slower and less repeatable in time, so tests run with one BLAS thread (as the CLI does).
"""

import pytest
from hypothesis import settings
from threadpoolctl import threadpool_limits

settings.register_profile("ci", deadline=None, derandomize=True, database=None, max_examples=40)
settings.load_profile("ci")


@pytest.fixture(autouse=True, scope="session")
def _one_blas_thread():
    with threadpool_limits(limits=1, user_api="blas"):
        yield

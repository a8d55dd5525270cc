"""Estimation runs with BLAS on one thread: its matrices are small, and threaded BLAS made
fits about ten times slower on two cores (measured). The thread-pool controller scans the
loaded libraries once (a scan per fit cost several milliseconds)."""

from __future__ import annotations

from functools import cache

from threadpoolctl import ThreadpoolController


@cache
def _controller() -> ThreadpoolController:
    return ThreadpoolController()


def one_blas_thread():
    """Context manager: BLAS limited to one thread inside it."""
    return _controller().limit(limits=1, user_api="blas")
